"""The results CSV of a lot: one row per capture, appended and synced as each finishes; and
the table it is made of (:class:`AppendedTable`), which the curves file shares.

The file is valid CSV after every row: each row is written whole and ``fsync``-ed;
a write that fails (disk full) is cut off again, so the file keeps its earlier rows
and no partial line. A run that was killed may leave one partial last line:
:meth:`ResultsFile.open` cuts it off and returns the complete rows, so a new run
can skip them. One run at a time: :class:`~wavefit.batch.run_lock.RunLock`.

Text cells go through :func:`~wavefit.report.safe_text.spreadsheet_cell`: control
characters escaped, and a leading apostrophe on a cell that a spreadsheet could take
as a formula (OWASP "CSV Injection"); reading the file back undoes both exactly.
Numbers are written as numbers (``repr`` of the float: enough digits to read back
the same value).

References
----------
.. [1] OWASP Foundation, "CSV Injection",
   https://owasp.org/www-community/attacks/CSV_Injection
.. [2] RFC 4180, "Common Format and MIME Type for Comma-Separated Values (CSV) Files".
"""
from __future__ import annotations

import contextlib
import csv
import errno
import io
import math
import os
import re
from pathlib import Path
from typing import Any, Mapping, Sequence

from ..errors import WavefitError
from ..report.safe_text import from_spreadsheet_cell, spreadsheet_cell, visible
from .decision import VERDICTS
from ..write_errors import write_failed

LEAD_COLUMNS = ("file", "verdict", "message")
TRACE_COLUMNS = ("tool_version", "capture_sha256", "setup_sha256", "spec_sha256", "analysed_at")

_NEWLINE = re.compile(b"\n")


class ResultsFileError(WavefitError):
    """The results file cannot be used: it was written differently, or it is not a results file."""

    exit_code = 3


def result_columns(quantities: Sequence[str], reading: str | None = None) -> tuple[str, ...]:
    """Header of a results file for a method reporting ``quantities``; a ``reading`` the captures
    carry (the ohmmeter's ``DCR``) goes right after the fitted ``R`` (after the last quantity
    when there is none)."""
    names = list(quantities)
    if reading is not None:
        names.insert(names.index("R") + 1 if "R" in names else len(names), reading)
    value_columns = [c for name in names for c in (name, f"{name}_U")]
    return (*LEAD_COLUMNS, *value_columns, *TRACE_COLUMNS)


def numeric_columns(columns: Sequence[str]) -> frozenset[str]:
    """The columns that hold numbers (quantity values and expanded uncertainties)."""
    fixed = set(LEAD_COLUMNS) | set(TRACE_COLUMNS)
    return frozenset(c for c in columns if c not in fixed)


def encode_cell(value: Any) -> str:
    """A cell as written: numbers as numbers, text escaped and defused against formula evaluation."""
    if value is None:
        return ""
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return repr(float(value)) if math.isfinite(value) else ""
    return spreadsheet_cell(str(value))


def decode_number(cell: str) -> float | None:
    """A number cell as read back (``None`` when empty); one this module could not have written
    (not a number, or not finite) raises ``ValueError``."""
    if not cell:
        return None
    value = float(cell)
    if not math.isfinite(value):
        raise ValueError(f"{cell!r} is not a finite number")
    return value


class AppendedTable:
    """An open CSV table appended one record (or one part's records) at a time and synced;
    use as a context manager, inside the run's lock.

    Parameters
    ----------
    path
        The CSV file; created with its header when missing or empty.
    columns
        The header this run writes; an existing file with another header is refused
        rather than mixed.
    numeric
        The columns that hold numbers.
    """

    #: What the table is called in messages.
    what = "table"

    def __init__(self, path: str | os.PathLike[str], columns: Sequence[str], numeric: frozenset[str]) -> None:
        self.path = Path(path)
        self.columns = tuple(columns)
        self._numeric = numeric
        self._fd: int | None = None
        self.rows: list[dict[str, Any]] = []
        #: The byte offset where each row's line ends, in the order of ``rows``.
        self.line_ends: list[int] = []
        self.dropped_partial_line = False

    def __enter__(self) -> "AppendedTable":
        self.open()
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def open(self) -> list[dict[str, Any]]:
        """Check the header and rows, drop a partial last line; return the rows."""
        try:
            fd = os.open(self.path, os.O_RDWR | os.O_CREAT | os.O_APPEND, 0o644)
        except OSError as exc:
            raise write_failed(self.what, self.path, exc) from None
        self._fd = fd
        try:
            self.rows = self._resume(fd)
        except BaseException:
            self.close()
            raise
        return self.rows

    def append(self, row: Mapping[str, Any]) -> None:
        """Write one row (missing columns empty) and sync it to disk."""
        self.append_rows([row])

    def append_rows(self, rows: Sequence[Mapping[str, Any]]) -> None:
        """Write ``rows`` whole or not at all (a failed write is cut off again) and sync them."""
        if not rows:
            return
        records = [[encode_cell(row.get(c)) for c in self.columns] for row in rows]
        lines = [_csv_line(cells) for cells in records]
        end = self._write(b"".join(lines)) - sum(map(len, lines))
        for cells, line in zip(records, lines):
            end += len(line)
            self.rows.append(self.decode(cells))
            self.line_ends.append(end)

    def close(self) -> None:
        if self._fd is not None:
            os.close(self._fd)
            self._fd = None

    def decode(self, cells: Sequence[str]) -> dict[str, Any]:
        """A row as read back: text columns decoded, numbers as floats (``None`` when empty)."""
        row: dict[str, Any] = {}
        for column, cell in zip(self.columns, cells):
            row[column] = decode_number(cell) if column in self._numeric else from_spreadsheet_cell(cell)
        return row

    def truncate_rows(self, keep: int) -> None:
        """Cut the file after its first ``keep`` rows."""
        assert self._fd is not None
        end = self.line_ends[keep - 1] if keep else len(_csv_line(self.columns))
        try:
            os.ftruncate(self._fd, end)
        except OSError as exc:
            raise write_failed(self.what, self.path, exc) from None
        del self.rows[keep:], self.line_ends[keep:]

    def _check(self, row: Mapping[str, Any], number: int) -> None:
        """Refuse a row that this tool could not have written (line ``number``); none by default."""

    def _resume(self, fd: int) -> list[dict[str, Any]]:
        """Rows of an existing file; the file is changed only once it is known to be ours."""
        os.lseek(fd, 0, os.SEEK_SET)
        chunks = []
        while chunk := os.read(fd, 1 << 20):
            chunks.append(chunk)
        data = b"".join(chunks)
        if not data or (b"\n" not in data and _csv_line(self.columns).startswith(data)):
            self._write(_csv_line(self.columns), start=0)  # new, or a header cut short by a kill
            return []
        keep = data.rfind(b"\n") + 1
        try:
            text = data[:keep].decode("utf-8")
        except UnicodeDecodeError:
            raise ResultsFileError(f"{self.what} {visible(self.path)} is not UTF-8 text; is it a {self.what}? "
                                   "use another --out") from None
        rows = self._parse(text)
        ends = [match.end() for match in _NEWLINE.finditer(data, 0, keep)]
        if len(ends) != len(rows) + 1:
            raise ResultsFileError(f"{self.what} {visible(self.path)} has a line break inside a cell, which this "
                                   "tool never writes; use another --out")
        self.line_ends = ends[1:]
        if keep < len(data):
            try:
                os.ftruncate(fd, keep)  # the partial last line of a killed run
            except OSError as exc:
                raise write_failed(self.what, self.path, exc) from None
            self.dropped_partial_line = True
        return rows

    def _parse(self, text: str) -> list[dict[str, Any]]:
        records = list(csv.reader(io.StringIO(text, newline="")))
        header = tuple(records[0]) if records else ()
        if header and header[0].startswith("\ufeff") and (header[0][1:], *header[1:]) == self.columns:
            # the offsets of its rows are its bytes', which a byte-order mark in front would move
            raise ResultsFileError(f"{self.what} {visible(self.path)} starts with a byte-order mark, which this tool "
                                   "never writes (saved again by another program?); use another --out, or remove "
                                   "the mark")
        if header != self.columns:
            raise ResultsFileError(
                f"{self.what} {visible(self.path)} has columns {visible(', '.join(header))}, but this run writes "
                f"{', '.join(self.columns)} (another method or version); use another --out")
        rows = []
        for number, cells in enumerate(records[1:], start=2):
            if len(cells) != len(self.columns):
                raise ResultsFileError(f"{self.what} {visible(self.path)}: line {number} has {len(cells)} "
                                       f"cells, expected {len(self.columns)}; repair or remove that line")
            try:
                row = self.decode(cells)
            except ValueError:
                raise ResultsFileError(f"{self.what} {visible(self.path)}: line {number} has a number that "
                                       "cannot be read; repair or remove that line") from None
            self._check(row, number)
            rows.append(row)
        return rows

    def _write(self, data: bytes, start: int | None = None) -> int:
        """Append ``data`` and sync it; on failure cut the file back to where it began. Returns
        the file's new length.

        ``start`` first cuts the file to that length (0 for a new header).
        """
        assert self._fd is not None
        try:
            if start is not None:
                os.ftruncate(self._fd, start)
            before = os.fstat(self._fd).st_size
        except OSError as exc:
            raise write_failed(self.what, self.path, exc) from None
        try:
            view = memoryview(data)
            while view:
                written = os.write(self._fd, view)
                if not written:  # a file system that takes nothing and says nothing
                    raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))
                view = view[written:]
            os.fsync(self._fd)
        except OSError as exc:
            with contextlib.suppress(OSError):  # else the next run cuts off the partial line
                os.ftruncate(self._fd, before)
            kept = "its earlier rows are kept" if before else "no capture was analysed"
            raise write_failed(self.what, self.path, exc, kept) from None
        return before + len(data)


class ResultsFile(AppendedTable):
    """The results file of a lot (:func:`result_columns`): one row per capture, each with a
    verdict this tool writes."""

    what = "results file"

    def __init__(self, path: str | os.PathLike[str], columns: Sequence[str]) -> None:
        super().__init__(path, columns, numeric_columns(columns))

    def __enter__(self) -> "ResultsFile":
        self.open()
        return self

    def _check(self, row: Mapping[str, Any], number: int) -> None:
        if row["verdict"] not in VERDICTS:
            raise ResultsFileError(f"{self.what} {visible(self.path)}: line {number} has the verdict "
                                   f"'{visible(row['verdict'])}', not one of {', '.join(VERDICTS)}; "
                                   "repair or remove that line")


def _csv_line(cells: Sequence[str]) -> bytes:
    """One CSV line of ``cells`` as written to the file (UTF-8, ``\\n`` ending)."""
    buffer = io.StringIO()
    csv.writer(buffer, lineterminator="\n").writerow(cells)
    return buffer.getvalue().encode("utf-8")
