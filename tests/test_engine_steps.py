"""The solver's shortcut for negligible trial steps (``NEGLIGIBLE_CHANGE`` in
wavefit.fit.engine) must not stop a fit short, however precisely a parameter is known.

Truth: the least-squares estimate of a constant is the sample mean, and of a straight line
the closed-form regression (normal equations), both exact to rounding.
"""
from __future__ import annotations

import lmfit
import numpy as np

import wavefit.fit.engine as engine


def test_a_parameter_known_far_better_than_its_value_is_not_stopped_short():
    # 1,000 samples of a level near 10⁶ with noise 1e-9: its standard error is 3e-11, far
    # below 1e-11 of its value, and the start is 5e-6 (10⁵ standard errors) away
    rng = np.random.default_rng(1)
    y = 1e6 * (1 + 5e-12) + 1e-9 * rng.standard_normal(1000)
    params = lmfit.Parameters()
    params.add("a", 1e6)
    x = engine.minimise(params, ["a"], lambda v: (y - v[0]) / 1e-9, lambda v: np.full((y.size, 1), -1e9), "jac")
    standard_error = 1e-9 / np.sqrt(y.size)
    # to the resolution of a double near 10⁶ (1.2e-10, four standard errors)
    assert abs(x[0] - np.mean(y)) <= max(0.01 * standard_error, 2 * np.spacing(np.mean(y)))


def test_fewer_evaluations_and_the_same_line():
    t = np.linspace(0, 1, 500)
    y = 3.0 + 2.0 * t + 0.01 * np.random.default_rng(2).standard_normal(t.size)
    counted = {True: 0, False: 0}
    results = {}
    for shortcut in (True, False):
        def residuals(v, shortcut=shortcut):
            counted[shortcut] += 1
            return (y - v[0] - v[1] * t) / 0.01

        params = lmfit.Parameters()
        params.add("b0", 1.0)
        params.add("b1", 1.0)
        old = engine.NEGLIGIBLE_CHANGE
        engine.NEGLIGIBLE_CHANGE = old if shortcut else 0.0
        try:
            results[shortcut] = engine.minimise(params, ["b0", "b1"], residuals,
                                                lambda v: -np.column_stack((np.ones_like(t), t)) / 0.01, "jac")
        finally:
            engine.NEGLIGIBLE_CHANGE = old
    exact = np.linalg.lstsq(np.column_stack((np.ones_like(t), t)), y, rcond=None)[0]
    for x in results.values():
        np.testing.assert_allclose(x, exact, rtol=1e-10)
    assert counted[True] <= counted[False]


def test_the_solve_ends_where_scipy_alone_ends():
    """The solve ends at the first negligible trial step (every later one would be shorter and
    rejected too); it must end where scipy's own trust-region solve, run to its tolerances
    without the shortcut, ends: to a millionth of a standard error."""
    from scipy.optimize import least_squares

    rng = np.random.default_rng(4)
    t = np.linspace(0, 6, 3000)
    y = 0.3 + 1.7 * np.exp(-t / 1.1) + 0.02 * rng.standard_normal(t.size)

    def residuals(v):
        return (y - v[0] - v[1] * np.exp(-t / v[2])) / 0.02

    def jacobian(v):
        e = np.exp(-t / v[2])
        return -np.column_stack((np.ones_like(t), e, v[1] * e * t / v[2] ** 2)) / 0.02

    params = lmfit.Parameters()
    for name, start in (("c", 0.0), ("a", 1.0), ("tau", 0.7)):
        params.add(name, start)
    ours = engine.minimise(params, ["c", "a", "tau"], residuals, jacobian, "jac")
    tol = engine.TOLERANCE
    alone = least_squares(residuals, [0.0, 1.0, 0.7], jac=jacobian, method="trf", x_scale="jac",
                          ftol=tol, xtol=tol, gtol=tol).x
    j = jacobian(alone)
    standard_errors = np.sqrt(np.diag(np.linalg.inv(j.T @ j)))
    assert np.all(np.abs(ours - alone) <= 1e-6 * standard_errors)
