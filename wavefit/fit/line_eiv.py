"""Straight line through points with uncertainty in both coordinates (York's solution)."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import stats


@dataclass(frozen=True)
class LineFit:
    """y = intercept + slope·x with the covariance of (slope, intercept) from the stated
    point uncertainties, the weighted sum of squares ``chi2`` and its ``dof`` = n − 2."""

    slope: float
    intercept: float
    covariance: np.ndarray  # of (slope, intercept)
    chi2: float
    dof: int

    @property
    def p_value(self) -> float:
        """Probability of a chi-square at least this large if the points lie on a line."""
        return float(stats.chi2.sf(self.chi2, self.dof)) if self.dof > 0 else 1.0


def york_line(x: np.ndarray, y: np.ndarray, u_x: np.ndarray, u_y: np.ndarray,
              tol: float = 1e-15, max_iter: int = 100) -> LineFit:
    """Best straight line when both x and y carry (uncorrelated) standard uncertainties.

    Iterates York's equations for the slope with weights
    W_i = 1/(u_y,i² + b²·u_x,i²); the standard uncertainties follow from the
    stated point uncertainties (not scaled by the scatter; compare ``chi2``
    with ``dof`` to judge whether the points lie on a line). ``u_x`` may be zero
    (exact abscissae), which reduces to weighted least squares in y.

    References
    ----------
    D. York, N. M. Evensen, M. López Martínez and J. De Basabe Delgado,
    "Unified equations for the slope, intercept, and standard errors of the best
    straight line", Am. J. Phys. 72(3), 367–375, 2004.
    """
    x, y, u_x, u_y = (np.asarray(a, dtype=float) for a in (x, y, u_x, u_y))
    if x.size < 2:
        raise ValueError("a line needs at least two points")
    if np.any(u_y < 0) or np.any(u_x < 0) or np.any((u_x == 0) & (u_y == 0)):
        raise ValueError("every point needs a positive uncertainty in x or y")
    b = float(np.polyfit(x, y, 1)[0])
    for _ in range(max_iter):
        w = 1.0 / (u_y ** 2 + b * b * u_x ** 2)
        x_bar, y_bar = np.sum(w * x) / np.sum(w), np.sum(w * y) / np.sum(w)
        uu, vv = x - x_bar, y - y_bar
        beta = w * (uu * u_y ** 2 + b * vv * u_x ** 2)
        b_new = float(np.sum(w * beta * vv) / np.sum(w * beta * uu))
        done = abs(b_new - b) <= tol * max(abs(b_new), 1e-300)
        b = b_new
        if done:
            break
    w = 1.0 / (u_y ** 2 + b * b * u_x ** 2)
    x_bar, y_bar = np.sum(w * x) / np.sum(w), np.sum(w * y) / np.sum(w)
    a = float(y_bar - b * x_bar)
    beta = w * ((x - x_bar) * u_y ** 2 + b * (y - y_bar) * u_x ** 2)
    x_adj = x_bar + beta
    x_adj_bar = float(np.sum(w * x_adj) / np.sum(w))
    var_b = 1.0 / float(np.sum(w * (x_adj - x_adj_bar) ** 2))
    var_a = 1.0 / float(np.sum(w)) + x_adj_bar ** 2 * var_b
    cov_ab = -x_adj_bar * var_b
    chi2 = float(np.sum(w * (y - b * x - a) ** 2))
    if not math.isfinite(var_b):
        raise ValueError("the points do not determine a slope (all x equal)")
    return LineFit(b, a, np.array([[var_b, cov_ab], [cov_ab, var_a]]), chi2, int(x.size - 2))
