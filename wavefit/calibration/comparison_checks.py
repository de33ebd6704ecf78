"""Checks that refuse a channel comparison that cannot be trusted.

A comparison is only meaningful when both channels saw the whole waveform (no clipping) of
one node (the same shape, and a gain ratio near 1 for probes and settings alike). Each check
raises :class:`~wavefit.errors.AnalysisRefused` with the reason and what to do.

References
----------
.. [1] IEEE Std 1057-2017, IEEE Standard for Digitizing Waveform Recorders (clipping at the
   converter's range; gain and offset of a channel).
"""
from __future__ import annotations

import math

import numpy as np

from ..errors import AnalysisRefused
from .edge_skew import EdgePair
from .plateau_line import transition_half

#: Share of a state's plateau samples at the record's extreme value beyond which the state is
#: taken as clipped. A level inside the converter's range spreads over the codes around it and
#: its noise reaches beyond it, so the record's extreme lies elsewhere (a spike, a noise peak);
#: a level beyond the limit puts all its samples on the limit's code (common practice). A quiet
#: level (noise well below a code) that happens to be the record's extreme code cannot be told
#: from a clipped one and is refused too: moving the offset by a division settles it.
CLIPPED_SHARE = 0.9
#: Largest |ratio − 1| accepted. Two channels of one scope each hold their DC gain within
#: about ±2–3 % and probes of one model within about ±1 % (common practice), so the ratio of
#: two channels on one node stays within a few per cent; beyond 10 % the probes were on
#: different nodes, had different attenuations, or the channels had different settings.
MAX_RATIO_DEVIATION = 0.10
#: Largest rms of other − (ratio·reference + offset), away from the edges, in units of the
#: rms the two channels' noise alone gives: 2 leaves room for the slope correction's noise
#: and a noise estimate from a few plateaus, yet a node of another shape (a current's rise
#: against a voltage's decay) exceeds it many times over.
MAX_SHAPE_RMS_RATIO = 2.0
#: Samples left out on each side of an edge's transition (mid-reference instant ± the time from
#: it to the transition's end) in the shape check, since the residual sub-sample skew leaves a
#: large difference on a fast edge.
EDGE_GUARD_SAMPLES = 3


def refuse_clipped(y: np.ndarray, windows: list[tuple[int, int, int]], name: str) -> None:
    """Refuse a channel whose plateaus of one state sit, nearly all their samples, at the
    record's extreme value on that state's side (its minimum for the low state, its maximum for
    the high one): the level lay at or beyond the converter's limit, and its mean is lost.

    ``windows`` are (start, stop, state) of the channel's averaging windows.
    """
    for state, extreme in ((-1, float(np.min(y))), (1, float(np.max(y)))):
        samples = np.concatenate([y[a:b] for a, b, s in windows if s == state] or [np.zeros(0)])
        share = float(np.mean(samples == extreme)) if samples.size else 0.0
        if share >= CLIPPED_SHARE:
            level = "low" if state < 0 else "high"
            raise AnalysisRefused(f"the {name} channel is clipped: {share:.0%} of its {level} level's samples "
                                  "sit at the record's extreme value, the converter's limit; use a larger "
                                  "volts/division or move the offset so that both levels are inside the screen")


def refuse_implausible_ratio(ratio: float) -> None:
    """Refuse a gain ratio too far from 1 for two channels on one node with the same settings."""
    if not abs(ratio - 1.0) <= MAX_RATIO_DEVIATION:
        raise AnalysisRefused(f"the gain ratio of the channels is {ratio:.4g}, more than "
                              f"{MAX_RATIO_DEVIATION:.0%} from 1: the probes were not on the same node, or "
                              "their attenuations or the channels' settings differ")


def refuse_different_shape(reference: np.ndarray, other: np.ndarray, pairs: list[EdgePair], t0: float,
                           dt: float, skew: float, ratio: float, offset: float, sigma_reference: float,
                           sigma_other: float, skew_half_width: float = 0.0) -> float:
    """Refuse when the other channel is not ratio·reference(t − skew) + offset within its noise.

    The reference is shifted by the skew (whole samples, the rest by its local slope);
    samples near an edge are left out. When the skew is only known within ±``skew_half_width``
    (coherent sampling, :func:`wavefit.calibration.edge_skew.interpolation_bound`), the shift's
    error times the reference's slope, at most ratio·half-width·rms(slope) over the samples
    kept, is allowed besides the noise. Returns the rms ratio found.
    """
    shift = int(round(skew / dt))
    rest = skew - shift * dt
    n = reference.size - abs(shift)
    ref = reference[max(-shift, 0):max(-shift, 0) + n]
    oth = other[max(shift, 0):max(shift, 0) + n]
    residual = oth - ratio * (ref - rest * np.gradient(ref, dt)) - offset
    keep = np.ones(n, dtype=bool)
    for pair in pairs:
        for edge, moved in ((pair.reference, 0), (pair.other, -shift)):
            half = transition_half(edge)
            a = (edge.t50 - half - t0) / dt + moved - max(-shift, 0)
            b = (edge.t50 + half - t0) / dt + moved - max(-shift, 0)
            first = max(int(math.floor(a)) - EDGE_GUARD_SAMPLES, 0)
            keep[first:max(int(math.ceil(b)) + EDGE_GUARD_SAMPLES + 1, 0)] = False
    expected = math.hypot(sigma_other, ratio * sigma_reference * math.sqrt(1.0 + 0.5 * (rest / dt) ** 2))
    if skew_half_width > 0.0 and keep.any():
        slope = np.gradient(ref, dt)[keep]
        expected = math.hypot(expected, ratio * skew_half_width * float(np.sqrt(np.mean(slope ** 2))))
    found = float(np.sqrt(np.mean(residual[keep] ** 2))) if keep.any() else math.inf
    if not expected > 0 or found > MAX_SHAPE_RMS_RATIO * expected:
        raise AnalysisRefused(f"the two channels do not show the same waveform (they differ by {found:.3g} V rms "
                              f"where their noise allows {expected:.3g} V); put both probes on the same node "
                              "with the same settings")
    return found / expected
