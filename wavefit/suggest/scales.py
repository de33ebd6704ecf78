"""Vertical settings that use more of the converter: from a channel's code step and span now
and the span the next record is expected to show."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from ..io import Channel
from ..signal.clipping import extremes
from ..signal.codes import code_step
from ..signal.edges import noise_rms
from .rules import DIVISIONS, SCALE_HEADROOM
from .series import round_up_125


@dataclass(frozen=True)
class ScaleAdvice:
    """Vertical setting proposed for one role's channel (volts, or the channel's unit)."""

    role: str
    column: str
    code_step: float | None     # the present record's converter step; None when not on a grid
    codes_used: float | None    # present span / code step
    clipped: bool
    expected_low: float         # span the next record should show
    expected_high: float
    full_scale: float           # DIVISIONS · per_division
    per_division: float
    centre: float
    codes_next: float           # expected span in codes of the proposed setting
    codes_present: float | None = None  # expected span in codes of the present setting, when it
    #                                   holds that span (None otherwise)

    @property
    def keep_present(self) -> bool:
        """Whether the present setting already holds the expected span in more codes than the
        proposed 1-2-5 setting would (a setting between two 1-2-5 steps, say)."""
        return not self.clipped and self.codes_present is not None and self.codes_present >= self.codes_next


def scale_advice(role: str, channel: Channel, expected_low: float, expected_high: float, bits: int) -> ScaleAdvice:
    """The smallest 1-2-5 volts per division whose :data:`DIVISIONS` divisions hold the expected
    span with :data:`SCALE_HEADROOM`, centred on it.

    A clipped record (a run at its extreme although its noise spans codes, or noise piled up
    at the extreme: :mod:`wavefit.signal.clipping`) shows less than the signal's span; its
    expected span is then at least twice the present one.
    """
    y = np.asarray(channel.values, dtype=float)
    y = y[np.isfinite(y)]
    step = code_step(y)
    span_now = float(np.ptp(y)) if y.size else 0.0
    found = extremes(y)
    sigma = noise_rms(y)
    clipped = found.flat(sigma) or found.piles_up(sigma)
    low, high = min(expected_low, expected_high), max(expected_low, expected_high)
    if clipped:
        middle = 0.5 * (low + high)
        half = max(0.5 * (high - low), span_now)
        low, high = middle - half, middle + half
    span = max(high - low, 1e-300)
    per_division = round_up_125(SCALE_HEADROOM * span / DIVISIONS)
    full_scale = DIVISIONS * per_division
    codes_next = span / (full_scale / 2 ** bits)
    # the present setting holds the expected span when it is no wider than the present record's
    # (within the proposal's headroom: a ring's span is its offset ± its largest excursion) and
    # leaves the proposal's headroom on the converter's codes
    held = (bool(step) and not clipped and span <= SCALE_HEADROOM * span_now
            and SCALE_HEADROOM * span / step <= 2 ** bits)
    return ScaleAdvice(role, channel.header, step, span_now / step if step else None, bool(clipped),
                       low, high, full_scale, per_division, 0.5 * (low + high), codes_next,
                       span / step if held else None)
