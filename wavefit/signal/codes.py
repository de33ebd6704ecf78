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
