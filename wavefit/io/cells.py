"""What counts as a number or a missing value in one table cell, and how a line splits into cells.

The same rules serve the layout sniffer (on the first lines as text) and the
error-path scan that names a bad line, so both agree with each other and with
the pandas C parser that reads the body (see ``docs/capture-format.md``).
"""
from __future__ import annotations

import csv
import re
from functools import lru_cache

#: Cell texts read as a missing sample (NaN). Passed to pandas as ``na_values``.
NA_TOKENS: frozenset[str] = frozenset(
    {"", "nan", "NaN", "NAN", "-nan", "-NaN", "NA", "N/A", "n/a", "#N/A", "null", "NULL", "None"}
)

#: Separator code for "one or more spaces or tabs".
WHITESPACE = " "

def _number_core(decimal: str) -> str:
    """Regex source of one number written with ``decimal``, without surrounding blanks."""
    d = re.escape(decimal)
    return rf"[+-]?(?:(?:[0-9]+(?:{d}[0-9]*)?|{d}[0-9]+)(?:[eE][+-]?[0-9]+)?|(?i:infinity|inf))"


@lru_cache(maxsize=None)
def number_pattern(decimal: str) -> re.Pattern[str]:
    """A compiled pattern matching one numeric cell written with ``decimal`` as decimal mark.

    Parameters
    ----------
    decimal
        ``"."`` or ``","``.

    Returns
    -------
    re.Pattern
        Full-match pattern; surrounding blanks are allowed, as pandas allows them.
    """
    return re.compile(rf"\s*{_number_core(decimal)}\s*")


@lru_cache(maxsize=None)
def row_pattern(sep: str, decimal: str) -> re.Pattern[str]:
    """A compiled pattern matching a whole unquoted line whose cells are all numbers or missing.

    A fast path for scanning many lines; lines it rejects are examined cell by cell.
    Every part of a line can match in one way only, so a failing line costs
    linear time (no backtracking blow-up on long rows of padded cells).
    """
    missing = "|".join(re.escape(token) for token in sorted(NA_TOKENS, key=len, reverse=True) if token)
    token = rf"(?:{_number_core(decimal)}|{missing})"
    if sep == WHITESPACE:
        return re.compile(rf"[ \t]*(?:{token}(?:[ \t]+{token})*)?[ \t]*")
    cell = rf"[ \t]*(?:{token}[ \t]*)?"
    return re.compile(rf"{cell}(?:{re.escape(sep)}{cell})*")


def is_number(cell: str, decimal: str) -> bool:
    """True when ``cell`` is a finite or infinite number written with ``decimal``."""
    return number_pattern(decimal).fullmatch(cell) is not None


def is_missing(cell: str) -> bool:
    """True when ``cell`` is empty or one of :data:`NA_TOKENS` (blanks around it ignored)."""
    return cell.strip() in NA_TOKENS


def split_line(line: str, sep: str) -> list[str]:
    """Split one line of text into cells, honouring double quotes.

    Parameters
    ----------
    line
        One line without its line ending.
    sep
        A single separator character, or :data:`WHITESPACE` for runs of blanks.

    Returns
    -------
    list of str
        Cells with quotes removed and surrounding blanks stripped.
    """
    if sep == WHITESPACE:
        text = line.replace("\t", " ").strip()
        if '"' not in text:
            return text.split()
        return [f.strip() for f in _quoted_fields(text, " ") if f.strip()]
    return [f.strip() for f in _quoted_fields(line, sep)]


def _quoted_fields(line: str, sep: str) -> list[str]:
    """Cells of a line with double quotes honoured; a line too long for the csv module (a huge
    preamble value) is split plainly, its quotes dropped."""
    try:
        return next(csv.reader([line], delimiter=sep, skipinitialspace=True), [])
    except csv.Error:
        return [cell.strip().strip('"') for cell in line.split(sep)]
