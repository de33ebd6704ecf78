"""Covariance of the code likelihood's maximum when the noise before the converter is correlated.

The code likelihood ℓ = Σ_i log P(code_i | θ, σ) (:mod:`wavefit.fit.code_likelihood`) treats
the samples as independent. When the noise before the converter is Gaussian but correlated
(a band-limited front end), each term is still the exact marginal likelihood of its sample,
so ℓ is a composite (independence) likelihood: its score has mean zero at the true
parameters and its maximum is consistent, but the inverse information understates the
scatter of that maximum (C. Varin, N. Reid and D. Firth, "An overview of composite
likelihood methods", Statistica Sinica 21 (2011) 5–42, §2.3). The covariance is then
Godambe's sandwich H⁻¹·J·H⁻¹ (V. P. Godambe, "An optimum property of regular maximum
likelihood estimation", Ann. Math. Statist. 31 (1960) 1208–1211, cited from memory), with

* H the expected information of the marginal terms, the same sum as for independent noise;
* J = var(Σ_i u_i), the variance of the summed per-sample scores u_i = ∂ℓ_i/∂(θ, σ), from
  their lag products truncated where the scores' correlation has died out: a
  heteroskedasticity-and-autocorrelation consistent estimate (L. P. Hansen, Econometrica 50
  (1982) 1029–1054), as :mod:`wavefit.fit.sandwich` forms it for least squares. When the
  truncated sum is not positive definite the Bartlett weights 1 − k/(K + 1), which always
  give a positive semi-definite estimate, are used instead (W. K. Newey and K. D. West,
  Econometrica 55 (1987) 703–708); and corrected for the part of the scores the fit absorbed
  (:func:`_absorbed_corrected`), without which it read 0.8 of the scatter of a line fitted
  at 0.1 code in AR(1) noise (``benchmarks/code_sandwich_study.py``).

The blocks (channels, windows) are taken as independent of each other, as the least-squares
sandwich takes them.
"""
from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from .code_likelihood import expected_information, information, scores
from .jacobian import Jacobian
from .lagged import Rows, lag_grams
from .noise_model import autocovariance
from .sandwich import positive_definite, correlation_extent

#: Longest lag of the scores' autocovariance looked at: scope front ends correlate their noise
#: over a few to a few tens of samples (common practice); a block shorter than four times
#: this is looked at to a quarter of its length.
MAX_SCORE_LAG = 100


def godambe_covariance(codes: np.ndarray, step: "float | np.ndarray", origin: "float | np.ndarray",
                       mean: np.ndarray, jac: Jacobian, sigma: np.ndarray, groups: np.ndarray,
                       blocks: Sequence[tuple[int, int]], sigma_known: bool) -> np.ndarray | None:
    """H⁻¹·J·H⁻¹ of the code likelihood's maximum (module docstring), on the model parameters.

    ``codes`` on the grid ``step``/``origin`` (scalars or per sample), ``mean`` the fitted
    model, ``jac`` its Jacobian in θ, ``sigma`` the noise per group and ``groups`` each
    sample's group; ``blocks`` the (start, stop) rows of each independent block, each in one
    group. σ is a parameter of the sandwich unless ``sigma_known``. None when H is singular
    or the result is not positive definite.
    """
    p, g = jac.params, sigma.size
    members = [groups == k for k in range(g)]
    size = p if sigma_known else p + g
    hessian = information(jac, mean, sigma, groups, members, step, origin)[:size, :size]
    s_mean, s_sigma = scores(codes, mean, sigma[groups], step)
    lags = {k: _score_lags(s_mean, [b for b in blocks if groups[b[0]] == k]) for k in range(g)}
    block_lags = [lags[int(groups[b[0]])] for b in blocks]
    parts = [_block_products(jac, s_mean, s_sigma, start, stop, int(groups[start]), p, sigma_known)
             for start, stop in blocks]
    meat = _weighted(parts, block_lags, size, bartlett=False)
    if not positive_definite(meat):
        meat = _weighted(parts, block_lags, size, bartlett=True)
    try:
        bread = np.linalg.inv(hessian)
    except np.linalg.LinAlgError:
        return None
    meat = _absorbed_corrected(meat, bread, jac, mean, sigma, groups, step, origin, blocks, block_lags,
                               sigma_known)
    cov = (bread @ meat @ bread)[:p, :p]
    cov = 0.5 * (cov + cov.T)
    return cov if positive_definite(cov) else None


def _score_lags(s_mean: np.ndarray, blocks: list[tuple[int, int]]) -> int:
    """Lags of the scores' autocovariance summed for one group: 1.5 times the lag after which
    their correlation stays within ±2/√n, plus one (the rule of :mod:`wavefit.fit.sandwich`)."""
    if not blocks:
        return 0
    shortest = min(b - a for a, b in blocks)
    max_lag = max(1, min(MAX_SCORE_LAG, shortest // 4))
    acov, n = autocovariance([s_mean[a:b] for a, b in blocks], max_lag)
    return min(int(math.ceil(1.5 * correlation_extent(acov, n))) + 1, max_lag)


def _block_products(jac: Jacobian, s_mean: np.ndarray, s_sigma: np.ndarray, start: int, stop: int, group: int,
                    p: int, sigma_known: bool) -> tuple[np.ndarray, Rows, int]:
    """The parameters a block's scores involve, and its rows of per-sample scores on them."""
    cols = jac.support(start, stop)
    columns = cols if sigma_known else np.concatenate((cols, [p + group]))

    def rows(a: int, b: int) -> np.ndarray:
        out = jac.dense(start + a, start + b, cols) * s_mean[start + a:start + b, None]
        return out if sigma_known else np.column_stack((out, s_sigma[start + a:start + b]))

    return columns, rows, stop - start


def _weighted(parts, lags: list[int], size: int, *, bartlett: bool) -> np.ndarray:
    """Σ over blocks of Σ_k w_k·(lag-k products of the scores), on all parameters."""
    meat = np.zeros((size, size))
    for (columns, rows, n), lag in zip(parts, lags):
        lag = min(lag, n - 1)
        grams = lag_grams(rows, n, columns.size, lag)
        k = np.arange(lag + 1)
        weights = 1.0 - k / (lag + 1.0) if bartlett else np.ones(lag + 1)
        meat[np.ix_(columns, columns)] += np.tensordot(weights, grams, axes=1)
    return meat


#: Fixed-point iterations of :func:`_absorbed_corrected`, and the relative change that ends them.
ABSORBED_ITERATIONS, ABSORBED_TOLERANCE = 50, 1e-8


def _absorbed_corrected(meat: np.ndarray, bread: np.ndarray, jac: Jacobian, mean: np.ndarray, sigma: np.ndarray,
                        groups: np.ndarray, step, origin, blocks, lags: list[int], sigma_known: bool) -> np.ndarray:
    """J corrected for the part of the scores the fit absorbed.

    At the maximum the scores are û_i ≈ u_i − A_i·H⁻¹·Σ_j u_j (A_i the sample's expected
    information, H = Σ A_i), so their truncated lag products fall short of J. Taking each
    sample's share of the long-run covariance as A_i·H⁻¹·J (which sums to J), the shortfall is
    E[Ĵ] ≈ J − sym(Σ_i A_i·V·B_i), V = H⁻¹·J·H⁻¹ and B_i = Σ_{|k|≤K} A_{i+k} the information
    within the lags summed; J is found from Ĵ by fixed-point iteration. This is the
    regression-residual correction of :func:`wavefit.fit.sandwich.fit_corrected_autocovariance`
    (after H. D. Patterson and R. Thompson, Biometrika 58 (1971) 545–554) carried to scores.
    The uncorrected Ĵ is returned when the iteration does not settle.
    """
    p, size = jac.params, meat.shape[0]
    i_mm, i_ms, i_ss = expected_information(mean, sigma[groups], step, origin)
    pieces = []
    for (start, stop), lag in zip(blocks, lags):
        cols = jac.support(start, stop)
        rows = jac.dense(start, stop, cols)
        columns = cols if sigma_known else np.concatenate((cols, [p + int(groups[start])]))
        q = columns.size
        info = np.einsum("i,ia,ib->iab", i_mm[start:stop], rows, rows)
        if not sigma_known:
            full = np.zeros((stop - start, q, q))
            full[:, :-1, :-1] = info
            full[:, :-1, -1] = full[:, -1, :-1] = i_ms[start:stop, None] * rows
            full[:, -1, -1] = i_ss[start:stop]
            info = full
        running = np.concatenate((np.zeros((1, q, q)), np.cumsum(info, axis=0)))
        n = stop - start
        lo, hi = np.clip(np.arange(n) - lag, 0, n), np.clip(np.arange(n) + lag + 1, 0, n)
        near = running[hi] - running[lo]
        # Σ_i A_i·V·B_i is linear in V: its four-index kernel Σ_i A_i[a,b]·B_i[c,d] is summed
        # once here, so that each iteration costs q⁴ products instead of n·q⁴
        kernel = (info.reshape(n, q * q).T @ near.reshape(n, q * q)).reshape(q, q, q, q)
        pieces.append((columns, kernel))
    current = meat
    for _ in range(ABSORBED_ITERATIONS):
        v = bread @ current @ bread
        shortfall = np.zeros((size, size))
        for columns, kernel in pieces:
            local = v[np.ix_(columns, columns)]
            shortfall[np.ix_(columns, columns)] += np.einsum("abcd,bc->ad", kernel, local)
        updated = meat + 0.5 * (shortfall + shortfall.T)
        if not np.all(np.isfinite(updated)):
            return meat
        change = np.max(np.abs(updated - current)) / max(np.max(np.abs(updated)), 1e-300)
        current = updated
        if change < ABSORBED_TOLERANCE:
            return current
    return meat
