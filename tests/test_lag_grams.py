"""The lagged Gram matrices xᵀ·T_k·x of the covariance sandwich, by their definition.

Reference: the definition itself, summed term by term (Σ_t x_tᵀ·x_{t+k} plus its transpose
for k ≥ 1), against both ways wavefit sums them: a matrix product per lag, and the FFT
(the correlation theorem) beyond ``DIRECT_LAGS`` lags, over chunks of rows.
"""
from __future__ import annotations

import numpy as np
import pytest

from wavefit.fit import lagged


def by_definition(x: np.ndarray, lags: int) -> np.ndarray:
    n, q = x.shape
    out = np.zeros((lags + 1, q, q))
    for k in range(lags + 1):
        for t in range(n - k):
            out[k] += np.outer(x[t], x[t + k])
        if k:
            out[k] += out[k].T.copy()
    return out


@pytest.mark.parametrize("direct", [True, False], ids=["direct", "fft"])
def test_lag_grams_match_their_definition(direct, monkeypatch):
    x = np.random.default_rng(2).standard_normal((300, 3))
    monkeypatch.setattr(lagged, "DIRECT_LAGS", 10 ** 6 if direct else -1)
    monkeypatch.setattr(lagged, "DIRECT_LAGS_WIDE", 10 ** 6 if direct else -1)
    got = lagged.lag_grams(lagged.array_rows(x), 300, 3, 40)
    np.testing.assert_allclose(got, by_definition(x, 40), rtol=1e-12, atol=1e-10)


def test_fft_lag_grams_span_chunk_boundaries(monkeypatch):
    # a record longer than one chunk: the products that reach across a chunk's end count once
    x = np.random.default_rng(3).standard_normal((2000, 2))
    monkeypatch.setattr(lagged, "DIRECT_LAGS", -1)
    monkeypatch.setattr(lagged, "chunk_rows", lambda columns: 256)
    got = lagged.lag_grams(lagged.array_rows(x), 2000, 2, 50)
    monkeypatch.setattr(lagged, "DIRECT_LAGS", 10 ** 6)
    direct = lagged.lag_grams(lagged.array_rows(x), 2000, 2, 50)
    np.testing.assert_allclose(got, direct, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(got[:3], by_definition(x, 2), rtol=1e-12, atol=1e-9)


@pytest.mark.parametrize("direct", [True, False], ids=["direct", "fft"])
@pytest.mark.parametrize("n", [5, 40, 1000])
def test_lag_sums_match_their_definition_across_chunks(direct, n, monkeypatch):
    # the autocovariance's sums Σ_t (x_t − c)·(x_{t+k} − c), term by term, against the direct
    # dot products over chunks of 64 rows (so that lags reach across chunk ends) and the FFT
    x = np.random.default_rng(n).standard_normal(n) + 0.7
    monkeypatch.setattr(lagged, "DIRECT_LAGS", 10 ** 6 if direct else -1)
    monkeypatch.setattr(lagged, "chunk_rows", lambda columns: 64)
    lags = 30
    centred = x - 0.7
    expected = [sum(centred[t] * centred[t + k] for t in range(n - k)) if k < n else 0.0 for k in range(lags + 1)]
    np.testing.assert_allclose(lagged.lag_sums(x, 0.7, lags), expected, rtol=1e-12, atol=1e-12)
