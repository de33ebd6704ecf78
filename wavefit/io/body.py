"""Parse the numeric body of a capture with the pandas C engine, straight from the file.

The body is never held as one Python string: pandas reads the (decompressed)
byte stream in chunks and produces float64 columns. When it refuses a cell, a
second streaming pass over the file finds the first offending line so the
message can name it; the same pass maps row numbers to line numbers for other
messages.
"""
from __future__ import annotations

import io
from collections.abc import Iterator, Sequence

import numpy as np
import pandas as pd

from ..errors import CaptureError
from .cells import NA_TOKENS, WHITESPACE, is_missing, is_number, row_pattern, split_line
from .layout import Layout, bad_cell_message
from .source import GZIP_ERRORS, FileSource, damaged_gzip_message


def read_body(source: FileSource, layout: Layout, encoding: str) -> list[np.ndarray]:
    """Read the table's columns as float64 arrays.

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
    list of numpy.ndarray
        One float64 array per column of ``layout.headers``, NaN where a cell is empty.

    Raises
    ------
    CaptureError
        Naming the first line with a non-numeric cell or too many cells.
    """
    try:
        with source.open_binary() as stream:
            frame = pd.read_csv(
                stream,
                engine="c",
                sep=r"\s+" if layout.sep == WHITESPACE else layout.sep,
                decimal=layout.decimal,
                skiprows=layout.data_start,
                header=None,
                names=list(range(layout.n_fields)),
                index_col=False,
                dtype=np.float64,
                na_values=sorted(NA_TOKENS),
                keep_default_na=False,
                skip_blank_lines=True,
                skipinitialspace=True,
                lineterminator=layout.line_terminator,
                encoding=encoding,
                encoding_errors="replace",
            )
    except GZIP_ERRORS as exc:
        raise CaptureError(damaged_gzip_message(source.name, exc)) from None
    except (ValueError, pd.errors.ParserError) as exc:
        raise CaptureError(_explain_failure(source, layout, encoding, exc)) from None
    columns = {j: frame[j].to_numpy() for j in range(layout.n_fields)}
    del frame
    _refuse_values_in_unread_cells(columns, source, layout, encoding)
    return [columns[j] for j in layout.fields]


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


def _explain_failure(source: FileSource, layout: Layout, encoding: str, exc: Exception) -> str:
    """Message naming the first bad line, found by a streaming scan after the parser failed."""
    n_fields = layout.n_fields
    fast = row_pattern(layout.sep, layout.decimal)
    for number, line in _table_lines(source, layout, encoding):
        if not line.strip():
            continue
        if '"' not in line and fast.fullmatch(line) and _count_cells(line, layout.sep) <= n_fields:
            continue
        cells = split_line(line, layout.sep)
        if len(cells) > n_fields:
            return (
                f"{source.name}, line {number}: {len(cells)} cells where the table has "
                f"{n_fields} ({layout.describe_separator()}-separated); fix or delete that line"
            )
        for cell in cells:
            if not is_number(cell, layout.decimal) and not is_missing(cell):
                return bad_cell_message(source.name, number, cell)
    reason = str(exc).strip().splitlines()[0] if str(exc).strip() else type(exc).__name__
    return f"{source.name}: the table body could not be parsed ({reason}); check the file"


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
