"""The lmfit models of wavefit.fit.models, each fitted on its own with lmfit's plain fit.

External references: NIST StRD Misra1a (certified values, nonlinear regression,
https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml) for the exponential step, and
ngspice transient simulations of a series RLC ring (alpha = R/2L, w_d² = 1/LC − alpha²,
the underdamped second-order response) and of a square-wave driven RL loop (tau = L/R).
The checks on analytic waveforms only test ``guess`` and that each model's function is the
one wavefit's own fits evaluate.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from spice import needs_ngspice, simulate
from test_fit_exponential import read_strd, sig_digits
from wavefit.fit.damped_sine import fit_damped_sine
from wavefit.fit.exponential import WindowChannel, fit_exponential_window
from wavefit.fit.models import DampedSine, ExponentialStep, Relaxation
from wavefit.fit.relaxation import fit_relaxations


def test_misra1a_certified_values_with_the_step_model():
    # NIST StRD Misra1a: y = b1·(1 − exp(−b2·x)) is the step from zero, coef = −final, tau = 1/b2
    starts, certified, x, y = read_strd("Misra1a.dat")
    model = ExponentialStep()
    params = model.make_params(final=starts[0][0], coef=-starts[0][0], tau=1.0 / starts[0][1], t_ref=0.0)
    params["coef"].set(expr="-final")
    result = model.fit(y, params, t=x)
    b1, tau = result.params["final"], result.params["tau"]
    assert sig_digits(b1.value, certified["b1"][0]) >= 6
    assert sig_digits(1.0 / tau.value, certified["b2"][0]) >= 6
    assert sig_digits(b1.stderr, certified["b1"][1]) >= 5
    # the linearised standard deviation carries through b2 = 1/tau by the derivative 1/tau²
    assert sig_digits(tau.stderr / tau.value ** 2, certified["b2"][1]) >= 5


@needs_ngspice
def test_damped_sine_on_an_ngspice_ring():
    # series RLC from a charged capacitor: v = exp(−αt)(A cos w_d t + B sin w_d t), α = R/2L
    ind, cap, res = 100e-6, 10e-9, 2.0
    alpha = res / (2 * ind)
    w_d = math.sqrt(1 / (ind * cap) - alpha ** 2)
    dt = 20e-9
    t, v = simulate(f"C1 top 0 {cap:.6e} IC=1\nL1 top mid {ind:.6e}\nR1 mid 0 {res}", dt, 20 * 2 * math.pi / w_d,
                    ["v(top)"], uic=True)
    y = v["v(top)"]
    model = DampedSine()
    result = model.fit(y, model.guess(y, t=t), t=t)
    # measured: 2e-5 and 8e-6 (the simulator's own integration error)
    assert result.params["alpha"].value == pytest.approx(alpha, rel=2e-4)
    assert result.params["w_d"].value == pytest.approx(w_d, rel=5e-5)


@needs_ngspice
def test_relaxation_on_an_ngspice_square_wave():
    # series RL driven by a square wave with 1 ps edges: each state relaxes with tau = L/R
    ind, res = 1e-3, 100.0
    tau = ind / res
    dt = 0.1e-6
    t, v = simulate(f"V1 in 0 PULSE(0 1 20e-6 1e-12 1e-12 50e-6 100e-6)\nL1 in mid {ind:.6e}\nR1 mid 0 {res}",
                    dt, 110e-6, ["v(mid)"])
    y = v["v(mid)"]
    model = Relaxation(2)
    result = model.fit(y, model.guess(y, t=t), t=t)
    assert result.params["tau"].value == pytest.approx(tau, rel=2e-5)  # measured: 2e-6
    assert result.params["t0_1"].value == pytest.approx(20e-6, abs=0.01 * dt)
    assert result.params["t0_2"].value == pytest.approx(70e-6, abs=0.01 * dt)
    assert result.params["final_1"].value == pytest.approx(1.0, rel=1e-4)


def test_guess_recovers_an_analytic_step():
    t = np.linspace(0.0, 1e-3, 2001)
    model = ExponentialStep()
    y = model.eval(t=t, final=2.0, coef=-1.5, tau=1.3e-4, t_ref=0.0)
    guess = model.guess(y, t=t)
    assert guess["tau"].value == pytest.approx(1.3e-4, rel=1e-5)
    assert guess["final"].value == pytest.approx(2.0, rel=1e-5)
    assert not guess["t_ref"].vary


def test_guess_recovers_an_analytic_ring():
    t = np.arange(4000) * 50e-9
    model = DampedSine()
    truth = dict(offset=0.1, a=1.0, b=0.3, alpha=3e3, w_d=2 * math.pi * 2e4)
    y = model.eval(t=t, t_ref=0.0, **truth)
    guess = model.guess(y, t=t)
    assert guess["alpha"].value == pytest.approx(truth["alpha"], rel=1e-9)
    assert guess["w_d"].value == pytest.approx(truth["w_d"], rel=1e-9)
    # the amplitude is referred to the start of the ring that guess found
    shift = guess["t_ref"].value
    assert math.hypot(guess["a"].value, guess["b"].value) == pytest.approx(
        math.hypot(truth["a"], truth["b"]) * math.exp(-truth["alpha"] * shift), rel=1e-9)


def test_guess_finds_the_edges_of_an_analytic_relaxation():
    t = np.linspace(0.0, 1e-3, 2001)
    model = Relaxation(2)
    truth = dict(tau=5e-5, final_head=0.0, coef_head=0.0, final_1=1.0, t0_1=2e-4, final_2=0.0, t0_2=6e-4)
    guess = model.guess(model.eval(t=t, **truth), t=t)
    assert guess["tau"].value == pytest.approx(truth["tau"], rel=0.05)
    for k in (1, 2):
        assert guess[f"t0_{k}"].value == pytest.approx(truth[f"t0_{k}"], abs=2 * (t[1] - t[0]))


def test_step_model_is_the_function_the_window_fit_evaluates():
    rng = np.random.default_rng(3)
    t = np.linspace(1e-4, 1.1e-3, 1500)
    y = 2.0 - 1.5 * np.exp(-(t - 1e-4) / 1.3e-4) + rng.normal(0, 0.01, t.size)
    fit = fit_exponential_window([WindowChannel("y", t, y)], 1e-4, noise="white")
    curve = ExponentialStep().eval(t=t, final=fit["final_y"], coef=fit["coef_y"], tau=fit["tau"],
                                   t_ref=fit.t_ref)
    np.testing.assert_allclose(curve, y - fit.residuals, rtol=0, atol=1e-12)


def test_ring_model_is_the_function_the_ring_fit_evaluates():
    rng = np.random.default_rng(4)
    dt = 50e-9
    t = 1e-6 + np.arange(3000) * dt
    tau = t - t[0]
    y = 0.1 + np.exp(-3e3 * tau) * np.cos(2 * math.pi * 2e4 * tau + 0.4) + rng.normal(0, 0.01, t.size)
    x0 = np.array([0.1, math.cos(0.4), -math.sin(0.4), 3e3 * dt, 2 * math.pi * 2e4 * dt])
    ring = fit_damped_sine(t, y, x0, dt, noise="white")
    values = dict(zip(ring.fit.names, ring.fit.values))
    curve = DampedSine().eval(t=t, t_ref=ring.t_ref, **values)
    np.testing.assert_allclose(curve, y - ring.fit.residuals, rtol=0, atol=1e-12)


def test_relaxation_model_is_the_function_the_record_fit_evaluates():
    rng = np.random.default_rng(5)
    t = np.linspace(0.0, 1e-3, 3001)
    model = Relaxation(2)
    truth = dict(tau=5e-5, final_head=0.0, coef_head=0.0, final_1=1.0, t0_1=2e-4, final_2=0.0, t0_2=6e-4)
    y = model.eval(t=t, **truth) + rng.normal(0, 0.01, t.size)
    fit = fit_relaxations(t, y, [2.01e-4, 5.99e-4], [0.0, 1.0, 0.0], 4.5e-5, noise="white")
    curve = model.eval(t=t, **dict(zip(fit.names, fit.values)))
    np.testing.assert_allclose(curve, y - fit.residuals, rtol=0, atol=1e-12)
