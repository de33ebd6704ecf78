"""Sniff how a capture's table is laid out, from its first lines of text.

The sniffer tries every separator (comma, semicolon, tab, runs of blanks,
vertical bar) with both decimal marks, and keeps the reading under which the
longest run of numeric rows appears (a clock-time stamp counts as a number).
Leading rows of that run with fewer cells than its rows have (a count line)
are left to the preamble; rows right above it that hold the same numbers
beside text in otherwise empty columns (settings written beside the data)
join it. The non-blank line right above the run is the header when it is all
text with a fitting number of cells; a second text line holding only units
(``s``, ``(V)``, ``[mA]``) may sit between the names and the numbers, and one
more text line of names above them (a name line over a symbol line) gives the
columns a second name. Everything above is the preamble.
"""
from __future__ import annotations

import re
import statistics
from dataclasses import dataclass, field, replace

from ..errors import CaptureError
from .cells import WHITESPACE, is_missing, is_number, split_line
from .clock import is_clock
from .column_units import is_time_name, parse_header, parse_unit
from .preamble import gives_time_base

SEPARATORS: tuple[str, ...] = (",", ";", "\t", WHITESPACE, "|")
_SEPARATOR_NAMES = {",": "comma", ";": "semicolon", "\t": "tab", WHITESPACE: "blanks", "|": "bar"}
_LINE_BREAK = re.compile(r"\r\n|\r|\n")
_EARLIER_TABLE_ROWS = 3
#: Rows of settings beside the data are only looked for this far above the table.
_MAX_SIDE_ROWS = 100
_UNIT_BRACKETS = "()[]{}"
_COMMENT_MARK = re.compile(r"^(?:#+|%+|//+)\s*")
_RULE = re.compile(r"[\s,;|]*[-=_*~]{3}[-=_*~\s,;|]*")  # one way to match: linear time


@dataclass(frozen=True)
class Layout:
    """Where the table sits in the file and how its lines split.

    Attributes
    ----------
    sep
        Separator character, or :data:`~wavefit.io.cells.WHITESPACE` for runs of blanks.
    decimal
        Decimal mark, ``"."`` or ``","``.
    line_terminator
        ``"\\r"`` for files that end lines with a bare CR, else None (LF or CRLF).
    data_start
        0-based index of the first data line in the file.
    n_fields
        Cells per data row, including empty cells left by trailing separators.
    fields
        0-based indices of the cells that are read as columns: every cell but
        those without header that are empty in every sniffed row (left by
        trailing or doubled separators).
    headers
        One header per read column; the cell index (``"0"``, ``"1"``, ...)
        where the file gives none.
    header_line
        1-based line number of the header (of the names when a units row follows), or None.
    preamble
        ``(line number, text)`` of every non-blank line above the header or
        table, then the settings found beside the data rows.
    aliases
        A second name per read column (from a name line above the header), or ``()``.
    clock_fields
        Cell indices that hold clock-time stamps instead of numbers.
    side_rows
        Number of data rows that carry settings in otherwise unread cells
        (those cells are then skipped by the parser).
    printed
        How each read column's numbers are printed in the sniffed rows, by
        position in ``fields``: ``(True, n)`` for n significant digits in
        exponent form, ``(False, n)`` for n decimals in fixed form.
    alike
        Positions in ``fields`` of the columns printed in one form on every
        sniffed row (:func:`printed_form`: a fixed format, not shortest-form
        printing), where a number printed shorter shows a cut.
    """

    sep: str
    decimal: str
    line_terminator: str | None
    data_start: int
    n_fields: int
    fields: tuple[int, ...]
    headers: tuple[str, ...]
    header_line: int | None
    preamble: tuple[tuple[int, str], ...]
    aliases: tuple[str, ...] = ()
    clock_fields: frozenset[int] = frozenset()
    side_rows: int = 0
    printed: dict[int, tuple[bool, int]] = field(default_factory=dict)
    alike: frozenset[int] = frozenset()

    def describe_separator(self) -> str:
        """Human name of the separator, for messages."""
        return _SEPARATOR_NAMES[self.sep]


@dataclass(frozen=True)
class _Run:
    """A run of numeric rows under one reading: lines ``start..stop-1`` (0-based); ``word_rows``
    of its rows have words in some cells (:func:`mostly_numbers`), with ``word_row_numbers``
    numbers among them."""

    start: int
    stop: int
    numeric_rows: int
    n_fields: int
    n_used: int
    filled: frozenset[int]
    clocks: frozenset[int] = frozenset()
    word_rows: int = 0
    word_row_numbers: int = 0


def split_lines(text: str) -> list[str]:
    """Split text into lines on LF, CRLF or a bare CR, as the body parser does."""
    return _LINE_BREAK.split(text)


def sniff_layout(text: str, *, complete: bool, source: str, max_lines: int = 200) -> Layout:
    """Find separator, decimal mark, header and preamble from the first lines of a file.

    Parameters
    ----------
    text
        The decoded first part of the file.
    complete
        True when ``text`` is the whole file; otherwise its last, possibly cut,
        line is ignored.
    source
        File name used in messages.
    max_lines
        Only this many lines from the start are looked at.

    Returns
    -------
    Layout
        How to read the table body.

    Raises
    ------
    CaptureError
        When no numeric row is found, or the first lines show a broken table.
    """
    lines = split_lines(text)
    if not complete and len(lines) > 1:
        lines = lines[:-1]
    if len(lines) > max_lines:
        lines, complete = lines[:max_lines], False
    if not any(line.strip() for line in lines):
        raise CaptureError(f"{source} contains only blank lines; export the capture again")
    best: tuple[tuple[int, ...], str, str, _Run] | None = None
    for priority, sep in enumerate(SEPARATORS):
        for decimal in (".", ","):  # "," with "," too: it reads quoted cells ("0,5","1,2")
            run = _longest_run(lines, sep, decimal)
            if run is None:
                continue
            above = _line_above(lines, run.start)
            header_fits = above is not None and _header_cells(lines[above], sep, run) is not None
            # a table whose every row has a word (a status column) is scored by its numbers: a
            # wrong reading splits some of them into words ('0,5;1,2' read with commas)
            score = (run.numeric_rows, 0 if run.numeric_rows else run.word_row_numbers, header_fits, run.n_used,
                     -priority)
            if best is None or score > best[0]:
                best = (score, sep, decimal, run)
    if best is None:
        raise CaptureError(_no_table_message(lines, complete, source))
    _, sep, decimal, run = best
    run, side = _with_side_rows(lines, sep, decimal, run)
    _refuse_earlier_table(lines, sep, decimal, run, source)
    names, header_start, aliases = _find_header(lines, sep, decimal, run, source)
    if names is None:
        names = ("",) * run.n_used
    names = (_COMMENT_MARK.sub("", names[0]), *names[1:])
    fields = tuple(j for j, name in enumerate(names) if name or j in run.filled)
    headers = tuple(names[j] or str(j) for j in fields)
    first_text_above = header_start if header_start is not None else run.start
    preamble = tuple(
        (i + 1, line.strip()) for i, line in enumerate(lines[:first_text_above]) if line.strip()
    )
    bare_cr = "\n" not in text and "\r" in text
    return Layout(
        sep=sep,
        decimal=decimal,
        line_terminator="\r" if bare_cr else None,
        data_start=run.start,
        n_fields=run.n_fields,
        fields=fields,
        headers=headers,
        header_line=None if header_start is None else header_start + 1,
        preamble=preamble + side,
        aliases=tuple(aliases[j] if j < len(aliases) else "" for j in fields) if aliases else (),
        clock_fields=run.clocks,
        side_rows=len(side),
        printed=_printed_forms(lines[run.start:run.stop], sep, decimal, fields),
        alike=_printed_alike(lines[run.start:run.stop], sep, decimal, fields),
    )


_EXPONENT_FORM = re.compile(r"\s*[+-]?0*(?P<digits>[0-9]*)[.,]?(?P<fraction>[0-9]*)[eE]")
_FIXED_FORM = re.compile(r"\s*[+-]?[0-9]*(?:[.,](?P<fraction>[0-9]+))?\s*")


def _printed_forms(
    lines: list[str], sep: str, decimal: str, fields: tuple[int, ...]
) -> dict[int, tuple[bool, int]]:
    """How each read column's numbers are printed: significant digits of exponent forms, else decimals.

    The printing step of a time column tells whether repeated stamps are
    rounding; it is read from the text, since trailing zeros do not survive
    the conversion to floating point.
    """
    forms: dict[int, tuple[bool, int]] = {}
    for line in lines:
        cells = split_line(line, sep)
        for k, j in enumerate(fields):
            if j >= len(cells) or not is_number(cells[j], decimal):
                continue
            exponent = _EXPONENT_FORM.match(cells[j])
            if exponent is not None:
                digits = len((exponent["digits"] + exponent["fraction"]).lstrip("0") or "0")
                form = (True, max(digits, forms[k][1]) if forms.get(k, (False, 0))[0] else digits)
            elif k in forms and forms[k][0]:
                continue
            else:
                fixed = _FIXED_FORM.fullmatch(cells[j])
                decimals = len(fixed["fraction"] or "") if fixed is not None else 0
                form = (False, max(decimals, forms.get(k, (False, 0))[1]))
            forms[k] = form
    return forms


def printed_form(cell: str, decimal: str) -> tuple[bool, int, int]:
    """(has an exponent, digits after the decimal mark, digits of the exponent) of a number's text."""
    mantissa, letter, exponent = cell.strip().lower().partition("e")
    _, mark, fraction = mantissa.partition(decimal)
    return bool(letter), len(fraction) if mark else 0, sum(ch.isdigit() for ch in exponent)


def _printed_alike(lines: list[str], sep: str, decimal: str, fields: tuple[int, ...]) -> frozenset[int]:
    """Positions in ``fields`` of the columns whose numbers have one :func:`printed_form` on every
    line (at least two lines with a number there)."""
    forms: dict[int, set[tuple[bool, int, int]]] = {}
    numbers: dict[int, int] = {}
    for line in lines:
        cells = split_line(line, sep)
        for k, j in enumerate(fields):
            if j < len(cells) and is_number(cells[j], decimal):
                forms.setdefault(k, set()).add(printed_form(cells[j], decimal))
                numbers[k] = numbers.get(k, 0) + 1
    return frozenset(k for k, found in forms.items() if len(found) == 1 and numbers[k] >= 2)


def _row_kind(cells: list[str], decimal: str) -> str:
    """``"numeric"``, ``"missing"`` (all cells empty/NaN) or ``"text"``; a clock stamp counts as a number."""
    numbers = 0
    for cell in cells:
        if is_number(cell, decimal) or is_clock(cell):
            numbers += 1
        elif not is_missing(cell):
            return "text"
    return "numeric" if numbers else "missing"


def _numbers(cells: list[str], decimal: str) -> int:
    """How many of the cells are numbers (a clock stamp counts as one)."""
    return sum(1 for c in cells if is_number(c, decimal) or is_clock(c))


#: A row with words belongs to a table only where its first value continues the first column of
#: the rows around it (their time) to within this share of a step: a settings line shaped like a
#: row ('10,V/div,0', '2,channels') does not (common practice: half a step).
STEP_TOLERANCE = 0.5


def first_value(cells: list[str], decimal: str) -> float | None:
    """The number in the first filled cell, or None (a clock stamp, a word, no cell)."""
    filled = [c for c in cells if not is_missing(c)]
    if not filled or not is_number(filled[0], decimal):
        return None
    return float(filled[0].strip().replace(decimal, "."))


def in_step(value: float | None, reference: float | None, steps: int, step: float) -> bool:
    """Whether ``value`` lies ``steps`` steps of ``step`` from ``reference``, to within
    :data:`STEP_TOLERANCE` of a step."""
    if value is None or reference is None or not step:
        return False
    return abs(value - reference - steps * step) <= STEP_TOLERANCE * abs(step)


def mostly_numbers(cells: list[str], decimal: str) -> bool:
    """A data row with words in some cells (``overflow``): its first filled cell (time) a number
    and :func:`few_words`; a line of text that starts with a number (``5000,trigger,event,here``)
    is not one."""
    filled = [c for c in cells if not is_missing(c)]
    return bool(filled) and (is_number(filled[0], decimal) or is_clock(filled[0])) and few_words(filled, decimal)


def few_words(cells: list[str], decimal: str) -> bool:
    """No more of the filled cells are words than numbers (a row of numbers with a bad cell or
    two, not a line of text)."""
    filled = [c for c in cells if not is_missing(c)]
    return 2 * _numbers(filled, decimal) >= len(filled)


#: Consecutive rows of one shape with words in some cells and numbers in more of the others
#: (or as many) that make a table with a column of text (a status or flag column), not lines of
#: prose: a run of such rows only is read as a table, and named in the refusal otherwise.
_TEXT_COLUMN_ROWS = 10


def _longest_run(lines: list[str], sep: str, decimal: str) -> _Run | None:
    """The longest run of numeric rows of one shape (blank and all-missing rows do not break it).

    A row with another number of cells ends a run: a count line above the
    table, or settings written as numbers after it, are not part of it. A row
    with a word in some cells (:func:`mostly_numbers`) belongs to a run of its
    shape: the body's reader leaves such a column out. A run of such rows only
    (a status column) counts when it has at least :data:`_TEXT_COLUMN_ROWS` rows.
    """
    runs: list[_Run] = []
    rows: list[tuple[int, list[str]]] = []
    shape: tuple[int, int] | None = None  # cells, and cells without the empty ones at the end
    for i, line in enumerate([*lines, None]):
        if line is not None and not line.strip():
            continue
        cells = split_line(line, sep) if line is not None else []
        kind = _row_kind(cells, decimal) if line is not None else "text"
        row_shape = (len(cells), len(_strip_trailing_empty(cells)))
        if kind == "text" and line is not None and mostly_numbers(cells, decimal) and (
                _same_shape(row_shape, shape) if shape is not None else _numbers(cells, decimal) >= 2):
            # a word in a cell of a data row ('overflow'): the reader leaves that column out (one
            # that starts a run has two numbers at least: '1000,points' above a table is no row)
            kind = "words"
        if kind in ("numeric", "words") and shape is not None and not _same_shape(row_shape, shape):
            runs += _run_of(rows, decimal, stop=i)
            rows, shape = [], None
        if kind != "text":
            if kind != "missing" and shape is None:
                shape = row_shape
            rows.append((i, cells))
            continue
        runs += _run_of(rows, decimal, stop=i)
        rows, shape = [], None
    runs = [r for r in runs if r.numeric_rows or r.word_rows >= _TEXT_COLUMN_ROWS]
    return max(runs, key=lambda r: (r.numeric_rows, r.word_row_numbers), default=None)


def _same_shape(row: tuple[int, int], run: tuple[int, int]) -> bool:
    """A row fits a run when it has as many cells, or as many up to its last filled one (a trailing
    separator on some rows, or an empty last cell, does not change the table's shape)."""
    return row[0] == run[0] or row[1] == run[1]


def _run_of(rows: list[tuple[int, list[str]]], decimal: str, stop: int) -> list[_Run]:
    """The run made of consecutive non-text rows ``(index, cells)`` of one shape, or none; its
    columns are those filled in its numeric rows (in its rows with words, when it has no other)."""
    kinds = [_row_kind(cells, decimal) for _, cells in rows]
    rows, kinds = _word_rows_in_step(rows, kinds, decimal)
    if not rows:
        return []
    stop = min(stop, rows[-1][0] + 1)
    numeric = [cells for (_, cells), kind in zip(rows, kinds) if kind == "numeric"]
    words = [cells for (_, cells), kind in zip(rows, kinds) if kind == "text"]
    data = numeric or words  # (every row with a word: a status column)
    if not data:
        return []
    filled = {j for cells in data for j, cell in enumerate(cells) if not is_missing(cell)}
    clocks = {j for cells in data for j, cell in enumerate(cells) if is_clock(cell)}
    used = max(len(_strip_trailing_empty(cells)) for cells in data)
    width = max(len(cells) for _, cells in rows)
    numbers = sum(_numbers(cells, decimal) for cells in words)
    return [_Run(rows[0][0], stop, len(numeric), width, used, frozenset(filled), frozenset(clocks), len(words),
                 numbers)]


def _word_rows_in_step(rows: list[tuple[int, list[str]]], kinds: list[str],
                       decimal: str) -> tuple[list[tuple[int, list[str]]], list[str]]:
    """The run's rows without the rows with words at its ends whose first value does not continue
    the first column of its numeric rows (:func:`in_step`); a run with fewer than two numeric rows
    is kept only when all its rows are in step. First columns of clock stamps are not judged."""
    if "text" not in kinds:
        return rows, kinds
    data = [k for k, kind in enumerate(kinds) if kind != "missing"]
    values = {k: first_value(rows[k][1], decimal) for k in data}
    if any(value is None for value in values.values()):
        return rows, kinds  # a first column of clock stamps
    position = {k: p for p, k in enumerate(data)}  # place among the rows with values
    numeric = [k for k in data if kinds[k] == "numeric"]
    reference = numeric if len(numeric) >= 2 else data
    if len(reference) < 2:
        return [], []  # a row with words and nothing to judge it by
    step = statistics.median((values[b] - values[a]) / (position[b] - position[a])  # type: ignore[operator]
                             for a, b in zip(reference, reference[1:]))

    if len(numeric) < 2:  # every row (but one) with words: each must follow the one before
        steady = all(in_step(values[b], values[a], position[b] - position[a], step) for a, b in zip(data, data[1:]))
        return (rows, kinds) if steady else ([], [])

    def fits(k: int) -> bool:
        nearest = min(numeric, key=lambda r: abs(position[r] - position[k]))
        return in_step(values[k], values[nearest], position[k] - position[nearest], step)

    # the run starts after the last word row before its numbers that is out of step, and ends
    # before the first such row after them
    leading = [k for k in range(numeric[0]) if kinds[k] == "text" and not fits(k)]
    trailing = [k for k in range(numeric[-1] + 1, len(rows)) if kinds[k] == "text" and not fits(k)]
    first, last = (leading[-1] + 1 if leading else 0), (trailing[0] if trailing else len(rows))
    return rows[first:last], kinds[first:last]


def _with_side_rows(
    lines: list[str], sep: str, decimal: str, run: _Run
) -> tuple[_Run, tuple[tuple[int, str], ...]]:
    """Extend the run upward over rows that hold its numbers beside text in columns it leaves empty.

    Some exports write their settings in the leftmost cells of the first
    data rows (``Record Length,2500,Points,-1.2e-05,0.04``); below them those
    cells are empty. Such rows are data rows: their numbers join the table and
    their other cells become preamble lines ``key,value unit``.
    """
    side: list[tuple[int, str]] = []
    start = run.start
    at = _previous_nonblank(lines, run.start)
    while at is not None and len(side) < _MAX_SIDE_ROWS:
        cells = split_line(lines[at], sep)
        data = [cells[j] if j < len(cells) else "" for j in sorted(run.filled)]
        # (a word among them, 'overflow', is read as in any data row: its column is left out)
        if len(cells) > run.n_fields or any(is_missing(c) for c in data) or not mostly_numbers(data, decimal):
            break
        settings = [c for j, c in enumerate(cells) if j not in run.filled and not is_missing(c)]
        if any(is_number(c, decimal) for c in settings[:1]):
            break
        if settings:  # rows between settings rows that hold only data belong to the table too
            side.append((at + 1, f"{settings[0]}{sep if sep != WHITESPACE else ' '}{' '.join(settings[1:])}".strip()))
            start = at
        at = _previous_nonblank(lines, at)
    if not side:
        return run, ()
    extended = replace(run, start=start, numeric_rows=run.numeric_rows + len(side))
    return extended, tuple(reversed(side))


def _strip_trailing_empty(cells: list[str]) -> list[str]:
    """Cells without the empty ones at the end of the row."""
    end = len(cells)
    while end and not cells[end - 1]:
        end -= 1
    return cells[:end]


def _previous_nonblank(lines: list[str], index: int) -> int | None:
    """Index of the last non-blank line before ``index``, or None."""
    for i in range(index - 1, -1, -1):
        if lines[i].strip():
            return i
    return None


def _line_above(lines: list[str], index: int) -> int | None:
    """Index of the nearest line above ``index`` that is neither blank nor a rule like ``-----``."""
    above = _previous_nonblank(lines, index)
    while above is not None and _RULE.fullmatch(lines[above]):
        above = _previous_nonblank(lines, above)
    return above


def _find_header(
    lines: list[str], sep: str, decimal: str, run: _Run, source: str
) -> tuple[tuple[str, ...] | None, int | None, tuple[str, ...]]:
    """Header cells (empty where a column has no name), the index of the first header line, if any,
    and second names from a name line above the header (or ``()``)."""
    above = _line_above(lines, run.start)
    if above is None:
        return None, None, ()
    cells = _header_cells(lines[above], sep, run)
    if cells is None:
        _refuse_broken_row(lines[above], above, sep, decimal, run, source)
        return None, None, ()
    header: tuple[str, ...] = tuple(cells)
    names_at = _line_above(lines, above)
    if names_at is not None and all(_is_unit_cell(c) for c in cells) and any(cells):
        names = _header_cells(lines[names_at], sep, run)
        if names is None or len(names) != len(cells):
            return header, above, ()
        header, above = _join_units(names, cells), names_at
    over = _line_above(lines, above)
    second = _header_cells(lines[over], sep, run) if over is not None else None
    if second is None or len(second) != len(header) or all(_is_unit_cell(c) for c in second):
        return header, above, ()
    return header, above, tuple(second)


def _header_cells(line: str, sep: str, run: _Run) -> list[str] | None:
    """The line's cells when it can be a header for the run: text (or a time name first), fitting count.
    A comment mark before the first name is dropped first: split on blanks, ``# t CH1 CH2``
    would have the mark as a cell of its own; where the line fits only with the mark as a cell
    (``# Time CH1`` over rows of an index, a time and a value), it names the first column."""
    for text in (_COMMENT_MARK.sub("", line.lstrip(), count=1), line):
        splits = [split_line(text, sep)]
        if sep == WHITESPACE:
            splits += [re.split(r"\s{2,}|\t", text.strip()), _merge_bracketed(splits[0])]
        for cells in splits:
            cells = _strip_trailing_empty(cells)
            if not cells or not run.n_used <= len(cells) <= run.n_fields:
                continue
            numeric = [is_number(c, ".") or is_number(c, ",") for c in cells]
            if len(cells) == 1 and gives_time_base(cells[0], sep):
                continue  # the preamble's interval line right above a table of one column
            # Channels may be named by number ("Time,1,2") when a time column names the row a header.
            if not any(numeric) or (not numeric[0] and is_time_name(parse_header(cells[0]).name)):
                return cells
    return None


def _merge_bracketed(cells: list[str]) -> list[str]:
    """Glue ``(unit)`` tokens to the token before them: ``Time (s)`` split on blanks."""
    merged: list[str] = []
    for cell in cells:
        if merged and cell[:1] in "([{":
            merged[-1] = f"{merged[-1]} {cell}"
        else:
            merged.append(cell)
    return merged


def _is_unit_cell(cell: str) -> bool:
    """True when a header cell is nothing but a unit, possibly in brackets, or empty."""
    return not cell or parse_unit(cell.strip(_UNIT_BRACKETS)) is not None


def _join_units(names: list[str], units: list[str]) -> tuple[str, ...]:
    """Headers ``"name (unit)"`` from a names row and a units row (empty where both are)."""
    joined = []
    for i, (name, unit) in enumerate(zip(names, units)):
        unit = unit.strip(_UNIT_BRACKETS)
        joined.append(f"{name or i} ({unit})" if unit else name)
    return tuple(joined)


def _refuse_broken_row(
    line: str, index: int, sep: str, decimal: str, run: _Run, source: str
) -> None:
    """Raise when the line above the table is a damaged data row or a mismatched header."""
    cells = _strip_trailing_empty(split_line(line, sep))
    if not cells:
        return
    texts = [c for c in cells if not is_number(c, decimal) and not is_missing(c)]
    if is_number(cells[0], decimal) and texts and len(cells) <= run.n_fields:
        raise CaptureError(bad_cell_message(source, index + 1, texts[0]))
    if not any(is_number(c, decimal) for c in cells) and any(
        is_time_name(parse_header(c).name) for c in cells
    ):
        raise CaptureError(
            f"{source}: the header on line {index + 1} has {len(cells)} names but the rows "
            f"below it have {run.n_used} {_SEPARATOR_NAMES[sep]}-separated numbers; "
            "make the header and the rows agree"
        )


def _refuse_earlier_table(lines: list[str], sep: str, decimal: str, run: _Run, source: str) -> None:
    """Raise when numeric rows of the same shape appear above the table: a bad line split it."""
    rows = 0
    for i, line in enumerate(lines[: run.start]):
        if not line.strip():
            continue
        cells = split_line(line, sep)
        if _row_kind(cells, decimal) != "text" and len(cells) == run.n_fields:
            rows += 1
            continue
        if rows >= _EARLIER_TABLE_ROWS:
            texts = [c for c in cells if not is_number(c, decimal) and not is_missing(c)]
            found = texts[0] if len(texts) == 1 else line.strip()
            raise CaptureError(bad_cell_message(source, i + 1, found))
        rows = 0
    _refuse_rows_of_another_shape_above(lines, sep, decimal, run, source)


def _refuse_rows_of_another_shape_above(lines: list[str], sep: str, decimal: str, run: _Run, source: str) -> None:
    """Raise when numeric rows of another shape lead straight into the table: they are data that a
    changed number of cells cut off, not a count line (one or two lines)."""
    rows, at, first = 0, _previous_nonblank(lines, run.start), None
    while at is not None and _row_kind(split_line(lines[at], sep), decimal) == "numeric":
        rows, first = rows + 1, first if first is not None else at
        at = _previous_nonblank(lines, at)
    if rows >= _EARLIER_TABLE_ROWS and first is not None:
        count = len(split_line(lines[first], sep))
        raise CaptureError(
            f"{source}, line {first + 1}: {count} cells where the table below has {run.n_fields} "
            f"({_SEPARATOR_NAMES[sep]}-separated), and {rows} such rows above it; make the rows agree"
        )


#: Characters of a bad cell's printed form shown in a message, at most.
_SHOWN_CELL = 64


def bad_cell_message(source: str, line_number: int, found: str, among_numbers: bool = False) -> str:
    """One-line message for text found where the table needs a number; ``among_numbers`` when the
    line's other cells are numbers (one bad cell in a row: deleting the row would leave a gap in
    the sampling, an empty cell is filled in from its neighbours)."""
    # the cell as far as its printed form fits _SHOWN_CELL (a control character prints as four:
    # 60 NULs took 240 characters of the message)
    shown = found
    if len(repr(found[:_SHOWN_CELL + 1])) > _SHOWN_CELL:
        width, keep = 2, 0
        for character in found:
            width += len(repr(character)) - 2
            if width > _SHOWN_CELL - 3:
                break
            keep += 1
        shown = found[:keep] + "..."
    advice = ("fix that cell, or empty it to have it filled in from its neighbours (deleting the line "
              "would leave a gap in the sampling)") if among_numbers else "fix or delete that line"
    return f"{source}, line {line_number}: found {shown!r} where a number was expected; {advice}"


def _no_table_message(lines: list[str], complete: bool, source: str) -> str:
    """Message for text in which no numeric row was found."""
    text_column = _text_column_message(lines, source)
    if text_column is not None:
        return text_column
    nonblank = sum(1 for line in lines if line.strip())
    if complete:
        what = "one line only, a header or text" if nonblank == 1 else f"{nonblank} lines of text"
        return (
            f"{source} has no data rows ({what}, no line of numbers); "
            "a capture needs numeric rows below its header"
        )
    return (
        f"{source}: no line of numbers in its first {len(lines)} lines; "
        "is it a waveform table in CSV text?"
    )


def _text_column_message(lines: list[str], source: str) -> str | None:
    """Message naming a column of text in a table that is otherwise numbers, or None.

    Under each separator and decimal mark, the longest run of consecutive non-blank lines of
    one shape (as many cells, text in the same ones, as many numbers) is such a table when it
    has at least :data:`_TEXT_COLUMN_ROWS` lines, at least two numbers a line and more numbers
    than text cells; the reading with the most numbers a line names the column.
    """
    best: tuple[int, int, str, str, int, tuple[int, ...]] | None = None  # numbers, rows, sep, decimal, start, text
    for sep in SEPARATORS:
        for decimal in (".", ","):
            run_start, run_length, shape = 0, 0, None
            for i, line in enumerate(lines):
                if not line.strip():
                    continue
                cells = split_line(line, sep)
                number = [is_number(c, decimal) or is_clock(c) for c in cells]
                text = tuple(j for j, c in enumerate(cells) if not number[j] and not is_missing(c))
                if (len(cells), text, sum(number)) != shape:
                    run_start, run_length, shape = i, 0, (len(cells), text, sum(number))
                run_length += 1
                numbers = sum(number)
                if (run_length >= _TEXT_COLUMN_ROWS and text and 2 <= numbers and len(text) < numbers
                        and (best is None or (numbers, run_length) > best[:2])):
                    best = (numbers, run_length, sep, decimal, run_start, text)
    if best is None:
        return None
    _, _, sep, decimal, first, text = best
    width = len(split_line(lines[first], sep))
    above = _previous_nonblank(lines, first)
    names = split_line(lines[above], sep) if above is not None else []
    named = len(names) == width and not any(is_number(c, decimal) for c in names)
    which = ", ".join(repr(names[j].strip()) if named else f"cell {j + 1}" for j in text)
    sample = split_line(lines[first], sep)[text[0]].strip()
    return (f"{source}, line {first + 1} on: every row has text in {which} (such as {sample[:20]!r}) "
            f"beside its numbers ({_SEPARATOR_NAMES[sep]}-separated); wavefit reads columns of numbers "
            f"only: delete {'that column' if len(text) == 1 else 'those columns'} or export without")
