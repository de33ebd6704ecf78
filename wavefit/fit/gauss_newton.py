"""Gauss–Newton steps through the triangular factor of [J | f], for a start near the minimum.

With [J | f] = Q·[[R, a], [0, ρ]] (J the Jacobian of the residuals f, both whitened),
‖f + J·Δ‖² = ‖a + R·Δ‖² + ρ², so the Gauss–Newton step is Δ = −R⁻¹·a and it lowers the
linearised sum of squares by ‖a‖² (Å. Björck, *Numerical Methods for Least Squares
Problems*, SIAM 1996, §9.2.1). From a start within a few standard errors of the minimum,
such as another fit's parameters carried to a part of its window, the steps shrink by orders
of magnitude each and two or three reach it; a trust-region solver takes as many factors
and its own set-up besides. Where the steps do not settle, the caller hands the start to
the solver, so the steps never decide where a fit that needs the solver ends.
"""
from __future__ import annotations

from typing import Callable

import numpy as np
from scipy.linalg import solve_triangular

#: Steps taken before the start is handed back to the solver: from a start a few standard
#: errors off, each step's error is of the order of the previous one's squared over the
#: parameters' scale, so a start that needs more is not near the minimum.
MAX_STEPS = 8
#: A step may raise the sum of squares by this share before it counts as a rise (a step past
#: the minimum, to be left to the solver): the sum's own rounding over 10⁷ samples with a
#: signal 10³ times its noise is about 1e-10 of itself.
RISE = 1e-8


def descend(factor: Callable[[np.ndarray], np.ndarray], x: np.ndarray, lower: np.ndarray,
            upper: np.ndarray, negligible: float) -> tuple[np.ndarray, np.ndarray] | None:
    """The minimum of the sum of squares reached by Gauss–Newton steps from ``x`` and the
    factor there, or None.

    ``factor(x)`` is the upper triangular factor of the whitened [J | f] at ``x``, of side
    p + 1. The steps stop at the first point whose step would lower the sum by at most
    ``negligible`` of it (the solver's own stop, :data:`wavefit.fit.engine.NEGLIGIBLE_CHANGE`);
    a step that leaves the bounds, raises the sum by more than :data:`RISE` of it or is not
    finite, and more than :data:`MAX_STEPS` steps, give None."""
    t = factor(x)
    for _ in range(MAX_STEPS + 1):
        p = t.shape[0] - 1
        a, rho = t[:p, p], float(t[p, p])
        predicted = float(a @ a)
        cost = predicted + rho * rho
        if not np.isfinite(cost):
            return None
        if predicted <= negligible * cost:
            return x, t
        with np.errstate(all="ignore"):
            step = solve_triangular(t[:p, :p], -a, check_finite=False)
        moved = x + step
        if not (np.all(np.isfinite(moved)) and np.all(moved >= lower) and np.all(moved <= upper)):
            return None
        t_moved = factor(moved)
        rise = float(t_moved[:p, p] @ t_moved[:p, p]) + float(t_moved[p, p]) ** 2
        if not rise <= cost * (1.0 + RISE):
            return None
        x, t = moved, t_moved
    return None
