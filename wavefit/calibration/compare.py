"""The channel comparison: gain ratio, offset difference and skew of two channels on one node.

Model: other(t) = ratio·reference(t − skew) + offset + noise, for a square wave (a generator's
output, or the drive node of a fixture) recorded by both channels with the same settings.
The skew comes from the edges (:mod:`wavefit.calibration.edge_skew`), the ratio and offset
from the plateaus (:mod:`wavefit.calibration.plateau_line`); the checks of
:mod:`wavefit.calibration.comparison_checks` refuse a comparison that cannot be trusted.

References
----------
.. [1] IEEE Std 181-2011, IEEE Standard for Transitions, Pulses, and Related Waveforms.
.. [2] JCGM 100:2008 (GUM), 4.2 (type A), 4.3 (type B), 5.1.2 (propagation).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..blas_threads import one_blas_thread
from ..errors import AnalysisRefused
from ..signal.edges import find_edges
from .channel_file import Estimated
from .comparison_checks import refuse_clipped, refuse_different_shape, refuse_implausible_ratio
from ..values import eng
from .edge_skew import SkewEstimate, pair_edges, skew_from_pairs
from .plateau_line import LineEstimate, plateau_line
from .state_peaks import settled_levels


@dataclass(frozen=True)
class ComparisonEstimate:
    """The three estimated quantities and what they rest on."""

    gain_ratio: Estimated
    offset_difference: Estimated
    skew: Estimated
    edges: int
    line: LineEstimate
    shape_rms_ratio: float
    note: str


@one_blas_thread()
def compare_channels(time: np.ndarray, reference: np.ndarray, other: np.ndarray) -> ComparisonEstimate:
    """Estimate ratio, offset and skew of ``other`` against ``reference`` (same time axis).

    Parameters
    ----------
    time
        Uniform time axis, s.
    reference, other
        The two channels' samples, V.

    Returns
    -------
    ComparisonEstimate

    Raises
    ------
    AnalysisRefused
        A clipped channel, too few edges, channels that do not show the same waveform, or a
        ratio too far from 1 for one node.

    References
    ----------
    .. [1] IEEE Std 181-2011 (state levels, mid-reference instants).
    .. [2] D. York et al., Am. J. Phys. 72(3), 367–375, 2004 (line with errors in both coordinates).
    """
    time, reference, other = (np.asarray(a, dtype=float) for a in (time, reference, other))
    if time.size < 2:
        raise AnalysisRefused(f"the comparison capture holds {time.size} sample(s); record several periods "
                              "of the square wave")
    if not (np.all(np.isfinite(reference)) and np.all(np.isfinite(other))):
        raise AnalysisRefused("the comparison capture has gaps (missing values) in a channel; record it again")
    dt = float(time[1] - time[0])
    pairs = pair_edges(*(find_edges(time, y, settled_levels(y)) for y in (reference, other)))
    skew = skew_from_pairs(pairs, float(time[0]), dt)
    line = plateau_line(reference, other, pairs, float(time[0]), dt, skew.value)
    windows = [(p.start, p.stop, p.state) for p in line.plateaus]
    refuse_clipped(reference, windows, "reference")
    refuse_clipped(other, [(a + line.shift, b + line.shift, s) for a, b, s in windows], "other")
    refuse_implausible_ratio(line.ratio)
    shape = refuse_different_shape(reference, other, pairs, float(time[0]), dt, skew.value, line.ratio,
                                   line.offset, line.reference_noise.model.sigma, line.other_noise.model.sigma,
                                   skew.interpolation_half_width)
    return ComparisonEstimate(
        gain_ratio=Estimated(line.ratio, math.sqrt(line.covariance[0, 0]), line.degrees_of_freedom, ""),
        offset_difference=Estimated(line.offset, math.sqrt(line.covariance[1, 1]), line.degrees_of_freedom, "V"),
        skew=Estimated(skew.value, skew.standard_uncertainty, skew.degrees_of_freedom, "s"),
        edges=skew.count,
        line=line,
        shape_rms_ratio=shape,
        note=coherent_sampling_note(skew, dt),
    )


def coherent_sampling_note(skew: SkewEstimate, dt: float) -> str:
    """One line for the file and the summary when the interpolation bound was added, else ""."""
    if not skew.coherent:
        return ""
    return (f"coherent sampling: the {skew.count} edges cross at one phase of the {eng(dt, 's')} sample clock "
            f"(Rayleigh test p = {skew.phase_p:.1g}), so their scatter cannot show the interpolation error; "
            f"u(skew) includes a rectangular bound of ±{eng(skew.interpolation_half_width, 's')} "
            "(half a sample for each channel); a period that is not a whole number of samples, "
            "or a faster sample rate, gives a smaller u(skew)")
