"""Edges of step and square-wave records: where each transition is and how fast it goes.

State levels come from the IEEE Std 181 histogram method
(:func:`wavefit.signal.levels.state_levels`), edges from 50 % reference-level
crossings with hysteresis, and each edge's 10 % and 90 % instants by linear
interpolation. For a first-order step y = 1 − exp(−(t − t0)/tau) the p-level
instant is t0 − tau·ln(1 − p), so t90 − t10 = tau·ln 9 and
t10 = t0 + tau·ln(10/9): both give a starting tau and the switching instant t0.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .codes import CHUNK_VALUES
from .levels import StateLevels, crossings, state_levels
from .robust import mad_sigma

LN9 = math.log(9.0)


@dataclass(frozen=True)
class Edge:
    """One transition: direction (+1 rising), 10/50/90 % instants, and the estimated start t0.

    ``left_at`` is where the trace next leaves the state this transition reached in a
    transition that is not an edge (the record ends before it reaches its far reference
    level, or it turns back before): the last near reference-level instant before that
    transition's 50 % crossing (its own 50 % crossing when there is none); infinite when
    the next crossing is the next edge or there is none. A part of the record fitted as
    this edge's relaxation must end before it."""

    direction: int
    t10: float
    t50: float
    t90: float
    left_at: float = math.inf

    @property
    def duration(self) -> float:
        """10 %–90 % transition duration."""
        return abs(self.t90 - self.t10)

    @property
    def tau(self) -> float:
        """Time constant of a first-order step with this transition duration: (t90 − t10)/ln 9."""
        return self.duration / LN9

    @property
    def t0(self) -> float:
        """Start of a first-order step with these instants: t10 − tau·ln(10/9)."""
        return self.t10 - self.tau * math.log(10.0 / 9.0)


def noise_rms(y: np.ndarray, lag: int = 1) -> float:
    """Robust white-noise rms from differences ``lag`` samples apart: 1.4826·MAD(Δy)/√2
    (common practice). Over a longer lag, correlated noise shows the scatter it has across
    that span (a difference's rms is √2 times the value returned)."""
    y = np.asarray(y, dtype=float)
    d = y[lag:] - y[:-lag]
    if d.size == 0:
        return 0.0
    return mad_sigma(d) / math.sqrt(2.0)


def state_noise_rms(y: np.ndarray, levels: StateLevels) -> float:
    """Noise rms from the samples that sit near a state level: 1.4826·MAD of their distance
    to it (common practice). Unlike first differences it holds for band-limited noise,
    whose neighbouring samples move together."""
    y = np.asarray(y, dtype=float)
    reach = 0.25 * abs(levels.amplitude)
    if levels.amplitude:
        # within a quarter of the amplitude of one level a sample is three quarters from the
        # other, so its distance to the nearer level is the one to this level (a long record a
        # chunk at a time: the deviations are never held whole)
        near = np.concatenate([_within(y[a:a + CHUNK_VALUES] - level, reach)
                               for a in range(0, max(y.size, 1), CHUNK_VALUES)
                               for level in (levels.low, levels.high)])
    else:
        near = np.where(np.abs(y - levels.low) < np.abs(y - levels.high), y - levels.low, y - levels.high)
    if near.size < 8:
        return 0.0
    return mad_sigma(near)


def _within(deviations: np.ndarray, reach: float) -> np.ndarray:
    """The ``deviations`` smaller in size than ``reach`` (the array is the caller's to give up)."""
    return deviations[np.abs(deviations) < reach]


def find_edges(t: np.ndarray, y: np.ndarray, levels: StateLevels | None = None,
               min_snr: float = 5.0, rms: float | None = None) -> list[Edge]:
    """Transitions of a two-state record, in time order.

    Parameters
    ----------
    t, y
        Time axis (s) and samples.
    levels
        State levels; by default from the histogram method of IEEE Std 181.
    min_snr
        An amplitude below ``min_snr`` times the noise rms means there is no transition.
    rms
        The record's :func:`noise_rms`, when the caller has it already.

    Returns
    -------
    list of Edge
        Empty when the record holds no transition.

    References
    ----------
    IEEE Std 181-2011, IEEE Standard for Transitions, Pulses, and Related Waveforms
    (state levels by the histogram method, reference levels and instants).
    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    levels = levels or state_levels(y)
    amp = levels.amplitude
    sigma = noise_rms(y) if rms is None else rms
    if not amp > 0 or amp < min_snr * sigma:
        return []
    # hysteresis against the noise at the levels, which first differences underrate when the
    # noise is band-limited: spurious crossings around the 50 % level would hide the edge
    hyst = max(0.1 * amp, 3.0 * sigma, 3.0 * state_noise_rms(y, levels))
    mid = crossings(t, y, levels.reference(50.0), hysteresis=min(hyst, 0.4 * amp))
    edges = []
    for k, c in enumerate(mid):
        lo = int(math.floor(mid[k - 1].index)) if k > 0 else 0
        hi = int(math.ceil(mid[k + 1].index)) if k + 1 < len(mid) else y.size - 1
        i50 = int(math.floor(c.index))
        t10 = _instant(t, y, levels.reference(10.0 if c.direction > 0 else 90.0), lo, i50, last=True)
        t90 = _instant(t, y, levels.reference(90.0 if c.direction > 0 else 10.0), i50, hi, last=False)
        if t10 is None or t90 is None:
            if edges and math.isinf(edges[-1].left_at):
                # a transition that is not an edge still ends the state the last edge reached
                edges[-1] = replace(edges[-1], left_at=c.time if t10 is None else t10)
            continue
        edges.append(Edge(c.direction, t10, c.time, t90))
    return edges


def _instant(t: np.ndarray, y: np.ndarray, level: float, a: int, b: int, last: bool) -> float | None:
    """Linearly interpolated crossing of ``level`` in samples a..b: the last one before b or the first after a."""
    seg = y[a:b + 1] - level
    flips = np.flatnonzero(np.signbit(seg[1:]) != np.signbit(seg[:-1]))
    if flips.size == 0:
        return None
    k = a + int(flips[-1] if last else flips[0])
    y0, y1 = y[k] - level, y[k + 1] - level
    frac = y0 / (y0 - y1) if y1 != y0 else 0.5
    return float(t[k] + frac * (t[k + 1] - t[k]))


#: A drive's jump is a step at least this many times the median step of the stretch searched
#: (mostly settled level and relaxation, whose steps are a few per cent of a jump's); the
#: steps of a relaxation alone differ by less than 2 times (common practice).
JUMP_OVER_MEDIAN = 5.0


def jump_instant(t: np.ndarray, y: np.ndarray, t_from: float, t_to: float) -> tuple[float, float] | None:
    """Instant and duration of the fastest jump of ``y`` between ``t_from`` and ``t_to``.

    Used on the drive channel, whose switching is much faster than the current's
    rise: the instant is where the jump crosses half its height, the duration
    spans the samples whose step exceeds 10 % of the largest one (at least one
    sample interval). None when there are too few samples, or when the largest step is less
    than :data:`JUMP_OVER_MEDIAN` times the median step (no jump is inside the stretch).
    """
    a = max(int(np.searchsorted(t, t_from)), 0)
    b = min(int(np.searchsorted(t, t_to)), t.size - 1)
    if b - a < 3:
        return None
    d = np.diff(y[a:b + 1])
    k = int(np.argmax(np.abs(d)))
    big = np.abs(d) >= 0.1 * abs(d[k])
    i, j = k, k
    while i > 0 and big[i - 1] and np.sign(d[i - 1]) == np.sign(d[k]):
        i -= 1
    while j + 1 < d.size and big[j + 1] and np.sign(d[j + 1]) == np.sign(d[k]):
        j += 1
    if abs(d[k]) < JUMP_OVER_MEDIAN * float(np.median(np.abs(d))):
        # no step stands out: the stretch holds no jump (a record that starts just after an
        # edge holds only the drive's relaxation, whose steps are all alike: read as a
        # 34-sample "edge", it warned of a slow generator)
        return None
    dt = float(t[1] - t[0])
    start, stop = a + i, a + j + 1
    half = 0.5 * (y[start] + y[stop])
    t_half = _instant(t, y, half, start, stop, last=False)
    return (t_half if t_half is not None else float(t[a + k])), max((stop - start) * dt, dt)


def placement_deviation(noise_sigma: float, tau: float, step: float) -> float:
    """Standard deviation of a first-order edge's switching instant as its own trace places
    it: the noise over the slope at the edge, σ/(|step|/tau) = σ·tau/|step| (amplitude
    noise turned into timing error by the slope; common practice in timing measurement)."""
    return noise_sigma * tau / max(abs(step), 1e-300)

