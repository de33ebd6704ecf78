"""Parse the numeric body of a capture with the pandas C engine, straight from the file.

The body is never held as one Python string: pandas reads the (decompressed)
byte stream in chunks and produces float64 columns (clock-time stamps are read
as text and turned into seconds). When it refuses a cell, a second streaming
pass over the file finds the first offending line so the message can name it,
or finds that the table ended there and a block of text and settings follows
(a footer); the same kind of pass maps row numbers to line numbers for other
messages.
"""
from __future__ import annotations

import io
import os
import re
from collections.abc import Iterator, Sequence
from contextlib import nullcontext
from typing import BinaryIO
from dataclasses import dataclass, field, replace

import numpy as np
import pandas as pd

from ..errors import CaptureError
from .cells import NA_TOKENS, WHITESPACE, is_missing, is_number, row_pattern, split_line
from .clock import is_clock, read_clock_column
from .layout import (Layout, bad_cell_message, few_words, first_value, in_step, mostly_numbers, printed_form,
                     split_lines)
from .source import GZIP_ERRORS, FileSource, damaged_gzip_message


#: Most lines accepted after the table as a footer (a logger's settings block has dozens);
#: more is a broken file.
MAX_FOOTER_LINES = 2000
#: This many consecutive rows of the table's own shape after a text line mean the table
#: goes on (the text line broke it), not that a footer began.
RESUMED_ROWS = 5
_END_OF_FILE = "\x1a"
#: Bytes read back from a file's end for its last line and whether that has its line break
#: (a row of a capture is tens of bytes; a longer last line is not judged).
_TAIL_BYTES = 4096
_SKIP_CHUNK = 1 << 16
_WORD = re.compile(r"[^\W\d_]{2,}")
_LEADING_NUMBER = re.compile(r"\s*[+-]?\.?[0-9]")


@dataclass(frozen=True)
class Body:
    """The table's columns, and the text lines that followed it.

    Attributes
    ----------
    columns
        One float64 array per column of ``layout.headers``, NaN where a cell is
        empty; clock-time stamps as seconds from the first one.
    footer
        ``(line number, text)`` of the lines after the table.
    clock_resolution
        For each column read from clock stamps (by its position in ``columns``),
        the stamps' printing resolution in seconds.
    text_cells
        For each column (by its position in ``columns``) that holds text in a row of
        numbers: the line of its first such cell and the refusal naming it; the column
        is all NaN here.
    """

    columns: list[np.ndarray]
    footer: tuple[tuple[int, str], ...] = ()
    clock_resolution: dict[int, float] = field(default_factory=dict)
    text_cells: dict[int, tuple[int, str]] = field(default_factory=dict)


@dataclass(frozen=True)
class _Problem:
    """Why a line is not a row of the table, its line number (0 when no line is named), and
    ``text_cell`` the cell when it is text in a row of numbers (that column can be left out)."""

    message: str
    line: int = 0
    text_cell: int | None = None


@dataclass(frozen=True)
class _Scan:
    """What a line-by-line pass found: the first bad line's problem, or where a text footer starts."""

    problem: _Problem | None
    rows: int = 0
    footer: tuple[tuple[int, str], ...] = ()


def read_body(source: FileSource, layout: Layout, encoding: str) -> Body:
    """Read the table's columns as float64 arrays.

    When the parser stops at a line of text and only text follows to the end
    of the file, those lines are a footer: the table is read again up to them.

    Parameters
    ----------
    source
        The capture file.
    layout
        Separator, decimal mark and where the table starts.
    encoding
        Codec of the file's text.

    Returns
    -------
    Body
        The columns and any footer lines.

    Raises
    ------
    CaptureError
        Naming the first line with a non-numeric cell or too many cells.
    """
    footer: tuple[tuple[int, str], ...] = ()
    rows: int | None = None
    text: dict[int, tuple[int, str]] = {}  # cell index: line and refusal of its first text cell
    while True:  # each pass leaves out one more column with text, or ends the table at its footer
        try:
            frame = _parse(source, layout, encoding, rows=rows, skipped=frozenset(text))
            columns, resolution = _columns(frame, layout)
            break
        except (ValueError, pd.errors.ParserError) as error:
            if isinstance(error, _UnreadableStamp) and rows is not None:
                line = line_numbers(source, layout, encoding, [error.row])[0]
                raise CaptureError(bad_cell_message(source.name, line, error.cell)) from None
            if rows is not None:  # the rows above the footer passed the line-by-line scan
                raise CaptureError(_unparsed_message(source, error)) from None
            exc = error
        scan = _scan(source, layout, encoding, exc, frozenset(text))
        problem = scan.problem
        if problem is None:
            footer, rows = scan.footer, scan.rows
        elif problem.text_cell is not None and set(layout.fields) - set(text) - {problem.text_cell}:
            text[problem.text_cell] = (problem.line, problem.message)
        else:
            raise CaptureError(problem.message) from None
    for j in text:
        columns[j] = np.full(len(frame), np.nan)
    if not layout.side_rows:
        _refuse_values_in_unread_cells(columns, source, layout, encoding)
    return Body([columns[j] for j in layout.fields], footer, resolution,
                {layout.fields.index(j): found for j, found in text.items()})


def without_cut_last_line(source: FileSource, layout: Layout, encoding: str, body: Body) -> tuple[Body, str | None]:
    """The body without its last row when the file ends inside that row's line, and a warning.

    The last line of a file that ends inside it (no line break after it) is a write cut short
    (a capture stopped, a copy interrupted) when it lacks cells, or has an empty one, where
    others hold values, or when its last cell is printed shorter than the same column on the
    two lines above it, in a column printed in one form on every line sniffed
    (:attr:`Layout.alike`; :func:`_printed_shorter`: ``1.00`` where they print
    ``1.002604e-01``, ``0,3`` where they print ``0,3125``). Its cells may then be cut numbers
    that read as plausible values, so the whole row is left out, not filled in. Kept: a last
    row whose cells are all there (many writers end the file without a line break), a
    missing-value word such as ``NaN`` (written, not cut), an empty cell on a line that has its
    break (filled in and named, as anywhere in the table), and a row with no value at all
    (left out by the rule for empty rows at the table's ends). The shorter printing is looked
    for in uncompressed files only (a gzip stream would be read through for it, and a cut
    one does not decompress).
    """
    if body.footer or not body.columns or body.columns[0].size == 0:
        return body, None
    missing = any(np.isnan(c[-1]) for c in body.columns)
    if not missing and source.compressed:
        return body, None
    lines = _unterminated_tail(source, encoding)
    if lines is None:
        return body, None
    cells = split_line(lines[-1], layout.sep)
    read = [cells[j].strip() if j < len(cells) else "" for j in layout.fields]
    empty = [h for h, cell in zip(layout.headers, read) if not cell]
    if empty and len(empty) < len(read):
        why = "with no value in " + ", ".join(repr(h) for h in empty)
    elif not missing and layout.fields[-1] == len(cells) - 1 and len(read) - 1 in layout.alike and _printed_shorter(
            read[-1], [_cell(line, layout.sep, layout.fields[-1]) for line in lines[-3:-1]], layout.decimal):
        why = f"with {read[-1]!r} in {layout.headers[-1]!r} printed shorter than on the lines above"
    else:
        return body, None
    number = line_numbers(source, layout, encoding, [body.columns[0].size - 1])[0]
    warning = (f"line {number}, the file's last, ends without a line break and {why}: "
               "a write cut short, so that row is left out (its other cells may be cut too)")
    return replace(body, columns=[c[:-1] for c in body.columns]), warning


def _cell(line: str, sep: str, index: int) -> str:
    cells = split_line(line, sep)
    return cells[index].strip() if index < len(cells) else ""


def _printed_shorter(cell: str, above: list[str], decimal: str) -> bool:
    """Whether ``cell`` is a number cut short: it ends on its decimal mark or an exponent's sign,
    or it lacks the exponent, decimals or exponent digits that the same column shows on both
    lines ``above`` (printed alike; the caller judges only columns printed in one form)."""
    if cell.endswith((decimal, "+", "-")):
        return True
    if len(above) < 2 or not all(is_number(a, decimal) for a in above):
        return False
    form = printed_form(above[0], decimal)
    if printed_form(above[1], decimal) != form:
        return False
    exponent, decimals, exponent_digits = printed_form(cell, decimal)
    return (form[0] and not exponent) or decimals < form[1] or exponent_digits < form[2]


def _unterminated_tail(source: FileSource, encoding: str) -> list[str] | None:
    """The last lines of the file, within the :data:`_TAIL_BYTES` read back from its end, when the
    file ends inside the last of them (no line break after its last cell, blanks and a DOS
    end-of-file mark aside), else None; also None when that line is longer than the bytes read.
    A compressed file is read through to its end."""
    with source.open_binary() as raw:
        mark = raw.read(2) if encoding == "utf-16" else b""  # its byte order, for the tail
        if source.compressed:
            tail = b""
            for chunk in iter(lambda: raw.read(_SKIP_CHUNK), b""):
                tail = (tail + chunk)[-_TAIL_BYTES:]
        else:
            size = raw.seek(0, os.SEEK_END)
            raw.seek(max(len(mark), size - _TAIL_BYTES))  # even, as UTF-16 files' sizes are
            tail = raw.read()
    text = (mark + tail).decode(encoding, errors="replace").rstrip(" \t" + _END_OF_FILE)
    if not text or text.endswith(("\n", "\r")):
        return None
    lines = split_lines(text)
    return [line for line in lines[1:] if line.strip()] if len(lines) > 1 else None


class _UnreadableStamp(ValueError):
    """A cell of a clock-time column that is not a stamp, at a 0-based table row."""

    def __init__(self, row: int, cell: str) -> None:
        super().__init__(f"row {row}: {cell!r} is not a clock-time stamp")
        self.row, self.cell = row, cell


def _columns(frame: pd.DataFrame, layout: Layout) -> tuple[dict[int, np.ndarray], dict[int, float]]:
    """The parsed cells as float64 arrays by cell index, clock stamps as seconds, and the
    stamps' resolution by position in ``layout.fields``."""
    resolution: dict[int, float] = {}
    columns: dict[int, np.ndarray] = {}
    for j in frame.columns:
        if j not in layout.clock_fields:
            columns[j] = frame[j].to_numpy()
            continue
        clock = read_clock_column(frame[j])
        if clock.unreadable.size:
            row = int(clock.unreadable[0])
            raise _UnreadableStamp(row, str(frame[j].iloc[row]))
        columns[j] = clock.seconds
        if j in layout.fields:
            resolution[layout.fields.index(j)] = clock.resolution
    return columns, resolution


def _parse(source: FileSource, layout: Layout, encoding: str, rows: int | None,
           skipped: frozenset[int] = frozenset()) -> pd.DataFrame:
    """Run the pandas C parser over the table (its first ``rows`` rows when given), leaving
    out the cells ``skipped`` (columns found to hold text).

    A file whose first part ends its lines with a bare CR may end later lines
    otherwise (joined from pieces): the lines above the table are skipped here,
    by their CRs, and the parser then takes any line end.
    """
    skip, terminator = layout.data_start, layout.line_terminator
    # the parser reads a UTF-8 file it opens itself about twice as fast as a Python stream (a
    # 10⁷-row capture: 0.65 s against 1.8 s), with the same options the same table; given as an
    # absolute path (pandas would expand a leading "~") and read as it is (pandas would infer a
    # compression from the name: a plain file called .gz, .zip, .xz … was read as text before)
    by_path = not source.compressed and source.end is None and encoding == "utf-8" and terminator != "\r"
    beside = sorted(set(range(layout.n_fields)) - set(layout.fields)) if layout.side_rows else []
    try:
        with nullcontext(os.path.abspath(source.path)) if by_path else source.open_binary() as target:
            if terminator == "\r" and _ascii_compatible(encoding):
                _skip_lines(target, skip, b"\r")
                skip, terminator = 0, None
            frame = pd.read_csv(
                target,
                engine="c",
                sep=r"\s+" if layout.sep == WHITESPACE else layout.sep,
                decimal=layout.decimal,
                skiprows=skip,
                nrows=rows,
                header=None,
                names=list(range(layout.n_fields)),
                index_col=False,
                # the cells beside the table (settings, mostly empty) and those skipped are passed
                # over, not left out of the parse (usecols): the parser then still counts every
                # row's cells, where given some columns only it takes a row with a cell too many as
                # if its cells were in their places
                dtype={j: (object if j in beside else str if j in layout.clock_fields else np.float64)
                       for j in range(layout.n_fields) if j not in skipped},
                converters={j: _passed_over for j in skipped} or None,
                na_values=sorted(NA_TOKENS),
                keep_default_na=False,
                skip_blank_lines=True,
                skipinitialspace=True,
                lineterminator=terminator,
                encoding=encoding,
                encoding_errors="replace",
                compression=None,
            )
    except GZIP_ERRORS as exc:
        raise CaptureError(damaged_gzip_message(source.name, exc)) from None
    return frame.drop(columns=[*beside, *skipped]) if beside or skipped else frame


def _passed_over(cell: str) -> None:
    """A cell of a column left out for its text (a converter keeps no value: a text column of
    ten million cells would otherwise be held as as many strings)."""
    return None


def _ascii_compatible(encoding: str) -> bool:
    """True when the codec writes a CR as the single byte 0x0D (not UTF-16)."""
    return "16" not in encoding and "32" not in encoding


def _skip_lines(stream: BinaryIO, count: int, mark: bytes) -> None:
    """Move ``stream`` past its first ``count`` lines ended by ``mark``, reading in chunks."""
    while count > 0:
        start = stream.tell()
        chunk = stream.read(_SKIP_CHUNK)
        if not chunk:
            return
        at = -1
        for _ in range(count):
            at = chunk.find(mark, at + 1)
            if at < 0:
                break
            count -= 1
        if at < 0:
            continue
        stream.seek(start + at + 1)
        return


def line_numbers(
    source: FileSource, layout: Layout, encoding: str, rows: Sequence[int]
) -> list[int]:
    """1-based file line numbers of the given 0-based table rows.

    Blank lines inside the table are skipped by the parser, so the mapping
    needs a pass over the file; it stops at the last row asked for.

    Parameters
    ----------
    source, layout, encoding
        The file and how it is read.
    rows
        Row indices in increasing order.

    Returns
    -------
    list of int
        Line numbers, one per row.
    """
    found: list[int] = []
    wanted = iter(rows)
    target = next(wanted, None)
    row = 0
    for number, line in _table_lines(source, layout, encoding):
        if target is None:
            break
        if not line.strip():
            continue
        while target is not None and target == row:
            found.append(number)
            target = next(wanted, None)
        row += 1
    return found


def _table_lines(source: FileSource, layout: Layout, encoding: str) -> Iterator[tuple[int, str]]:
    """``(1-based line number, line)`` of every line from the table's first row on."""
    codec = "utf-8-sig" if encoding == "utf-8" else encoding
    with source.open_binary() as raw:
        text = io.TextIOWrapper(raw, encoding=codec, errors="replace", newline="")
        for number, line in enumerate(text, start=1):
            if number > layout.data_start:
                yield number, line.rstrip("\r\n")


def _scan(source: FileSource, layout: Layout, encoding: str, exc: Exception,
          skipped: frozenset[int] = frozenset()) -> _Scan:
    """Find the first line the parser refused, and whether the table ends there (a footer follows).

    The table ends at a line of words or a line of another shape than its
    rows (not a damaged row such as ``1.2e-`` or ``0.5,abc``) after which the
    table's rows do not resume: whatever follows, numbers and words mixed, is
    the footer. ``RESUMED_ROWS`` rows of the table's shape in a row after it
    mean the line broke the table instead. The cells ``skipped`` are not judged.
    """
    fast = row_pattern(layout.sep, layout.decimal)
    rows = 0
    first: _Problem | None = None
    footer: list[tuple[int, str]] = []
    shaped = in_a_row = other_rows = 0
    other_from = (0, "")  # the first of the rows in another separator in a row
    expected: float | None = None
    step = 0.0
    before = last = ""  # the last two rows that read
    for number, line in _table_lines(source, layout, encoding):
        if not line.strip():
            continue
        problem = None
        quick = not layout.clock_fields and '"' not in line and fast.fullmatch(line) is not None
        if not (quick and _count_cells(line, layout.sep) <= layout.n_fields):
            problem = _line_problem(source.name, number, line, layout, skipped)
        if first is None:
            if problem is None:
                rows += 1
                before, last = last, line
                continue
            if problem.text_cell is not None and not _in_step(source, layout, encoding, line, problem,
                                                                [row for row in (before, last) if row]):
                problem = replace(problem, text_cell=None)  # a line shaped like a row: '2,channels'
            if not (_is_footer_text(line) or _is_other_shape(line, layout)):
                return _Scan(problem)
            first = problem
            # the time of the table's last row and its step, which rows in another separator would go on from
            expected = _time_value(last, layout) if last else None
            earlier = _time_value(before, layout) if before else None
            step = expected - earlier if expected is not None and earlier is not None else 0.0
        table_row = problem is None and _count_cells(line, layout.sep) == layout.n_fields
        shaped, in_a_row = shaped + table_row, in_a_row + 1 if table_row else 0
        time = _other_separator_time(line, layout)
        if in_step(time, expected, 1, step):  # the table's time column going on, in another separator
            other_rows, expected = other_rows + 1, time
        else:
            other_rows = 0
        if other_rows == 1:
            other_from = (number, line)
        if other_rows >= RESUMED_ROWS:
            return _Scan(_Problem(
                f"{source.name}, line {other_from[0]}: the rows go on with another separator than the table's "
                f"{layout.sep!r} ({other_from[1].strip()[:40]!r}): are two exports joined into one file? Export "
                "the capture again as one table"))
        if in_a_row >= RESUMED_ROWS or len(footer) >= MAX_FOOTER_LINES:
            return _Scan(first)
        footer.append((number, line.strip()))
    if first is None:
        return _Scan(_Problem(_unparsed_message(source, exc)))
    if 2 * shaped > len(footer):
        return _Scan(first)  # mostly rows of the table after one line: that line broke the table
    return _Scan(None, rows, tuple(footer))


def _in_step(source: FileSource, layout: Layout, encoding: str, line: str, problem: _Problem,
             recent: list[str]) -> bool:
    """Whether a row with a word continues the first column (the time) of the rows before it (the
    two ``recent`` ones), or at the table's start of the two rows after it (:func:`in_step`); a
    first column of clock stamps is not judged."""
    if layout.fields[0] in layout.clock_fields:
        return True
    value = _time_value(line, layout)
    around = [_time_value(row, layout) for row in recent]
    if len(around) == 2:
        return around[1] is not None and around[0] is not None and in_step(value, around[1], 1, around[1] - around[0])
    after: list[float | None] = []
    for number, row in _table_lines(source, layout, encoding):
        if number <= problem.line or not row.strip():
            continue
        cells = split_line(row, layout.sep)
        data = _table_cells(cells, layout)
        if len(after) == 2 or len(cells) > layout.n_fields or not mostly_numbers(data, layout.decimal):
            break  # (the rows after it may have words too: a status column)
        after.append(first_value(data, layout.decimal))
    return len(after) == 2 and after[0] is not None and after[1] is not None and in_step(
        value, after[0], -1, after[1] - after[0])


def _table_cells(cells: list[str], layout: Layout) -> list[str]:
    """The row's cells in the table's columns (not the settings beside them)."""
    return [cells[j] for j in layout.fields if j < len(cells)]


def _time_value(line: str, layout: Layout) -> float | None:
    """The number in the row's first filled column of the table (its time), or None."""
    return first_value(_table_cells(split_line(line, layout.sep), layout), layout.decimal)


def _unparsed_message(source: FileSource, exc: Exception) -> str:
    """Message for a table the parser refused where no line-by-line check found a fault."""
    reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return f"{source.name}: the table body could not be parsed ({reason}); check the file"


def _is_footer_text(line: str) -> bool:
    """A line that can close a table: words, not a damaged row (``1.2e-``, ``0.5,abc``); or Ctrl-Z."""
    text = line.strip()
    if text == _END_OF_FILE:
        return True
    return _WORD.search(text) is not None and not _LEADING_NUMBER.match(text)


def _other_separator_time(line: str, layout: Layout) -> float | None:
    """The first number of a line of as many numbers as the table has columns split by another
    separator than the table's (its time, were it a row of the table), else None. RESUMED_ROWS
    such lines in a row whose times go on from the table's last row by its step are the table
    going on in another format, not a footer: a file whose separator changed from commas to
    tabs partway had its last 1,250 rows dropped as a footer, with a warning only (a fault
    campaign's file), while a block of numeric settings after a table (a matrix, pairs) does
    not step on from its time and stays a footer (a review)."""
    if _count_cells(line, layout.sep) >= layout.n_fields:
        return None
    tokens = re.split(r"[\s,;|]+", line.strip())
    if len(tokens) != layout.n_fields or not all(is_number(token, ".") for token in tokens):
        return None
    return float(tokens[0])


def _is_other_shape(line: str, layout: Layout) -> bool:
    """A line of whole numbers in fewer cells than the table's rows (settings written as numbers
    after it, ``1 0`` in a tab-separated table), not a cut row or a row with a cell too many."""
    tokens = re.split(r"[\s,;|]+", line.strip())
    return _count_cells(line, layout.sep) < layout.n_fields and all(
        is_number(token, ".") or is_number(token, ",") for token in tokens
    )


def _line_problem(name: str, number: int, line: str, layout: Layout,
                  skipped: frozenset[int] = frozenset()) -> _Problem | None:
    """What is wrong with a line that is not a valid table row, or None when it is one (the
    cells ``skipped`` are not judged)."""
    cells = split_line(line, layout.sep)
    if len(cells) > layout.n_fields:
        return _Problem(
            f"{name}, line {number}: {len(cells)} cells where the table has "
            f"{layout.n_fields} ({layout.describe_separator()}-separated); fix or delete that line", number
        )
    for j, cell in enumerate(cells):
        if j in skipped:
            continue
        if j in layout.clock_fields:
            if is_clock(cell) or is_missing(cell):
                continue
            return _Problem(bad_cell_message(name, number, cell), number)
        if is_number(cell, layout.decimal) or is_missing(cell):
            continue
        if layout.side_rows and j not in layout.fields:
            continue
        others = [c for k, c in enumerate(cells) if k != j]
        data = _table_cells(cells, layout) if layout.side_rows else cells
        # one bad cell among numbers (to be emptied and filled in), not a line of text
        among = (len(cells) == layout.n_fields and any(is_number(c, layout.decimal) for c in others)
                 and few_words(data, layout.decimal))
        column = among and mostly_numbers(data, layout.decimal)  # (its first cell, the time, a number)
        return _Problem(bad_cell_message(name, number, cell, among), number, j if column else None)
    return None


def _count_cells(line: str, sep: str) -> int:
    """Number of cells in an unquoted line."""
    return len(line.split()) if sep == WHITESPACE else line.count(sep) + 1


def _refuse_values_in_unread_cells(
    columns: dict[int, np.ndarray], source: FileSource, layout: Layout, encoding: str
) -> None:
    """Raise when a cell that has no header and was empty in the first rows holds a value."""
    for j in sorted(set(columns) - set(layout.fields)):
        filled = np.flatnonzero(~np.isnan(columns[j]))
        if filled.size:
            line = line_numbers(source, layout, encoding, [int(filled[0])])[0]
            raise CaptureError(
                f"{source.name}, line {line}: a value in cell {j + 1}, where the rows above "
                "have none and the table has no column; fix or delete that line"
            )
