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

References
----------
.. [1] IEEE Std 181-2011, IEEE Standard for Transitions, Pulses, and Related Waveforms
   (state levels, reference levels, mid-reference-level instants).
.. [2] JCGM 100:2008 (GUM), 4.2.2–4.2.3 (experimental standard deviation of the mean) and
   G.3 (degrees of freedom of a type A evaluation).
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
    """Mean delay of the other channel over ``count`` edges, its standard uncertainty and dof."""

    value: float
    standard_uncertainty: float
    degrees_of_freedom: float
    count: int


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


def skew_from_pairs(pairs: list[EdgePair]) -> SkewEstimate:
    """Mean delay of matched edges with its type A standard uncertainty s/√n (n − 1 dof).

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
    return SkewEstimate(float(delays.mean()), float(delays.std(ddof=1) / math.sqrt(n)), float(n - 1), n)
