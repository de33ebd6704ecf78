"""Clock-time stamps as a time column: ``5/26/2021  11:44:55.465797``, ``2021-05-26T11:44:55.4Z``, ``11:44:55.25``.

Loggers and some scopes stamp each row with the time of day instead of the
time since the trigger. Only the time of day is read: the date part is
checked for its form but not interpreted (its field order, day-month or
month-day, differs between tools and does not matter within one record);
a record that runs past midnight is recognised by its time of day falling
back by more than half a day. Time-zone suffixes (``Z``, ``+02:00``) are
constant within a record and ignored.

The result is seconds from the first stamp, and the stamps' printing
resolution (the step of their last fractional digit), which tells whether
they can resolve the sample interval.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

_DATE = r"(?:\d{4}[-/.]\d{1,2}[-/.]\d{1,2}|\d{1,2}[-/.]\d{1,2}[-/.]\d{2,4})"
_TIME_OF_DAY = r"(?P<h>[01]?\d|2[0-3]):(?P<m>[0-5]\d):(?P<s>[0-5]\d|60)(?:[.,](?P<f>\d{1,12}))?"
_MERIDIEM = r"(?:\s*(?P<ampm>[AaPp]\.?[Mm]\.?))?"
_ZONE = r"(?:\s*(?:Z|[+-]\d{2}(?::?\d{2})?))?"
_STAMP = rf"(?:{_DATE}(?:\s+|T))?{_TIME_OF_DAY}{_MERIDIEM}{_ZONE}"
#: One clock stamp: an optional date, blanks or ``T``, the time of day, an optional AM/PM and zone.
CLOCK_PATTERN = re.compile(rf"\s*{_STAMP}\s*")
#: A backwards step of the time of day larger than this (s) is the record passing midnight.
_MIDNIGHT_JUMP = 43200.0
_DAY = 86400.0
_RESOLUTION_SAMPLES = 2000


@dataclass(frozen=True)
class ClockColumn:
    """Clock stamps turned into seconds from the first one.

    Attributes
    ----------
    seconds
        float64 seconds since the first stamp; NaN where a cell is empty.
    resolution
        Step of the stamps' last printed digit in seconds (``1e-6`` for six
        fractional digits, ``1`` for whole seconds).
    unreadable
        0-based rows whose cell holds text that is not a stamp.
    """

    seconds: np.ndarray
    resolution: float
    unreadable: np.ndarray


def is_clock(cell: str) -> bool:
    """True when ``cell`` is a clock-time stamp this reader understands.

    Parameters
    ----------
    cell
        One cell's text.

    Returns
    -------
    bool
        Whether it is an optional date, the time of day (hours 0-23, minutes and
        seconds 0-59, a leap second 60), an optional AM/PM and zone.
    """
    return CLOCK_PATTERN.fullmatch(cell) is not None


def read_clock_column(cells: pd.Series) -> ClockColumn:
    """Convert a column of clock stamps (strings, NaN where empty) to seconds from the first stamp.

    Parameters
    ----------
    cells
        The column as text, as the table parser read it.

    Returns
    -------
    ClockColumn
        Seconds from the first valid stamp and the printing resolution.
    """
    text = cells.astype("string")
    parts = text.str.extract(rf"^\s*{_STAMP}\s*$")
    hours = pd.to_numeric(parts["h"], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    minutes = pd.to_numeric(parts["m"], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    whole = pd.to_numeric(parts["s"], errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    fraction_text = parts["f"].fillna("")
    digits = fraction_text.str.len().to_numpy(dtype=np.int64, na_value=0)
    fraction = pd.to_numeric("0." + fraction_text, errors="coerce").to_numpy(dtype=np.float64, na_value=0.0)
    meridiem = parts["ampm"].str.lower().str.slice(0, 1).fillna("").to_numpy(dtype=object)
    hours = np.where(meridiem == "p", np.mod(hours, 12.0) + 12.0, np.where(meridiem == "a", np.mod(hours, 12.0), hours))
    whole_of_day = hours * 3600.0 + minutes * 60.0 + whole
    valid = np.flatnonzero(np.isfinite(whole_of_day))
    seconds = np.full(whole_of_day.size, np.nan)
    if valid.size:
        # whole seconds and fractions apart, so that six or more fractional digits survive
        kept = whole_of_day[valid]
        kept += np.concatenate(([0.0], np.cumsum(np.diff(kept + fraction[valid]) < -_MIDNIGHT_JUMP) * _DAY))
        seconds[valid] = (kept - kept[0]) + (fraction[valid] - fraction[valid[0]])
    picks = digits[np.linspace(0, digits.size - 1, min(digits.size, _RESOLUTION_SAMPLES)).astype(int)]
    resolution = 10.0 ** -int(picks.max()) if picks.size else 1.0
    unreadable = np.flatnonzero(text.notna().to_numpy() & ~np.isfinite(whole_of_day))
    return ClockColumn(seconds, resolution, unreadable)
