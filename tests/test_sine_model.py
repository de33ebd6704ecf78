"""The four-parameter sine model (wavefit.fit.models.Sine) and its IEEE Std 1057 start.

External references:
- ngspice transient simulation of an RC low-pass driven by a sine source: in steady state
  the output is the input scaled by 1/√(1 + (ωRC)²) and delayed in phase by atan(ωRC), the
  first-order low-pass transfer function H = 1/(1 + jωRC) (any circuit-theory handbook);
- IEEE Std 1057-2017, §4.1.4.3: at a known frequency the sine fit is linear in A0, B0, C0 of
  y = A0·cos ωt + B0·sin ωt + C0, solved by the normal equations of [cos ωt, sin ωt, 1], with
  the linear-regression covariance s²·(DᵀD)⁻¹ (Seber & Wild 1989, §1.1).
No NIST StRD nonlinear-regression set is a single sine: ENSO (a sum of three sines) is the
nearest, and it is not among the reference copies here (tests/reference), so none is used.
The checks on analytic records only test ``guess``.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

import wavefit
from spice import needs_ngspice, simulate
from wavefit.fit.models import Sine
from wavefit.fit.sine import spectral_frequency, three_parameter_fit


@needs_ngspice
def test_rc_low_pass_gain_and_phase_from_an_ngspice_sine():
    res, cap, freq = 1e3, 100e-9, 1e3
    w_rc = 2 * math.pi * freq * res * cap
    dt = 1e-6
    t, v = simulate(f"V1 in 0 SIN(0.5 1 {freq:.6e})\nR1 in out {res:.6e}\nC1 out 0 {cap:.6e}", dt, 10e-3,
                    ["v(in)", "v(out)"])
    steady = t >= 2e-3  # 20 time constants after the start: the transient is below 1e-8 of the swing
    t = t[steady]
    model = Sine()
    fits = {}
    for node in ("v(in)", "v(out)"):
        y = v[node][steady]
        fits[node] = model.fit(y, model.guess(y, t=t), t=t).params
    source, out = fits["v(in)"], fits["v(out)"]
    # measured: 2e-14 and 6e-12 relative, the offset 6e-11 off
    assert source["frequency"].value == pytest.approx(freq, rel=1e-9)
    assert out["frequency"].value == pytest.approx(freq, rel=1e-9)
    assert out["offset"].value == pytest.approx(0.5, abs=1e-8)  # DC gain 1
    # measured: gain 2.3e-7 relative and lag 3.7e-7 rad off (the simulator's integration error)
    assert out["amplitude"].value / source["amplitude"].value == pytest.approx(1 / math.hypot(1, w_rc), rel=2e-6)
    lag = (source["phase"].value - out["phase"].value) % (2 * math.pi)
    assert lag == pytest.approx(math.atan(w_rc), abs=2e-6)


def test_fixed_frequency_fit_is_the_ieee_1057_three_parameter_fit():
    # with the frequency fixed, fit_model's sine is the closed-form linear least squares of
    # IEEE 1057 §4.1.4.3, value and standard error (white noise, scatter estimated)
    rng = np.random.default_rng(11)
    t = np.arange(2000) * 2e-6
    freq = 1.3e3
    y = 0.7 * np.cos(2 * math.pi * freq * t + 0.9) - 0.05 + rng.normal(0, 0.02, t.size)
    design = np.column_stack((np.cos(2 * math.pi * freq * t), np.sin(2 * math.pi * freq * t), np.ones_like(t)))
    normal = design.T @ design
    a0, b0, c0 = np.linalg.solve(normal, design.T @ y)
    rss = float(np.sum((y - design @ np.array([a0, b0, c0])) ** 2))
    c0_std = math.sqrt(rss / (t.size - 3) * np.linalg.inv(normal)[2, 2])

    model = Sine()
    params = model.make_params(amplitude=0.5, frequency=freq, phase=0.0, offset=0.0, t_ref=0.0)
    params["frequency"].set(vary=False)
    found = wavefit.fit_model(model, (t, y), params=params, noise="white")
    amplitude, phase = found.params["amplitude"].value, found.params["phase"].value
    assert amplitude == pytest.approx(math.hypot(a0, b0), rel=1e-9)
    assert amplitude * math.cos(phase) == pytest.approx(a0, rel=1e-9)
    assert -amplitude * math.sin(phase) == pytest.approx(b0, rel=1e-9)
    assert found.params["offset"].value == pytest.approx(c0, rel=1e-9)
    assert found.params["offset"].stderr == pytest.approx(c0_std, rel=1e-6)


def test_guess_on_an_analytic_sine_of_a_fractional_number_of_cycles():
    t = 1e-3 + np.arange(1000) * 1e-6
    truth = dict(amplitude=0.8, frequency=7777.7, phase=-2.0, offset=0.2)
    y = Sine().eval(t=t, t_ref=t[0], **truth)
    guess = Sine().guess(y, t=t)
    bin_width = 1.0 / (t.size * 1e-6)
    assert guess["frequency"].value == pytest.approx(truth["frequency"], abs=0.05 * bin_width)
    assert guess["t_ref"].value == t[0] and not guess["t_ref"].vary
    # at the true frequency the three-parameter fit is exact
    exact = three_parameter_fit(t, y, truth["frequency"], t_ref=t[0])
    assert exact.amplitude == pytest.approx(truth["amplitude"], rel=1e-12)
    assert exact.phase == pytest.approx(truth["phase"], abs=1e-12)
    assert exact.offset == pytest.approx(truth["offset"], abs=1e-12)


def test_a_record_with_no_sine_is_refused():
    with pytest.raises(ValueError, match="constant"):
        spectral_frequency(np.full(100, 0.3), 1e-6)
    with pytest.raises(ValueError, match="at least"):
        Sine().guess(np.zeros(3), t=np.arange(3.0))
