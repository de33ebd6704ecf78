"""A step response in a first capture: which channel drives, which senses, and the loop's tau.

Every node of a first-order loop relaxes exponentially with the loop's time constant toward
the settled level of the drive state it is in, whether or not the previous state had
settled. Between switching instants the record is therefore, per channel,
``y = F_state + C_window·exp(−(t − t_window)/tau)`` with one settled level per drive state
and one coefficient per window. For a given tau this is linear in the levels and
coefficients; tau is found by minimising the residual sum of squares over it (variable
projection), so that a record whose half periods are too short to settle still gives it.

References
----------
G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear least
squares problems whose variables separate", SIAM J. Numer. Anal. 10(2), 413–432, 1973
(variable projection; cited from memory). IEEE Std 181-2011 (state levels, reference-level
crossings).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize

from ..io import Capture, Channel
from ..signal.edges import find_edges, jump_instant
from ..signal.levels import state_levels
from .rules import FAST_TRANSITION_SAMPLES, MAX_FIT_SAMPLES, MIN_WINDOW_SAMPLES, SKIP_SAMPLES, STEP_MAX_RESIDUAL


@dataclass(frozen=True)
class SteppingChannel:
    """A channel that switches between two states: its switching instants (50 % crossings
    between the state levels, IEEE Std 181 histogram method) with their direction, its swing
    (the record's range, highest less lowest value) and the median count of its samples
    within the 10 %–90 % band at its transitions (:func:`_samples_in_transition`)."""

    channel: Channel
    instants: tuple[float, ...]
    directions: tuple[int, ...]
    swing: float
    transition: float


@dataclass(frozen=True)
class Relaxation:
    """One channel's fit at the common tau: settled levels of the high and low drive states and
    the coefficient of each window's exponential at the window's first sample."""

    high: float
    low: float
    coefficients: np.ndarray
    residual_rms: float

    @property
    def settled_step(self) -> float:
        return self.high - self.low


@dataclass(frozen=True)
class StepRecord:
    """A step response found in a capture."""

    sense: SteppingChannel
    drive: SteppingChannel | None
    tau: float
    sense_fit: Relaxation
    drive_fit: Relaxation | None
    period: float | None


def stepping_channels(capture: Capture) -> list[SteppingChannel]:
    """The channels that show transitions (IEEE Std 181 edges, see
    :func:`wavefit.signal.edges.find_edges`) at most one per :data:`MIN_WINDOW_SAMPLES`
    samples, widest swing first: the drive node jumps by the generator's whole step at each
    switching instant (no current has changed yet) and the sense by its share of it, so the
    drive's range is the wider even where the two settled steps are alike (a coil of a few
    milliohms: its drive node settles to the sense's step plus the small DCR drop).

    The edge finder's own gate (a step of 5 noise rms from first differences) is not used: on a
    record with a few samples per tau the signal's own slope dominates the first differences.
    Whether the record is a step response is judged by the relaxation fit instead
    (:func:`search_step`)."""
    found = []
    for channel in capture.channels:
        y = np.asarray(channel.values, dtype=float)
        if y.size < 8 or not np.all(np.isfinite(y)):
            continue
        edges = find_edges(capture.time, y, min_snr=0.0)
        if not edges or len(edges) * MIN_WINDOW_SAMPLES > y.size:
            continue
        levels = state_levels(y)
        instants = tuple(e.t50 for e in edges)
        found.append(SteppingChannel(channel, instants, tuple(e.direction for e in edges), float(np.ptp(y)),
                                     _samples_in_transition(capture.time, y, instants, levels)))
    return sorted(found, key=lambda s: -s.swing)


def search_step(capture: Capture) -> tuple[StepRecord | None, str | None]:
    """The step response of the capture, or (None, why) where the channels step but their
    settling cannot be measured (``why`` names the setting to change; None when nothing steps
    or the record is not a step response at all).

    The channel with the widest swing is the drive, the next one the sense
    (:func:`stepping_channels`). A single stepping channel is the sense.
    """
    steps = stepping_channels(capture)
    if not steps:
        return None, None
    drive, sense = (steps[0], steps[1]) if len(steps) >= 2 else (None, steps[0])
    dt = capture.sample_interval
    if sense.transition <= FAST_TRANSITION_SAMPLES:
        return None, _too_fast(sense, dt)
    # the sense is monotonic between switching instants, so each of its 50 % crossings lies
    # after one switching instant and before the next; the drive's jump, fast beside the
    # current's settling, is found between consecutive sense crossings. Without a drive a
    # window starts at the sense's own crossing and ends at the sample where the sense turns
    # back (its extreme before the next crossing), at or before the next switching instant.
    t = capture.time
    directions = sense.directions
    if drive is not None:
        switching = _drive_jumps(t, np.asarray(drive.channel.values, dtype=float), sense.instants)
        if switching is None:
            return None, None
        margin = SKIP_SAMPLES * capture.sample_interval
        starts, ends = tuple(s + margin for s in switching), tuple(s - margin for s in switching)
    else:
        switching = starts = sense.instants
        ends = _turning_points(t, np.asarray(sense.channel.values, dtype=float), sense.instants, directions)
    windows = _windows(t, starts, ends, directions)
    if {state for _, _, state in windows} != {1, -1}:
        return None, None  # both drive states are needed for the two settled levels
    y_sense = np.asarray(sense.channel.values, dtype=float)
    tau, edge = _best_tau(t, y_sense, windows, dt)
    if tau is None:
        return None, (_too_fast(sense, dt) if edge < 0 else
                      f"the {sense.channel.name} channel steps, but does not settle between the steps: lengthen "
                      "the period, or the record")
    sense_fit = _relaxation(t, y_sense, windows, tau)
    if not sense_fit.residual_rms <= STEP_MAX_RESIDUAL * float(np.ptp(y_sense)):
        return None, None
    drive_fit = None if drive is None else _relaxation(t, np.asarray(drive.channel.values, dtype=float),
                                                        windows, tau)
    return StepRecord(sense, drive, tau, sense_fit, drive_fit, _period(switching, directions)), None


def _samples_in_transition(t: np.ndarray, y: np.ndarray, instants: tuple[float, ...], levels) -> float:
    """The median count, over the transitions at ``instants``, of the samples between the 10 %
    and 90 % reference levels (IEEE Std 181-2011) within a few samples of the crossing: a
    first-order step has 2.2 tau there; one that settles within a sample has none or one.
    (An edge's own 10 % instant is not used: with no sample inside the band it is taken
    from the edge before.)"""
    if not levels.amplitude:
        return math.inf
    share = (y - levels.low) / levels.amplitude
    reach = TRANSITION_REACH
    counts = []
    for instant in instants:
        k = int(np.searchsorted(t, instant))
        near = share[max(0, k - reach):k + reach]
        counts.append(int(np.count_nonzero((near > 0.1) & (near < 0.9))))
    return float(np.median(counts))


#: Samples either side of a 50 % crossing among which the transition's samples are counted: a
#: transition within FAST_TRANSITION_SAMPLES has them all near the crossing, and noise alone
#: seldom puts a settled sample inside the 10 %–90 % band.
TRANSITION_REACH = 8


def _too_fast(sense: SteppingChannel, dt: float) -> str:
    """Why a step record cannot be measured when its sense settles within a sample or two."""
    return (f"the {sense.channel.name} channel steps, but settles within the first samples after each step: "
            f"its tau is too short for the {dt:.3g} s sample interval; sample at least ten times faster")


def _drive_jumps(t: np.ndarray, drive: np.ndarray, crossings: tuple[float, ...]) -> tuple[float, ...] | None:
    """The drive's switching instants: its fastest jump before each sense crossing and after the
    one before (:func:`wavefit.signal.edges.jump_instant`); None when one is not found."""
    found = []
    for before, crossing in zip((float(t[0]),) + crossings[:-1], crossings):
        jump = jump_instant(t, drive, before, crossing)
        if jump is None:
            return None
        found.append(jump[0])
    return tuple(found)


def _turning_points(t: np.ndarray, y: np.ndarray, crossings: tuple[float, ...],
                    directions: tuple[int, ...]) -> tuple[float, ...]:
    """For each crossing, half a sample interval after the sample before it where the record is
    most extreme in the state it leaves (the maximum before a falling crossing): there the
    trace turned back, so the switching instant is not earlier (to within the noise)."""
    dt = float(t[1] - t[0])
    found = []
    for before, crossing, direction in zip((float(t[0]),) + crossings[:-1], crossings, directions):
        a = int(np.searchsorted(t, before))
        b = max(int(np.searchsorted(t, crossing)), a + 1)
        segment = y[a:b]
        k = a + int(np.argmin(segment) if direction > 0 else np.argmax(segment))
        found.append(float(t[k]) + 0.5 * dt)
    return tuple(found)


def _windows(t: np.ndarray, starts: tuple[float, ...], ends: tuple[float, ...], directions: tuple[int, ...]
             ) -> list[tuple[int, int, int]]:
    """(first, stop, state) of each stretch between switching instants: state +1 after a rising
    switch, −1 after a falling one; the stretch before the first switch is in the state the
    first switch leaves. Stretch k holds the samples after ``starts[k − 1]`` (the record's
    start for k = 0) and before ``ends[k]`` (the record's end for the last)."""
    begin = [-math.inf] + list(starts)
    finish = list(ends) + [math.inf]
    states = [-directions[0]] + list(directions)
    out = []
    for start_time, end_time, state in zip(begin, finish, states):
        first = int(np.searchsorted(t, start_time, side="right"))
        stop = int(np.searchsorted(t, end_time, side="left"))
        if stop - first >= MIN_WINDOW_SAMPLES:
            out.append((first, stop, state))
    return out


def _window_sums(t: np.ndarray, y: np.ndarray, windows: list[tuple[int, int, int]], tau: float
                 ) -> list[tuple[int, float, float, float, float, float, float]]:
    """Per window: state, n, Σy, Σy², Σe, Σe², Σe·y with e = exp(−(t − t_first)/tau), over every
    :func:`_stride`-th sample."""
    step = _stride(windows)
    sums = []
    for first, stop, state in windows:
        ty, yy = t[first:stop:step], y[first:stop:step]
        e = np.exp(-(ty - ty[0]) / tau)
        sums.append((state, float(yy.size), float(yy.sum()), float(yy @ yy), float(e.sum()), float(e @ e),
                     float(e @ yy)))
    return sums


def _stride(windows: list[tuple[int, int, int]]) -> int:
    """Every how many samples the fit takes: all up to :data:`MAX_FIT_SAMPLES`, fewer beyond."""
    total = sum(stop - first for first, stop, _ in windows)
    return max(1, math.ceil(total / MAX_FIT_SAMPLES))


def _levels_and_ss(sums: list[tuple[int, float, float, float, float, float, float]]
                   ) -> tuple[dict[int, float], float]:
    """Settled level per state and the residual sum of squares, each window's coefficient
    C = e·(y − F)/(e·e) eliminated: the residual of window j is P_j·(y − F), P_j the projection
    off its exponential, so the sum of squares is Σ‖P y‖² − 2F·(P 1)·(P y) + F²‖P 1‖², minimal
    at F = Σ(P 1)·(P y) / Σ‖P 1‖² per state."""
    a: dict[int, float] = {1: 0.0, -1: 0.0}
    b: dict[int, float] = {1: 0.0, -1: 0.0}
    c: dict[int, float] = {1: 0.0, -1: 0.0}
    for state, n, sy, syy, se, see, sey in sums:
        a[state] += syy - sey * sey / see
        b[state] += sy - se * sey / see
        c[state] += n - se * se / see
    levels = {s: b[s] / c[s] if c[s] > 0 else math.nan for s in (1, -1)}
    ss = sum(a[s] - (b[s] * b[s] / c[s] if c[s] > 0 else 0.0) for s in (1, -1))
    return levels, max(ss, 0.0)


def _residual_ss(t: np.ndarray, y: np.ndarray, windows: list[tuple[int, int, int]], tau: float) -> float:
    return _levels_and_ss(_window_sums(t, y, windows, tau))[1]


def _best_tau(t: np.ndarray, y: np.ndarray, windows: list[tuple[int, int, int]],
              dt: float) -> tuple[float | None, int]:
    """tau minimising the residuals: a scan over a logarithmic grid from a tenth of a sample
    interval to the longest window, then a bounded search around the best grid point; and 0,
    or where the grid has no interior minimum (no settling to measure), None and the end it
    reached (−1 the short end, settling faster than the sampling shows; 1 the long end)."""
    longest = max(stop - first for first, stop, _ in windows) * dt
    grid = np.geomspace(0.1 * dt, 2.0 * longest, 80)
    ss = np.array([_residual_ss(t, y, windows, tau) for tau in grid])
    k = int(np.argmin(ss))
    if k == 0 or k == grid.size - 1:
        return None, -1 if k == 0 else 1
    found = optimize.minimize_scalar(lambda u: _residual_ss(t, y, windows, math.exp(u)), method="bounded",
                                     bounds=(math.log(grid[k - 1]), math.log(grid[k + 1])),
                                     options={"xatol": 1e-6})
    return float(math.exp(found.x)), 0


def _relaxation(t: np.ndarray, y: np.ndarray, windows: list[tuple[int, int, int]], tau: float) -> Relaxation:
    sums = _window_sums(t, y, windows, tau)
    levels, ss = _levels_and_ss(sums)
    coefficients = np.array([(sey - levels[state] * se) / see for state, _, _, _, se, see, sey in sums])
    samples = sum(n for _, n, *_ in sums)
    return Relaxation(levels[1], levels[-1], coefficients, math.sqrt(ss / samples))


def _period(switching: tuple[float, ...], directions: tuple[int, ...]) -> float | None:
    """The drive period: the median spacing of the rising switching instants, or twice the
    spacing of a rising and a falling one; None for a single step."""
    rising = [s for s, d in zip(switching, directions) if d > 0]
    if len(rising) >= 2:
        return float(np.median(np.diff(rising)))
    return 2.0 * float(np.median(np.diff(switching))) if len(switching) >= 2 else None
