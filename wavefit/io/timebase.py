"""Check a time column (strictly increasing, uniformly sampled) or build a time axis from an interval.

Limits, relative to the median interval ``dt``:

* any interval more than 1 % away from ``dt`` is an error;
* an rms jitter of the intervals above 0.1 % of ``dt`` is reported as a warning;
* except when the time stamps are merely printed with too few digits: when
  every stamp lies within the printing resolution of a uniform grid, the axis
  is rebuilt as that least-squares grid (with a warning), since the median of
  rounded intervals would be biased (rounding to nearest, down or up: the
  stamps' departures from the grid span at most one printing step). Stamps
  printed coarser than the interval repeat (``3.98E-05`` on two rows); that is
  rounding too, not time standing still.
* stamps printed with a few digits too few vary by less than these limits and
  still leave the median a printing step off the stamps' rate (7 digits on
  33.33 ns intervals: 1e-4): where the median and the rate from the first
  stamp to the last differ by more than ``MEDIAN_BIAS_LIMIT``, the rebuilt
  grid gives the interval too, with a note rather than a warning.

The rebuilt interval and its uncertainty. The stamps are cut into segments
of one printing step r (significant digits change the step at every decade)
and one sign, so that a rounding rule that is not to nearest (stamps cut
instead of rounded) only shifts each segment by a constant. Each segment
gives its own least-squares slope; their weighted mean is the interval. The
rounding errors are not independent from stamp to stamp (they run in a
sawtooth, slow when the interval is close to a multiple of the step), so a
segment's slope is taken to be uncertain by what its two ends allow: two
errors uniform over r, r/(√6·(n−1)) (JCGM 100:2008, 4.3.7 and 5.1.2). The
variance of a regression slope, r/√(n(n²−1)), was measured 8 times too
small on 5-digit stamps. Segments that disagree beyond their uncertainty
enlarge it by their Birge ratio.

A time column that goes backwards, or steps by clearly more or less than
rounding explains, is refused.
"""
from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace
from decimal import Decimal

import numpy as np

from ..errors import CaptureError

#: Largest deviation of one interval from the median, as a fraction of it.
MAX_INTERVAL_DEVIATION = 0.01
#: Relative rms jitter of the intervals above which a warning is given.
JITTER_WARNING = 1e-3
_DIGIT_SAMPLES = 2000
# Rounding by any rule (to nearest, down, up; some stamps exact) leaves every stamp within one
# printing step r of a uniform grid: the departures span at most r. Slack for the fitted slope.
_ROUNDING_SPAN = 1.2
#: A grid whose interval the stamps give to worse than this relative standard uncertainty is
#: none: stamps that stand still (one value on every row) left a "slope" of 1e-24 s known to
#: 1e16 relative (a fault campaign's constant column). Coarse but real stamps give it to 1e-3 or
#: better (a step of ten intervals over 10⁴ rows: 4e-4).
GRID_MAX_RELATIVE = 0.1
# Printed coarser than half an interval, time stamps cannot be trusted to show whether samples
# are missing: the rebuilt axis says so.
_COARSEST_RESOLUTION = 0.5
# Coarse stamps disturb many intervals; a few bad ones are a real sampling problem.
_MANY_DEVIATIONS = 0.01
#: Largest relative gap between the median interval and the stamps' mean rate that is taken
#: as the interval without asking why. Stamps printed with too few digits for their interval
#: vary by less than the 1 % limit yet leave the median a rounding step off (7 digits on
#: 33.33 ns: 1e-4); 1e-6 is below the timebase accuracy of scopes and loggers (tens of ppm,
#: common practice) and above the float noise of stamps printed at full precision.
MEDIAN_BIAS_LIMIT = 1e-6


@dataclass(frozen=True)
class Printing:
    """How a column's stamps are printed: a fixed step, or a number of significant digits.

    Attributes
    ----------
    step
        The step of the last printed digit (fixed decimals, clock stamps), in
        the printed unit, or None when ``digits`` applies.
    digits
        Significant digits of an exponent form (``4.00E-08``: 3), or None.
    scale
        Seconds per unit of the printed numbers (1e-6 for a column in µs).
    alternative
        Another reading of the same stamps (from the numbers across the column, see
        :meth:`seen_in`): each stamp's step is then the coarser of the two.
    """

    step: float | None = None
    digits: int | None = None
    scale: float = 1.0
    alternative: Printing | None = None

    def steps(self, time: np.ndarray) -> np.ndarray:
        """The printing step of every stamp in seconds (0 for a stamp printed as exactly 0)."""
        if self.alternative is not None:
            other = replace(self.alternative, scale=self.scale).steps(time)
            return np.maximum(replace(self, alternative=None).steps(time), other)
        if self.digits is None:
            return np.full(time.size, float(self.step or 0.0) * self.scale)
        steps = np.zeros(time.size)
        runs = _decade_runs(time, self.scale)
        if runs is not None:
            # a time column in order: each decade is one run of stamps (or two, either side of
            # zero), found by bisection; the step of each filled in (a tenth of the time of a
            # logarithm of every stamp on a 10⁷-row column)
            if runs:
                lowest = min(d for *_, d in runs)
                table = self._decade_steps(lowest, max(d for *_, d in runs))
                for a, b, d in runs:
                    steps[a:b] = table[d - lowest]
            return steps
        printed = np.abs(time) / self.scale
        nonzero = printed > 0
        if not nonzero.any():
            return steps
        # the step of each decade once, taken for each stamp by its decade (a long column has a
        # few decades: ten million powers took a third of a second)
        decade = np.floor(np.log10(printed[nonzero]))
        lowest = float(decade.min())
        steps[nonzero] = self._decade_steps(int(lowest), int(decade.max()))[(decade - lowest).astype(np.intp)]
        return steps

    def _decade_steps(self, lowest: int, highest: int) -> np.ndarray:
        """The printing step in seconds of each decade from 10^lowest to 10^highest."""
        decades = np.arange(float(lowest), float(highest) + 1.0)
        return 10.0 ** (decades - self.digits + 1) * self.scale

    def seen_in(self, values: np.ndarray) -> Printing:
        """This printing, checked against the numbers across the whole column (the text it was
        read from is the first lines only; a general format drops trailing zeros there).

        Significant digits read from an exponent form are a lower bound: the most the numbers
        show is taken (``1.5e-07``, ``3e-07`` at the start, ``1.499982e-01`` a million rows
        on). Never fewer: numbers on an exact grid (``2.9900000000e-06``) show few. Decimals
        read from fixed forms are taken, or more where the numbers show more; where the
        numbers are printed to significant digits instead (``0.0015``, ``0.003`` at the start,
        ``1.499`` later), each stamp takes the coarser of the two steps. ``values`` are the
        column's numbers as printed (before any unit scale)."""
        significant, decimals = _shortest_forms(values)
        if not significant.size:
            return self
        if self.digits is not None:
            return replace(self, digits=max(self.digits, int(significant.max())))
        seen = _printing_from_forms(significant, decimals)
        if seen.digits is None:
            return replace(self, step=min(float(self.step or math.inf), float(seen.step)))
        return replace(self, alternative=seen)


@dataclass(frozen=True)
class TimeAxis:
    """A checked, uniformly sampled time axis in seconds.

    ``relative_uncertainty`` is the relative standard uncertainty of
    ``sample_interval`` left by the printing of the stamps (0 when they are
    exact to their printing). ``notes`` say how the axis was made where
    nothing is wrong with the file.
    """

    time: np.ndarray
    sample_interval: float
    warnings: tuple[str, ...] = ()
    relative_uncertainty: float = 0.0
    notes: tuple[str, ...] = ()


def axis_from_interval(rows: int, interval: float, start: float = 0.0) -> np.ndarray:
    """The time axis ``start + i * interval`` for ``rows`` samples, in seconds."""
    return start + np.arange(rows, dtype=np.float64) * interval


def axis_from_column(
    time: np.ndarray,
    *,
    header: str,
    where: Callable[[int], str],
    source: str,
    resolution: Printing | None = None,
    printed: np.ndarray | None = None,
) -> TimeAxis:
    """Check a time column and return it as the time axis.

    Parameters
    ----------
    time
        The column in seconds, without NaN.
    header
        The column's header, for messages.
    where
        Turns a 0-based row index into a place in the source (``"line 12"``).
    source
        Name of the source, for messages.
    resolution
        The stamps' printing step when it is known from their text; estimated
        from the values otherwise.
    printed
        The column's numbers as printed (before any unit scale): ``resolution`` is checked
        against them (:meth:`Printing.seen_in`), only where the axis is not plainly uniform.

    Returns
    -------
    TimeAxis
        The column (or a uniform grid fitted to it, when it is coarsely
        printed), its median interval and warnings.

    Raises
    ------
    CaptureError
        When time goes backwards, repeats where rounding does not explain it,
        or is not uniformly sampled.
    """
    def checked() -> Printing | None:
        return resolution.seen_in(printed) if resolution is not None and printed is not None else resolution

    steps = np.diff(time)
    bad = np.flatnonzero(~(steps > 0))
    if bad.size:
        if np.all(steps >= 0):
            rounded = _rounded_grid(time, header, checked(), repeats=bad.size)
            if rounded is not None:
                return rounded
        raise CaptureError(_not_increasing_message(time, int(bad[0]) + 1, header, where, source))
    # The median reorders ``steps`` in place (no copy of a long column); only
    # order-free figures are taken from it afterwards.
    dt = float(np.median(steps, overwrite_input=True))
    steps -= dt
    mean = float(steps.mean())
    jitter = math.sqrt(max(float(np.dot(steps, steps)) / steps.size - mean * mean, 0.0)) / dt
    largest = float(np.max(np.abs(steps, out=steps))) / dt
    del steps
    if largest <= MAX_INTERVAL_DEVIATION and jitter <= JITTER_WARNING:
        rate = float(time[-1] - time[0]) / (time.size - 1)
        if abs(rate - dt) <= MEDIAN_BIAS_LIMIT * dt:
            return TimeAxis(time, dt)
        # intervals within the limits, but the median is a printing step off the stamps' rate:
        # a grid fitted to the stamps gives the interval; nothing is wrong with the file, so the
        # reader notes it rather than warns
        rounded = _rounded_grid(time, header, checked(), largest=largest)
        if rounded is not None:
            return replace(rounded, warnings=(), notes=rounded.warnings)
        return TimeAxis(time, dt)
    resolution = checked()
    rounded = _rounded_grid(time, header, resolution, largest=largest)
    if rounded is not None:
        return rounded
    if largest > MAX_INTERVAL_DEVIATION:
        step = float(resolution.steps(time).max()) if resolution is not None else printing_resolution(time)
        raise CaptureError(_non_uniform_message(time, dt, step, where, source))
    return TimeAxis(time, dt, (
        f"time column {header!r}: the sample intervals jitter by {100 * jitter:.2g} % rms "
        f"of the median {dt:.6g} s (warning above {100 * JITTER_WARNING:g} %); "
        "the analysis assumes uniform sampling",
    ))


def _decade_runs(time: np.ndarray, scale: float) -> list[tuple[int, int, int]] | None:
    """The runs (start, stop, decade) of the stamps ``|time| / scale`` printed in one decade,
    their decade ``floor(log10(.))`` as for each stamp alone; None when ``time`` is not in
    non-decreasing order (its decades are then not runs). Stamps at zero are in no run."""
    if time.size > 1 and not bool(np.all(time[1:] >= time[:-1])):
        return None
    zero_from, zero_to = int(np.searchsorted(time, 0.0, "left")), int(np.searchsorted(time, 0.0, "right"))

    def decade(i: int) -> int:
        return int(np.floor(np.log10(abs(time[i:i + 1]) / scale))[0])

    runs = []
    for i, b, step in ((zero_from - 1, -1, -1), (zero_to, time.size, 1)):  # away from zero both ways
        while i != b:
            d = decade(i)
            lo, hi = i, b  # the first stamp past i in another decade: between lo (exclusive) and hi
            while abs(hi - lo) > 1:
                mid = (lo + hi) // 2
                lo, hi = (mid, hi) if decade(mid) == d else (lo, mid)
            runs.append((hi + 1, i + 1, d) if step < 0 else (i, hi, d))
            i = hi
    return runs


def _rounded_grid(
    time: np.ndarray, header: str, printing: Printing | None, *, repeats: int = 0, largest: float = 0.0
) -> TimeAxis | None:
    """The uniform grid that the stamps are a rounding of, or None when rounding does not explain them."""
    if printing is None:
        printing = Printing(step=printing_resolution(time))
    steps = printing.steps(time)
    resolution = float(steps.max())
    rows = _Rows()
    with np.errstate(over="ignore", invalid="ignore"):  # stamps near the float range's end: no grid
        slope, relative = _segment_slope(time, steps, rows)
        if not (slope > 0 and relative <= GRID_MAX_RELATIVE):
            return None
        low, high = _departure_range(time, slope, rows)
    span = high - low
    if span > _ROUNDING_SPAN * resolution:
        return None
    if repeats and resolution <= slope:
        return None  # stamps printed finer than the interval repeat only when time stands still
    if repeats:
        what = (f"repeats its value on {repeats} rows: it is printed with a resolution of about "
                f"{resolution:.2g} s, coarser than the {slope:.6g} s between samples")
    else:
        what = (f"is printed with a resolution of about {resolution:.2g} s, so its intervals vary by "
                f"up to {100 * largest:.3g} % of {slope:.6g} s")
    caution = "; a missing sample would not show in such stamps" if resolution >= _COARSEST_RESOLUTION * slope else ""
    grid = np.arange(time.size, dtype=np.float64)
    grid *= slope
    grid += 0.5 * (low + high)
    return TimeAxis(grid, slope, (
        f"time column {header!r} {what}; the axis was rebuilt as a uniform grid fitted to it "
        f"(departures span {span:.2g} s, interval uncertain by {relative:.1e} relative, "
        f"carried into the timebase input){caution}",
    ), relative)


def _segment_slope(time: np.ndarray, steps: np.ndarray, rows: "_Rows") -> tuple[float, float]:
    """The interval from the stamps' segments of one printing step and sign, and its relative
    standard uncertainty (see the module docstring)."""
    overall = _line_slope(time, 0, time.size, rows) if time.size > 1 else 0.0
    if not overall > 0:
        return overall, math.inf
    edges = _segment_edges(time, steps)
    slopes, variances = [], []
    for a, b in zip(edges[:-1], edges[1:]):
        r = float(steps[a])
        n = float(b - a)
        if n < 2 or r <= 0.0:
            continue
        slopes.append(_line_slope(time, a, b, rows))
        u = r / (math.sqrt(6.0) * (n - 1.0))
        variances.append(u * u)
    if not slopes:
        return overall, math.inf
    weights = 1.0 / np.array(variances)
    if not (np.all(np.isfinite(weights)) and weights.sum() > 0):
        return overall, math.inf  # steps near the float range's end (stamps of 1e300 s): no interval
    slope = float(np.dot(weights, slopes) / weights.sum())
    u = math.sqrt(1.0 / float(weights.sum()))
    if len(slopes) > 1:
        birge = math.sqrt(float(np.dot(weights, (np.array(slopes) - slope) ** 2)) / (len(slopes) - 1))
        u *= max(1.0, birge)
    return slope, u / slope


#: Stamps taken at a time by the grid's sums and comparisons, in buffers made once: a 10⁷-row
#: column had made ten temporaries of its own size (0.3–0.9 s of allocation; measured).
GRID_CHUNK = 1 << 16


class _Rows:
    """Row numbers a chunk at a time (:data:`GRID_CHUNK`), written into one buffer: ``chunks``
    gives the ranges of start..stop, ``shifted`` the rows a..b less ``offset`` (exact: rows and
    offsets are whole or half numbers far below 2⁵³)."""

    def __init__(self):
        self._base = np.arange(GRID_CHUNK, dtype=np.float64)
        self._buffer = np.empty(GRID_CHUNK)

    @staticmethod
    def chunks(start: int, stop: int) -> list[tuple[int, int]]:
        return [(a, min(a + GRID_CHUNK, stop)) for a in range(start, stop, GRID_CHUNK)]

    def shifted(self, a: int, b: int, offset: float = 0.0) -> np.ndarray:
        return np.add(self._base[:b - a], a - offset, out=self._buffer[:b - a])


def _segment_edges(time: np.ndarray, steps: np.ndarray) -> list[int]:
    """0, the first row of each run of stamps of one printing step and sign after the first, and
    the row count."""
    edges = [0]
    key = np.empty(GRID_CHUNK + 1)
    for a, b in _Rows.chunks(0, time.size - 1):  # rows a..b against the row after each
        part = np.sign(time[a:b + 1], out=key[:b + 1 - a])
        part *= steps[a:b + 1]
        edges += (np.flatnonzero(part[1:] != part[:-1]) + (a + 1)).tolist()
    return [*edges, time.size]


def _line_slope(time: np.ndarray, start: int, stop: int, rows: _Rows) -> float:
    """The least-squares slope of the stamps ``time[start:stop]`` against their row numbers: the
    centred rows' products with the stamps, a chunk at a time, over the centred rows' sum of
    squares n(n² − 1)/12 (no array of the column's length is made)."""
    n = float(stop - start)
    centre = 0.5 * (start + stop - 1)  # the mean row, a whole or half number
    products = math.fsum(float(np.dot(rows.shifted(a, b, centre), time[a:b])) for a, b in rows.chunks(start, stop))
    return products / (n * (n * n - 1.0) / 12.0)


def _departure_range(time: np.ndarray, slope: float, rows: _Rows) -> tuple[float, float]:
    """The least and greatest departure of the stamps from the line ``slope`` times the row number."""
    low, high = math.inf, -math.inf
    for a, b in rows.chunks(0, time.size):
        departures = rows.shifted(a, b)
        departures *= slope
        np.subtract(time[a:b], departures, out=departures)
        low, high = min(low, float(departures.min())), max(high, float(departures.max()))
    return low, high


def _not_increasing_message(
    time: np.ndarray, row: int, header: str, where: Callable[[int], str], source: str
) -> str:
    """Message for the first row whose time is not after the row before it."""
    now, before = float(time[row]), float(time[row - 1])
    what = (
        f"repeats the value {now:.9g} s of the row before"
        if now == before
        else f"goes backwards ({now:.9g} s after {before:.9g} s)"
    )
    return (
        f"{source}, {where(row)}: time in column {header!r} {what}; the time column must "
        "increase strictly; sort the capture, or pass a sample interval to ignore the column"
    )


def _non_uniform_message(
    time: np.ndarray, dt: float, resolution: float, where: Callable[[int], str], source: str
) -> str:
    """Message for the largest interval deviation, with a hint at missing samples or coarse stamps."""
    steps = np.diff(time)
    deviation = np.abs(steps - dt) / dt
    worst = int(np.argmax(deviation))
    off = float(steps[worst])
    ratio = off / dt
    hint = ""
    if round(ratio) >= 2 and abs(ratio - round(ratio)) < MAX_INTERVAL_DEVIATION * round(ratio):
        hint = f" (about {round(ratio)} intervals: samples missing?)"
    deviating = int(np.count_nonzero(deviation > MAX_INTERVAL_DEVIATION))
    if resolution >= _COARSEST_RESOLUTION * dt and deviating > _MANY_DEVIATIONS * steps.size:
        hint = (
            f" (its time stamps have only about {resolution:.2g} s resolution: export more "
            "digits, or pass a sample interval to ignore the column)"
        )
    return (
        f"{source}, {where(worst + 1)}: sampling is not uniform: the interval to this row is "
        f"{off:.6g} s, {100 * deviation[worst]:.3g} % away from the median {dt:.6g} s{hint} "
        f"(limit {100 * MAX_INTERVAL_DEVIATION:g} %); resample the capture to a uniform grid"
    )


def printing_resolution(values: np.ndarray) -> float:
    """Estimate the step of the last printed digit at the largest magnitude in ``values``.

    The shortest decimal forms of a sample of the values show how they were printed: with a
    fixed number of decimals (the count after the point is the same for most values) or with
    a fixed number of significant digits (the most seen). The step of the last digit follows,
    at the largest magnitude.

    Parameters
    ----------
    values
        Numbers read from text.

    Returns
    -------
    float
        The estimated resolution (0 when all values are zero).
    """
    largest = float(np.max(np.abs(values)))
    if largest == 0.0:
        return 0.0
    significant, decimals = _shortest_forms(values)
    return float(_printing_from_forms(significant, decimals).steps(np.array([largest]))[0])


def _shortest_forms(values: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Significant digits and decimals of the shortest forms of up to ``_DIGIT_SAMPLES`` non-zero
    values spread over ``values``."""
    picks = np.unique(np.linspace(0, values.size - 1, min(values.size, _DIGIT_SAMPLES)).astype(int))
    forms = [_digits_and_exponent(float(v)) for v in values[picks] if v != 0.0 and math.isfinite(v)]
    significant = np.array([digits for digits, _ in forms], dtype=int)
    decimals = np.array([digits - 1 - exponent for digits, exponent in forms], dtype=int)
    return significant, decimals


def _printing_from_forms(significant: np.ndarray, decimals: np.ndarray) -> Printing:
    """Fixed decimals when most values show the most decimals seen, else significant digits."""
    if np.mean(decimals == decimals.max()) > np.mean(significant == significant.max()):
        return Printing(step=10.0 ** -int(decimals.max()))
    return Printing(digits=int(significant.max()))


def _digits_and_exponent(value: float) -> tuple[int, int]:
    """Significant digits of the shortest decimal form of ``value`` (non-zero), and its decimal exponent."""
    shortest = Decimal(repr(abs(value))).normalize()
    return len(shortest.as_tuple().digits), shortest.adjusted()
