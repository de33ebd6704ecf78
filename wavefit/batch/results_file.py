"""The results CSV of a lot: one row per capture, appended and synced as each finishes.

The file is valid CSV after every row: each row is written with one ``write``
call and ``fsync``-ed. A run that was killed may leave one partial last line;
:meth:`ResultsFile.open` cuts it off and returns the complete rows, so a new
run can skip them. The file is locked (POSIX record lock) while a run writes.

Text cells that a spreadsheet could take as a formula (starting with ``=``,
``+``, ``-``, ``@``, tab or carriage return) get a leading apostrophe, as the
OWASP "CSV Injection" guidance recommends; cells that start with an apostrophe
get one too, so reading the file back is exact. Numbers are written as numbers
(``repr`` of the float: enough digits to read back the same value).

References
----------
.. [1] OWASP Foundation, "CSV Injection",
   https://owasp.org/www-community/attacks/CSV_Injection
.. [2] RFC 4180, "Common Format and MIME Type for Comma-Separated Values (CSV) Files".
"""
from __future__ import annotations

import csv
import io
import math
import os
from pathlib import Path
from typing import Any, Mapping, Sequence

from ..errors import WavefitError

try:
    import fcntl
except ImportError:  # pragma: no cover - not on POSIX
    fcntl = None  # type: ignore[assignment]

LEAD_COLUMNS = ("file", "verdict", "message")
TRACE_COLUMNS = ("tool_version", "capture_sha256", "setup_sha256", "spec_sha256", "analysed_at")
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r", "'")


class ResultsFileError(WavefitError):
    """The results file cannot be used: another run holds it, or it was written differently."""

    exit_code = 3


def result_columns(quantities: Sequence[str]) -> tuple[str, ...]:
    """Header of a results file for a method reporting ``quantities``."""
    value_columns = [c for name in quantities for c in (name, f"{name}_U")]
    return (*LEAD_COLUMNS, *value_columns, *TRACE_COLUMNS)


def numeric_columns(columns: Sequence[str]) -> frozenset[str]:
    """The columns that hold numbers (quantity values and expanded uncertainties)."""
    fixed = set(LEAD_COLUMNS) | set(TRACE_COLUMNS)
    return frozenset(c for c in columns if c not in fixed)


def encode_cell(value: Any) -> str:
    """A cell as written: numbers as numbers, text defused against formula evaluation."""
    if value is None:
        return ""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return repr(float(value)) if math.isfinite(value) else ""
    text = str(value).replace("\r\n", " ").replace("\r", " ").replace("\n", " ")
    return "'" + text if text.startswith(_FORMULA_START) else text


def decode_text(cell: str) -> str:
    """Undo :func:`encode_cell` for a text cell."""
    return cell[1:] if cell.startswith("'") else cell


class ResultsFile:
    """An open, locked results file; use as a context manager.

    Parameters
    ----------
    path
        The CSV file; created with its header when missing or empty.
    columns
        The header this run writes (:func:`result_columns`); an existing file
        with another header is refused rather than mixed.
    """

    def __init__(self, path: str | os.PathLike[str], columns: Sequence[str]) -> None:
        self.path = Path(path)
        self.columns = tuple(columns)
        self._numeric = numeric_columns(self.columns)
        self._fd: int | None = None
        self.rows: list[dict[str, Any]] = []
        self.dropped_partial_line = False

    def __enter__(self) -> "ResultsFile":
        self.open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def open(self) -> list[dict[str, Any]]:
        """Lock the file, check the header and rows, drop a partial last line; return the rows."""
        try:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        except OSError as exc:
            raise ResultsFileError(f"cannot open results file {self.path}: {exc.strerror or exc}") from None
        self._fd = fd
        try:
            self._lock(fd)
            self.rows = self._resume(fd)
        except BaseException:
            self.close()
            raise
        return self.rows

    def append(self, row: Mapping[str, Any]) -> None:
        """Write one row (missing columns empty) and sync it to disk."""
        cells = [encode_cell(row.get(c)) for c in self.columns]
        self._write_line(cells)
        self.rows.append(self.decode(cells))

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)  # closing the descriptor also releases the record lock
            self._fd = None

    def decode(self, cells: Sequence[str]) -> dict[str, Any]:
        """A row as read back: text columns decoded, numbers as floats (``None`` when empty)."""
        row: dict[str, Any] = {}
        for column, cell in zip(self.columns, cells):
            if column in self._numeric:
                row[column] = float(cell) if cell else None
            else:
                row[column] = decode_text(cell)
        return row

    def _lock(self, fd: int) -> None:
        if fcntl is None:  # pragma: no cover
            return
        try:
            fcntl.lockf(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            raise ResultsFileError(f"results file {self.path} is being written by another run; "
                                   "wait for it to finish or use another --out") from None

    def _resume(self, fd: int) -> list[dict[str, Any]]:
        """Rows of an existing file; the file is changed only once it is known to be ours."""
        os.lseek(fd, 0, os.SEEK_SET)
        chunks = []
        while chunk := os.read(fd, 1 << 20):
            chunks.append(chunk)
        data = b"".join(chunks)
        if not data or (b"\n" not in data and _csv_line(self.columns).startswith(data)):
            os.ftruncate(fd, 0)  # new, or a header cut short by a kill
            self._write_line(self.columns)
            return []
        keep = data.rfind(b"\n") + 1
        try:
            text = data[:keep].decode("utf-8")
        except UnicodeDecodeError:
            raise ResultsFileError(f"results file {self.path} is not UTF-8 text; is it a results file? "
                                   "use another --out") from None
        rows = self._parse(text)
        if keep < len(data):
            os.ftruncate(fd, keep)  # the partial last line of a killed run
            self.dropped_partial_line = True
        return rows

    def _parse(self, text: str) -> list[dict[str, Any]]:
        records = list(csv.reader(io.StringIO(text, newline="")))
        header = tuple(records[0]) if records else ()
        if header != self.columns:
            raise ResultsFileError(
                f"results file {self.path} has columns {', '.join(header)}, but this run writes "
                f"{', '.join(self.columns)} (another method or version); use another --out")
        rows = []
        for number, cells in enumerate(records[1:], start=2):
            if len(cells) != len(self.columns):
                raise ResultsFileError(f"results file {self.path}: line {number} has {len(cells)} cells, "
                                       f"expected {len(self.columns)}; repair or remove that line")
            try:
                rows.append(self.decode(cells))
            except ValueError:
                raise ResultsFileError(f"results file {self.path}: line {number} has a number that "
                                       "cannot be read; repair or remove that line") from None
        return rows

    def _write_line(self, cells: Sequence[str]) -> None:
        data = _csv_line(cells)
        assert self._fd is not None
        written = os.write(self._fd, data)
        if written != len(data):  # pragma: no cover - a full disk
            raise ResultsFileError(f"results file {self.path}: disk full? wrote {written} of {len(data)} bytes")
        os.fsync(self._fd)


def _csv_line(cells: Sequence[str]) -> bytes:
    """One CSV line of ``cells`` as written to the file (UTF-8, ``\\n`` ending)."""
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerow(cells)
    return buffer.getvalue().encode("utf-8")
