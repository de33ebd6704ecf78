"""The converter's code grid: the step between the values a digitised record can take."""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Iterator

import numpy as np

#: Values gathered at a time when a record's levels are collected (8 MB of float64), so that
#: a long record is never copied whole; the levels found are the same as in one pass.
CHUNK_VALUES = 1 << 20

#: Most distinct values per sample of a record that sits on a code grid: a grid shows itself
#: in values that repeat; continuous values are nearly all distinct (common practice).
GRID_LEVELS_PER_SAMPLE = 0.5


def finite_chunks(y: np.ndarray) -> Iterator[np.ndarray]:
    """The finite values of ``y``, :data:`CHUNK_VALUES` samples at a time."""
    for a in range(0, y.size, CHUNK_VALUES):
        chunk = y[a:a + CHUNK_VALUES]
        yield chunk[np.isfinite(chunk)]


def distinct_levels(y: np.ndarray, limit: float = math.inf) -> np.ndarray | None:
    """The distinct finite values of ``y`` in increasing order (``np.unique`` of them),
    gathered a chunk at a time; None as soon as there are more than ``limit``."""
    y = np.asarray(y, dtype=float)
    levels = np.zeros(0)
    for chunk in finite_chunks(y):
        levels = np.union1d(levels, chunk)
        if levels.size > limit:
            return None
        if levels.size > CHUNK_VALUES // 4:  # values nearly all distinct: one sorted copy is cheaper
            return _levels_by_sorting(y, limit)
    return levels


def _levels_by_sorting(y: np.ndarray, limit: float) -> np.ndarray | None:
    """:func:`distinct_levels` from one sorted copy of the finite values (no other copy)."""
    ordered = y[np.isfinite(y)]
    ordered.sort()
    count = 1 + sum(int(np.count_nonzero(np.diff(ordered[a:a + CHUNK_VALUES + 1])))
                    for a in range(0, ordered.size - 1, CHUNK_VALUES))
    if count > limit:
        return None
    keep = np.ones(ordered.size, dtype=bool)
    np.not_equal(ordered[1:], ordered[:-1], out=keep[1:])
    return ordered[keep]


@dataclass(frozen=True)
class RecordLevels:
    """A record's distinct finite values and the converter step they show (:func:`record_levels`)."""

    levels: np.ndarray | None  # increasing; None for a record of continuous values (not on a grid)
    step: float | None         # None unless the levels sit on a uniform grid
    #: the least difference of two distinct values, when the levels were found from one sorted
    #: copy of the record (None: not found, or fewer than two distinct values)
    gap: float | None = None


def record_levels(y: np.ndarray) -> RecordLevels:
    """The distinct levels of a record, gathered once, and the converter (or printing) step
    they show: the code-grid fit and the clipping checks both need the two. The levels are
    not gathered past :data:`GRID_LEVELS_PER_SAMPLE` per finite sample (values that repeat
    that little sit on no grid). A record whose first part (:data:`HEAD_SHARE`) holds more
    distinct values than that is continuous at once (shown by the buckets of a hash table that
    part occupies, :func:`occupied_buckets`, or else by a sort of it); any other of at most
    :data:`CHUNK_VALUES` samples is sorted once, which also gives the least gap between its
    values, and a longer one is gathered a chunk at a time (:func:`distinct_levels`)."""
    y = np.asarray(y, dtype=float)
    finite = int(np.count_nonzero(np.isfinite(y)))
    limit = GRID_LEVELS_PER_SAMPLE * finite
    head_size = int(HEAD_SHARE * limit) + 1
    head, rest = y[:head_size], y[head_size:]
    head = head[np.isfinite(head)]
    if head.size > limit and occupied_buckets(head) > limit:
        return RecordLevels(None, None)  # more distinct values than a grid has, without a sort
    head.sort()
    if _more_levels(head, limit):
        return RecordLevels(None, None)
    if y.size > CHUNK_VALUES:
        levels = distinct_levels(y, limit)
        return RecordLevels(levels, _grid_step(levels))
    # a merge of the two sorted runs (timsort finds them): the record sorted once in all
    ordered = np.sort(np.concatenate((head, np.sort(rest[np.isfinite(rest)]))), kind="stable")
    levels = ordered[np.concatenate(([True], ordered[1:] != ordered[:-1]))] if ordered.size else ordered
    gap = float(np.diff(levels).min()) if levels.size >= 2 else None
    if levels.size > limit:
        return RecordLevels(None, None, gap)
    return RecordLevels(levels, _grid_step(levels), gap)


#: The head of a record that :func:`record_levels` sorts first holds this many times the
#: limit on a grid's levels (62.5 % of the samples): continuous values printed to 10–12
#: digits repeat now and then (a few thousand of 5·10⁶), and a head that may repeat up to a
#: fifth of its values still shows more distinct values than a grid has.
HEAD_SHARE = 1.25


#: The hash table of :func:`occupied_buckets` has 2**BUCKET_BITS to twice that many buckets per
#: value (8 to 16, one byte each: one to two times the 8-byte values it counts, for a moment):
#: some 3–6 % of distinct random values then share a bucket.
BUCKET_BITS = 3
#: Odd multiplier of Fibonacci hashing (2⁶⁴ divided by the golden ratio; D. E. Knuth, *The Art
#: of Computer Programming*, vol. 3, §6.4): the top bits of key·multiplier spread the keys.
FIBONACCI_MULTIPLIER = np.uint64(0x9E3779B97F4A7C15)


def occupied_buckets(values: np.ndarray) -> int:
    """A lower bound on the number of distinct values among finite ``values``: the buckets of a
    hash table that they occupy (equal values share one; two distinct values may share one too,
    so the count never exceeds the number of distinct values). One pass of multiplications and
    one of scattered writes, a tenth of the time of a sort; a lower bound on the distinct values
    is all :func:`record_levels` needs to call a record continuous.

    References
    ----------
    K.-Y. Whang, B. T. Vander-Zanden and H. M. Taylor, "A linear-time probabilistic counting
    algorithm for database applications", ACM Trans. Database Syst. 15 (1990) 208–229 (the
    occupied buckets of a hash table as a count of distinct values); D. E. Knuth, *The Art of
    Computer Programming*, vol. 3, 2nd ed., §6.4 (multiplicative hashing).
    """
    bits = int(values.size).bit_length() + BUCKET_BITS
    seen = np.zeros(1 << bits, dtype=bool)
    for a in range(0, values.size, CHUNK_VALUES):
        keys = (values[a:a + CHUNK_VALUES] + 0.0).view(np.uint64)  # + 0.0: -0.0 is 0.0, which it equals
        keys *= FIBONACCI_MULTIPLIER  # modulo 2⁶⁴
        keys >>= np.uint64(64 - bits)
        seen[keys] = True
    return int(np.count_nonzero(seen))


def _more_levels(head: np.ndarray, limit: float) -> bool:
    """Whether ``head``, sorted finite values from a record's start, holds more than ``limit``
    distinct values: more levels than a grid has, so the record is continuous (the usual case)
    and the rest of it need not be sorted."""
    return head.size > limit and 1 + int(np.count_nonzero(head[1:] != head[:-1])) > limit


def code_step(y: np.ndarray) -> float | None:
    """The converter (or printing) step of a record, if its values sit on a uniform grid
    (at most one distinct value per two samples)."""
    return record_levels(y).step


#: Values looked at by :func:`has_gap_below`: enough that noisy continuous values show gaps far
#: below their noise (256 values of a normal spread are about σ/40 apart in the middle), few
#: enough to cost nothing beside the sort of a whole record that it spares.
PROBE_VALUES = 256


def has_gap_below(y: np.ndarray, gap: float) -> bool:
    """Whether two of the first :data:`PROBE_VALUES` finite values of ``y`` differ, by less
    than ``gap``. Then any grid the record sits on has a step below ``gap`` (a grid's step is
    the least difference of its distinct levels), which a caller that only wants coarser
    grids learns without sorting the record (:func:`code_step`)."""
    probe = np.asarray(y[:PROBE_VALUES], dtype=float)
    probe = np.sort(probe[np.isfinite(probe)])
    steps = np.diff(probe)
    return bool(np.any((steps > 0) & (steps < gap)))


def _grid_step(levels: np.ndarray | None) -> float | None:
    """The step of the uniform grid the distinct ``levels`` sit on, or None."""
    if levels is None or levels.size < 3:
        return None
    gaps = np.diff(levels)
    step = float(gaps.min())
    if step <= 0:
        return None
    ratio = gaps / step
    if np.max(np.abs(ratio - np.round(ratio))) > 0.05:
        return None
    return step


def code_grid(y: np.ndarray, step: float | None = None) -> tuple[float, float] | None:
    """(origin, step) of the grid a record's values sit on, fitted to all its levels.

    The step between adjacent printed levels varies by the printing resolution (0.00392 and
    0.00393 for 8-bit codes printed to 10 µV); a least-squares line through the levels
    against their code numbers recovers it. ``step`` is a first guess when the record holds
    too few levels to find one (a settled level reading one or two codes). None when the
    values are not on a uniform grid.
    """
    y = np.asarray(y, dtype=float)
    found = record_levels(y)
    first = found.step or step
    levels = found.levels if found.levels is not None else distinct_levels(y)
    if first is None or levels.size == 0:
        return None
    number = np.round((levels - levels[0]) / first)
    if number[-1] > 0:
        slope, origin = np.polyfit(number, levels, 1)
    else:
        slope, origin = first, float(levels[0])
    if not slope > 0 or np.max(np.abs(origin + slope * number - levels)) > 0.05 * slope:
        return None
    return float(origin), float(slope)
