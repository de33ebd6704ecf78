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

The covariance of (μ̂, σ̂) is the inverse expected information, which counts the samples as
independent; correlated (band-limited) noise makes n samples worth n/ρ independent ones, so it
is scaled by the long-run variance ratio ρ of the channel's AR noise model, as for a plain
mean. It is split in two parts: each level's variance with σ known, 1/I_μμ (independent from
plateau to plateau), and the error of σ̂ shared by all of them, which moves level i by
g_i·δσ with g_i = −I_μσ/I_μμ (the regression of μ̂_i on σ̂: a level close to a threshold
between two codes is told only as "so many σ from it").

When σ̂ is uncertain by more than a fraction of itself (every level straddles one threshold
and reaches no further code, so the counts tell each level's distance from its threshold in
units of σ but hardly σ itself), σ is taken as rectangular over the interval its profile
likelihood allows (deviance below ρ·χ²₁(0.99)), the levels are fitted at the interval's
middle, and the interval's half-width, over √3, is σ's standard uncertainty in the same
shared term (JCGM 100:2008, 4.3.7). Only when no such interval is found (the codes allow any
σ up to a code) is the level the plain mean with its quantisation error bounded by half a
code, rectangular (JCGM 100:2008, F.2.2.1); so too when a level's variance from the counts
reaches the half-code rectangle's (its samples on one code, the codes place it nowhere within
that code: an error shared by all plateaus of its state, not independent between them).

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

from ..fit.code_likelihood import CodeFit, expected_information, fit_codes, log_likelihood
from ..signal.codes import code_grid

#: Smallest σ/Δ at which the codes tell σ, and with it a level's place between two codes: at
#: σ = 0.1 Δ a level in the middle of a code reads a neighbour with probability 2·Φ(−5) ≈ 6e-7,
#: so the counts carry no information on where in the code it sits.
MIN_SIGMA_CODES = 0.1
#: Largest relative standard uncertainty of σ̂ for which a level's shift with σ is taken as
#: linear (g_i·δσ) with σ̂'s Fisher variance: beyond it the codes barely tell σ (levels that
#: each straddle one threshold and no more), the likelihood in σ is far from a parabola, and
#: σ's profile-likelihood interval is used instead.
MAX_SIGMA_RELATIVE_UNCERTAINTY = 0.25
#: σ/Δ grid on which the profile likelihood is searched for σ's interval: from MIN_SIGMA_CODES
#: to one code (above it the plain mean's bias is below 1e-8 Δ, Widrow and Kollár ch. 11) in
#: steps of 0.02 (an interval's ends known to a few per cent of a typical σ ≈ 0.25 Δ).
PROFILE_SIGMA_CODES = np.arange(10, 101, 2) / 100.0
#: χ²₁ quantile at 99 % for the profile interval of σ (rectangular on it: a wide reading).
PROFILE_DEVIANCE = 6.635
#: Starting σ/Δ of the scoring when the plateaus' scatter says less (all on one code).
START_SIGMA_CODES = 0.3


@dataclass(frozen=True)
class Levels:
    """The plateaus' levels on one channel; their independent variances (σ known) with the
    noise's correlation counted; the input noise σ (None when the codes do not tell it), the
    variance of σ̂ and each level's shift per unit of σ (g_i; zeros for plain means); and the
    half-width of the rectangular bound of what the estimate leaves of the quantisation error
    (0 or Δ/2)."""

    values: np.ndarray
    variances: np.ndarray
    sigma: float | None
    sigma_variance: float
    sigma_sensitivity: np.ndarray
    bias_bound: float


def plain_levels(y: np.ndarray, windows: list[tuple[int, int]], sigma: float, long_run_ratio: float,
                 bias_bound: float) -> Levels:
    """Means of the windows with variance σ²·ρ/n, and the given quantisation bound."""
    n = np.array([b - a for a, b in windows], dtype=float)
    values = np.array([float(np.mean(y[a:b])) for a, b in windows])
    return Levels(values, sigma ** 2 * long_run_ratio / n, None, 0.0, np.zeros(values.size), bias_bound)


def code_levels(y: np.ndarray, windows: list[tuple[int, int]], step: float, sigma: float,
                long_run_ratio: float) -> Levels:
    """Maximum-likelihood level of every window from its codes, one σ for them all (see the
    module's text); the plain means with a half-code bound when σ cannot be told at all.

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
    grouped = _Grouped(y, windows, origin, step)
    fit = grouped.fit(None)
    if fit.converged and fit.sigma[0] >= MIN_SIGMA_CODES * step:
        level_info, sensitivity, sigma_info = grouped.information(fit.values, float(fit.sigma[0]))
        sigma_variance = long_run_ratio / sigma_info if sigma_info > 0 else math.inf
        if math.sqrt(sigma_variance) <= MAX_SIGMA_RELATIVE_UNCERTAINTY * fit.sigma[0]:
            found = grouped.levels(fit.values, level_info, long_run_ratio, float(fit.sigma[0]), sigma_variance,
                                   sensitivity)
            return found or plain_levels(y, windows, sigma, long_run_ratio, 0.5 * step)
    interval = grouped.sigma_interval(long_run_ratio)
    if interval is None:
        return plain_levels(y, windows, sigma, long_run_ratio, 0.5 * step)
    low, high = interval
    middle = 0.5 * (low + high)
    fit = grouped.fit(middle)
    if not fit.converged:
        return plain_levels(y, windows, sigma, long_run_ratio, 0.5 * step)
    level_info, sensitivity, _ = grouped.information(fit.values, middle)
    found = grouped.levels(fit.values, level_info, long_run_ratio, middle, (high - low) ** 2 / 12.0, sensitivity)
    return found or plain_levels(y, windows, sigma, long_run_ratio, 0.5 * step)


class _Grouped:
    """The plateaus' samples snapped to the code grid, and the fits of their levels."""

    def __init__(self, y: np.ndarray, windows: list[tuple[int, int]], origin: float, step: float):
        blocks = [origin + step * np.round((y[a:b] - origin) / step) for a, b in windows]
        self.origin, self.step, self.count = origin, step, len(blocks)
        self.codes = np.concatenate(blocks)
        self.owner = np.repeat(np.arange(self.count), [b.size for b in blocks])
        self.design = np.zeros((self.codes.size, self.count))
        self.design[np.arange(self.codes.size), self.owner] = 1.0
        self.start = np.array([float(np.mean(b)) for b in blocks])
        self.spread = float(np.sqrt(np.mean((self.codes - self.start[self.owner]) ** 2)))

    def fit(self, sigma: float | None) -> CodeFit:
        """Levels and σ (or the levels at the given σ) of greatest likelihood."""
        sigma0 = sigma if sigma is not None else max(self.spread, START_SIGMA_CODES * self.step)
        return fit_codes(self.codes, self.step, lambda theta: theta[self.owner], lambda theta: self.design,
                         self.start, np.zeros(self.codes.size, dtype=int), np.array([sigma0]),
                         sigma_known=sigma is not None)

    def information(self, values: np.ndarray, sigma: float) -> tuple[np.ndarray, np.ndarray, float]:
        """Per level its information I_μμ and shift per unit of σ (−I_μσ/I_μμ), and σ's information
        with the levels unknown (Schur complement), for independent samples."""
        i_mm, i_ms, i_ss = expected_information(values[self.owner], np.full(self.codes.size, sigma), self.step,
                                                self.origin)
        level_info = np.bincount(self.owner, i_mm, self.count)
        cross = np.bincount(self.owner, i_ms, self.count)
        with np.errstate(divide="ignore", invalid="ignore"):
            sensitivity = np.where(level_info > 0, -cross / level_info, 0.0)
            sigma_info = float(np.sum(i_ss)) - float(np.sum(np.where(level_info > 0, cross ** 2 / level_info, 0.0)))
        return level_info, sensitivity, sigma_info

    def levels(self, values: np.ndarray, level_info: np.ndarray, long_run_ratio: float, sigma: float,
               sigma_variance: float, sensitivity: np.ndarray) -> Levels | None:
        """The levels with their variances ρ/I_μμ; None when one of them is as uncertain as a
        half-code rectangle (a level the codes place nowhere within its code, whose error is
        then the same on every plateau of its state, not independent)."""
        with np.errstate(divide="ignore"):
            variances = long_run_ratio / level_info
        if not np.all(variances < self.step ** 2 / 12.0):
            return None
        return Levels(values, variances, sigma, sigma_variance, sensitivity, 0.0)

    def sigma_interval(self, long_run_ratio: float) -> tuple[float, float] | None:
        """σ's interval from the profile likelihood on :data:`PROFILE_SIGMA_CODES` (its lower end
        0 when the grid's first point is inside); None when it reaches the grid's top."""
        sigmas = PROFILE_SIGMA_CODES * self.step
        profile = np.full(sigmas.size, -math.inf)
        for k, s in enumerate(sigmas):
            fit = self.fit(float(s))
            if np.all(np.isfinite(fit.values)):  # converged or not: a level on one code has no variance
                profile[k] = log_likelihood(self.codes, fit.values[self.owner], np.full(self.codes.size, s),
                                            self.step)
        inside = 2.0 * (np.max(profile) - profile) <= long_run_ratio * PROFILE_DEVIANCE
        if not np.any(inside) or inside[-1]:
            return None
        allowed = sigmas[inside]
        low = 0.0 if inside[0] else float(allowed.min())
        return low, float(allowed.max())
