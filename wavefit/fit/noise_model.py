"""Noise models for least squares: white, or autoregressive (AR) for band-limited noise.

Scope noise is band-limited and the record oversampled, so neighbouring samples
are correlated and the white-noise covariance of a fit is too small. We fit an
AR(p) model to the residuals (Yule–Walker equations, order by the Bayesian
information criterion) and whiten the residual vector with its prediction-error
filter before refitting: two-stage feasible generalised least squares with
autoregressive errors (G. A. F. Seber and C. J. Wild, *Nonlinear Regression*,
Wiley 1989, ch. 6; D. Cochrane and G. H. Orcutt, J. Am. Stat. Assoc. 44 (1949)
32–61). The covariance of the refit is then the ordinary one of a white-noise
problem. The order is chosen by G. Schwarz's criterion, Ann. Stat. 6 (1978) 461–464.

The whitening is exact, the first p samples included: they are decorrelated with
the inverse Cholesky factor of their stationary covariance, the AR(p)
generalisation of S. J. Prais and C. B. Winsten's first-observation transform
(Cowles Commission Discussion Paper 383, 1954). Dropping them, as the conditional
(Cochrane–Orcutt) transform does, would throw away the most informative samples of
a window that starts at an edge: in strongly correlated noise the first sample
carries as much information as dozens of later ones.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from functools import cached_property
from typing import Callable

import numpy as np
from scipy.linalg import cholesky, solve_triangular, toeplitz
from scipy.signal import lfilter

from .lagged import lag_sums


@dataclass(frozen=True)
class ARNoise:
    """AR(p) noise: x[n] = Σ a_k x[n-k] + e[n], innovation standard deviation ``sigma_e``.

    ``filter`` is the prediction-error filter [1, -a_1, ..., -a_p].
    """

    coefficients: np.ndarray
    sigma: float
    sigma_e: float
    #: the model's autocovariance at lags 0 … p−1 (Yule–Walker reproduces the sample's)
    head_autocovariance: np.ndarray = field(default_factory=lambda: np.zeros(0))

    @property
    def order(self) -> int:
        return int(self.coefficients.size)

    @property
    def filter(self) -> np.ndarray:
        return np.concatenate(([1.0], -self.coefficients))

    def long_run_ratio(self) -> float:
        """Long-run variance over variance, Σ_k ρ_k: how many samples one independent one is worth."""
        if self.order == 0:
            return 1.0
        denom = 1.0 - float(np.sum(self.coefficients))
        if denom <= 1e-12:
            return math.inf
        return (self.sigma_e / denom) ** 2 / self.sigma ** 2

    @cached_property
    def head_whitener(self) -> np.ndarray:
        """L⁻¹ with L Lᵀ the stationary covariance of p consecutive samples."""
        chol = cholesky(toeplitz(self.head_autocovariance), lower=True)
        return solve_triangular(chol, np.eye(self.order), lower=True)

    def whiten(self, r: np.ndarray) -> np.ndarray:
        """``r`` transformed to independent unit-variance samples, as many as it has: the
        first p through :attr:`head_whitener`, the rest as scaled innovations."""
        return self.whiten_rows(lambda a, b: r[a:b], r.shape[0], 0, r.shape[0])

    def whiten_rows(self, rows: Callable[[int, int], np.ndarray], n: int, start: int, stop: int) -> np.ndarray:
        """Rows start..stop of :meth:`whiten` of the n-row array whose rows a..b are ``rows(a, b)``
        (each output row needs the p rows before it, and the first p the first p)."""
        if self.order == 0:
            return rows(start, stop) / self.sigma_e
        k = min(self.order, n)
        lo = max(0, start - self.order)
        r = rows(lo, stop)
        out = lfilter(self.filter, [1.0], r, axis=0)[start - lo:]
        out /= self.sigma_e  # (in place: a long record's rows are not copied again)
        if start < k:
            head = r[:k] if stop >= k else rows(0, k)
            out[: min(stop, k) - start] = (self.head_whitener[:k, :k] @ head)[start:stop]
        return out

    def whiten_adjoint(self, g: np.ndarray) -> np.ndarray:
        """Wᵀ g for the whitening W of :meth:`whiten` (same length as ``g``)."""
        return self.adjoint_rows(lambda a, b: g[a:b], g.shape[0], 0, g.shape[0])

    def adjoint_rows(self, rows: Callable[[int, int], np.ndarray], n: int, start: int, stop: int) -> np.ndarray:
        """Rows start..stop of :meth:`whiten_adjoint` of the n-row array given by ``rows``
        (each output row needs the p rows after it, and the first p the first p)."""
        if self.order == 0:
            return rows(start, stop) / self.sigma_e
        p = self.order
        k = min(p, n)
        g = rows(start, min(stop + p, n))
        out = np.zeros((stop - start,) + g.shape[1:])
        for j, fj in enumerate(self.filter):
            lo, hi = max(start, p - j), min(stop, n - j)  # rows i whose i + j is a row p..n of g
            if lo < hi:
                out[lo - start:hi - start] += fj * g[lo + j - start:hi + j - start]
        out /= self.sigma_e
        if start < k:
            head = g[:k] if start == 0 and g.shape[0] >= k else rows(0, k)
            out[: min(stop, k) - start] += (self.head_whitener[:k, :k].T @ head)[start:stop]
        return out

    def describe(self) -> dict:
        return {
            "kind": "white" if self.order == 0 else "autoregressive",
            "order": self.order,
            "sigma": self.sigma,
            "long_run_variance_ratio": self.long_run_ratio(),
        }


def autocovariance(blocks: list[np.ndarray], max_lag: int) -> tuple[np.ndarray, int]:
    """Pooled biased autocovariance of zero-mean blocks up to ``max_lag`` (lag products a chunk
    of samples at a time: :func:`wavefit.fit.lagged.lag_sums`)."""
    acov = np.zeros(max_lag + 1)
    total = 0
    for r in blocks:
        if r.size == 0:
            continue
        acov += lag_sums(np.asarray(r, dtype=float), float(r.mean()), max_lag)
        total += r.size
    return acov / max(total, 1), total


def fit_ar(blocks: list[np.ndarray], max_order: int = 30) -> ARNoise:
    """Choose and fit an AR model to residual blocks (Yule–Walker, order by BIC)."""
    acov, n = autocovariance(blocks, max_order)
    sigma = math.sqrt(max(acov[0], 0.0))
    if n < 8 or acov[0] <= 0:
        return ARNoise(np.zeros(0), sigma, sigma)
    max_order = int(min(max_order, max(0, n // 20)))
    best = (n * math.log(acov[0]), np.zeros(0), acov[0])
    for p, a, var_e in _durbin(acov, max_order):
        bic = n * math.log(var_e) + p * math.log(n)
        if bic < best[0]:
            best = (bic, a.copy(), var_e)
    _, a, var_e = best
    if a.size and not _is_stationary(a):
        return ARNoise(np.zeros(0), sigma, sigma)
    return ARNoise(np.asarray(a, dtype=float), sigma, math.sqrt(var_e), np.array(acov[: a.size]))


def _durbin(acov: np.ndarray, max_order: int):
    """The Yule–Walker AR(p) coefficients and prediction-error variance for p = 1 … max_order,
    each order from the one before (Durbin's recursion: the same solutions as solving each
    order's Toeplitz system, in O(p) per order); stops before an order whose prediction-error
    variance is not positive. The coefficients are a view of one array that the next order
    overwrites (no array is made per order): copy those to be kept.

    References
    ----------
    .. [1] J. Durbin, "The fitting of time-series models", Rev. Int. Stat. Inst. 28 (1960)
       233–244.
    """
    coefficients = np.zeros(max_order)
    turned = np.zeros(max_order)  # the previous order's coefficients in reverse
    var_e = float(acov[0])
    for p in range(1, max_order + 1):
        a = coefficients[:p - 1]
        reflection = (float(acov[p]) - float(a @ acov[p - 1:0:-1])) / var_e
        np.multiply(a[::-1], reflection, out=turned[:p - 1])
        a -= turned[:p - 1]
        coefficients[p - 1] = reflection
        var_e *= 1.0 - reflection * reflection
        if not var_e > 0:
            return
        yield p, coefficients[:p], var_e


def _is_stationary(a: np.ndarray) -> bool:
    roots = np.roots(np.concatenate(([1.0], -a)))
    return bool(np.all(np.abs(roots) < 0.999))


def white(sigma: float) -> ARNoise:
    """White noise of standard deviation ``sigma``."""
    return ARNoise(np.zeros(0), sigma, sigma)
