"""State levels and reference-level instants of two-state waveforms.

Follows the histogram method of IEEE Std 181-2011 (transitions, pulses and
related waveforms): the histogram of the waveform values is split at its
midpoint and the mode of each half is a state level; the x % reference level
is s_low + x/100·(s_high − s_low), and reference-level instants are found by
linear interpolation between the adjacent samples. (The clause wording is from
memory; the identities are checked in the tests, see docs/methods.md.)
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class StateLevels:
    """Low and high state levels; ``amplitude`` = high − low."""

    low: float
    high: float

    @property
    def amplitude(self) -> float:
        return self.high - self.low

    def reference(self, percent: float) -> float:
        """The ``percent`` % reference level."""
        return self.low + percent / 100.0 * self.amplitude


def state_levels(y: np.ndarray, bins: int | None = None) -> StateLevels:
    """Low and high state levels by the histogram (mode) method of IEEE Std 181.

    The bin count defaults to about √N, capped to [16, 1024]; the standard
    leaves it to the user.
    """
    y = np.asarray(y, dtype=float)
    y = y[np.isfinite(y)]
    lo, hi = float(np.min(y)), float(np.max(y))
    if hi <= lo:
        return StateLevels(lo, hi)
    n_bins = bins or int(np.clip(np.sqrt(y.size), 16, 1024))
    counts, edges = np.histogram(y, bins=n_bins, range=(lo, hi))
    centres = 0.5 * (edges[:-1] + edges[1:])
    half = n_bins // 2
    low = centres[:half][np.argmax(counts[:half])]
    high = centres[half:][np.argmax(counts[half:])]
    # refine each mode by the mean of the samples in its bin and its two neighbours
    return StateLevels(_refine(y, edges, int(np.argmax(counts[:half]))),
                       _refine(y, edges, half + int(np.argmax(counts[half:])))) if high > low else StateLevels(lo, hi)


def _refine(y: np.ndarray, edges: np.ndarray, k: int) -> float:
    a, b = edges[max(k - 1, 0)], edges[min(k + 2, edges.size - 1)]
    sel = y[(y >= a) & (y <= b)]
    return float(sel.mean()) if sel.size else float(0.5 * (edges[k] + edges[k + 1]))


@dataclass(frozen=True)
class Crossing:
    """A reference-level crossing: fractional sample index, time, and direction (+1 rising)."""

    index: float
    time: float
    direction: int


def crossings(t: np.ndarray, y: np.ndarray, level: float, hysteresis: float = 0.0) -> list[Crossing]:
    """Instants where ``y`` crosses ``level``, linearly interpolated (IEEE Std 181).

    With ``hysteresis`` > 0 a crossing counts only once the signal has been
    beyond ``level ± hysteresis`` on both sides, so noise near the level gives
    one crossing, placed at the last sign change before the far band is reached.
    """
    y = np.asarray(y, dtype=float)
    upper, lower = level + hysteresis, level - hysteresis
    state = np.zeros(y.size, dtype=np.int8)
    state[y > upper] = 1
    state[y < lower] = -1
    idx = np.flatnonzero(state)
    if idx.size < 2:
        return []
    s = state[idx]
    changes = np.flatnonzero(s[1:] != s[:-1])
    out = []
    for c in changes:
        a, b = idx[c], idx[c + 1]
        seg = y[a : b + 1] - level
        sign = np.signbit(seg)
        flips = np.flatnonzero(sign[1:] != sign[:-1])
        k = a + int(flips[-1]) if flips.size else a
        y0, y1 = y[k] - level, y[k + 1] - level
        frac = y0 / (y0 - y1) if y1 != y0 else 0.5
        out.append(Crossing(k + frac, float(t[k] + frac * (t[k + 1] - t[k])), int(s[c + 1])))
    return out
