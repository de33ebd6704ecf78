"""Clipping: a trace held flat at the converter's limits.

A clipped trace sits at its extreme code for a run of consecutive samples while
the signal beyond it is lost. An extreme value that recurs only in isolated
samples is ordinary noise; a long run at the very minimum or maximum is the
sign (common practice). The fitted model settles it: see :func:`model_exceeds_record`.
"""
from __future__ import annotations

import numpy as np


def longest_run_at_extremes(y: np.ndarray) -> tuple[int, int]:
    """Length of the longest run of samples equal to min(y), and to max(y)."""
    y = np.asarray(y)
    return _longest_run(y == np.nanmin(y)), _longest_run(y == np.nanmax(y))


def _longest_run(mask: np.ndarray) -> int:
    if not mask.any():
        return 0
    padded = np.concatenate(([0], mask.astype(np.int8), [0]))
    d = np.diff(padded)
    return int(np.max(np.flatnonzero(d == -1) - np.flatnonzero(d == 1)))


def model_exceeds_record(y: np.ndarray, model: np.ndarray, sigma: float, min_run: int = 5) -> bool:
    """True when the fitted model lies beyond the record's extreme value by more than 3σ
    for ``min_run`` or more consecutive samples that sit at that extreme: the trace was clipped."""
    y, model = np.asarray(y), np.asarray(model)
    top, bottom = np.nanmax(y), np.nanmin(y)
    above = (y == top) & (model > top + 3.0 * sigma)
    below = (y == bottom) & (model < bottom - 3.0 * sigma)
    return _longest_run(above) >= min_run or _longest_run(below) >= min_run


def piles_up_at_limit(y: np.ndarray, sigma: float, min_count: int = 5) -> bool:
    """True when noise has been cut off at the converter's range: more samples sit at the
    record's extreme value than at the value one code inside it (a pile-up; a smooth noise
    distribution thins out towards its tails, common practice). Only judged when the noise
    spans more than one code, since a quiet plateau on one code piles up by itself."""
    from ..fit.quantisation import code_step

    y = np.asarray(y, dtype=float)
    y = y[np.isfinite(y)]
    step = code_step(y)
    for extreme, inward in ((np.max(y), -1.0), (np.min(y), 1.0)):
        at = int(np.count_nonzero(y == extreme))
        if at < min_count:
            continue
        if step is None:
            return sigma > 0  # continuous values repeat an extreme only when it was clipped
        if sigma <= step:
            continue
        near = int(np.count_nonzero(np.abs(y - (extreme + inward * step)) < 0.01 * step))
        if at > 1.5 * near + 3:
            return True
    return False
