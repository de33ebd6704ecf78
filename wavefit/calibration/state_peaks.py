"""State levels of a node that overshoots and settles: the two most prominent histogram peaks.

IEEE Std 181's histogram method splits the histogram at the midpoint of the record's range and
takes the mode of each half. On a fixture's drive node the range is set by the spikes after
each edge (the generator's full step, before the inductor's current flows), and the midpoint
can fall between the two settled levels and the spikes, so one half holds both levels. The
standard leaves the choice of histogram and mode to the user; here the two states are the two
most prominent peaks of the histogram (peaks standing out from the valleys around them), which
on a settling square wave are the settled levels, each refined, as in
:func:`wavefit.signal.levels.state_levels`, by the mean of the samples in its bin and the two
neighbours.

References
----------
.. [1] IEEE Std 181-2011, IEEE Standard for Transitions, Pulses, and Related Waveforms
   (state levels by the histogram method).
"""
from __future__ import annotations

import numpy as np
from scipy.signal import find_peaks

from ..signal.levels import StateLevels, state_levels

#: Histogram bins: about √N, within [16, 1024], as :func:`wavefit.signal.levels.state_levels`.
MIN_BINS, MAX_BINS = 16, 1024


def settled_levels(y: np.ndarray) -> StateLevels:
    """Low and high state levels as the two most prominent histogram peaks; the IEEE 181
    midpoint split when the histogram has fewer than two peaks."""
    y = np.asarray(y, dtype=float)
    y = y[np.isfinite(y)]
    lo, hi = float(np.min(y)), float(np.max(y))
    if hi <= lo:
        return StateLevels(lo, hi)
    bins = int(np.clip(np.sqrt(y.size), MIN_BINS, MAX_BINS))
    counts, edges = np.histogram(y, bins=bins, range=(lo, hi))
    peaks, found = find_peaks(np.concatenate(([0], counts, [0])), prominence=1)
    if peaks.size < 2:
        return state_levels(y, bins)
    two = np.sort(peaks[np.argsort(found["prominences"])[-2:]] - 1)
    return StateLevels(*(_refined(y, edges, int(k)) for k in two))


def _refined(y: np.ndarray, edges: np.ndarray, k: int) -> float:
    a, b = edges[max(k - 1, 0)], edges[min(k + 2, edges.size - 1)]
    near = y[(y >= a) & (y <= b)]
    return float(near.mean()) if near.size else float(0.5 * (edges[k] + edges[k + 1]))
