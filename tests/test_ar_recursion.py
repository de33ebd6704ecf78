"""The AR noise model's Yule–Walker solutions for every order by Durbin's recursion.

External reference: scipy.linalg.solve_toeplitz, which solves each order's Toeplitz system
on its own (Levinson's algorithm); the recursion must give the same coefficients and
prediction-error variances (J. Durbin, Rev. Int. Stat. Inst. 28 (1960) 233–244).
"""
from __future__ import annotations

import numpy as np
from scipy.linalg import solve_toeplitz

from wavefit.fit.noise_model import _durbin, autocovariance, fit_ar


def test_every_order_matches_the_toeplitz_solution():
    rng = np.random.default_rng(0)
    noise = np.convolve(rng.standard_normal(5000), [1.0, 0.8, 0.5, 0.2], "same")
    acov, _ = autocovariance([noise], 30)
    orders = [(p, a.copy(), var_e) for p, a, var_e in _durbin(acov, 30)]  # each order's own copy
    assert [p for p, _, _ in orders] == list(range(1, 31))
    for p, a, var_e in orders:
        direct = solve_toeplitz(acov[:p], acov[1:p + 1])
        np.testing.assert_allclose(a, direct, rtol=1e-10, atol=1e-12)
        np.testing.assert_allclose(var_e, acov[0] - direct @ acov[1:p + 1], rtol=1e-10)


def test_an_ar2_process_is_recovered():
    # x_t = 0.6 x_{t-1} - 0.3 x_{t-2} + e_t (a stationary AR(2), coefficients by construction)
    rng = np.random.default_rng(1)
    e = rng.standard_normal(200_000)
    x = np.zeros_like(e)
    for t in range(2, e.size):
        x[t] = 0.6 * x[t - 1] - 0.3 * x[t - 2] + e[t]
    model = fit_ar([x])
    assert model.order == 2
    np.testing.assert_allclose(model.coefficients, [0.6, -0.3], atol=0.01)
