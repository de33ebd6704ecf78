"""The converter's code grid: the step between the values a digitised record can take."""
from __future__ import annotations

import numpy as np


def code_step(y: np.ndarray) -> float | None:
    """The converter (or printing) step of a record, if its values sit on a uniform grid."""
    y = np.asarray(y, dtype=float)
    y = y[np.isfinite(y)]
    levels = np.unique(y)
    if levels.size < 3 or levels.size > 0.5 * y.size:
        return None
    gaps = np.diff(levels)
    step = float(gaps.min())
    if step <= 0:
        return None
    ratio = gaps / step
    if np.max(np.abs(ratio - np.round(ratio))) > 0.05:
        return None
    return step


def code_grid(y: np.ndarray, step: float | None = None) -> tuple[float, float] | None:
    """(origin, step) of the grid a record's values sit on, fitted to all its levels.

    The step between adjacent printed levels varies by the printing resolution (0.00392 and
    0.00393 for 8-bit codes printed to 10 µV); a least-squares line through the levels
    against their code numbers recovers it. ``step`` is a first guess when the record holds
    too few levels to find one (a settled level reading one or two codes). None when the
    values are not on a uniform grid.
    """
    y = np.asarray(y, dtype=float)
    y = y[np.isfinite(y)]
    first = code_step(y) or step
    if first is None or y.size == 0:
        return None
    levels = np.unique(y)
    number = np.round((levels - levels[0]) / first)
    if number[-1] > 0:
        slope, origin = np.polyfit(number, levels, 1)
    else:
        slope, origin = first, float(levels[0])
    if not slope > 0 or np.max(np.abs(origin + slope * number - levels)) > 0.05 * slope:
        return None
    return float(origin), float(slope)
