"""The Ljung–Box statistic against its definition.

External reference: G. M. Ljung and G. E. P. Box, Biometrika 65 (1978) 297–303:
Q = n(n + 2)·Σ_{k=1}^{h} r_k²/(n − k) with r_k = Σ_t ê_t·ê_{t+k} / Σ_t ê_t² (ê the residuals about
their mean), χ² with h degrees of freedom for white residuals. The statistic sums its lag
products a chunk of samples at a time; records shorter and longer than a chunk must give the
definition's autocorrelations and p-value.
"""
from __future__ import annotations

import numpy as np
import pytest
from scipy import stats

from wavefit.fit.jacobian import chunk_rows
from wavefit.fit.portmanteau import ljung_box


def by_definition(e: np.ndarray, h: int) -> tuple[float, np.ndarray]:
    n = e.size
    d = e - e.mean()
    r = np.array([float(d[:n - k] @ d[k:]) for k in range(1, h + 1)]) / float(d @ d)
    q = n * (n + 2) * sum(r[k - 1] ** 2 / (n - k) for k in range(1, h + 1))
    return float(stats.chi2.sf(q, h)), r


@pytest.mark.parametrize("n", [6, 40, 333, chunk_rows(1) + 7])
def test_ljung_box_is_its_definition(n):
    rng = np.random.default_rng(n)
    e = 5.0 + np.convolve(rng.standard_normal(n + 2), [1.0, 0.6, 0.3])[2:n + 2]  # some correlation, an offset
    p, rho = ljung_box(e)
    p_def, rho_def = by_definition(e, rho.size)
    assert rho.size == min(20, max(1, n // 5))
    np.testing.assert_allclose(rho, rho_def, rtol=1e-10, atol=1e-13)
    assert p == pytest.approx(p_def, rel=1e-9, abs=1e-300)
