"""Level of each plateau of a quantised record from the counts of the codes it hit.

An ideal converter of step Δ reads code c when the input lies between c − Δ/2 and c + Δ/2.
A plateau's samples are a constant level μ plus Gaussian noise of standard deviation σ, so
the number of samples reading each code is grouped (interval-censored) normal data, and the
maximum-likelihood (μ, σ) of those counts is consistent where the plain mean of the codes is
biased by the quantiser (by up to Δ/2 with no noise, ~0.08 Δ at σ = 0.27 Δ). Every plateau of
a channel has its own μ and the channel one σ (a scope's noise does not depend on the level
it reads, common practice), which lets a level that sits in the middle of a code borrow σ
from the other plateaus. The likelihood and its Fisher scoring are
:func:`wavefit.fit.code_likelihood.fit_codes`.

The covariance of μ̂ is the inverse expected information, which counts the samples as
independent; correlated (band-limited) noise makes n samples worth n/ρ independent ones, so it
is scaled by the long-run variance ratio ρ of the channel's AR noise model, as for a plain
mean. When the codes cannot tell σ (every plateau reads one code, or nearly so), the level
is the plain mean and its quantisation error only bounded: half a code, rectangular
(JCGM 100:2008, F.2.2.1).

References
----------
.. [1] B. Widrow and I. Kollár, *Quantization Noise*, Cambridge University Press, 2008,
   ch. 4–5 and 11 (the quantiser as sampling of the input's distribution; the moments of its
   output for a Gaussian input).
.. [2] M. Kulldorff, *Contributions to the Theory of Estimation from Grouped and Partially
   Grouped Samples*, Almqvist & Wiksell, Stockholm, 1961 (maximum likelihood for grouped
   normal samples and its asymptotic variance; cited from memory).
.. [3] G. M. Tallis, "Approximate maximum likelihood estimates from grouped data",
   Technometrics 9(4), 599–606, 1967 (cited from memory).
.. [4] JCGM 100:2008 (GUM), 4.3.7 and F.2.2.1 (resolution of a digital indication).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..fit.code_likelihood import fit_codes
from ..signal.codes import code_grid

#: Smallest σ/Δ at which the codes tell σ, and with it a level's place between two codes: at
#: σ = 0.1 Δ a level in the middle of a code reads a neighbour with probability 2·Φ(−5) ≈ 6e-7,
#: so the counts carry no information on where in the code it sits.
MIN_SIGMA_CODES = 0.1
#: Starting σ/Δ of the scoring when the plateaus' scatter says less (all on one code).
START_SIGMA_CODES = 0.3


@dataclass(frozen=True)
class Levels:
    """The plateaus' levels on one channel, their variances with the noise's correlation
    counted, the input noise σ (None when the codes do not tell it) and the half-width of the
    rectangular bound of what the estimate leaves of the quantisation error (0 or Δ/2)."""

    values: np.ndarray
    variances: np.ndarray
    sigma: float | None
    bias_bound: float


def plain_levels(y: np.ndarray, windows: list[tuple[int, int]], sigma: float, long_run_ratio: float,
                 bias_bound: float) -> Levels:
    """Means of the windows with variance σ²·ρ/n, and the given quantisation bound."""
    n = np.array([b - a for a, b in windows], dtype=float)
    values = np.array([float(np.mean(y[a:b])) for a, b in windows])
    return Levels(values, sigma ** 2 * long_run_ratio / n, None, bias_bound)


def code_levels(y: np.ndarray, windows: list[tuple[int, int]], step: float, sigma: float,
                long_run_ratio: float) -> Levels:
    """Maximum-likelihood level of every window from its codes, one σ for them all (see the
    module's text); the plain means with a half-code bound when σ cannot be told.

    Parameters
    ----------
    y
        The channel's samples, on a code grid of step ``step``.
    windows
        (start, stop) of each plateau's averaging window, samples.
    sigma, long_run_ratio
        The recorded noise's standard deviation and long-run variance ratio ρ (AR model).
    """
    grid = code_grid(y, step)
    origin, step = grid if grid is not None else (float(np.min(y)), step)
    blocks = [origin + step * np.round((y[a:b] - origin) / step) for a, b in windows]
    codes = np.concatenate(blocks)
    owner = np.repeat(np.arange(len(blocks)), [b.size for b in blocks])
    design = np.zeros((codes.size, len(blocks)))
    design[np.arange(codes.size), owner] = 1.0
    start = np.array([float(np.mean(b)) for b in blocks])
    spread = float(np.sqrt(np.mean((codes - start[owner]) ** 2)))
    fit = fit_codes(codes, step, lambda theta: theta[owner], lambda theta: design, start,
                    np.zeros(codes.size, dtype=int), np.array([max(spread, START_SIGMA_CODES * step)]))
    if not fit.converged or fit.sigma[0] < MIN_SIGMA_CODES * step:
        return plain_levels(y, windows, sigma, long_run_ratio, 0.5 * step)
    return Levels(fit.values, np.diag(fit.covariance) * long_run_ratio, float(fit.sigma[0]), 0.0)
