"""rl-step estimator "per-edge windows": each edge window fitted alone, the windows combined
by generalised least squares (inverse-covariance weighting).

With a drive channel each window is the joint fit of sense and drive sharing tau, so this is
also the estimator "joint with drive". Its result, :class:`Combined`, is what every rl-step
estimator returns. See ``docs/method-rl-step.md``.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
from ..errors import AnalysisRefused
from ..scale_factor import birge_ratio, scale_factor
from ._scale_factor import EDGE_SCATTER_P, RISE_FALL_SCATTER_P


class StatesNotMeasured(AnalysisRefused):
    """The windows do not hold both states' settled levels (their combination is singular):
    rl-step names the clipping when windows were left out as clipped."""


@dataclass(frozen=True)
class Combined:
    names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    units: tuple[str, ...]
    dof: float
    by_direction: dict
    rise_fall: float | None
    birge: tuple[float, float] | None

    def with_tau_variance_scaled(self, factor: float) -> "Combined":
        """The same result with the variance of tau (the first entry) multiplied by ``factor``."""
        scale = np.ones(self.values.size)
        scale[0] = math.sqrt(factor)
        return dataclasses.replace(self, covariance=self.covariance * np.outer(scale, scale))


def combine(windows, fits, baseline, has_drive) -> Combined:
    """Generalised least-squares combination of per-window estimates (independent windows).

    Parameter vector: tau, [q = C_d/C_s], S_high, S_low, [D_high, D_low]; each window
    observes tau, q and the final levels of the state its edge enters; the pre-edge
    baseline observes the levels of the state before the first edge.
    """
    names = ["tau_fit"] + (["q_drive_sense"] if has_drive else []) + ["sense_high", "sense_low"]
    if has_drive:
        names += ["drive_high", "drive_low"]
    idx = {n: i for i, n in enumerate(names)}
    p = len(names)
    info = np.zeros((p, p))
    score = np.zeros(p)
    obs = []
    for w, f in zip(windows, fits):
        state = "high" if w.edge.direction > 0 else "low"
        vals, cov = f.subset(("tau", "final_sense", "coef_sense")
                             + (("final_drive", "coef_drive") if has_drive else ()))
        if has_drive:
            tau, sf, cs, df, cd = vals
            g = np.array([[1, 0, 0, 0, 0], [0, 0, -cd / cs ** 2, 0, 1 / cs], [0, 1, 0, 0, 0], [0, 0, 0, 1, 0]])
            y = np.array([tau, cd / cs, sf, df])
            cols = [idx["tau_fit"], idx["q_drive_sense"], idx[f"sense_{state}"], idx[f"drive_{state}"]]
        else:
            tau, sf, cs = vals
            g = np.array([[1, 0, 0], [0, 1, 0]])
            y = np.array([tau, sf])
            cols = [idx["tau_fit"], idx[f"sense_{state}"]]
        obs.append((y, g @ cov @ g.T, cols, w.edge.direction))
    if baseline is not None:
        state = "low" if windows[0].edge.direction > 0 else "high"
        groups = ("final_sense", "final_drive") if has_drive else ("final_sense",)
        vals, cov = baseline.subset(groups)
        cols = [idx[f"sense_{state}"]] + ([idx[f"drive_{state}"]] if has_drive else [])
        obs.append((vals, cov, cols, 0))
    for y, c, cols, _ in obs:
        try:
            ci = np.linalg.inv(c)
        except np.linalg.LinAlgError:
            ci = np.full_like(c, np.nan)
        if not (np.all(np.isfinite(ci)) and np.all(np.isfinite(y))):
            raise AnalysisRefused("a window's fit has no usable covariance (its noise is far below a converter "
                                  "code, or its levels are flat): increase the vertical sensitivity or record "
                                  "with more noise-free resolution")
        info[np.ix_(cols, cols)] += ci
        score[cols] += ci @ y
    d = np.sqrt(np.abs(np.diag(info)))
    if np.any(d == 0) or np.linalg.matrix_rank(info / np.outer(d, d)) < p:
        raise StatesNotMeasured("the record does not hold both states settled long enough to measure the "
                              "current step; record a pre-edge baseline or a full period")
    cov = np.linalg.inv(info)
    theta = cov @ score
    chi2 = sum(float((y - theta[cols]) @ np.linalg.inv(c) @ (y - theta[cols])) for y, c, cols, _ in obs)
    nu = sum(y.size for y, *_ in obs) - p
    birge = None
    if nu > 0:
        birge = birge_ratio(chi2, nu)
        cov = cov * scale_factor(*birge, EDGE_SCATTER_P) ** 2
    by_dir = {}
    chi2_within, nu_within = 0.0, 0
    for key, sign in (("rising", 1), ("falling", -1)):
        sel = [(f["tau"], f.stderr("tau") ** 2) for w, f in zip(windows, fits) if w.edge.direction == sign]
        if sel:
            wts = np.array([1 / v for _, v in sel])
            taus = np.array([m for m, _ in sel])
            mean = float(np.sum(wts * taus) / wts.sum())
            by_dir[key] = (mean, float(1 / math.sqrt(wts.sum())))
            chi2_within += float(np.sum(wts * (taus - mean) ** 2))
            nu_within += len(sel) - 1
    rise_fall = None
    if "rising" in by_dir and "falling" in by_dir:
        (a, ua), (b, ub) = by_dir["rising"], by_dir["falling"]
        # against the scatter of the edges within each direction when it exceeds the stated
        # uncertainties (correlated noise the per-edge fits underrate)
        scale = scale_factor(*birge_ratio(chi2_within, nu_within), RISE_FALL_SCATTER_P) if nu_within > 0 else 1.0
        rise_fall = (a - b) / (math.hypot(ua, ub) * scale)
    dof = float(sum(max(f.dof, 1.0) for f in fits))
    units = tuple({"tau_fit": "s", "q_drive_sense": ""}.get(n, "V") for n in names)
    return Combined(tuple(names), theta, cov, units, dof, by_dir, rise_fall, birge)
