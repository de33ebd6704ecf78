"""rl-step estimator "pooled windows": all sense windows fitted jointly with one noise model.

Used without a drive channel in correlated noise (see :mod:`wavefit.methods._rl_estimators`).
"""
from __future__ import annotations

import numpy as np

from ..fit.exponential import WindowChannel, fit_exponential_window
from ._rl_per_edge import Combined
from ..scale_factor import scale_factor
from ._scale_factor import POOLED_SCATTER_P


def pooled_windows(t, sense, windows, baseline, windowed: Combined, noise) -> Combined | None:
    """tau and state levels from one joint fit of all sense windows with one noise model.

    Used without a drive channel in correlated noise: fitting the windows separately
    estimates each window's noise covariance from its own few hundred effective
    samples, which underestimates it, and the per-window biases add up over many
    edges. One fit with tau shared, a final level and coefficient per window, and the
    AR model and covariance sandwich estimated from all windows together
    (``wavefit.fit.engine``, one noise group, one block per window) avoids both.
    """
    channels = [WindowChannel(f"w{k}", t[w.start:w.stop], sense[w.start:w.stop], noise_group="sense")
                for k, w in enumerate(windows)]
    try:
        fit = fit_exponential_window(channels, windowed.values[0], noise=noise, model="rl-step windows")
    except (ValueError, FloatingPointError, np.linalg.LinAlgError):
        return None
    names = ["tau"] + [f"final_w{k}" for k in range(len(windows))]
    vals, cov = fit.subset(tuple(names))
    rows = {"high": [], "low": []}
    for k, w in enumerate(windows):
        rows["high" if w.edge.direction > 0 else "low"].append(1 + k)
    extra_val, extra_var = [], []
    for state in ("high", "low"):
        if not rows[state]:
            if baseline is None:
                return None
            extra_val.append(baseline["final_sense"])
            extra_var.append(baseline.stderr("final_sense") ** 2)
            rows[state].append(len(names) + len(extra_val) - 1)
    if extra_val:
        n = len(names) + len(extra_val)
        big = np.zeros((n, n))
        big[: len(names), : len(names)] = cov
        big[len(names):, len(names):] = np.diag(extra_var)
        vals, cov = np.concatenate((vals, extra_val)), big
    a = np.zeros((3, vals.size))
    a[0, 0] = 1.0
    for r, state in ((1, "high"), (2, "low")):
        a[r, rows[state]] = 1.0 / len(rows[state])
    cov = a @ cov @ a.T
    if windowed.birge is not None:
        # the edges are repeated observations: a scatter beyond their stated uncertainties is a
        # correlated noise the AR model misses (:mod:`wavefit.methods._scale_factor`)
        cov = cov * scale_factor(*windowed.birge, POOLED_SCATTER_P) ** 2
    return Combined(("tau_fit", "sense_high", "sense_low"), a @ vals, cov, ("s", "V", "V"),
                    float(fit.dof), windowed.by_direction, windowed.rise_fall, windowed.birge)
