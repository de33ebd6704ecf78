"""The voltage pulses of a saturation record and the part of each that the ramp fit uses.

A pulse is a run of samples where the coil voltage stands above half its largest value. The
switching edges ring (the switch's and the winding's capacitance with the loop's inductance);
those samples do not follow the coil's flux law and are masked by a stated rule:
:func:`ring_mask_end`.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: A run shorter than this is a spike, not a pulse (a ramp fit needs far more samples).
MIN_PULSE_SAMPLES = 64
#: A first difference beyond this many standard deviations of the first differences in the
#: pulse's middle half is ringing, not noise (Gaussian noise exceeds 5σ once in 1.7 million
#: samples).
RING_Z = 5.0
#: The edge mask is at least this many times as long as the ringing that was seen.
RING_MARGIN = 2.0
#: The mask runs until the ring's envelope, extrapolated as an exponential decay from its
#: largest first difference to the detection limit (RING_Z) where it was last seen, falls to
#: this many noise deviations: a ring left at the detection limit is a few σ per sample and
#: coherent over many samples, one left below a tenth of the noise moves the spline fit far
#: less than its own uncertainty (common practice). A ring that decays fast and then slowly is
#: still underestimated.
RING_RESIDUAL_Z = 0.1
#: The scatter that ringing is judged against is at least this fraction of the pulse voltage:
#: on a record with almost no noise the bank's droop as the core saturates (a smooth change of
#: a few millivolts per sample) would otherwise stand out as ringing and be masked, up to a
#: quarter of the pulse (measured on a noiseless ngspice record: 738 samples, the current from
#: 1.85 A to 3.1 A of a hard core). A ring at a switching edge is volts to tens of volts
#: (common practice), far above it.
QUIET_FLOOR = 1e-4
#: Ringing is looked for in this fraction of the pulse next to each edge.
EDGE_FRACTION = 0.25
#: The rest level before a pulse is taken from the samples before its last
#: 1/EDGE_SEARCH_DIVISOR, where the switching edge lies (a switch's edge takes a few samples;
#: a sixteenth of the pre-trigger of a record that shows a tenth of its pulse before it is
#: still well over ten samples).
EDGE_SEARCH_DIVISOR = 16
#: Samples always dropped at each edge: the sample that straddles the switching instant
#: and its neighbour.
MIN_EDGE_SKIP = 2


@dataclass(frozen=True)
class Pulse:
    """Samples ``on:off`` stand above half the pulse voltage; ``start:stop`` are fitted;
    ``rise`` is the first sample of the switching edge (the voltage leaves its level before
    the pulse)."""

    on: int
    off: int
    start: int
    stop: int
    rise: int


def find_pulses(voltage: np.ndarray) -> list[Pulse]:
    """The voltage pulses of ``voltage`` (positive, above half its largest value), each with
    its edges' ringing masked."""
    v = np.asarray(voltage, dtype=float)
    level = np.percentile(v, 99.9)
    if not level > 0:
        return []
    above = np.concatenate(([False], v > 0.5 * level, [False]))
    changes = np.flatnonzero(np.diff(above.astype(np.int8)))
    pulses = []
    previous = 0
    for on, off in zip(changes[::2], changes[1::2]):
        if off - on < MIN_PULSE_SAMPLES:
            continue
        start = on + ring_mask_end(v[on:off])
        stop = off - ring_mask_end(v[on:off][::-1])
        if stop - start >= MIN_PULSE_SAMPLES // 2:
            pulses.append(Pulse(int(on), int(off), int(start), int(stop), edge_start(v[previous:on]) + previous))
        previous = off
    return pulses


def edge_start(before: np.ndarray) -> int:
    """Index in ``before`` (the samples up to a pulse's half-voltage crossing, from the end of
    the previous pulse or the record's start) where the switching edge begins: the samples
    walked back from the crossing while they stand more than :data:`RING_Z` noise deviations
    above the level before it, the median and the scatter of the first differences of the
    samples from the middle of ``before`` to its last 1/:data:`EDGE_SEARCH_DIVISOR` (the rest
    just before the pulse, after the previous pulse's turn-off and freewheeling have ended;
    the edge itself lies in that last part)."""
    if before.size < 4:
        return 0
    edge = max(before.size // EDGE_SEARCH_DIVISOR, MIN_EDGE_SKIP)
    quiet = before[before.size // 2:before.size - edge]
    if quiet.size < 2:
        quiet = before[:before.size // 2]
    level = float(np.median(quiet))
    noise = float(np.std(np.diff(quiet))) / np.sqrt(2.0)
    j = before.size
    while j > 0 and before[j - 1] > level + RING_Z * noise:
        j -= 1
    return j


def ring_mask_end(v: np.ndarray) -> int:
    """How many samples from the start of ``v`` (a pulse, from one edge inwards) to mask.

    The last first difference within :data:`EDGE_FRACTION` of the pulse that exceeds
    :data:`RING_Z` standard deviations σ of the first differences in the pulse's middle half
    (at least :data:`QUIET_FLOOR` of the pulse voltage)
    marks the end of the visible ringing, after ``seen`` samples. The ring's envelope is taken
    as an exponential decay from its largest first difference A to RING_Z·σ over ``seen``;
    the mask runs to where that envelope reaches :data:`RING_RESIDUAL_Z`·σ,
    seen·ln(A/(RING_RESIDUAL_Z·σ))/ln(A/(RING_Z·σ)), at least :data:`RING_MARGIN`·seen and
    :data:`MIN_EDGE_SKIP` samples, at most the :data:`EDGE_FRACTION` of the pulse searched.
    """
    d = np.diff(v)
    middle = d[d.size // 4:max(3 * d.size // 4, d.size // 4 + 1)]
    # the middle half's scatter: far from both edges, and a quantised record's first
    # differences (mostly zero) leave no robust median deviation
    sigma = max(float(np.std(middle)), QUIET_FLOOR * float(np.median(np.abs(v))))
    near = d[:max(int(EDGE_FRACTION * d.size), 1)]
    excursion = np.abs(near - np.mean(middle))
    loud = np.flatnonzero(excursion > RING_Z * sigma) if sigma > 0 else np.array([], int)
    if not loud.size:
        return MIN_EDGE_SKIP
    seen = int(loud[-1]) + 1
    peak = float(np.max(excursion))
    decays = np.log(peak / (RING_RESIDUAL_Z * sigma)) / np.log(peak / (RING_Z * sigma))
    return max(MIN_EDGE_SKIP, int(np.ceil(max(RING_MARGIN, min(decays, near.size / seen)) * seen)))


#: The falling ramp after a pulse is fitted down to this fraction of the pulse's peak current
#: (below it the freewheeling diode stops conducting and the record no longer follows the coil).
FALLING_END_FRACTION = 0.05
#: A falling ramp must fall by at least this fraction of the peak to be compared.
FALLING_MIN_FALL = 0.2


def falling_segment(amperes: np.ndarray, voltage: np.ndarray, pulse: Pulse, next_on: int) -> tuple[int, int] | None:
    """Samples ``start:stop`` of the current's decay after ``pulse`` (until ``next_on``), or None.

    The decay is the current falling while the coil voltage stands negative (the freewheeling
    diode, or a reversed bank) after the switch opens; its turn-off ringing is masked by the
    rule of :func:`ring_mask_end`, and it ends where the current falls below
    :data:`FALLING_END_FRACTION` of the pulse's peak.
    """
    after = slice(pulse.off, next_on)
    if next_on - pulse.off < MIN_PULSE_SAMPLES or not np.median(voltage[after]) < 0:
        return None
    peak = float(np.max(amperes[pulse.start:pulse.stop]))
    low = np.flatnonzero(amperes[after] <= FALLING_END_FRACTION * peak)
    stop = pulse.off + (int(low[0]) if low.size else next_on - pulse.off)
    if stop - pulse.off < MIN_PULSE_SAMPLES:
        return None
    start = pulse.off + ring_mask_end(voltage[pulse.off:stop])
    if stop - start < MIN_PULSE_SAMPLES // 2 or amperes[start] - amperes[stop - 1] < FALLING_MIN_FALL * peak:
        return None
    return start, stop
