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
import threading
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


class PendingHashes:
    """The SHA-256 of files (:func:`file_sha256`), taken in a thread of its own while the caller
    goes on, one file after another in order.

    hashlib and file reads release the interpreter's lock, so the hash of a long capture
    (about 0.5 s for a 10⁷-row file of 280 MB, measured) runs beside the analysis instead of
    after it. The thread is a daemon: an analysis that ends in an error does not wait for it.
    """

    def __init__(self, paths: Sequence[str | os.PathLike[str]]):
        self._paths = list(dict.fromkeys(Path(p) for p in paths))
        self._found: dict[Path, str | OSError] = {}
        self._thread = threading.Thread(target=self._hash_all, name="wavefit-sha256", daemon=True)
        self._thread.start()

    def _hash_all(self) -> None:
        for path in self._paths:
            try:
                self._found[path] = file_sha256(path)
            except OSError as exc:
                self._found[path] = exc

    def sha256(self, path: str | os.PathLike[str]) -> str:
        """The file's SHA-256, once its hash is done (a file not given at the start is hashed now).

        Raises
        ------
        OSError
            As :func:`file_sha256` raised it for that file."""
        self._thread.join()
        found = self._found.get(Path(path))
        if found is None:
            return file_sha256(path)
        if isinstance(found, OSError):
            raise found
        return found


def capture_paths(sources: Sequence[Any]) -> list[Path]:
    """The sources read from files (paths), in order: those whose bytes the provenance hashes."""
    return [Path(s) for s in sources if isinstance(s, (str, os.PathLike))]


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


def capture_record(source: Any, capture: Capture, hashes: PendingHashes | None = None) -> dict[str, Any]:
    """What identifies one capture: its file and sha256 (None when it was not read from a
    file), whether the file changed after the reader opened it, its shape, the preamble
    metadata, and the entries of it that name the part.

    The sha256 is taken in a pass of its own after the load (the reader reads the table in
    several passes and seeks, so it cannot hash as it goes; the pass costs about 40 ms for
    a 48 MB file, measured): from ``hashes`` when given (started as the analysis began),
    else now. ``changed_since_read`` is True when the file's size or modification time, at
    the end, differs from what the reader saw (``Capture.file_state``): the hash may then be
    of other bytes than the ones analysed.
    """
    path = Path(source) if isinstance(source, (str, os.PathLike)) else None
    metadata = dict(capture.metadata)
    changed = None
    if path is not None and capture.file_state is not None:
        changed = file_state(path) != capture.file_state
    return {
        "source": capture.source,
        "file": str(path.absolute()) if path is not None else None,
        "sha256": (hashes.sha256(path) if hashes is not None else file_sha256(path)) if path is not None else None,
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
            "recorded sha256 was taken after the read and may not be of the bytes analysed; analyse it again"
            for entry in record["captures"] if entry["changed_since_read"]]


def _identifies(key: str, value: str) -> bool:
    """Whether a metadata entry names the part: by its key, or by its text for a free-text line."""
    text = value if FREE_TEXT_KEY.fullmatch(key) else key
    return IDENTIFIER_WORD.search(text) is not None


def provenance(setup: Setup, sources: Sequence[Any], captures: Sequence[Capture],
               hashes: PendingHashes | None = None) -> dict[str, Any]:
    """The provenance object of one analysis.

    Parameters
    ----------
    setup
        The setup as parsed (before the front door widens any figure or moves columns).
    sources
        What each capture was read from (paths, DataFrames or Captures), in order.
    captures
        The captures analysed, in the same order.
    hashes
        The captures' hashes, when they were started before (:class:`PendingHashes` of
        :func:`capture_paths`); else they are taken now.

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
        "captures": [capture_record(s, c, hashes) for s, c in zip(sources, captures)],
        "column_files": {role: {"file": str(path), "sha256": file_sha256(path)}
                         for role, path in setup.column_files.items()},
        "calibration_files": {kind: {"file": str(path), "sha256": file_sha256(path)}
                              for kind, path in (("channels", setup.calibration.channels),
                                                 ("reference", setup.calibration.reference))
                              if path is not None and path.is_file()},
    }
