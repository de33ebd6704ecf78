"""Cramér–Rao lower bounds for signals in Gaussian noise.

For a signal s(θ) observed in zero-mean Gaussian noise with covariance C, the
Fisher information is I(θ) = Jᵀ C⁻¹ J with J = ∂s/∂θ, and any unbiased
estimator has cov(θ̂) ≥ I(θ)⁻¹ (S. M. Kay, *Fundamentals of Statistical Signal
Processing: Estimation Theory*, Prentice Hall 1993, §3.9, eq. 3.31; for white
noise C = σ²·I). Band-limited noise is described by its autocovariance
sequence, and C⁻¹J is computed by a Toeplitz solve (Levinson recursion).
"""
from __future__ import annotations

from typing import Callable

import numpy as np
from scipy.linalg import solve_toeplitz


def numerical_jacobian(signal: Callable[[np.ndarray], np.ndarray], theta: np.ndarray,
                       rel_step: float = 1e-6) -> np.ndarray:
    """Central-difference Jacobian ∂s/∂θ of a signal model (columns = parameters)."""
    theta = np.asarray(theta, dtype=float)
    cols = []
    for k in range(theta.size):
        h = rel_step * max(abs(theta[k]), 1e-12)
        up, dn = theta.copy(), theta.copy()
        up[k] += h
        dn[k] -= h
        cols.append((signal(up) - signal(dn)) / (2 * h))
    return np.column_stack(cols)


def crlb(jacobian: np.ndarray, sigma: float | None = None,
         autocovariance: np.ndarray | None = None) -> np.ndarray:
    """Cramér–Rao bound matrix I(θ)⁻¹ for white noise (``sigma``) or stationary noise
    given by its ``autocovariance`` sequence r[0], r[1], … (zero beyond its length)."""
    j = np.asarray(jacobian, dtype=float)
    if autocovariance is None:
        if sigma is None:
            raise ValueError("give sigma or autocovariance")
        info = j.T @ j / sigma ** 2
    else:
        r = np.zeros(j.shape[0])
        r[: min(len(autocovariance), r.size)] = autocovariance[: r.size]
        info = j.T @ solve_toeplitz(r, j)
    return np.linalg.inv(info)
