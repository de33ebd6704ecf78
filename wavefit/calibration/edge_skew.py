"""Skew between two channels that recorded the same square wave: from their edges' mid-reference instants.

Each channel's edges are found on its own state levels (IEEE Std 181 histogram method) and
placed at their 50 % reference-level instants (linear interpolation between samples). Since
other(t) = ratio·reference(t − skew) + offset maps the reference channel's state levels onto
the other's, its 50 % reference level is the image of the reference's, and each pair of
matching edges differs in time by the skew alone, plus the noise at the crossing and the
interpolation error. The skew is the mean of the pairs' differences; its standard uncertainty
is type A from their scatter, s/√n with n − 1 degrees of freedom. Edges of a generator that is
not locked to the scope's clock fall at varying phases of the sample clock, so the scatter
also covers the interpolation error.

Coherent sampling (a period that is a whole number of sample intervals: a generator locked to
the scope's reference, or simply a round period) puts every edge at the same phase of the
sample clock, so the interpolation error is the same at every edge: the scatter does not show
it. The edges' sub-sample phases (each reference crossing's time after the first sample,
modulo the sample interval, as a fraction of it) are tested for uniformity on the circle by
the Rayleigh test [3]_; when they are concentrated, a type B rectangular contribution bounds
the interpolation error (:func:`interpolation_bound`, [4]_), and the skew's value stays the mean.

References
----------
.. [1] IEEE Std 181-2011, IEEE Standard for Transitions, Pulses, and Related Waveforms
   (state levels, reference levels, mid-reference-level instants).
.. [2] JCGM 100:2008 (GUM), 4.2.2–4.2.3 (experimental standard deviation of the mean) and
   G.3 (degrees of freedom of a type A evaluation).
.. [3] J. H. Zar, Biostatistical Analysis, 5th ed., Prentice Hall, 2010, 27.1 (Rayleigh test,
   with the approximation of its probability by Greenwood and Durand, eq. 27.4; from memory).
.. [4] JCGM 100:2008 (GUM), 4.3.7 (rectangular distribution, u = a/√3), G.4.1
   (Welch–Satterthwaite formula) and G.4.2 (a type B bound taken as exact: infinite degrees of
   freedom; from memory).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisRefused
from ..signal.edges import Edge

#: Fewest matched edge pairs the comparison takes: five edges bound four plateaus, two of each
#: state, for the levels' line (two degrees of freedom), and leave four degrees of freedom for
#: the skew's scatter; with fewer, the t-factor for 95 % grows quickly (Student: 2.78 at four
#: degrees of freedom, 12.7 at one).
MIN_EDGE_PAIRS = 5
#: Significance below which the Rayleigh test takes the edges' sub-sample phases as concentrated
#: (coherent sampling). Edges at one phase give R = n and p = exp(√(1 + 4n) − 1 − 2n), 0.0016 at
#: the :data:`MIN_EDGE_PAIRS` edges the comparison takes at least, so 1 % finds every coherent
#: record it admits; edges at random phases are taken as concentrated one time in a hundred,
#: and then only get the bound, which is conservative.
COHERENCE_SIGNIFICANCE = 0.01
#: Half-width of the skew's interpolation error, in sample intervals: half a sample for each
#: channel's crossing, the two adding up in the worst case (see :func:`interpolation_bound`).
INTERPOLATION_BOUND_SAMPLES = 1.0


@dataclass(frozen=True)
class EdgePair:
    """A reference-channel edge and the other channel's edge of the same event."""

    reference: Edge
    other: Edge

    @property
    def delay(self) -> float:
        """How much later the other channel crosses its mid-reference level, s."""
        return self.other.t50 - self.reference.t50


@dataclass(frozen=True)
class SkewEstimate:
    """Mean delay of the other channel over ``count`` edges, its standard uncertainty and dof.

    ``phase_p`` is the Rayleigh test's probability of phases as concentrated as the edges'
    under uniformity; ``interpolation_half_width`` the rectangular bound (s) included in the
    standard uncertainty, 0 when the phases spread over the sample interval.
    """

    value: float
    standard_uncertainty: float
    degrees_of_freedom: float
    count: int
    phase_p: float
    interpolation_half_width: float

    @property
    def coherent(self) -> bool:
        """Whether the edges sat at one phase of the sample clock and the bound was added."""
        return self.interpolation_half_width > 0.0


def pair_edges(reference: list[Edge], other: list[Edge]) -> list[EdgePair]:
    """Match each reference edge with the other channel's edge of the same direction nearest
    to it, within half the shortest interval between reference edges.

    Raises
    ------
    AnalysisRefused
        When an edge of either channel has no partner: the channels do not show the same waveform.
    """
    if len(reference) < 2 or len(other) < 2:
        raise AnalysisRefused(f"the comparison needs at least {MIN_EDGE_PAIRS} edges on each channel; found "
                              f"{len(reference)} on the reference and {len(other)} on the other channel; "
                              "record more periods of the square wave")
    spacing = float(np.min(np.diff([e.t50 for e in reference])))
    other_t50 = np.array([e.t50 for e in other])
    pairs, used = [], set()
    for edge in reference:
        k = int(np.argmin(np.abs(other_t50 - edge.t50)))
        if abs(other_t50[k] - edge.t50) < 0.5 * spacing and other[k].direction == edge.direction:
            pairs.append(EdgePair(edge, other[k]))
            used.add(k)
    unmatched = len(reference) - len(pairs) + len(other) - len(used)
    # an edge at either end of the record may lie outside the other channel's view by the skew
    if unmatched > 2 or len(pairs) != len(used):
        raise AnalysisRefused(f"the two channels do not show the same waveform: {len(reference)} edges on the "
                              f"reference channel, {len(other)} on the other, {len(pairs)} of them matched; "
                              "put both probes on the same node with the same settings")
    return pairs


def subsample_phases(pairs: list[EdgePair], t0: float, dt: float) -> np.ndarray:
    """Each reference crossing's place between samples: ((t50 − t0)/dt) mod 1, in [0, 1)."""
    return np.mod([(p.reference.t50 - t0) / dt for p in pairs], 1.0)


def rayleigh_p(phases: np.ndarray) -> float:
    """Probability, under phases uniform on the circle, of a resultant at least as long as theirs.

    R = |Σ exp(2πi·φ)| over the n phases; p ≈ exp(√(1 + 4n + 4(n² − R²)) − (1 + 2n)), the
    approximation of Greenwood and Durand as given by Zar (2010), eq. 27.4 (from memory), capped at 1.

    References
    ----------
    .. [1] J. H. Zar, Biostatistical Analysis, 5th ed., 2010, 27.1 (Rayleigh test).
    """
    n = phases.size
    resultant = abs(np.sum(np.exp(2j * np.pi * phases)))
    return float(min(1.0, math.exp(math.sqrt(1.0 + 4.0 * n + 4.0 * (n * n - resultant ** 2)) - (1.0 + 2.0 * n))))


def interpolation_bound(dt: float) -> float:
    """Half-width (s) of the rectangular bound on the skew's interpolation error under coherent sampling.

    Each channel's mid-reference instant is interpolated linearly between the two samples around
    the 50 % level ([1]_, reference-level instants). For an edge faster than the sampling
    (its 10–90 % duration shorter than about two samples) those samples sit on the two state
    levels, so the interpolated instant is the middle of the interval wherever the edge truly
    crosses in it: off by up to half a sample interval. The other channel's crossing may be off
    by as much in the other direction (the skew is not a whole number of samples), so the
    skew's error lies within ±dt, taken as a rectangular distribution (GUM 4.3.7,
    u = dt/√3, infinite degrees of freedom). A slower edge has a smaller error; the bound
    still holds for it, conservatively.

    References
    ----------
    .. [1] IEEE Std 181-2011 (reference-level instants found by linear interpolation between
       the samples around the reference level; clause numbers not checked here).
    .. [2] IEEE Std 1057-2017 (digitizing waveform recorders: timing between samples known from
       the record only through interpolation; from memory).
    .. [3] JCGM 100:2008 (GUM), 4.3.7.
    """
    return INTERPOLATION_BOUND_SAMPLES * dt


def skew_from_pairs(pairs: list[EdgePair], t0: float, dt: float) -> SkewEstimate:
    """Mean delay of matched edges with its type A standard uncertainty s/√n (n − 1 dof), and
    under coherent sampling the interpolation bound added.

    When the Rayleigh test finds the edges' sub-sample phases concentrated (p below
    :data:`COHERENCE_SIGNIFICANCE`), u² = s²/n + a²/3 with a from :func:`interpolation_bound`,
    and the degrees of freedom follow Welch–Satterthwaite (GUM G.4.1) with the bound's infinite.

    Raises
    ------
    AnalysisRefused
        With fewer than :data:`MIN_EDGE_PAIRS` pairs.
    """
    if len(pairs) < MIN_EDGE_PAIRS:
        raise AnalysisRefused(f"only {len(pairs)} matching edges on the two channels; the comparison needs at "
                              f"least {MIN_EDGE_PAIRS}: record more periods of the square wave")
    delays = np.array([p.delay for p in pairs])
    n = delays.size
    type_a = float(delays.std(ddof=1) / math.sqrt(n))
    p = rayleigh_p(subsample_phases(pairs, t0, dt))
    if p >= COHERENCE_SIGNIFICANCE:
        return SkewEstimate(float(delays.mean()), type_a, float(n - 1), n, p, 0.0)
    half_width = interpolation_bound(dt)
    u = math.hypot(type_a, half_width / math.sqrt(3.0))
    dof = u ** 4 / (type_a ** 4 / (n - 1)) if type_a > 0 else math.inf
    return SkewEstimate(float(delays.mean()), u, dof, n, p, half_width)
