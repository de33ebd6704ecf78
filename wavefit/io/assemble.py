"""Turn named float columns into a checked :class:`~wavefit.io.capture.Capture`.

Shared by the file reader and :func:`~wavefit.io.capture_from_frame`: units
from headers, the choice of time axis, the row-count, NaN and time checks.
"""
from __future__ import annotations

import math
import numbers
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from ..errors import CaptureError
from .capture import Capture, Channel, LeftOut
from .column_units import HeaderUnit, is_time_name, parse_header
from .preamble import Preamble
from .timebase import Printing, TimeAxis, axis_from_column, axis_from_interval

#: Fewest data rows a capture may have.
MIN_ROWS = 16
#: Largest share of empty/NaN cells per column that is filled in (with a warning).
MAX_MISSING_FRACTION = 1e-3
_LISTED_PLACES = 5
_SAME_INTERVAL = 0.01
# A unit-less time column stepping this slowly (s) may well be in ms, us or ns: say so.
_SLOW_INTERVAL = 1e-3
# Clock stamps coarser than this fraction of the stated interval cannot place the samples.
_COARSE_STAMPS = 0.5


@dataclass(frozen=True)
class Table:
    """Columns as read, before any checks.

    Attributes
    ----------
    source
        Name of the file or frame, for messages.
    headers
        One header per column, as written (``"0"``, ``"1"``, ... when there is none).
    columns
        float64 arrays, one per header, all the same length.
    where
        Turns 0-based row indices into places in the source (``["line 12"]``).
    has_header
        False when the source had no header row.
    preamble
        Metadata and time hints from above the table.
    positions
        Each column's 0-based place in the source (``0, 1, ...`` when None).
    aliases
        A second name per column (``""`` where none), or ``()``.
    clock_columns
        The columns read from clock-time stamps (seconds from the first stamp).
    printing
        How each column's numbers were printed, by column, in the units of the
        file (clock stamps: in seconds), when the source's text showed it.
    text_columns
        Columns that hold text among their numbers (their values all NaN), each with
        the line of its first text cell and the refusal naming that cell.
    """

    source: str
    headers: tuple[str, ...]
    columns: list[np.ndarray]
    where: Callable[[Sequence[int]], list[str]]
    has_header: bool = True
    preamble: Preamble = Preamble()
    positions: tuple[int | None, ...] | None = None
    aliases: tuple[str, ...] = ()
    clock_columns: frozenset[int] = frozenset()
    printing: dict[int, Printing] = field(default_factory=dict)
    text_columns: dict[int, tuple[int, str]] = field(default_factory=dict)

    def position(self, index: int) -> int | None:
        """The source's column number of column ``index`` (None for a frame's index)."""
        return index if self.positions is None else self.positions[index]

    def alias(self, index: int) -> str:
        """The second name of column ``index``, or ``""``."""
        return self.aliases[index] if index < len(self.aliases) else ""


def assemble(
    table: Table, *, sample_interval: float | None = None, time_column: str | int | None = None
) -> Capture:
    """Check a table and build the capture.

    Parameters
    ----------
    table
        The columns as read.
    sample_interval
        Seconds between samples; when given it overrides any time column or
        preamble interval.
    time_column
        Header, header without unit, or 0-based place in the source of the
        time column; found from the headers when None (in a table without
        header: the first column, when it increases uniformly).

    Returns
    -------
    Capture
        Time in seconds, channels scaled to SI, metadata and warnings.

    Raises
    ------
    CaptureError
        When the table is too short, a column is empty, there is no usable
        time information, or the time column fails its checks.
    """
    _check_interval_argument(sample_interval, table.source)
    warnings = list(table.preamble.warnings)
    table = _without_empty_edges(table, warnings)
    rows = table.columns[0].size if table.columns else 0
    if rows < MIN_ROWS:
        raise CaptureError(
            f"{table.source} has only {rows} data row{'s' if rows != 1 else ''}; "
            f"a capture needs at least {MIN_ROWS}"
        )
    units = [parse_header(h) for h in table.headers]
    warnings += [
        f"column {h!r}: unit {u.unit!r} is not recognised; its values are kept unscaled"
        for h, u in zip(table.headers, units)
        if not u.known
    ]
    # a column that cannot be used is left out, and refused only where it is needed: as the
    # time axis, or by a setup that maps it (scopes export the channels that were switched off)
    columns: list[np.ndarray] = []
    unusable: dict[int, tuple[str, str]] = {}  # what the column holds, and the refusal where it is needed
    for i, header in enumerate(table.headers):
        if i in table.text_columns:
            line, refusal = table.text_columns[i]
            unusable[i] = (f"holds text where numbers are expected (first at line {line})", refusal)
            columns.append(table.columns[i])
            continue
        try:
            columns.append(_filled(table, i, warnings))
        except _Unusable as exc:
            unusable[i] = (exc.reason, f"{table.source}: column {header!r} {exc.reason}; {exc.advice}")
            columns.append(table.columns[i])
    notes: list[str] = []
    time_index = _time_index(table, units, time_column)
    if time_index in unusable:
        raise CaptureError(unusable[time_index][1])
    if time_index is None and time_column is None and sample_interval is None:
        if not table.has_header and 0 in unusable:
            raise CaptureError(unusable[0][1])  # the first column would be time, were it readable
        time_index = _uniform_first_column(table, columns, notes)
    axis, time_header = _time_axis(table, units, columns, time_index, sample_interval, warnings)
    signal = [i for i in range(len(table.headers)) if time_header is None or i != time_index]
    channels = tuple(
        Channel(units[i].name, table.headers[i], units[i].unit, units[i].scale,
                _read_only(_scaled(columns[i], units[i].scale)), table.position(i), table.alias(i))
        for i in signal if i not in unusable
    )
    left_out = tuple(LeftOut(table.headers[i], units[i].name, table.position(i), unusable[i][1])
                     for i in signal if i in unusable)
    if not channels and left_out:
        raise CaptureError(left_out[0].message)
    if not channels:
        raise CaptureError(
            f"{table.source} has only the time column {time_header!r} and no signal column"
        )
    warnings += [f"column {table.headers[i]!r} {unusable[i][0]}: left out (a setup that uses it "
                 "is refused)" for i in signal if i in unusable]
    warnings += _scales_not_applied(channels, table.preamble.metadata)
    return Capture(
        time=_read_only(axis.time),
        channels=channels,
        sample_interval=axis.sample_interval,
        source=table.source,
        time_column=time_header,
        metadata=dict(table.preamble.metadata),
        warnings=tuple(warnings) + axis.warnings,
        notes=tuple(notes) + axis.notes,
        time_position=None if time_header is None or time_index is None else table.position(time_index),
        interval_uncertainty=axis.relative_uncertainty,
        left_out=left_out,
    )


def _without_empty_edges(table: Table, warnings: list[str]) -> Table:
    """The table without rows that have no value at all before its first or after its last data row."""
    empty = np.ones(table.columns[0].size if table.columns else 0, dtype=bool)
    for column in table.columns:
        empty &= np.isnan(column)
    # the first and last rows with a value (not the index of every one: 80 MB for 10⁷ rows)
    filled = ~empty
    if not filled.any():
        return table
    first, stop = int(np.argmax(filled)), empty.size - int(np.argmax(filled[::-1]))
    if first == 0 and stop == empty.size:
        return table
    dropped = [*range(first), *range(stop, empty.size)]
    places = table.where(dropped[:_LISTED_PLACES])
    listed = ", ".join(places) + (", ..." if len(dropped) > _LISTED_PLACES else "")
    warnings.append(
        f"{len(dropped)} row{'s' if len(dropped) > 1 else ''} without any value before or after "
        f"the data ({listed}) {'were' if len(dropped) > 1 else 'was'} left out"
    )

    def where(rows: Sequence[int]) -> list[str]:
        return table.where([row + first for row in rows])

    return replace(table, columns=[c[first:stop] for c in table.columns], where=where)


def _scales_not_applied(channels: tuple[Channel, ...], metadata: dict[str, str]) -> list[str]:
    """Warnings for columns without a unit that a preamble line names with a number (``CH1
    scale: 0.02 V/code``): their numbers are taken as they are, and a ratio of two such columns
    (drive over sense) is wrong by the ratio of their scales if the file holds converter codes."""
    out = []
    for ch in channels:
        if ch.unit or not ch.name:
            continue
        named = re.compile(rf"(?<![^\W_]){re.escape(ch.name)}(?![^\W_])", re.IGNORECASE)
        keys = [k for k, v in metadata.items() if named.search(k) and re.search(r"\d", v)]
        if keys:
            out.append(f"column {ch.header!r} has no unit, so its numbers are taken as they are (volts for a "
                       f"voltage), while the preamble gives {keys[0]!r} = {metadata[keys[0]]!r}: if that scales "
                       "them, convert the column or write its unit in the header")
    return out


def _check_interval_argument(sample_interval: float | None, source: str) -> None:
    """Refuse a sample interval argument that is not a positive, finite number of seconds."""
    if sample_interval is None:
        return
    ok = isinstance(sample_interval, numbers.Real) and not isinstance(sample_interval, bool)
    if not ok or not (math.isfinite(sample_interval) and sample_interval > 0):
        raise CaptureError(
            f"{source}: sample interval must be a positive number of seconds, got {sample_interval!r}; "
            "give it as e.g. 1e-8"
        )


class _Unusable(Exception):
    """A column that cannot be used: what it holds (``reason``) and what to do (``advice``)."""

    def __init__(self, reason: str, advice: str) -> None:
        super().__init__(reason)
        self.reason, self.advice = reason, advice


def _filled(table: Table, index: int, warnings: list[str]) -> np.ndarray:
    """Column ``index`` with its few NaN/inf cells filled by linear interpolation; raises
    :class:`_Unusable` for a column with no numbers or too many cells missing."""
    values = table.columns[index]
    header = table.headers[index]
    finite = np.isfinite(values)
    good = int(np.count_nonzero(finite))
    if good == values.size:
        return values
    if good == 0:
        raise _Unusable(f"has no numbers (all {values.size} cells are empty or NaN)",
                        "export the capture with that channel's data, or remove the column")
    bad = np.flatnonzero(~finite)
    allowed = max(1, int(MAX_MISSING_FRACTION * values.size))
    places = table.where([int(i) for i in bad[:_LISTED_PLACES]])
    listed = ", ".join(places) + (", ..." if bad.size > _LISTED_PLACES else "")
    share = f"{100 * bad.size / values.size:.2g} %"
    if bad.size > allowed:
        raise _Unusable(f"has {bad.size} empty, NaN or infinite cells ({share} of {values.size} rows; {listed}); "
                        f"at most {allowed} can be filled in", "fix the export or trim the capture")
    index_all = np.arange(values.size, dtype=np.float64)
    filled = np.interp(index_all, index_all[finite], values[finite])
    warnings.append(
        f"column {header!r}: {bad.size} empty, NaN or infinite cell{'s' if bad.size > 1 else ''} "
        f"({listed}) filled by linear interpolation between neighbouring samples"
    )
    return filled


def _time_index(table: Table, units: list[HeaderUnit], time_column: str | int | None) -> int | None:
    """Index of the time column: the one asked for, else the first time-like header, else the
    first column of clock stamps, else the first column in seconds."""
    if time_column is not None:
        return _asked_time_index(table, units, time_column)
    if table.has_header:
        for i, unit in enumerate(units):
            if is_time_name(unit.name):
                return i
    if table.clock_columns:
        return min(table.clock_columns)
    if table.has_header:
        for i, unit in enumerate(units):
            if unit.unit == "s":
                return i
    return None


def _asked_time_index(table: Table, units: list[HeaderUnit], time_column: str | int) -> int:
    """Index of the column a caller named as time (header, header without unit, or place)."""
    if isinstance(time_column, numbers.Integral) and not isinstance(time_column, bool):
        for i in range(len(table.headers)):
            if table.position(i) == time_column:
                return i
        places = ", ".join(str(table.position(i)) for i in range(len(table.headers)))
        raise CaptureError(
            f"time column {time_column} is not a column of {table.source}; its columns are at {places}"
        )
    for i, (header, unit) in enumerate(zip(table.headers, units)):
        if str(time_column) in (header, unit.name):
            return i
    listed = ", ".join(repr(h) for h in table.headers)
    raise CaptureError(
        f"time column {time_column!r} is not in {table.source}; its columns are: {listed}"
    )


def _uniform_first_column(table: Table, columns: list[np.ndarray], notes: list[str]) -> int | None:
    """0 when a table without header starts with a column that increases uniformly (time), else None.

    A column counting samples (0, 1, 2, ... by one) is an index, not time; a
    step that disagrees with the preamble's sample interval is not time either.
    """
    if table.has_header or len(columns) < 2:
        return None
    first = columns[0]
    try:
        dt = axis_from_column(first, header=table.headers[0], where=lambda row: "", source=table.source).sample_interval
    except CaptureError:
        return None
    if dt == 1.0 and np.all(first == np.round(first)):
        return None
    hint = table.preamble.sample_interval
    if hint is not None and not _same(hint, dt):
        return None
    notes.append(
        f"{table.source} has no header; its first column increases uniformly (by {dt:.6g} per row), "
        f"so it is read as time in seconds; map it in the setup (time = {table.position(0)}) to say so, "
        "or pass a sample interval to read it as a signal"
    )
    return 0


def _time_axis(
    table: Table,
    units: list[HeaderUnit],
    columns: list[np.ndarray],
    time_index: int | None,
    sample_interval: float | None,
    warnings: list[str],
) -> tuple[TimeAxis, str | None]:
    """The time axis and the header of the column it came from (None when built from an interval)."""
    rows = columns[0].size
    hint = table.preamble
    start = hint.start_time or 0.0
    if sample_interval is not None:
        if time_index is not None:
            _refuse_contradicting_column(table, units, columns, time_index, sample_interval)
            warnings.append(
                f"sample interval {sample_interval:.6g} s was given, so the time column "
                f"{table.headers[time_index]!r} is not used as time axis and is kept as a column"
            )
        if hint.sample_interval is not None and not _same(hint.sample_interval, sample_interval):
            warnings.append(
                f"sample interval {sample_interval:.6g} s was given and overrides the preamble's "
                f"{hint.sample_interval:.6g} s ({hint.interval_line})"
            )
        return TimeAxis(axis_from_interval(rows, sample_interval, start), sample_interval), None
    if time_index is not None:
        return _column_axis(table, units[time_index], columns[time_index], time_index, warnings)
    if hint.sample_interval is not None:
        if hint.interval_without_unit and hint.sample_interval >= _SLOW_INTERVAL:
            # (a bare "Sample rate,5" read as 5 Hz gave L = 470 H with no word: a fault campaign's file)
            warnings.append(f"the preamble's sample interval ({hint.interval_line}) has no unit and is read in SI: "
                            f"{hint.sample_interval:.6g} s between samples; if it is in MSa/s, ns or another unit, "
                            "write the unit")
        if hint.other_interval is not None:
            raise CaptureError(
                f"{table.source}: the file gives two sample intervals, {hint.sample_interval:.6g} s "
                f"({hint.interval_line}) and another ({hint.other_interval}), and no time column decides: "
                "pass the sample interval (--sample-interval, or sample_interval in the setup)")
        return TimeAxis(axis_from_interval(rows, hint.sample_interval, start), hint.sample_interval), None
    raise CaptureError(_no_time_message(table))


def _refuse_contradicting_column(
    table: Table, units: list[HeaderUnit], columns: list[np.ndarray], index: int, sample_interval: float
) -> None:
    """Refuse a given sample interval that a uniform time column of the table contradicts
    (beyond rounding, 1 %): one of the two is wrong, and L would be off by their ratio."""
    unit = units[index]
    if index in table.clock_columns or unit.unit not in ("s", ""):
        return
    try:
        axis = axis_from_column(_scaled(columns[index], unit.scale), header=table.headers[index],
                                where=lambda row: "", source=table.source)
    except CaptureError:
        return  # not a usable time column: the given interval is the way to read the table
    if not _same(axis.sample_interval, sample_interval):
        raise CaptureError(
            f"{table.source}: a sample interval of {sample_interval:.6g} s was given, but the time column "
            f"{table.headers[index]!r} steps by {axis.sample_interval:.6g} s ({sample_interval / axis.sample_interval:.3g} "
            "times that); drop the given interval (sample_interval in the setup, --sample-interval) or fix the column"
        )


#: Ratios of a unit-less time column's step to the preamble's interval (to 1 %) that name the
#: column's likely unit, and are refused: a time column exported in ms, µs, ns or ps without
#: its unit.
_PREFIX_RATIOS = (("m", 1e3), ("u", 1e6), ("n", 1e9), ("p", 1e12))


def _column_axis(
    table: Table, unit: HeaderUnit, column: np.ndarray, index: int, warnings: list[str]
) -> tuple[TimeAxis, str]:
    """The time axis from column ``index``, checked against the preamble's interval."""
    header = table.headers[index]
    hint = table.preamble
    printing = table.printing.get(index)
    clock = printing.step if index in table.clock_columns and printing is not None else None
    if clock is None and unit.unit not in ("s", ""):
        raise CaptureError(
            f"{table.source}: time column {header!r} is in {unit.unit!r}, not in seconds; "
            "give it a time unit such as 's' or 'us', or pass a sample interval"
        )
    if clock is not None and hint.sample_interval is not None and clock > _COARSE_STAMPS * hint.sample_interval:
        warnings.append(
            f"the clock stamps in column {header!r} resolve only {clock:.2g} s, coarser than the "
            f"preamble's sample interval {hint.sample_interval:.6g} s ({hint.interval_line}); "
            "the time axis is built from that interval"
        )
        return TimeAxis(axis_from_interval(column.size, hint.sample_interval), hint.sample_interval), header
    time = column if clock is not None else _scaled(column, unit.scale)
    if printing is not None and clock is None:
        printing = replace(printing, scale=unit.scale)

    def where(row: int) -> str:
        return table.where([row])[0]

    try:
        axis = axis_from_column(time, header=header, where=where, source=table.source, resolution=printing,
                                printed=None if clock is not None else column)
    except CaptureError as exc:
        if clock is None or hint.sample_interval is None:
            raise
        stated = (column.size - 1) * hint.sample_interval
        if abs(float(column[-1] - column[0]) - stated) > max(2.0 * clock, 0.5 * hint.sample_interval):
            raise  # the stamps span another time than the rows at the stated interval: samples missing
        warnings.append(
            f"the clock stamps in column {header!r} are not uniform ({exc}); the time axis is built from "
            f"the preamble's sample interval {hint.sample_interval:.6g} s ({hint.interval_line})"
        )
        return TimeAxis(axis_from_interval(column.size, hint.sample_interval), hint.sample_interval), header
    if clock is None and not unit.unit and axis.sample_interval >= _SLOW_INTERVAL:
        warnings.append(
            f"time column {header!r} has no unit and steps by {axis.sample_interval:.6g}, read "
            "as seconds; if it is in ms, us or ns, say so in the header (e.g. 'Time (us)') "
            "or pass a sample interval"
        )
    if hint.sample_interval is None:
        return axis, header
    if not _same(hint.sample_interval, axis.sample_interval):
        ratio = axis.sample_interval / hint.sample_interval
        likely = next((prefix for prefix, factor in _PREFIX_RATIOS if abs(ratio / factor - 1.0) <= 0.01), None)
        if clock is None and not unit.unit and likely is not None:
            # a column read as seconds only for want of a unit, 10³ⁿ times the stated interval:
            # it is in ms, µs, ns or ps, and L would be off by the ratio (a column in µs under a
            # preamble's 200 ns read 695 H); the other way round the preamble's number is the
            # suspect, and the column is used with the warning below
            raise CaptureError(
                f"{table.source}: the preamble gives a sample interval of {hint.sample_interval:.6g} s "
                f"({hint.interval_line}), but the time column {header!r}, which has no unit and would be read "
                f"as seconds, steps by {axis.sample_interval:.6g}, {ratio:.3g} times that: is it in {likely}s? Give "
                f"the column its unit in the header (e.g. 'Time ({likely}s)') or pass a sample interval"
            )
        warnings.append(
            f"the preamble gives a sample interval of {hint.sample_interval:.6g} s "
            f"({hint.interval_line}) but the time column {header!r} steps by "
            f"{axis.sample_interval:.6g} s; the time column is used"
        )
        return axis, header
    if axis.relative_uncertainty > 0.0:
        # the stated interval is exact where the rebuilt one carries the rounding's uncertainty
        # (a note: nothing is wrong with the file, and the interval used is the stated one)
        first = float(axis.time[0])
        note = (f"time column {header!r} is printed too coarsely to give the interval to better than "
                f"{axis.relative_uncertainty:.1e} relative; the preamble's sample interval "
                f"{hint.sample_interval:.6g} s ({hint.interval_line}) agrees with it and is used")
        return TimeAxis(axis_from_interval(column.size, hint.sample_interval, first), hint.sample_interval,
                        notes=(note,)), header
    return axis, header


def _no_time_message(table: Table) -> str:
    """Message for a table with no time column and no sample interval."""
    advice = "pass a sample interval (--sample-interval on the command line, sample_interval in the setup)"
    if len(table.headers) == 1:
        return f"{table.source} has a single column and no time information; {advice}"
    if not table.has_header:
        return (
            f"{table.source} has no header row, so no column is known to be time, and no sample "
            f"interval above the table; {advice}, or add a header such as 'Time (s)'"
        )
    listed = ", ".join(repr(h) for h in table.headers)
    return (
        f"{table.source} has no time column (columns: {listed}) and no sample interval above "
        f"the table; {advice}, or name the time column e.g. 'Time (s)'"
    )


def _scaled(values: np.ndarray, scale: float) -> np.ndarray:
    """``values`` in SI: the same array when the scale is 1, else a scaled copy."""
    return values if scale == 1.0 else values * scale


def _read_only(values: np.ndarray) -> np.ndarray:
    """``values`` marked read-only, as every array of a (frozen) capture is."""
    values.flags.writeable = False
    return values


def _same(a: float, b: float) -> bool:
    """True when two sample intervals agree to 1 %."""
    return abs(a - b) <= _SAME_INTERVAL * max(a, b)
