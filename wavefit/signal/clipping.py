"""Clipping: a trace held flat at the converter's limits.

A clipped trace sits at its extreme code for a run of consecutive samples while
the signal beyond it is lost. An extreme value that recurs only in isolated
samples is ordinary noise; a long run at the very minimum or maximum is the
sign (common practice). The fitted model settles it: see :func:`model_exceeds_record`.
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .codes import CHUNK_VALUES, RecordLevels, record_levels
from .robust import mad_sigma

#: Consecutive samples at a record's extremes that, with a model beyond them, mean clipping
#: (lc-ring's test), and that a refusal of suggest names as possible clipping.
CLIPPED_RUN = 5


def longest_run_at_extremes(y: np.ndarray) -> tuple[int, int]:
    """Length of the longest run of samples equal to min(y), and to max(y)."""
    y = np.asarray(y)
    return _longest_run(y == np.nanmin(y)), _longest_run(y == np.nanmax(y))


def _longest_run(mask: np.ndarray) -> int:
    """The most consecutive true values of ``mask``, from the positions of the true ones (a
    run ends where the next position is not the one after)."""
    at = np.flatnonzero(mask)
    if at.size == 0:
        return 0
    ends = np.flatnonzero(np.diff(at) != 1)  # the last position of every run but the last
    return int(np.max(np.diff(np.concatenate(([-1], ends, [at.size - 1])))))


def model_exceeds_record(y: np.ndarray, model: np.ndarray, sigma: float, min_run: int = 5) -> bool:
    """True when the fitted model lies beyond the record's extreme value by more than 3σ
    for ``min_run`` or more consecutive samples that sit at that extreme: the trace was clipped."""
    y, model = np.asarray(y), np.asarray(model)
    top, bottom = np.nanmax(y), np.nanmin(y)
    above = (y == top) & (model > top + 3.0 * sigma)
    below = (y == bottom) & (model < bottom - 3.0 * sigma)
    return _longest_run(above) >= min_run or _longest_run(below) >= min_run


#: Identical samples at a record's extreme, at least, that make a flat (clipped) trace
#: (common practice).
FLAT_RUN = 20


@dataclass(frozen=True)
class Extremes:
    """The facts about a record's extreme values that the clipping checks need, computed
    once per channel (they sort the whole record) and judged against any noise level."""

    #: between distinct values; None with fewer than two, or when the longest run at an
    #: extreme is shorter than :data:`FLAT_RUN` (:meth:`flat` is then false whatever it is)
    smallest_gap: float | None
    longest_run: int             # identical samples at the minimum or the maximum
    code: float | None           # the converter step, when the values sit on a grid
    counts: tuple[tuple[int, int, float | None], ...]  # (at the extreme, one step inside, the step) for max, min
    limits: tuple[float, float] = (math.nan, math.nan)  # the record's lowest and highest value

    def flat(self, sigma: float) -> bool:
        """A run of :data:`FLAT_RUN` identical samples at the record's extreme although the
        noise spans more than one converter step: the trace sat at the converter's limit
        (common practice)."""
        return self.smallest_gap is not None and sigma > self.smallest_gap and self.longest_run >= FLAT_RUN

    def piles_up(self, sigma: float, min_count: int = 5) -> bool:
        """See :func:`_piles_up`."""
        return _piles_up(self.counts, sigma, min_count)

    def held_while_curve_moves(self, y: np.ndarray, model: np.ndarray) -> bool:
        """True when part ``y`` of the record holds :data:`FLAT_RUN` or more consecutive samples
        at the record's lowest or highest value while the signal moves: the curve fitted to it
        (``model``, same length) moves over them by more than ``MOVING_CODES`` converter codes
        and ``MOVING_SIGMAS`` times the noise of ``y`` about it (:func:`residual_noise`), or
        that noise spans more than a code, which would not let a settled level sit on one
        value. A fit dragged by the held samples need not go beyond them
        (:func:`model_exceeds_record`); a settled level that happens to be the record's
        extreme, without dither, leaves both still."""
        y, model = np.asarray(y, dtype=float), np.asarray(model)
        held = np.isin(y, self.limits)
        runs = [(a, b) for a, b in _runs(held) if b - a >= FLAT_RUN]
        if not runs:
            return False
        noise = residual_noise(y, model, held)
        # the converter's step, or where noise hides the grid from the record's levels the
        # smallest gap between its values (a run of equal values needs noise under it)
        code = self.code or self.smallest_gap or 0.0
        if code and noise > code:
            return True
        moving = max(MOVING_SIGMAS * noise, MOVING_CODES * code)
        return any(float(np.ptp(model[a:b])) > moving for a, b in runs)

    def near_limit(self, y: np.ndarray, model: np.ndarray) -> int:
        """How many samples at the start of part ``y`` of the record the curve fitted to it
        (``model``) stays within ``NEAR_SIGMAS`` noise deviations (:func:`residual_noise`) of
        the record's limits: there the noise still carries samples onto a limit now and then,
        and those are cut off too (0 where the curve starts away from the limits)."""
        y, model = np.asarray(y, dtype=float), np.asarray(model)
        reach = NEAR_SIGMAS * residual_noise(y, model, np.isin(y, self.limits))
        near = (model - self.limits[0] <= reach) | (self.limits[1] - model <= reach)
        if not near.size or not near[0]:
            return 0
        away = np.flatnonzero(~near)
        return int(away[0]) if away.size else int(near.size)

    def held_throughout(self, y: np.ndarray) -> bool:
        """Whether part ``y`` of the record lies at one of its limits from end to end
        (:data:`FLAT_RUN` samples or more): for a channel clipped elsewhere, a stretch spent
        off screen, which alone cannot be told from a still trace."""
        y = np.asarray(y)
        return y.size >= FLAT_RUN and bool(np.all(y == self.limits[0]) or np.all(y == self.limits[1]))


def residual_noise(y: np.ndarray, model: np.ndarray, held: np.ndarray) -> float:
    """The noise of ``y`` about the curve ``model`` fitted to it: 1.4826·MAD of the first
    differences of the residuals, left out where both samples are ``held`` at a limit,
    divided by √2 (the differences take out the curve's slope and a smooth misfit; a fit's own
    scatter is swollen by the held samples it misses). 0 with too few differences."""
    free = ~(held[1:] & held[:-1])
    steps = np.diff(y - model)[free]
    return mad_sigma(steps) / math.sqrt(2.0) if steps.size >= MIN_NOISE_STEPS else 0.0


def clipped_where_fitted(facts: "Extremes", y: np.ndarray, curve: np.ndarray, sigma: float) -> bool:
    """Whether part ``y`` of a record, fitted by ``curve`` with noise ``sigma``, is clipped where
    it is fitted: the curve beyond the record's extreme (:func:`model_exceeds_record`), or
    samples held at it while the signal moves (:meth:`Extremes.held_while_curve_moves`)."""
    return model_exceeds_record(y, curve, sigma) or facts.held_while_curve_moves(y, curve)


#: Samples at the record's limits no more than this many apart belong to one held stretch:
#: where the signal comes back on screen its noise carries it to the limit and off again.
HELD_GAP = 3


def leading_held(y: np.ndarray, limits: tuple[float, float]) -> int:
    """How many samples at the start of ``y`` lie in the stretch held at the record's
    ``limits`` (samples at a limit no more than :data:`HELD_GAP` apart, the first within
    that of the start); 0 when ``y`` does not start at a limit."""
    at = np.flatnonzero(np.isin(y, limits))
    if at.size == 0 or at[0] > HELD_GAP:
        return 0
    breaks = np.flatnonzero(np.diff(at) > HELD_GAP)
    return int(at[breaks[0]] if breaks.size else at[-1]) + 1


#: A curve moves, over a run of held samples, when it changes by more than this many converter
#: codes (samples without dither stay on one code while the signal moves within it) and this
#: many noise standard deviations (the held samples would have moved with it).
MOVING_CODES = 2.0
MOVING_SIGMAS = 3.0
#: Fewest first differences outside the held stretches that the noise is taken from.
MIN_NOISE_STEPS = 10
#: A curve within this many noise deviations of a limit still has samples cut off by it (the
#: chance of a normal sample beyond 3σ is 0.13 %, common practice).
NEAR_SIGMAS = 3.0


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """(start, stop) of each run of true values of ``mask``."""
    held = np.concatenate(([False], mask, [False]))
    changes = np.flatnonzero(held[1:] != held[:-1])  # starts and stops of the runs, in turn
    return list(zip(changes[::2].tolist(), changes[1::2].tolist()))


#: An extreme holds a pile-up when it has more than PILE_RATIO times the samples one step inside
#: it plus PILE_EXCESS (common practice): an extreme of PILE_EXCESS samples or fewer never does.
PILE_RATIO = 1.5
PILE_EXCESS = 3
#: ... and when so many of the samples on the two outermost steps lie on the extreme one that
#: chance would put them there less often than this, each sample being there with probability
#: one half (a noise tail that is not cut off thins outward, so no more than that). Without it,
#: a few samples at the top code, such as the first samples after each rising edge of a drive
#: (5 there and 1 one code inside), made 7 of 240 clean 8-bit records of a clipping campaign warn
#: of clipping (0 of 240 with it). Clipped records measured in the
#: tests hold 14 samples to none, 15 to 2 (a chance of 0.0012) and more.
PILE_CHANCE = 0.01


def _piles_up(counts: tuple[tuple[int, int, float | None], ...], sigma: float, min_count: int) -> bool:
    """More samples at the record's extreme value than one step inside it, beyond chance (``counts``, from
    :func:`_extreme_counts`: the converter's code, or for values off any grid the step to the
    next value inside): noise cut off at the converter's range (a smooth noise distribution
    thins out towards its tails, common practice). Only judged when the noise spans more than
    that step, since a quiet plateau on one code piles up by itself. Values printed with few
    digits repeat like codes (a record printed to three significant digits keeps millivolts
    near a quarter volt), so their extreme is judged against its neighbour as a code is; truly
    continuous values repeat an extreme only when it was clipped (their next value is single)."""
    for at, near, step in counts:
        if at < min_count or step is None:
            continue
        if sigma > step and at > PILE_RATIO * near + PILE_EXCESS and _chance_of_as_many(at, near) < PILE_CHANCE:
            return True
    return False


def _chance_of_as_many(at: int, near: int) -> float:
    """The chance that ``at`` or more of ``at + near`` samples fall on one of two steps, each
    sample on either with probability one half: the binomial upper tail (W. Feller, *An
    Introduction to Probability Theory and Its Applications*, vol. 1, 3rd ed., Wiley 1968,
    ch. VI)."""
    from scipy.special import bdtrc  # P(X > k) of a binomial

    return float(bdtrc(at - 1, at + near, 0.5))


def extremes(y: np.ndarray, levels: RecordLevels | None = None) -> Extremes:
    """Gather :class:`Extremes` of a record; ``levels`` its :func:`record_levels` when known."""
    y = _finite(y)
    found = record_levels(y) if levels is None else levels
    code = found.step
    run = max(longest_run_at_extremes(y))
    if run < FLAT_RUN:
        gap = None  # not needed: no run long enough for a flat trace
    elif found.levels is not None:
        gap = float(np.diff(found.levels).min()) if found.levels.size >= 2 else None
    elif found.gap is not None:
        gap = found.gap
    else:  # continuous values: their smallest gap from one sorted copy
        gap = smallest_gap(y)
    return Extremes(gap, run, code, _extreme_counts(y, code), (float(np.min(y)), float(np.max(y))))


def _extreme_counts(y: np.ndarray, code: float | None) -> tuple[tuple[int, int, float | None], ...]:
    """(samples at the extreme, samples one step inside it, the step) for the maximum and the
    minimum; the step is ``code``, or without one the distance to the next value inside (None
    when there is none, and when the extreme holds too few samples to pile up: the values of a
    continuous record are not searched for it)."""
    counts = []
    for extreme, inward in ((np.max(y), -1.0), (np.min(y), 1.0)):
        at = int(np.count_nonzero(y == extreme))
        if code:
            counts.append((at, _count_within(y, extreme + inward * code, 0.01 * code), code))
            continue
        if at <= PILE_EXCESS:
            counts.append((at, 0, None))
            continue
        inside = y[y < extreme] if inward < 0 else y[y > extreme]
        if inside.size == 0:
            counts.append((at, 0, None))
            continue
        nxt = np.max(inside) if inward < 0 else np.min(inside)
        counts.append((at, int(np.count_nonzero(y == nxt)), float(abs(extreme - nxt))))
    return tuple(counts)


def smallest_gap(y: np.ndarray) -> float | None:
    """The smallest difference between two distinct values of ``y`` (finite values), or None
    when it holds fewer than two: the smallest step of its sorted values, taken a chunk at a
    time so that only the sorted copy is held."""
    ordered = np.sort(y)
    gap = math.inf
    for a in range(0, max(ordered.size - 1, 0), CHUNK_VALUES):
        steps = np.diff(ordered[a:a + CHUNK_VALUES + 1])
        steps = steps[steps > 0]
        if steps.size:
            gap = min(gap, float(steps.min()))
    return gap if math.isfinite(gap) else None


def _count_within(y: np.ndarray, value: float, tolerance: float) -> int:
    """How many samples lie within ``tolerance`` of ``value`` (counted a chunk at a time)."""
    return sum(int(np.count_nonzero(np.abs(y[a:a + CHUNK_VALUES] - value) < tolerance))
               for a in range(0, y.size, CHUNK_VALUES))


def piles_up_at_limit(y: np.ndarray, sigma: float, code: float | None, min_count: int = 5) -> bool:
    """See :func:`_piles_up`; ``code`` is the converter step of the record ``y`` is part of
    (its :func:`record_levels` step, None for continuous values), so that a part of a record
    is not sorted again for its levels."""
    y = _finite(y)
    return _piles_up(_extreme_counts(y, code), sigma, min_count)


def _finite(y: np.ndarray) -> np.ndarray:
    """The finite values of ``y`` as floats (``y`` itself when all are: no copy)."""
    y = np.asarray(y, dtype=float)
    return y if np.all(np.isfinite(y)) else y[np.isfinite(y)]
