"""Provenance of a result: which wavefit, which setup, which captures (with their sha256).

The front door (:func:`wavefit.analyze`) attaches it to every result as
``result.provenance``; ``to_dict()`` prints it under ``"provenance"``
(``docs/json-output.md``). With it a result can be traced back to the exact bytes
it came from and repeated: the setup is given in the setup file's own form, as
parsed (every part in the text it was read from), so it can be written back to
TOML or passed to :func:`wavefit.analyze` as a dict.

References
----------
.. [1] NIST FIPS 180-4, Secure Hash Standard (SHA-256).
"""
from __future__ import annotations

import hashlib
import os
import platform
import re
from pathlib import Path
from typing import Any, Sequence

from .io.capture import Capture
from .io.reader import file_state
from .setup import RelativeFigure, Setup

#: Bytes read at a time when hashing a file (memory stays flat on long records).
HASH_BLOCK = 1 << 20
#: Words that identify the part measured (part, serial or lot number). Preamble entries whose key
#: holds one, and free-text lines (``note1``, ``footer1``, ... in :mod:`wavefit.io.preamble`)
#: whose text holds one, are repeated under ``identifiers`` so that a reader of the JSON need
#: not search the preamble.
IDENTIFIER_WORD = re.compile(r"\b(part|serial|s/?n|p/?n|lot|dut)\b", re.IGNORECASE)
#: Keys under which the reader stores a free-text line of the preamble or of the text after the table.
FREE_TEXT_KEY = re.compile(r"(note|footer)\d+")


def file_sha256(path: str | os.PathLike[str]) -> str:
    """The SHA-256 of the file's bytes as stored (a compressed capture is hashed compressed)."""
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for block in iter(lambda: handle.read(HASH_BLOCK), b""):
            digest.update(block)
    return digest.hexdigest()


def setup_as_parsed(setup: Setup) -> dict[str, Any]:
    """The parsed setup in the setup file's structure (``docs/setup-file.md``).

    Parts and instrument figures are the text they were read from, the sample interval
    in seconds, files as absolute paths; ``wavefit.setup.parse_setup`` of it gives the
    same :class:`~wavefit.setup.Setup` back (its ``source`` aside).
    """
    columns: dict[str, Any] = {}
    for role, key in setup.columns.items():
        file = setup.column_files.get(role)
        columns[role] = {"file": str(file), "column": key} if file is not None else key
    instrument = {"timebase": _figure_text(setup.timebase),
                  "vertical_gain": _figure_text(setup.default_vertical_gain)}
    instrument.update({f"vertical_gain_{role}": _figure_text(f) for role, f in setup.vertical_gain.items()})
    out: dict[str, Any] = {"method": setup.method, "columns": columns,
                           "parts": {name: part.text for name, part in setup.parts.items()},
                           "instrument": instrument, "options": dict(setup.options)}
    if setup.sample_interval is not None:
        out["sample_interval"] = setup.sample_interval
    calibration = {key: str(path) for key, path in (("channels", setup.calibration.channels),
                                                    ("reference", setup.calibration.reference)) if path is not None}
    if setup.calibration.max_age_days is not None:
        calibration["max_age_days"] = setup.calibration.max_age_days
    if calibration:
        out["calibration"] = calibration
    if setup.captures:
        out["captures"] = [{"file": str(entry.file), **{n: p.text for n, p in entry.parts.items()}}
                           for entry in setup.captures]
    return out


def _figure_text(figure: RelativeFigure) -> str | int:
    """The figure's text; a figure written as the number 0 stays the number 0."""
    return 0 if figure.text == "0" else figure.text


def capture_record(source: Any, capture: Capture) -> dict[str, Any]:
    """What identifies one capture: its file and sha256 (None when it was not read from a
    file), whether the file changed after the reader opened it, its shape, the preamble
    metadata, and the entries of it that name the part.

    The sha256 is taken in a pass of its own after the load (the reader reads the table in
    several passes and seeks, so it cannot hash as it goes; the pass costs about 40 ms for
    a 48 MB file, measured). ``changed_since_read`` is True when the file's size or
    modification time then differs from what the reader saw (``Capture.file_state``): the
    hash is then of other bytes than the ones analysed.
    """
    path = Path(source) if isinstance(source, (str, os.PathLike)) else None
    metadata = dict(capture.metadata)
    changed = None
    if path is not None and capture.file_state is not None:
        changed = file_state(path) != capture.file_state
    return {
        "source": capture.source,
        "file": str(path.absolute()) if path is not None else None,
        "sha256": file_sha256(path) if path is not None else None,
        "changed_since_read": changed,
        "rows": capture.rows,
        "sample_interval_s": capture.sample_interval,
        "time_column": capture.time_column,
        "metadata": metadata,
        "identifiers": {key: value for key, value in metadata.items() if _identifies(key, value)},
    }


def changed_files(record: dict[str, Any]) -> list[str]:
    """The captures of a provenance ``record`` whose file changed after it was read, as a
    warning each."""
    return [f"{entry['file']} changed after it was read (size or modification time differ): the "
            "recorded sha256 is of the file as it is now, not of the bytes analysed; analyse it again"
            for entry in record["captures"] if entry["changed_since_read"]]


def _identifies(key: str, value: str) -> bool:
    """Whether a metadata entry names the part: by its key, or by its text for a free-text line."""
    text = value if FREE_TEXT_KEY.fullmatch(key) else key
    return IDENTIFIER_WORD.search(text) is not None


def provenance(setup: Setup, sources: Sequence[Any], captures: Sequence[Capture]) -> dict[str, Any]:
    """The provenance object of one analysis.

    Parameters
    ----------
    setup
        The setup as parsed (before the front door widens any figure or moves columns).
    sources
        What each capture was read from (paths, DataFrames or Captures), in order.
    captures
        The captures analysed, in the same order.

    Returns
    -------
    dict
        ``tool``, ``setup``, ``setup_file``, ``captures``, ``column_files``,
        ``calibration_files`` (see ``docs/json-output.md``).
    """
    from . import __version__

    setup_path = Path(setup.source)
    setup_file = None
    if setup.source != "<dict>" and setup_path.is_file():
        setup_file = {"file": str(setup_path.absolute()), "sha256": file_sha256(setup_path)}
    return {
        "tool": {"name": "wavefit", "version": __version__, "python": platform.python_version()},
        "setup": setup_as_parsed(setup),
        "setup_file": setup_file,
        "captures": [capture_record(s, c) for s, c in zip(sources, captures)],
        "column_files": {role: {"file": str(path), "sha256": file_sha256(path)}
                         for role, path in setup.column_files.items()},
        "calibration_files": {kind: {"file": str(path), "sha256": file_sha256(path)}
                              for kind, path in (("channels", setup.calibration.channels),
                                                 ("reference", setup.calibration.reference))
                              if path is not None and path.is_file()},
    }
