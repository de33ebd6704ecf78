"""The code likelihood's composite-likelihood sandwich (wavefit.fit.code_sandwich) on cases
with a known answer.

External references: the Godambe (sandwich) covariance H⁻¹·J·H⁻¹ of a composite likelihood's
maximum (C. Varin, N. Reid and D. Firth, Statistica Sinica 21 (2011) 5–42, §2.3); for
independent samples it equals the inverse information (the information identity J = H,
same source); and for the mean of AR(1) noise of coefficient φ the variance is (1 + φ)/(1 − φ)
times that of independent noise (M. B. Priestley, *Spectral Analysis and Time Series*,
Academic Press 1981, §5.3.2, from memory), so the inverse information, which ignores the
correlation, must fall short by about that factor. The "known answer" of each check is the
empirical variance of the estimates over repeated records.
"""
import numpy as np
import pytest
from scipy.signal import lfilter

from wavefit.fit.code_likelihood import fit_codes
from wavefit.fit.code_sandwich import godambe_covariance
from wavefit.fit.jacobian import as_jacobian

N, REPEATS, LEVEL, SIGMA = 2000, 200, 0.23, 0.3  # noise in codes (grid step 1)


def repeated_level_fits(phi: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A constant level on a grid of step 1 in AR(1) noise (marginal σ = SIGMA), fitted on its
    codes REPEATS times: the estimates, their sandwich variances and their inverse-information
    variances."""
    design = np.ones((N, 1))
    groups = np.zeros(N, dtype=int)
    estimates, sandwich, information = [], [], []
    for seed in range(REPEATS):
        rng = np.random.default_rng(seed)
        noise = lfilter([1.0], [1.0, -phi], rng.standard_normal(N + 200))[200:] * SIGMA * np.sqrt(1 - phi ** 2)
        codes = np.round(LEVEL + noise)
        found = fit_codes(codes, 1.0, lambda x: design @ x, lambda x: design, np.array([codes.mean()]), groups,
                          np.array([SIGMA]))
        assert found.converged
        cov = godambe_covariance(codes, 1.0, float(codes.min()), design @ found.values, as_jacobian(design),
                                 found.sigma, groups, [(0, N)], False)
        assert cov is not None
        estimates.append(found.values[0])
        sandwich.append(cov[0, 0])
        information.append(found.covariance[0, 0])
    return np.array(estimates), np.array(sandwich), np.array(information)


def test_the_sandwich_matches_the_scatter_of_a_level_in_ar1_noise_where_the_information_does_not():
    phi = 0.5
    estimates, sandwich, information = repeated_level_fits(phi)
    empirical = estimates.var(ddof=1)
    # the sample variance of 200 estimates is known to ±10 % (√(2/200)); the sandwich's own
    # estimate of J is noisier record by record but unbiased to a few per cent here
    assert 0.75 < sandwich.mean() / empirical < 1.3, (sandwich.mean(), empirical)
    # the information ignores the correlation: short by about (1 + φ)/(1 − φ) = 3
    assert information.mean() / empirical < 0.6, (information.mean(), empirical)
    assert abs(estimates.mean() - LEVEL) < 3 * np.sqrt(empirical / REPEATS)


def test_for_independent_noise_the_sandwich_agrees_with_the_information():
    estimates, sandwich, information = repeated_level_fits(0.0)
    assert sandwich.mean() / information.mean() == pytest.approx(1.0, abs=0.1)
    assert 0.75 < sandwich.mean() / estimates.var(ddof=1) < 1.3


def test_each_channel_may_have_its_own_code_grid():
    # two channels read one line on grids of different step and origin, in AR(1) noise
    # (φ = 0.6) of 0.15 of each one's code, which does not dither the converters: least squares
    # on the codes is biased by about one standard error (Widrow and Kollár, Quantization
    # Noise, 2008, ch. 4–5; measured 1.1–1.2 here), the code likelihood with one grid per
    # channel is not, and its sandwich intervals cover
    from wavefit.fit.engine import Block, fit_least_squares
    from wavefit.fit.quantisation import include_quantisation

    n = 1500
    steps, origins = np.array([1.0, 0.37]), np.array([0.0, 0.11])
    ramp = np.linspace(0.0, 1.0, n)
    plain, code, sd = [], [], []
    for seed in range(40):
        rng = np.random.default_rng(100 + seed)
        truth = np.array([0.6, 2.0])  # level and slope
        clean = np.concatenate([truth[0] + truth[1] * ramp, truth[0] + truth[1] * ramp])
        scale = np.repeat(steps, n)
        noise = 0.15 * scale * lfilter([1.0], [1.0, -0.6], rng.standard_normal(2 * n)) * np.sqrt(1 - 0.6 ** 2)
        base = np.repeat(origins, n)
        y = base + scale * np.round((clean + noise - base) / scale)
        design = np.column_stack([np.ones(2 * n), np.concatenate([ramp, ramp])])
        blocks = [Block(0, n, "a"), Block(n, 2 * n, "b")]
        fit = fit_least_squares(lambda x: y - design @ x, lambda x: -design, [0.0, 1.0], ("level", "slope"),
                                blocks, model="line")
        found = include_quantisation(fit, y, lambda x: design @ x, lambda x: design, blocks)
        assert found.code_fit is not None and found.code_fit.code_step == pytest.approx({"a": 1.0, "b": 0.37})
        plain.append(fit.values - truth)
        code.append(found.values - truth)
        sd.append(np.sqrt(np.diag(found.covariance)))
    plain, code, sd = np.array(plain), np.array(code), np.array(sd)
    spread = code.std(0)
    assert np.all(np.abs(code.mean(0)) < 3 * spread / np.sqrt(len(code)))
    assert np.max(np.abs(plain.mean(0)) / plain.std(0)) > 1.0
    assert np.mean(np.all(np.abs(code) <= 2 * sd, axis=1)) > 0.8
