"""Isolated bad samples (glitches): one sample far from both its neighbours, which agree.

A converter error, a transmission error or a hand edit can leave one sample of
a record far off (a 0 in a 5 V trace). One such sample can move a fit far
beyond its uncertainty, or fake a transition. The rule here finds it before any
fit, from the record alone, and only where the waveform itself cannot explain
it:

* d_i = y_i − (y_{i−1} + y_{i+1})/2, the sample's departure from the straight
  line through its neighbours;
* the waveform's own curvature near i, without y_i: s_i = |y_{i+1} − y_{i−1}| +
  |y_{i+2} − y_{i+1}| + |y_{i−1} − y_{i−2}|;
* sample i is a glitch when |d_i| > GLITCH_SHAPE·s_i + GLITCH_NOISE·σ, σ being
  the record's noise (from the median absolute second difference, a robust
  scale; Hampel's identifier, see References) or at least one converter step,
  unless the record starts to move right after it, or another channel jumps
  there, and the departure is below half the record's span (a spike at the
  onset of a transition, such as a winding capacitance charging when the
  drive switches, belongs to the response).

A smooth waveform sampled at n points per period has |d|/s ≈ 1/6 at a peak
and a single-sample step has 1/2, both far below GLITCH_SHAPE; two adjacent bad
samples are not single glitches and are left to the fit's checks.

References
----------
.. [1] F. R. Hampel, "The influence curve and its role in robust estimation",
   J. Amer. Statist. Assoc. 69 (1974) 383–393 (the median absolute deviation as a
   robust scale, and outliers judged against it).
.. [2] P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute
   deviation", J. Amer. Statist. Assoc. 88 (1993) 1273–1283 (the factor 1.4826
   that makes the MAD a consistent estimate of a normal standard deviation).
"""
from __future__ import annotations

from collections.abc import Sequence
from dataclasses import replace

import numpy as np

from ..io.capture import Capture
from .codes import CHUNK_VALUES
from .robust import mad_sigma

#: A glitch departs from its neighbours' line by more than this many times the curvature
#: of the waveform around it: 12 times what a sampled sinusoid's peak shows (1/6) and 4 times
#: a one-sample step (1/2), so no smooth or stepped waveform qualifies.
GLITCH_SHAPE = 2.0
#: ... and by more than this many noise standard deviations (a white-noise departure has
#: the standard deviation sqrt(1.5)·σ, so 12σ is about 10 of its own: never by chance).
GLITCH_NOISE = 12.0
#: A candidate after which the record moves by more than ONSET_NOISE noise standard deviations
#: within ONSET_SPAN samples, and ONSET_RATIO times more than in as many samples before it, sits
#: at the onset of a transition and is not a glitch (on a flat stretch both happen together by
#: chance about once in a thousand glitches: a glitch then stays, and the fit's checks see it).
ONSET_SPAN = 3
ONSET_NOISE = 4.0
ONSET_RATIO = 4.0
#: A spike at a transition's onset or at another channel's jump is taken as coupled into the
#: trace (part of the response) only while it departs by less than this share of the record's
#: span, measured between the SPAN_PERCENTILE and 100 − SPAN_PERCENTILE percentiles (the
#: winding-capacitance spike of the sample choke is 18 % of its step; a sample fallen to the
#: other level departs by the whole step).
SPIKE_SHARE = 0.5
SPAN_PERCENTILE = 0.5
#: A candidate within this many samples of another channel's jump is not a glitch.
COINCIDENCE = 2
#: A jump may take this many samples (a generator edge or a scope's bandwidth spreads a
#: switching edge over two: a QA trial's drive rose 0.02 → 1.86 → 4.86 V, and the sense's
#: winding-capacitance spike on its middle sample was replaced as a glitch at every edge).
JUMP_WIDTH = 2
#: Each step within a jump over two samples moves the same way by more than this many noise
#: standard deviations (a step of noise alone, whose rms is √2 σ, does so about once in 200
#: steps); the split may be uneven (0.86 → 0.5 → −4.06 V in that trial's lot).
JUMP_INNER_NOISE = 4.0
#: Neighbour changes looked at first for one no larger than the noise floor (then the record's
#: least change cannot raise :func:`record_noise`): in noise about half of them are, so the
#: whole record is searched only when its trace is quiet and quantised (common practice).
PROBE_CHANGES = 256
# The second difference of white noise has the variance 6σ².
_SECOND_DIFFERENCE_VARIANCE = 6.0


def find_glitches(y: np.ndarray, code: float | None = None, sigma: float | None = None) -> np.ndarray:
    """Indices of isolated samples that depart from both their neighbours beyond the waveform's
    own curvature and the noise (see the module docstring).

    Parameters
    ----------
    y
        A record, without NaN.
    code
        The converter step, when the values sit on a grid: the noise is taken as at least
        one step (a quiet trace flickers by one code).
    sigma
        The record's noise (:func:`record_noise`) when the caller already has it.

    Returns
    -------
    numpy.ndarray
        Sorted 0-based indices (samples two or more from either end only).
    """
    y = np.asarray(y, dtype=float)
    if y.size < 5:
        return np.empty(0, dtype=np.intp)
    sigma = record_noise(y, code) if sigma is None else sigma
    found = []
    for a, b in _spans(2, y.size - 2):  # centres a..b, each with two neighbours either side
        seg = y[a - 2:b + 2]
        departure = np.abs(seg[2:-2] - 0.5 * (seg[1:-3] + seg[3:-1]))
        # the curvature only where the departure exceeds the noise term alone (few samples): the
        # test adds a curvature of zero or more to that term
        k = np.flatnonzero(departure > GLITCH_NOISE * sigma) + 2
        curvature = np.abs(seg[k + 1] - seg[k - 1]) + np.abs(seg[k + 2] - seg[k + 1]) + np.abs(seg[k - 1] - seg[k - 2])
        found.append(k[departure[k - 2] > GLITCH_SHAPE * curvature + GLITCH_NOISE * sigma] + (a - 2))
    found = np.concatenate(found) if found else np.empty(0, dtype=np.intp)
    if found.size == 0:
        return found  # (the spike test's percentiles would sort a copy of the record for nothing)
    return found[~(_at_onset(y, found, sigma) & _spike_sized(y, found))]


def _spans(start: int, stop: int) -> list[tuple[int, int]]:
    """start..stop in consecutive ranges of at most CHUNK_VALUES samples: the rules are local,
    so a long record is examined a piece at a time, never copied whole."""
    return [(a, min(a + CHUNK_VALUES, stop)) for a in range(start, stop, CHUNK_VALUES)]


def _spike_sized(y: np.ndarray, found: np.ndarray) -> np.ndarray:
    """Mask of candidates whose departure is small enough for a spike coupled into the trace
    (below SPIKE_SHARE of the record's span); a larger one is a bad sample wherever it sits."""
    low, high = np.percentile(y, [SPAN_PERCENTILE, 100.0 - SPAN_PERCENTILE])
    departure = np.abs(y[found] - 0.5 * (y[found - 1] + y[found + 1]))
    return departure < SPIKE_SHARE * (high - low)


def _at_onset(y: np.ndarray, found: np.ndarray, sigma: float) -> np.ndarray:
    """Mask of candidates where the record starts to move right after them while it was still
    before them: a spike at the onset of a transition (a winding capacitance charging as the
    drive switches) belongs to the response. A glitch on a flat stretch or amid a flank does not
    change how the record moves around it."""
    after = np.abs(y[np.minimum(found + ONSET_SPAN, y.size - 1)] - y[found + 1])
    before = np.abs(y[found - 1] - y[np.maximum(found - ONSET_SPAN, 0)])
    started = np.abs(y[found + 1] - y[found - 1])  # the transition is under way right after it
    return (after > ONSET_NOISE * sigma) & (after > ONSET_RATIO * before) & (started > ONSET_NOISE * sigma)


def _after_jumps(y: np.ndarray, code: float | None, sigma: float | None = None) -> np.ndarray:
    """Mask of the samples of each jump of the record and the COINCIDENCE after it: where it
    moves within one or :data:`JUMP_WIDTH` samples by more than the noise and far more than in
    the one-sample steps just before and after (a switching edge; a smooth relaxation, however
    steep, is not a jump). A spike of another channel there is coupled from that edge; before
    it, it is not."""
    y = np.asarray(y, dtype=float)
    mask = np.zeros(y.size, dtype=bool)
    if y.size < 4:
        return mask
    sigma = record_noise(y, code) if sigma is None else sigma
    # the steps y[j] -> y[j + 1] (1 <= j) that move by more than JUMP_INNER_NOISE: every jump is
    # made of such steps (GLITCH_NOISE exceeds it), and they are rare, so the rest is judged at
    # them alone
    moving = np.concatenate([np.flatnonzero(np.abs(np.diff(y[a:b + 1])) > JUMP_INNER_NOISE * sigma) + a
                             for a, b in _spans(1, y.size - 1)])
    for width in range(1, JUMP_WIDTH + 1):
        # changes y[j] -> y[j + width], each with the one-sample steps either side; over two or
        # more samples every step within moves the same way by more than JUMP_INNER_NOISE (else it
        # is a one-sample jump with a quiet step beside it, which marks no earlier sample)
        j = moving[moving <= y.size - 2 - width]
        for inner in range(1, width):
            first, other = y[j + 1] - y[j], y[j + 1 + inner] - y[j + inner]
            j = j[(np.abs(other) > JUMP_INNER_NOISE * sigma) & (np.sign(first) == np.sign(other))]
        change = np.abs(y[j + width] - y[j])
        before, after = np.abs(y[j] - y[j - 1]), np.abs(y[j + width + 1] - y[j + width])
        leaps = j[(change > GLITCH_NOISE * sigma)
                  & (change > GLITCH_SHAPE * (before + after) + GLITCH_NOISE * sigma)] + 1  # the first sample after
        for shift in range(width + COINCIDENCE):
            mask[np.minimum(leaps + shift, y.size - 1)] = True
    return mask


def record_noise(y: np.ndarray, code: float | None) -> float:
    """The record's white-noise standard deviation from the MAD of its second differences
    (robust to the waveform's edges and to glitches), and at least one step of its values:
    the converter's, or the smallest change between neighbours when no code grid was found
    (a quiet quantised trace flickers by that much)."""
    # y[2:] − 2·y[1:-1] + y[:-2], the same sums in the same order, in one array
    second = np.multiply(y[1:-1], -2.0)
    second += y[2:]
    second += y[:-2]
    floor = max(mad_sigma(second) / np.sqrt(_SECOND_DIFFERENCE_VARIANCE), code or 0.0)
    return max(floor, _smallest_change(y, floor))


def _smallest_change(y: np.ndarray, floor: float) -> float:
    """The least nonzero change between neighbouring values of ``y`` (0 when there is none), or
    ``floor`` when one of the first :data:`PROBE_CHANGES` changes is no larger: the least is then
    no larger either, and a caller that takes the greater of the two need not search further."""
    probe = np.abs(np.diff(y[:PROBE_CHANGES + 1]))
    if np.any((probe > 0) & (probe <= floor)):
        return floor
    smallest = 0.0
    for a, b in _spans(0, y.size - 1):
        changes = np.abs(np.diff(y[a:b + 1]))
        changes = changes[changes > 0]
        if changes.size:
            smallest = float(changes.min()) if smallest == 0.0 else min(smallest, float(changes.min()))
    return smallest


def repair_glitches(capture: Capture, codes: Sequence[float | None]) -> tuple[Capture, dict[str, np.ndarray]]:
    """The capture with its isolated glitches replaced by the mean of their two neighbours.

    A candidate of :func:`find_glitches` is kept only when no other channel of the
    capture jumps (:func:`jumps`) within ``COINCIDENCE`` samples of it: a spike that
    coincides with an edge elsewhere (a winding capacitance charging at the switching
    instant) is part of the circuit's response, not a bad sample.

    Parameters
    ----------
    capture
        The capture as read.
    codes
        Each channel's converter step, or None (see :func:`wavefit.signal.codes.code_step`).

    Returns
    -------
    tuple of (Capture, dict)
        The repaired capture (the same object when nothing was found) and, by channel
        header, the indices that were replaced.
    """
    noise = [record_noise(np.asarray(ch.values, dtype=float), code) if len(ch.values) >= 4 else 0.0
             for ch, code in zip(capture.channels, codes)]
    near = [_after_jumps(ch.values, code, sigma) for ch, code, sigma in zip(capture.channels, codes, noise)]
    found: dict[str, np.ndarray] = {}
    channels = []
    for k, (channel, code) in enumerate(zip(capture.channels, codes)):
        candidates = find_glitches(channel.values, code, noise[k])
        others = [mask for j, mask in enumerate(near) if j != k]
        if others and candidates.size:
            coupled = np.any([mask[candidates] for mask in others], axis=0)
            candidates = candidates[~(coupled & _spike_sized(channel.values, candidates))]
        if candidates.size == 0:
            channels.append(channel)
            continue
        values = np.array(channel.values, dtype=float)
        values[candidates] = 0.5 * (values[candidates - 1] + values[candidates + 1])
        values.flags.writeable = False
        found[channel.header] = candidates
        channels.append(replace(channel, values=values))
    if not found:
        return capture, found
    return replace(capture, channels=tuple(channels)), found
