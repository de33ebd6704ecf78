"""Covariance of a (whitened) least-squares estimate under stationary correlated noise.

The feasible-GLS estimate solves min ‖W r(θ)‖² with W the whitening filter of
the fitted AR noise model. Linearised, θ̂ − θ = G ε with
G = (J_wᵀJ_w)⁻¹ J_wᵀ W and ε the raw noise, so cov(θ̂) = G Σ Gᵀ exactly, whatever
the noise, where Σ is the noise covariance. When the AR model describes the
noise, this equals the usual (J_wᵀJ_w)⁻¹; when it does not (for example noise
whose spectrum has a zero that no finite AR model whitens), the product still
holds. Σ is estimated from the residuals' autocovariance truncated at the lag
where the correlation has died out, i.e. a heteroskedasticity-and-autocorrelation
consistent (HAC) sandwich with a truncated kernel (L. P. Hansen, Econometrica 50
(1982) 1029–1054; W. K. Newey and K. D. West, Econometrica 55 (1987) 703–708),
applied to the GLS influence function rather than to OLS scores.
"""
from __future__ import annotations

import math
from typing import Sequence

import numpy as np


def correlation_extent(acov: np.ndarray, n: int, run: int = 10) -> int:
    """Smallest lag K after which ``run`` consecutive autocorrelations are within ±2/√n."""
    rho = acov / acov[0] if acov[0] > 0 else np.zeros_like(acov)
    band = 2.0 / math.sqrt(max(n, 1))
    inside = np.abs(rho[1:]) < band
    for k in range(inside.size - run + 1):
        if inside[k : k + run].all():
            return k
    return int(acov.size - 1)


def lagged_gram(h: np.ndarray, acov: np.ndarray) -> np.ndarray:
    """Σ_k γ_k Σ_n h_n h_{n+k}ᵀ over k = −K..K: hᵀ Σ h for Toeplitz Σ with autocovariance γ."""
    out = acov[0] * (h.T @ h)
    for k in range(1, acov.size):
        if k >= h.shape[0]:
            break
        c = h[:-k].T @ h[k:]
        out += acov[k] * (c + c.T)
    return out


def sandwich_covariance(r: np.ndarray, blocks: Sequence, models: dict, jw: np.ndarray,
                        bread: np.ndarray, max_lag: int) -> tuple[np.ndarray, dict[str, int]]:
    """G Σ Gᵀ with Σ from each noise group's residual autocovariance (see module doc).

    Returns the covariance and, per noise group, the number of lags used; the
    estimate of Σ then carries about n/(2·lags + 1) degrees of freedom
    (M. B. Priestley, *Spectral Analysis and Time Series*, Academic Press 1981,
    §6.2.4, for the truncated lag window).

    ``jw`` is the whitened Jacobian (rows as produced by the whitening of
    ``blocks`` in order) and ``bread`` = (J_wᵀJ_w)⁻¹.
    """
    from .noise_model import autocovariance

    extents: dict[str, int] = {}
    acovs: dict[str, np.ndarray] = {}
    for g in sorted({b.group for b in blocks}):
        segs = [r[b.start:b.stop] for b in blocks if b.group == g]
        acov, n = autocovariance(segs, max_lag)
        k = correlation_extent(acov, n)
        lags = min(int(math.ceil(1.5 * k)) + 1, acov.size - 1)
        extents[g] = lags
        # unbiased lag products: the pooled estimate divides by n, not by n − k
        acovs[g] = acov[: lags + 1] * n / np.maximum(n - np.arange(lags + 1) * len(segs), 1)
    meat = np.zeros_like(bread)
    for b in blocks:
        mod = models[b.group]
        meat += lagged_gram(mod.whiten_adjoint(jw[b.start:b.stop]), acovs[b.group])
    return bread @ meat @ bread, extents
