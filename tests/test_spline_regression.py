"""Regression splines: the derivative's band covers a known ramp's slope.

Reference: the closed form of the ramp y = a + b·(t/T)^1.5 (its slope 1.5·b·(t/T)^0.5/T),
sampled with band-limited noise and 8-bit codes by the synthetic scope. Over repeated noise
draws, z = (slope − truth)/u must be near unit normal: Schwarz's criterion alone leaves a
smoothing bias of the order of u (z rms 2–4), the undersmoothed knots do not.
"""
from __future__ import annotations

import numpy as np

from wavefit.fit.spline_regression import (choose_interior_knots, fit_spline, knots_at_steps,
                                           undersmoothed_knots)
from wavefit.synth.scope import ScopeModel

SAMPLES = 2500
DRAWS = 60


def _z_scores(knot_rule) -> np.ndarray:
    t = np.arange(SAMPLES) * 1e-7
    span = t[-1]
    y = 0.1 + 0.8 * (t / span) ** 1.5
    scope = ScopeModel(noise_rms=1 / 500, correlation_samples=3, bits=8, full_scale=(0.0, 1.0))
    rng = np.random.default_rng(11)
    z = []
    for _ in range(DRAWS):
        noisy = scope.apply(y, rng)
        spline = fit_spline(t, noisy, knot_rule(t, noisy), "current", "c")
        for position in (SAMPLES // 10, SAMPLES // 3, 2 * SAMPLES // 3):
            row = spline.basis(t[[position]], 1)[0]
            truth = 0.8 * 1.5 * (t[position] / span) ** 0.5 / span
            z.append((row @ spline.fit.values - truth) / np.sqrt(row @ spline.fit.covariance @ row))
    return np.asarray(z)


def test_undersmoothed_knots_give_a_slope_band_that_covers():
    z = _z_scores(lambda t, y: undersmoothed_knots(t, [y], y))
    assert np.sqrt(np.mean(z ** 2)) < 1.3
    assert np.mean(np.abs(z) <= 2) >= 0.88


def test_the_criterion_alone_leaves_a_bias_the_band_misses():
    z = _z_scores(lambda t, y: knots_at_steps(t, y, choose_interior_knots(t, [y], y)))
    assert np.sqrt(np.mean(z ** 2)) > 1.5
