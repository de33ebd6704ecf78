"""Whether residuals are white: the Ljung–Box portmanteau statistic.

Q = n(n + 2)·Σ_{k=1}^{h} ρ_k²/(n − k), χ² with h degrees of freedom for white residuals
(G. M. Ljung and G. E. P. Box, Biometrika 65 (1978) 297–303).
"""
from __future__ import annotations

import numpy as np
from scipy import stats

#: Structure that matters: significant (p below this) and with some autocorrelation above
#: NOTABLE_CORRELATION; weak structure from coarse quantisation alone (noise below one code)
#: stays below 0.1 (common practice for a portmanteau screen).
SIGNIFICANCE = 1e-4
NOTABLE_CORRELATION = 0.1


def ljung_box(e: np.ndarray) -> tuple[float, np.ndarray]:
    """p-value of the Ljung–Box statistic over h = min(20, n/5) lags, and the autocorrelations."""
    n = e.size
    h = int(min(20, max(1, n // 5)))
    ec = e - e.mean()
    denom = float(ec @ ec)
    rho = np.array([float(ec[:-k] @ ec[k:]) / denom for k in range(1, h + 1)]) if denom > 0 else np.zeros(h)
    q = n * (n + 2) * float(np.sum(rho ** 2 / (n - np.arange(1, h + 1))))
    return float(stats.chi2.sf(q, h)), rho


def structured(p_value: float, rho: np.ndarray) -> bool:
    """Both significant and large enough to matter."""
    return p_value < SIGNIFICANCE and float(np.max(np.abs(rho), initial=0.0)) > NOTABLE_CORRELATION
