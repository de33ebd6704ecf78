"""Plateau levels of quantised records from the counts of their codes.

External references: the normal distribution, from which the exact mean of a quantised
Gaussian level follows (B. Widrow and I. Kollár, Quantization Noise, Cambridge University
Press 2008, ch. 11); ngspice's transient solution of an RL fixture's drive node recorded by the
synthetic scope's two 8-bit channels with the issue's gains 0.98 and 1.015
(tests/channel_capture.py); Student's t quantiles for the 95 % intervals (JCGM 100:2008, G.3).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from wavefit.calibration.compare import compare_channels
from wavefit.calibration.level_likelihood import code_levels
from wavefit.errors import AnalysisRefused

from channel_capture import (FULL_SCALE, OTHER_GAIN, OTHER_OFFSET, PERIOD, REFERENCE_GAIN, REFERENCE_OFFSET,
                             comparison_frame, fixture_nodes)
from spice import needs_ngspice

TRUE_RATIO = OTHER_GAIN / REFERENCE_GAIN
#: The synthetic scope's code step: 255 steps over the full scale (8 bits).
CODE = (FULL_SCALE[1] - FULL_SCALE[0]) / 255
#: Seeds of the coverage studies, and the share of 95 % intervals that must hold the truth: a
#: binomial count of 40 at p = 0.95 falls below 34 (85 %) with probability under 1 %.
COVERAGE_SEEDS = 40
MIN_COVERAGE = 0.85
#: Share of the plain means' exact bias that the mean error over seeds may keep ("bias gone":
#: with 20 seeds the mean error's own scatter is about a tenth of that bias here).
RESIDUAL_BIAS_SHARE = 0.25


def exact_mean_offset(mu: float, sigma: float) -> float:
    """E[round(mu + sigma·Z)] − mu for a step of 1, from the normal distribution function."""
    codes = np.arange(math.floor(mu - 12 * sigma) - 1, math.ceil(mu + 12 * sigma) + 2)
    p = stats.norm.cdf((codes + 0.5 - mu) / sigma) - stats.norm.cdf((codes - 0.5 - mu) / sigma)
    return float(np.sum(codes * p) - mu)


def _covers(q, truth: float) -> bool:
    return abs(q.value - truth) <= stats.t.ppf(0.975, q.degrees_of_freedom) * q.standard_uncertainty


def _compare(frame):
    return compare_channels(frame["Time (s)"].to_numpy(), frame["CH1 (V)"].to_numpy(), frame["CH2 (V)"].to_numpy())


def _grid_shift(fraction: float) -> tuple[float, float]:
    """The full scale moved by a fraction of a code: the same waveform lands elsewhere between codes."""
    return FULL_SCALE[0] + fraction * CODE, FULL_SCALE[1] + fraction * CODE


@pytest.mark.parametrize("sigma", [0.2, 0.25, 0.3])
def test_levels_between_codes_are_unbiased_and_covered(sigma):
    # four plateaus of 400 samples at different places between codes (one in a code's middle,
    # whose tails on both sides tell σ), white noise below a code
    places = np.array([0.0, 0.3, 0.55, 0.8])
    windows = [(k * 400, (k + 1) * 400) for k in range(places.size)]
    errors, hits, sigmas = [], 0, []
    for seed in range(COVERAGE_SEEDS):
        rng = np.random.default_rng(seed)
        y = np.round(np.repeat(10.0 + places, 400) + sigma * rng.standard_normal(1600))
        levels = code_levels(y, windows, 1.0, float(np.std(y - np.repeat(10.0 + places, 400))), 1.0)
        u = np.sqrt(levels.variances + levels.sigma_sensitivity ** 2 * levels.sigma_variance)
        errors.append(levels.values - 10.0 - places)
        hits += int(np.sum(np.abs(levels.values - 10.0 - places) <= 1.96 * u))
        assert levels.bias_bound == 0.0
        sigmas.append(levels.sigma)
    plain_bias = np.array([exact_mean_offset(p, sigma) for p in places])
    mean_error = np.mean(errors, axis=0)
    assert np.all(np.abs(mean_error) <= RESIDUAL_BIAS_SHARE * np.max(np.abs(plain_bias))), (mean_error, plain_bias)
    assert hits >= MIN_COVERAGE * COVERAGE_SEEDS * places.size
    assert np.mean(sigmas) == pytest.approx(sigma, rel=0.1 if sigma >= 0.25 else 0.25)


def test_levels_on_one_code_keep_the_half_code_bound():
    # no sample leaves its code: the codes cannot tell σ, nor where in the code a level sits
    y = np.repeat([3.0, 7.0, 3.0, 7.0], 200)
    levels = code_levels(y, [(k * 200, (k + 1) * 200) for k in range(4)], 1.0, 0.0, 1.0)
    assert levels.sigma is None and levels.bias_bound == pytest.approx(0.5)  # GUM F.2.2.1
    assert np.array_equal(levels.values, [3.0, 7.0, 3.0, 7.0])


def _plain_ratio_bias(fraction: float, sigma: float) -> float:
    """Exact bias of the ratio of the plain means' level differences, for the fixture's settled
    drive levels (ngspice) read by the two channels with the grid moved by ``fraction``."""
    t, drive, _ = fixture_nodes()
    phase = ((t - 0.15 * PERIOD) % PERIOD) / PERIOD
    late = t > PERIOD
    high = float(drive[(phase > 0.3) & (phase < 0.48) & late].mean())
    low = float(drive[(phase > 0.8) & (phase < 0.98) & late].mean())
    origin = _grid_shift(fraction)[0]

    def read(v: float) -> float:
        return v + CODE * exact_mean_offset((v - origin) / CODE, sigma / CODE)

    def span(gain: float, offset: float) -> float:
        return read(gain * high + offset) - read(gain * low + offset)

    return span(OTHER_GAIN, OTHER_OFFSET) / span(REFERENCE_GAIN, REFERENCE_OFFSET) - TRUE_RATIO


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("correlation_samples", [0, 4], ids=["white", "band-limited"])
def test_ratio_intervals_cover_the_truth_with_levels_anywhere_between_codes(correlation_samples):
    hits = 0
    for seed in range(COVERAGE_SEEDS):
        fraction = (seed % 8) / 8
        noise = (0.2 + 0.1 * (seed % 5) / 4) * CODE
        frame = comparison_frame(seed=300 + seed, full_scale=_grid_shift(fraction),
                                 correlation_samples=correlation_samples, noise_rms=noise)
        try:
            hits += _covers(_compare(frame).gain_ratio, TRUE_RATIO)
        except AnalysisRefused:  # a refusal holds no interval: counted as a miss
            pass
    assert hits >= MIN_COVERAGE * COVERAGE_SEEDS, hits


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("correlation_samples", [0, 4], ids=["white", "band-limited"])
def test_ratio_bias_of_the_plain_means_is_gone(correlation_samples):
    fraction, noise = 0.25, 0.25 * CODE
    old_bias = _plain_ratio_bias(fraction, noise)
    assert abs(old_bias) > 0.004  # the plain means would miss by more than 0.4 %
    errors = [_compare(comparison_frame(seed=500 + seed, full_scale=_grid_shift(fraction),
                                        correlation_samples=correlation_samples, noise_rms=noise)).gain_ratio.value
              - TRUE_RATIO for seed in range(20)]
    assert abs(np.mean(errors)) < RESIDUAL_BIAS_SHARE * abs(old_bias), (np.mean(errors), old_bias)
