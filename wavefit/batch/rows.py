"""One capture (or one part's folder of captures) -> one results row: analysis, verdict against the spec, traceability.

Each row holds the verdict, the quantities with their expanded uncertainties,
and traceability (tool version, sha256 of capture, setup and spec, UTC time of
analysis). Any error of one capture becomes an ``error`` row with a one-line
message.
"""
from __future__ import annotations

import datetime as dt
import hashlib
import os
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Callable

from ..errors import CaptureError, WavefitError
from ..io.source import not_a_regular_file
from ..report.safe_text import visible
from ..results import AnalysisResult
from ..setup import Setup
from .curves_file import curve_rows
from .dcr_reading import DCR, dcr_reading
from .decision import ERROR, decide_part, limit_by_model
from .inputs import capture_files
from .spec import Spec

Analyse = Callable[[str, Setup], AnalysisResult]


def sha256_file(path: str | os.PathLike[str]) -> str:
    """Hex sha256 of a file's bytes; of a folder (one part's captures), of the names and bytes of
    its capture files in name order. A file that is not a regular one raises CaptureError
    before it is opened (a FIFO or a link to /dev/zero in a lot's folder hung the run)."""
    digest = hashlib.sha256()
    folder = os.path.isdir(path)
    files = capture_files(path) if folder else [Path(path)]
    for file in files:
        if folder:
            digest.update(file.name.encode() + b"\0")
        reason = not_a_regular_file(Path(file)) if os.path.exists(file) else None  # (missing: the open says so)
        if reason is not None:  # a FIFO would block the open, a device such as /dev/zero never end
            raise CaptureError(f"{visible(str(file))} {reason}")
        with open(file, "rb") as stream:
            while chunk := stream.read(1 << 20):
                digest.update(chunk)
    return digest.hexdigest()


def analyse_file(path: str, setup: Setup) -> AnalysisResult:
    """The default analysis: :func:`wavefit.analysis.analyze` of one capture file."""
    from ..analysis import analyze

    return analyze(path, setup)


@dataclass(frozen=True)
class RowMaker:
    """Turns a capture path into its results row; picklable, sent once to each worker.

    When the method has curves (``with_curves``), the row carries the part's rows of the
    curves file under ``"curves"`` (:func:`~wavefit.batch.curves_file.curve_rows`). When the
    spec limits ``DCR`` (``reads_dcr``), the part's ohmmeter reading from its capture's
    preamble is judged beside the fitted quantities and written as ``DCR``, ``DCR_U``
    (:mod:`wavefit.batch.dcr_reading`).
    """

    setup: Setup
    spec: Spec
    quantities: tuple[str, ...]
    setup_sha256: str
    spec_sha256: str
    tool_version: str
    analyse: Analyse = analyse_file
    with_curves: bool = False
    reads_dcr: bool = False

    def __call__(self, path: str) -> dict[str, Any]:
        row = self._traceability(path)
        try:
            row["capture_sha256"] = sha256_file(path)
            result = self.analyse(path, self.setup)
            quantities = dict(result.quantities)
            if self.reads_dcr:
                quantities[DCR] = dcr_reading(result)
            verdict, decisions = decide_part(quantities, self.spec)
            verdict, model_reason = limit_by_model(verdict, result.adequate)
            for name in self.quantities + ((DCR,) if self.reads_dcr else ()):
                quantity = quantities.get(name)
                if quantity is not None:
                    row[name] = quantity.value
                    row[f"{name}_U"] = quantity.expanded_uncertainty
            notes = [d.reason for d in decisions if d.reason]
            if model_reason:
                notes.append(model_reason)
            notes += result.warnings
            row.update(verdict=verdict, message="; ".join(notes))
            if self.with_curves:
                row["curves"] = curve_rows(path, result)
        except WavefitError as exc:
            row.update(verdict=ERROR, message=_one_line(str(exc)))
        except OSError as exc:
            row.update(verdict=ERROR, message=_one_line(f"cannot read {path}: {exc.strerror or exc}"))
        except Exception as exc:  # a bug must not stop the lot; the row says what happened
            row.update(verdict=ERROR, message=_one_line(f"unexpected {type(exc).__name__}: {exc}"))
        row["analysed_at"] = _now()
        return row

    def crashed_row(self, path: str) -> dict[str, Any]:
        """The ``error`` row of a capture whose analysis killed its worker process."""
        row = self._traceability(path)
        try:
            row["capture_sha256"] = sha256_file(path)
        except (OSError, CaptureError):
            pass
        row.update(verdict=ERROR, analysed_at=_now(),
                   message="the analysis process died on this capture (out of memory, or a crash in a "
                           "numerical library); check the file's size and content")
        return row

    def _traceability(self, path: str) -> dict[str, Any]:
        return {"file": path, "tool_version": self.tool_version, "setup_sha256": self.setup_sha256,
                "spec_sha256": self.spec_sha256}


def _now() -> str:
    return dt.datetime.now(dt.timezone.utc).isoformat(timespec="microseconds")


def _one_line(text: str) -> str:
    return " ".join(text.split())
