"""The fit-corrected residual autocovariance of the covariance sandwich (wavefit/fit/sandwich.py).

Reference: for residuals r = (I − N)ε of a linear least-squares fit, the expected lag products
are E[Σ r_i r_{i+k}] = tr(S_k (I − N) Σ (I − N)ᵀ) (expectation of a quadratic form, e.g.
G. A. F. Seber, *Linear Regression Analysis*, Wiley 1977, Theorem 1.7, cited from memory); the plain lag products
fall short of the noise's, the corrected estimate must not. Checked by Monte Carlo with noise of
known autocovariance (a moving average, whose autocovariance ends at its order).
"""
from __future__ import annotations

import numpy as np

from wavefit.fit.sandwich import fit_corrected_autocovariance

MA = np.array([1.0, 0.8, 0.5])                      # ε_t = e_t + 0.8 e_{t−1} + 0.5 e_{t−2}
GAMMA = np.array([MA @ MA, MA[:-1] @ MA[1:], MA[0] * MA[2]])   # 1.89, 1.2, 0.5 (exact)


def _draws(n: int = 40, trials: int = 3000):
    t = np.arange(n, dtype=float)
    model = np.column_stack([np.ones(n), np.exp(-t / 8.0), t * np.exp(-t / 8.0) / 8.0])
    jac = -model                                     # residual = data − model
    bread = np.linalg.inv(jac.T @ jac)
    hat = jac @ bread @ jac.T
    rng = np.random.default_rng(7)
    e = rng.standard_normal((trials, n + 2))
    eps = MA[0] * e[:, 2:] + MA[1] * e[:, 1:-1] + MA[2] * e[:, :-2]
    return eps - eps @ hat.T, jac, bread


def test_corrected_autocovariance_is_unbiased_where_the_plain_one_is_not():
    res, jac, bread = _draws()
    n = res.shape[1]
    lags = 2
    plain = np.array([[r[: n - k] @ r[k:] / (n - k) for k in range(lags + 1)] for r in res])
    corrected = np.array([fit_corrected_autocovariance([r], [jac], [jac], bread, lags, np.full(lags + 1, np.nan),
                                                       np.zeros_like(bread)) for r in res])
    se = corrected.std(axis=0, ddof=1) / np.sqrt(res.shape[0])
    assert np.all(np.abs(corrected.mean(axis=0) - GAMMA) < 4 * se), (corrected.mean(axis=0), GAMMA, se)
    # the plain estimate is short by far more than its sampling error (the fit absorbed noise)
    assert plain.mean(axis=0)[0] < GAMMA[0] - 10 * se[0]


def test_fallback_when_the_variance_comes_out_non_positive():
    _, jac, bread = _draws(trials=1)
    fallback = np.array([1.0, 0.0, 0.0])
    out = fit_corrected_autocovariance([np.zeros(jac.shape[0])], [jac], [jac], bread, 2, fallback,
                                       np.zeros_like(bread))
    assert out is fallback


def test_positive_gram_is_the_toeplitz_form_when_the_spectrum_is_non_negative():
    from wavefit.fit.sandwich import lagged_gram, positive_gram

    h = np.random.default_rng(3).standard_normal((300, 4))
    # MA(2) autocovariance: spectrum |1 + 0.8 e^{-iω} + 0.5 e^{-2iω}|² ≥ 0 everywhere
    assert np.allclose(positive_gram(h, GAMMA), lagged_gram(h, GAMMA), rtol=1e-12, atol=1e-9)


def test_positive_gram_stays_positive_semidefinite_for_a_truncated_estimate():
    from wavefit.fit.sandwich import lagged_gram, positive_gram

    h = np.random.default_rng(4).standard_normal((300, 3))
    h[:, 2] = np.cos(np.pi * np.arange(300)) * 0.1 + 0.05 * h[:, 2]   # weight near the Nyquist frequency
    truncated = 0.95 ** np.arange(12)   # an AR(1) autocovariance cut at lag 11: its spectrum dips below 0
    assert np.linalg.eigvalsh(positive_gram(h, truncated))[0] >= -1e-9
    assert np.linalg.eigvalsh(lagged_gram(h, truncated))[0] < 0       # the plain form does not


def test_shifted_traces_match_the_dense_matrices():
    # ⟨h, T_j U_k x⟩ against explicit shift matrices (T_0 = I, U_0 = 2I, else S_k + S_kᵀ)
    from wavefit.fit.sandwich import _shifted_traces

    rng = np.random.default_rng(5)
    for n, p, lags in ((40, 3, 5), (60, 2, 59), (7, 2, 6)):
        h, x = rng.standard_normal((n, p)), rng.standard_normal((n, p))

        def sym(k):
            return np.eye(n) if k == 0 else np.eye(n, k=k) + np.eye(n, k=-k)

        dense = np.array([[np.sum(h * (sym(j) @ ((2 * np.eye(n) if k == 0 else sym(k)) @ x)))
                           for j in range(lags + 1)] for k in range(lags + 1)])
        assert np.allclose(_shifted_traces(h, x, lags), dense, rtol=1e-10, atol=1e-9)


def test_held_influence_rows_give_the_chunked_covariance_bit_for_bit(monkeypatch):
    # The influence rows of a block short enough are computed once and held; the covariance
    # must be the one computed a chunk of rows at a time, to the last bit (same arithmetic).
    import wavefit.fit.sandwich as sandwich
    from wavefit.fit.engine import Block
    from wavefit.fit.jacobian import Jacobian, Piece
    from wavefit.fit.noise_model import ARNoise

    n = 30_000
    t = np.arange(2 * n, dtype=float)
    basis = lambda a, b: np.column_stack([np.ones(b - a), np.exp(-t[a:b] / 3e3), t[a:b] / n])  # noqa: E731
    jac = Jacobian(2 * n, [Piece(0, n, basis, np.array([[1.0, 0, 0, 0], [0, 1, 0, 0], [0, 0, 1, 0]])),
                           Piece(n, 2 * n, basis, np.array([[1.0, 0, 0, 0], [0, 0, 1, 0], [0, 0, 0, 1]]))])
    assert not jac.small
    rng = np.random.default_rng(11)
    r = np.empty(2 * n)
    for start, phi in ((0, 0.95), (n, 0.6)):    # AR(1) noise in each block
        e = rng.standard_normal(n)
        for i in range(1, n):
            e[i] += phi * e[i - 1]
        r[start:start + n] = e
    models = {"a": ARNoise(np.array([0.95]), 1 / np.sqrt(1 - 0.95 ** 2), 1.0, np.array([1 / (1 - 0.95 ** 2)])),
              "b": ARNoise(np.array([0.6]), 1 / np.sqrt(1 - 0.6 ** 2), 1.0, np.array([1 / (1 - 0.6 ** 2)]))}
    blocks = [Block(0, n, "a"), Block(n, 2 * n, "b")]
    dense = jac.toarray()
    white = np.vstack([models[b.group].whiten(dense[b.start:b.stop]) for b in blocks])
    bread = np.linalg.inv(white.T @ white)
    held = sandwich.sandwich_covariance(r, blocks, models, jac, bread, max_lag=300)
    monkeypatch.setattr(sandwich, "HELD_VALUES", 0)
    chunked = sandwich.sandwich_covariance(r, blocks, models, jac, bread, max_lag=300)
    assert held is not None and max(held[1].values()) > 96     # past the direct lag sums: the FFT's path
    assert np.array_equal(held[0], chunked[0]) and held[1] == chunked[1]


def test_the_lag_by_lag_path_of_the_correction_gives_the_all_lags_one(monkeypatch):
    # two ways of one sum: all lags at once when the lag Grams are small enough to hold, else
    # chunks of lags (the chunked matrix products replaced an einsum per lag, minutes at 1,000
    # lags on a spline of a few hundred coefficients); two blocks on overlapping parameters
    import wavefit.fit.sandwich as sandwich

    rng = np.random.default_rng(5)
    n, p, lags = 120, 6, 30
    jacs = [rng.standard_normal((n, p)) * (np.arange(p) < 4), rng.standard_normal((n, p)) * (np.arange(p) >= 2)]
    bread = np.linalg.inv(sum(j.T @ j for j in jacs))
    res = [rng.standard_normal(n) for _ in jacs]
    other = 0.01 * np.eye(p)
    fallback = np.full(lags + 1, np.nan)
    together = fit_corrected_autocovariance(res, jacs, jacs, bread, lags, fallback, other)
    for limit in (p * p, 3 * p * p):  # one lag, then three, per chunk
        monkeypatch.setattr(sandwich, "ALL_LAGS_VALUES", limit)
        chunked = fit_corrected_autocovariance(res, jacs, jacs, bread, lags, fallback, other)
        np.testing.assert_allclose(chunked, together, rtol=1e-10, atol=1e-12)
