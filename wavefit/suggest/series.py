"""Rounding proposed settings to values that instruments and parts offer."""
from __future__ import annotations

import math

#: The 1-2-5 sequence of scope ranges, time bases and generator periods (common practice).
ONE_TWO_FIVE = (1.0, 2.0, 5.0)

#: The E12 series of preferred resistor values, IEC 60063 (values from memory).
E12 = (1.0, 1.2, 1.5, 1.8, 2.2, 2.7, 3.3, 3.9, 4.7, 5.6, 6.8, 8.2)


def _candidates(x: float, mantissas: tuple[float, ...]) -> list[float]:
    decade = math.floor(math.log10(x))
    return [m * 10.0 ** (decade + d) for d in (-1, 0, 1) for m in mantissas]


def round_up_125(x: float) -> float:
    """The smallest 1-2-5 value at or above ``x`` (> 0)."""
    return min(c for c in _candidates(x, ONE_TWO_FIVE) if c >= x * (1 - 1e-12))


def round_down_125(x: float) -> float:
    """The largest 1-2-5 value at or below ``x`` (> 0)."""
    return max(c for c in _candidates(x, ONE_TWO_FIVE) if c <= x * (1 + 1e-12))


def nearest_e12(x: float) -> float:
    """The E12 value nearest to ``x`` (> 0) on a logarithmic scale."""
    return min(_candidates(x, E12), key=lambda c: abs(math.log(c / x)))
