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
#: The edge mask is made this many times as long as the ringing that was seen: a decaying
#: ring that fell to the detection limit in a time T falls by the same factor again in the
#: next T (an exponential decay), below the noise.
RING_MARGIN = 2.0
#: Ringing is looked for in this fraction of the pulse next to each edge.
EDGE_FRACTION = 0.25
#: Samples always dropped at each edge: the sample that straddles the switching instant
#: and its neighbour.
MIN_EDGE_SKIP = 2


@dataclass(frozen=True)
class Pulse:
    """Samples ``on:off`` stand above half the pulse voltage; ``start:stop`` are fitted."""

    on: int
    off: int
    start: int
    stop: int


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
    for on, off in zip(changes[::2], changes[1::2]):
        if off - on < MIN_PULSE_SAMPLES:
            continue
        start = on + ring_mask_end(v[on:off])
        stop = off - ring_mask_end(v[on:off][::-1])
        if stop - start >= MIN_PULSE_SAMPLES // 2:
            pulses.append(Pulse(int(on), int(off), int(start), int(stop)))
    return pulses


def ring_mask_end(v: np.ndarray) -> int:
    """How many samples from the start of ``v`` (a pulse, from one edge inwards) to mask.

    The last first difference within :data:`EDGE_FRACTION` of the pulse that exceeds
    :data:`RING_Z` standard deviations of the first differences in the pulse's middle half marks the end of
    the visible ringing; the mask is :data:`RING_MARGIN` times that long, and at least
    :data:`MIN_EDGE_SKIP` samples.
    """
    d = np.diff(v)
    middle = d[d.size // 4:max(3 * d.size // 4, d.size // 4 + 1)]
    # the middle half's scatter: far from both edges, and a quantised record's first
    # differences (mostly zero) leave no robust median deviation
    sigma = float(np.std(middle))
    near = d[:max(int(EDGE_FRACTION * d.size), 1)]
    loud = np.flatnonzero(np.abs(near - np.mean(middle)) > RING_Z * sigma) if sigma > 0 else np.array([], int)
    seen = int(loud[-1]) + 1 if loud.size else 0
    return max(MIN_EDGE_SKIP, int(np.ceil(RING_MARGIN * seen)))


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
