"""Gauss–Newton steps for a start near the minimum (wavefit.fit.gauss_newton, and the engine's
``close_start``).

External reference: NIST StRD Misra1a and BoxBOD
(https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml), y = b1·(1 − exp(−b2·x)) (BoxBOD the
same model with its own data), certified values and standard deviations read from the NIST
files. The certified values are the least-squares minimum, so steps that end anywhere must end
there.
"""
from __future__ import annotations

import numpy as np
import pytest

from test_fit_exponential import read_strd, sig_digits
from wavefit.fit.engine import NEGLIGIBLE_CHANGE, Block, fit_least_squares
from wavefit.fit.gauss_newton import descend

DATASETS = ["Misra1a.dat", "BoxBOD.dat"]
UNBOUNDED = (np.full(2, -np.inf), np.full(2, np.inf))


def problem(name):
    starts, certified, x, y = read_strd(name)

    def fun(b):
        with np.errstate(over="ignore"):  # (a far start's steps)
            return y - b[0] * (1.0 - np.exp(-b[1] * x))

    def jac(b):
        with np.errstate(over="ignore", invalid="ignore"):
            e = np.exp(-b[1] * x)
            return np.column_stack((-(1.0 - e), -b[0] * x * e))

    def factor(b):
        return np.linalg.qr(np.column_stack((jac(b), fun(b))), mode="r")

    best = np.array([certified["b1"][0], certified["b2"][0]])
    std = np.array([certified["b1"][1], certified["b2"][1]])
    return starts, best, std, fun, jac, factor


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_steps_from_near_the_minimum_reach_the_certified_values(sign):
    # three certified standard deviations off in each parameter, on NIST's problem of lower
    # difficulty (BoxBOD's large residuals make the steps converge slowly: they give up there,
    # below, and the solver takes the start)
    _, best, std, _, _, factor = problem("Misra1a.dat")
    found = descend(factor, best + sign * 3.0 * std * np.array([1.0, -1.0]), *UNBOUNDED, NEGLIGIBLE_CHANGE)
    assert found is not None
    x, t = found
    for k in range(2):
        assert sig_digits(x[k], best[k]) >= 6, (x, best)
    np.testing.assert_allclose(t, factor(x))  # the factor handed back is the one at the point


@pytest.mark.parametrize("name", DATASETS)
@pytest.mark.parametrize("start", ["nist 1", "nist 2", "near"])
def test_steps_end_at_the_certified_values_or_nowhere(name, start):
    # NIST's own starting points are far from the minimum (BoxBOD's first is 200 times off):
    # the steps either give up (the solver then takes the start) or reach the minimum
    starts, best, std, _, _, factor = problem(name)
    x0 = best + 0.1 * std if start == "near" else np.array(starts[int(start[-1]) - 1])
    found = descend(factor, x0, *UNBOUNDED, NEGLIGIBLE_CHANGE)
    if name == "BoxBOD.dat" and start == "near":
        assert found is None  # (slow steps: the case must exercise giving up)
    if found is not None:
        for k in range(2):
            assert sig_digits(found[0][k], best[k]) >= 6, (found[0], best)


def test_a_step_out_of_the_bounds_is_refused():
    _, best, std, _, _, factor = problem("Misra1a.dat")
    start = best + 3.0 * std
    assert descend(factor, start, np.array([-np.inf, start[1]]), np.full(2, np.inf), NEGLIGIBLE_CHANGE) is None


@pytest.mark.parametrize("name", DATASETS)
def test_a_close_start_gives_the_certified_values_and_standard_deviations(name):
    # the engine with close_start: the steps' solution, and the covariance from their last factor
    _, best, std, fun, jac, _ = problem(name)
    start = best - 3.0 * std
    n = fun(best).size
    for close in (True, False):
        fit = fit_least_squares(fun, jac, start, ["b1", "b2"], [Block(0, n)], model="saturating", noise="white",
                                close_start=close)
        for k, b in enumerate(("b1", "b2")):
            assert sig_digits(fit[b], best[k]) >= 6, (close, b, fit[b], best[k])
            assert sig_digits(fit.stderr(b), std[k]) >= 6, (close, b, fit.stderr(b), std[k])


def test_refits_reach_the_solver_s_solution(monkeypatch):
    # the engine's refits (two channels weighed by their scatter, then whitened by their AR
    # models) start with the steps from the solve before; the truth is the same fit with the
    # steps disabled (every solve the trust-region solver's): the same values to a millionth
    # of a standard error, the same covariance and noise models
    from scipy.signal import lfilter

    import wavefit.fit.engine as engine

    rng = np.random.default_rng(8)
    t = np.linspace(0.0, 5.0, 4000)
    truth = np.array([0.2, 1.5, 1.2, -0.4])  # levels of two channels on one exponential, then tau
    clean = np.concatenate([truth[0] + truth[1] * np.exp(-t / truth[2]), truth[3] * np.exp(-t / truth[2])])
    noise = lfilter([1.0], [1.0, -0.7], rng.standard_normal(clean.size))  # AR(1): a refit by its model
    y = clean + np.concatenate([0.01 * noise[:t.size], 0.03 * noise[t.size:]])
    n = t.size

    def fun(b):
        e = np.exp(-t / b[2])
        return y - np.concatenate([b[0] + b[1] * e, b[3] * e])

    def jac(b):
        e = np.exp(-t / b[2])
        de = e * t / b[2] ** 2
        top = np.column_stack([np.ones(n), e, b[1] * de, np.zeros(n)])
        bottom = np.column_stack([np.zeros(n), np.zeros(n), b[3] * de, e])
        return -np.vstack([top, bottom])

    blocks = [Block(0, n, "a"), Block(n, 2 * n, "b")]
    names = ["c", "a", "tau", "d"]
    start = truth * 1.01
    stepped = fit_least_squares(fun, jac, start, names, blocks, model="two channels")
    monkeypatch.setattr(engine, "descend", lambda *args: None)
    solver = fit_least_squares(fun, jac, start, names, blocks, model="two channels")
    assert {g: m["order"] for g, m in stepped.noise_model.items()} == {"a": 1, "b": 1}  # so refits happen
    assert {g: m["order"] for g, m in solver.noise_model.items()} == {"a": 1, "b": 1}
    se = np.sqrt(np.diag(solver.covariance))
    assert np.all(np.abs(stepped.values - solver.values) <= 1e-6 * se)
    np.testing.assert_allclose(stepped.covariance, solver.covariance, rtol=1e-7)


def test_a_bound_at_the_minimum_is_left_to_the_solver():
    # a bound on tau placed at the unbounded minimum itself: from this start (a draw where it
    # happens) the steps end within the reporting band of the bound and the fit would be
    # reported as pressed against it; the trust-region solver stops strictly inside, as every
    # fit did before the steps, and so does a close start now
    rng = np.random.default_rng(12)
    t = np.linspace(0, 10, 2000)
    rng.standard_normal(3 * t.size)
    y = 1.0 - 0.8 * np.exp(-t / 0.5) + 0.01 * rng.standard_normal(t.size)

    def fun(b):
        return y - (b[0] + b[1] * np.exp(-t / b[2]))

    def jac(b):
        e = np.exp(-t / b[2])
        return -np.column_stack([np.ones_like(t), e, b[1] * e * t / b[2] ** 2])

    blocks = [Block(0, t.size)]
    free = fit_least_squares(fun, jac, [1.0, -0.8, 0.5], list("fct"), blocks, model="x", noise="white")
    se = np.sqrt(np.diag(free.covariance))
    lower = np.array([-np.inf, -np.inf, free.values[2]])
    start = free.values + np.array([0.0, 0.0, 3.0 * se[2]])
    fits = [fit_least_squares(fun, jac, start, list("fct"), blocks, model="x", noise="white",
                              bounds=(lower, np.full(3, np.inf)), close_start=close) for close in (False, True)]
    assert [f.parameters_at_bounds for f in fits] == [(), ()]
    assert [f.warnings for f in fits] == [(), ()]
    assert abs(fits[1].values[2] - fits[0].values[2]) <= 1e-4 * se[2]
