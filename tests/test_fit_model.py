"""wavefit.fit_model: any lmfit Model fitted with wavefit's noise model and covariance.

External reference: NIST Statistical Reference Datasets, nonlinear regression, Misra1a and
BoxBOD (https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml), certified values and
standard deviations read from the unchanged NIST files. With noise="white" the covariance
is s²·(JᵀJ)⁻¹, s² = RSS/(n − p), as NIST defines its certified standard deviations.
On a record with correlated noise the covariance is checked against wavefit's own ring fit
(the engine's AR whitening and sandwich estimate), which is what fit_model must reproduce.
"""
from __future__ import annotations

import math

import lmfit
import numpy as np
import pytest
from scipy.signal import lfilter

import wavefit
from test_fit_exponential import read_strd, sig_digits
from wavefit.fit.damped_sine import fit_damped_sine
from wavefit.fit.models import DampedSine, ExponentialStep
from wavefit.io.capture import Capture, Channel


def saturating(x, b1, b2):
    with np.errstate(over="ignore"):  # far-off trial steps of the solver
        return b1 * (1.0 - np.exp(-b2 * x))


@pytest.mark.parametrize("name", ["Misra1a.dat", "BoxBOD.dat"])
@pytest.mark.parametrize("start", [0, 1])
def test_nist_certified_values_and_standard_deviations(name, start):
    # NIST StRD Misra1a and BoxBOD: y = b1·(1 − exp(−b2·x)), both NIST starting points
    starts, certified, x, y = read_strd(name)
    model = lmfit.Model(saturating)
    found = wavefit.fit_model(model, (x, y), model.make_params(b1=starts[start][0], b2=starts[start][1]),
                              noise="white")
    for b in ("b1", "b2"):
        value, std = certified[b]
        assert sig_digits(found.params[b].value, value) >= 6, (b, found.params[b].value, value)
        assert sig_digits(found.params[b].stderr, std) >= 6, (b, found.params[b].stderr, std)


def test_expression_parameters_carry_the_certified_values():
    # Misra1a as a step from zero: coef = −final (an lmfit expression), t_ref fixed at 0
    starts, certified, x, y = read_strd("Misra1a.dat")
    model = ExponentialStep()
    params = model.make_params(final=starts[0][0], coef=-starts[0][0], tau=1.0 / starts[0][1], t_ref=0.0)
    params["coef"].set(expr="-final")
    found = wavefit.fit_model(model, (x, y), params, noise="white")
    final, coef, tau = found.params["final"], found.params["coef"], found.params["tau"]
    assert sig_digits(final.value, certified["b1"][0]) >= 6
    assert sig_digits(final.stderr, certified["b1"][1]) >= 6
    assert sig_digits(1.0 / tau.value, certified["b2"][0]) >= 6
    assert sig_digits(tau.stderr / tau.value ** 2, certified["b2"][1]) >= 5  # b2 = 1/tau, linearised
    assert coef.value == pytest.approx(-final.value, rel=1e-15)
    assert coef.stderr == pytest.approx(final.stderr, rel=1e-8)
    assert coef.correl["final"] == pytest.approx(-1.0, abs=1e-8)
    assert found.params["t_ref"].stderr is None and found.params["t_ref"].value == 0.0


def correlated_ring(seed: int = 7):
    """A damped sine in AR(1) noise (φ = 0.7), as a capture with one channel."""
    rng = np.random.default_rng(seed)
    dt, n = 1e-7, 3000
    t = 2e-6 + np.arange(n) * dt
    tau = t - t[0]
    y = 0.05 + np.exp(-2e3 * tau) * (0.8 * np.cos(2 * math.pi * 1e5 * tau) + 0.3 * np.sin(2 * math.pi * 1e5 * tau))
    y = y + lfilter([1.0], [1.0, -0.7], rng.normal(0, 0.02, n))
    capture = Capture(time=t, channels=(Channel("tank", "tank", "V", 1.0, y),), sample_interval=dt, source="ring")
    return capture, dt


def test_correlated_noise_covariance_matches_the_engines_ring_fit():
    capture, dt = correlated_ring()
    t, y = capture.time, capture.channels[0].values
    ring = fit_damped_sine(t, y, np.array([0.05, 0.8, 0.3, 2e3 * dt, 2 * math.pi * 1e5 * dt]), dt, noise="auto")
    model = DampedSine()
    params = model.make_params(offset=0.05, a=0.8, b=0.3, alpha=2e3, w_d=2 * math.pi * 1e5, t_ref=float(t[0]))
    found = wavefit.fit_model(model, capture, params, channel="tank")
    assert found.fit.noise_model["tank"]["order"] == ring.fit.noise_model["tank"]["order"] >= 1
    names = list(ring.fit.names)
    idx = [found.fit.names.index(n) for n in names]
    ours = found.fit.covariance[np.ix_(idx, idx)]
    sd = np.sqrt(np.diag(ring.fit.covariance))
    # measured 3e-7: the derivatives of an arbitrary model are taken by central differences
    assert np.max(np.abs(ours - ring.fit.covariance) / np.outer(sd, sd)) < 1e-5
    for n in names:
        k = names.index(n)
        assert found.params[n].stderr == pytest.approx(math.sqrt(ring.fit.covariance[k, k]), rel=1e-5)
    # the white-noise covariance of the same fit is far narrower: the noise model matters here
    white = wavefit.fit_model(model, capture, params, channel="tank", noise="white")
    assert white.params["w_d"].stderr < 0.6 * found.params["w_d"].stderr


def test_a_capture_with_several_channels_needs_one_named():
    capture, _ = correlated_ring()
    two = Capture(time=capture.time, channels=capture.channels + (Channel("drive", "drive", "V", 1.0,
                                                                          capture.channels[0].values),),
                  sample_interval=capture.sample_interval, source="two")
    with pytest.raises(ValueError, match="name one with channel="):
        wavefit.fit_model(DampedSine(), two)
    found = wavefit.fit_model(DampedSine(), two, channel="tank")  # guess() gives the start
    assert found.params["w_d"].value == pytest.approx(2 * math.pi * 1e5, rel=1e-3)
    assert "[[Variables]]" in found.fit_report()


def test_profile_intervals_of_a_straight_line_are_the_student_t_intervals():
    # for a model linear in its parameters the profile-likelihood interval is exactly
    # value ± t(p, n − p)·u (D. M. Bates and D. G. Watts, Nonlinear Regression Analysis and
    # its Applications, Wiley 1988, §6.1); lmfit finds its ends by root finding
    from scipy import stats

    rng = np.random.default_rng(11)
    x = np.linspace(0.0, 1.0, 40)
    y = 0.3 + 2.0 * x + rng.normal(0, 0.1, x.size)
    model = lmfit.models.LinearModel()
    found = wavefit.fit_model(model, (x, y), model.make_params(slope=1.0, intercept=0.0), noise="white",
                              intervals="profile", sigmas=(1.0, 2.0))
    for name in ("slope", "intercept"):
        value, u = found.params[name].value, found.params[name].stderr
        for level, prob in ((1, 0.682689492), (2, 0.954499736)):
            k = stats.t.ppf(0.5 + prob / 2, x.size - 2)
            lo, hi = found.intervals[name][2 - level][1], found.intervals[name][2 + level][1]
            assert lo == pytest.approx(value - k * u, rel=1e-4)
            assert hi == pytest.approx(value + k * u, rel=1e-4)
