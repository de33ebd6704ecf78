"""The white-noise fit of an exponential window solved by variable projection
(``white_window_tau``) against the fit it stands in for, ``fit_exponential_window``.

Truth here is that fit (lmfit's trust-region solve with the engine's noise model): where it
ends white, the projection must give its tau and tau's variance; where it does not (an AR
noise model, a code grid coarser than the noise), the projection must say None. Variable
projection gives the same minimum as the full problem (G. H. Golub and V. Pereyra, SIAM J.
Numer. Anal. 10 (1973) 413–432). The late-start model check of rl-step, which uses it, must
report what it reported when it refitted every window.
"""
from __future__ import annotations

import numpy as np
import pytest

import wavefit
import wavefit.methods._rl_windows as rl_windows
from wavefit.fit.exponential import WindowChannel, fit_exponential_window
from wavefit.fit.white_projection import white_window_tau
from wavefit.synth.scope import ScopeModel


def window(rng, n: int, channels: int, noise: float, correlation: float = 0.0, bits: int | None = None):
    """An exponential window of ``n`` samples over about eight tau (tau = 1), one or two channels
    (the second three times as noisy, so that weighing them matters)."""
    t = 2.5 + np.arange(n) * (8.0 / n)
    out = []
    for group, final, step, louder in (("sense", 0.2, -0.6, 1.0), ("drive", 1.0, -0.8, 3.0))[:channels]:
        clean = final + step * np.exp(-(t - t[0]))
        y = ScopeModel(noise_rms=noise * louder, correlation_samples=correlation).apply(clean, rng)
        if bits is not None:
            y = np.round(y * 2 ** bits) / 2 ** bits
        out.append(WindowChannel(group, t, y))
    return out


def is_white(fit) -> bool:
    return (fit.code_fit is None and fit.quantisation_widening is None
            and not any(m["order"] for m in fit.noise_model.values()))


@pytest.mark.parametrize("channels", [1, 2])
def test_white_windows_give_the_fits_tau_and_variance(channels):
    rng = np.random.default_rng(channels)
    compared = 0
    for n in (60, 400, 3000, 20000):
        for noise in (1e-3, 1e-2, 5e-2):
            chans = window(rng, n, channels, noise)
            fit = fit_exponential_window(chans, 0.7)
            found = white_window_tau(chans, 0.7)
            if found is None:
                continue  # left to the fit: always safe
            assert is_white(fit)  # never an answer where the fit is not white
            se = fit.stderr("tau")
            assert abs(found.tau - fit["tau"]) < 1e-3 * se
            assert found.variance == pytest.approx(se ** 2, rel=1e-3)
            assert found.amplitudes[0] == pytest.approx(fit["coef_sense"], abs=1e-3 * fit.stderr("coef_sense"))
            compared += 1
    assert compared >= 10  # the white windows were the rule, not the exception


def test_a_start_beyond_the_grid_gives_the_fits_tau_or_none():
    # tau0 a sixth of tau: the grid around it (to five times tau0) does not reach the minimum,
    # and its end is no answer
    rng = np.random.default_rng(9)
    for _ in range(20):
        chans = window(rng, 400, 1, 0.03)
        fit = fit_exponential_window(chans, 0.17)
        found = white_window_tau(chans, 0.17)
        if found is not None:
            assert abs(found.tau - fit["tau"]) < 1e-3 * fit.stderr("tau")


def test_correlated_noise_and_coarse_codes_are_left_to_the_fit():
    rng = np.random.default_rng(5)
    # band-limited noise of 8 samples' correlation: the fit takes an AR model
    chans = window(rng, 4000, 2, 1e-2, correlation=8.0)
    assert not is_white(fit_exponential_window(chans, 0.7))
    assert white_window_tau(chans, 0.7) is None
    # 6-bit codes under noise of a fifth of a code: the fit leaves the Gaussian likelihood
    chans = window(rng, 2000, 1, 0.2 / 64, bits=6)
    assert not is_white(fit_exponential_window(chans, 0.7))
    assert white_window_tau(chans, 0.7) is None
    # noise given, not estimated: not the white fit solved here
    assert white_window_tau(window(rng, 500, 1, 1e-2), 0.7, noise="known") is None


def _late_check(frame, setup):
    return wavefit.analyze(frame, setup).fit.model_check.variations[0]


@pytest.mark.parametrize("sense_only", [False, True])
def test_model_check_reports_what_the_refits_reported(monkeypatch, sense_only):
    from tests.test_model_adequacy import rl_record

    for seed, fast in ((0, 0.0), (1, 0.05), (2, 0.1)):
        frame, setup = rl_record(46, seed, fast_share=fast, edges=4)
        if sense_only:
            setup = {**setup, "columns": {"time": "t", "sense": "sense"},
                     "parts": {"sense_resistor": 10.0, "source_resistance": 50.0, "dut_resistance": 0.5}}
        projected = _late_check(frame, setup)
        with monkeypatch.context() as m:
            m.setattr(rl_windows, "white_window_tau", lambda *a, **k: None)  # every later window refitted
            refitted = _late_check(frame, setup)
        assert projected.z == pytest.approx(refitted.z, abs=1e-3)
        assert projected.varied["late_windows"] == pytest.approx(refitted.varied["late_windows"], rel=1e-9)


def test_a_channel_held_at_one_value_gives_no_answer_rather_than_a_division_by_zero():
    # a drive held at a converter limit through a later window has no scatter: it was weighed
    # by 1/0 (ZeroDivisionError, reported as "the analysis failed numerically"); the
    # projection now leaves such a window to the fit
    rng = np.random.default_rng(4)
    sense, drive = window(rng, 400, 2, 1e-3)
    held = WindowChannel(drive.group, drive.time, np.full(drive.time.size, 0.05))
    assert white_window_tau([sense, held], 0.7) is None
