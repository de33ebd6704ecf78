"""The channel comparison against ngspice captures with known channel gains, offsets and skew.

External references: ngspice's transient solution of an RL fixture's drive node (see
tests/channel_capture.py), to which the synthetic scope applies the issue's gains 0.98
(reference) and 1.015 (other), offsets and a 3 ns skew; Student's t quantiles for the 95 %
intervals (JCGM 100:2008, G.3); for coherent sampling, the same fixture with 2 ns generator
edges recorded at a sample interval that divides the period, and the Rayleigh test's null
distribution (phases uniform on the circle).
"""
from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from wavefit.calibration.compare import compare_channels
from wavefit.calibration.edge_skew import COHERENCE_SIGNIFICANCE, interpolation_bound, rayleigh_p
from wavefit.errors import AnalysisRefused

from channel_capture import (FULL_SCALE, OTHER_GAIN, OTHER_OFFSET, PERIOD, REFERENCE_GAIN, REFERENCE_OFFSET,
                             SKEW, comparison_frame)
from spice import needs_ngspice

TRUE_RATIO = OTHER_GAIN / REFERENCE_GAIN
TRUE_OFFSET = OTHER_OFFSET - TRUE_RATIO * REFERENCE_OFFSET  # other − ratio·reference for one voltage
#: Seeds of the coverage study, and the share of 95 % intervals that must hold the truth: a
#: binomial count of 40 at p = 0.95 falls below 34 (85 %) with probability under 1 %.
COVERAGE_SEEDS = 40
MIN_COVERAGE = 0.85


def _compare(frame):
    return compare_channels(frame["Time (s)"].to_numpy(), frame["CH1 (V)"].to_numpy(), frame["CH2 (V)"].to_numpy())


def _covers(q, truth: float) -> bool:
    return abs(q.value - truth) <= stats.t.ppf(0.975, q.degrees_of_freedom) * q.standard_uncertainty


@needs_ngspice
@pytest.mark.ngspice
def test_applied_ratio_offset_and_skew_lie_within_their_uncertainty():
    estimate = _compare(comparison_frame(seed=0))
    assert _covers(estimate.gain_ratio, TRUE_RATIO), (estimate.gain_ratio, TRUE_RATIO)
    assert _covers(estimate.offset_difference, TRUE_OFFSET), (estimate.offset_difference, TRUE_OFFSET)
    assert _covers(estimate.skew, SKEW), (estimate.skew, SKEW)
    # the comparison resolves what it is for: the ratio's 3.6 % departure and a 3 ns skew
    assert estimate.gain_ratio.standard_uncertainty < 0.005
    assert estimate.skew.standard_uncertainty < 0.1e-9
    assert estimate.edges >= 8  # every edge of 5.3 periods but one at the record's start
    # the generator is not locked to the sample clock: the edges' phases spread, no bound is added
    assert estimate.note == "" and estimate.skew.degrees_of_freedom == estimate.edges - 1


#: Fast generator edges (2 ns) for the coherent captures: faster than the sampling resolves.
FAST_EDGE = 2e-9


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("sample_interval", [5e-9, 20e-9], ids=["5ns", "20ns"])
def test_coherent_sampling_bounds_the_interpolation_error(sample_interval):
    # the period is a whole number of samples (400 and 100): every edge at one phase of the clock
    assert (PERIOD / sample_interval) == pytest.approx(round(PERIOD / sample_interval), abs=1e-9)
    estimate = _compare(comparison_frame(seed=5, sample_interval=sample_interval, edge=FAST_EDGE, periods=6.3))
    skew = estimate.skew
    assert "coherent sampling" in estimate.note
    assert _covers(skew, SKEW), (skew, SKEW)
    # the scatter alone would have been confidently wrong: the type A part misses the truth by far
    type_a = math.sqrt(max(skew.standard_uncertainty ** 2 - interpolation_bound(sample_interval) ** 2 / 3, 0.0))
    assert abs(skew.value - SKEW) > 5 * type_a, (skew.value, type_a)


@needs_ngspice
@pytest.mark.ngspice
def test_a_period_off_the_sample_grid_keeps_todays_estimate():
    # 2 µs at 1.3 ns (1538.46 samples): edges walk through the sample interval, the scatter shows
    # the interpolation error; the skew is the plain mean with s/√n and n − 1 degrees of freedom
    estimate = _compare(comparison_frame(seed=5, edge=FAST_EDGE, periods=6.3))
    assert estimate.note == ""
    assert estimate.skew.degrees_of_freedom == estimate.edges - 1
    assert _covers(estimate.skew, SKEW), (estimate.skew, SKEW)


@pytest.mark.parametrize("n", [5, 12])
def test_rayleigh_false_alarms_of_uniform_phases_match_the_significance(n):
    # under uniform phases p < 1 % should occur about 1 % of the time; 4000 draws: the binomial
    # count at p = 0.01 lies within 40 ± 25 with probability above 99.9 %
    rng = np.random.default_rng(n)
    alarms = sum(rayleigh_p(rng.random(n)) < COHERENCE_SIGNIFICANCE for _ in range(4000))
    assert 15 <= alarms <= 65, alarms


def test_rayleigh_finds_one_phase_and_not_an_even_spread():
    assert rayleigh_p(np.full(5, 0.37)) < COHERENCE_SIGNIFICANCE
    assert rayleigh_p(np.arange(8) / 8) == pytest.approx(1.0)


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("correlation_samples", [0, 8], ids=["white", "band-limited"])
def test_95_percent_intervals_cover_the_truth_over_seeds(correlation_samples):
    hits = {"gain_ratio": 0, "offset_difference": 0, "skew": 0}
    truths = {"gain_ratio": TRUE_RATIO, "offset_difference": TRUE_OFFSET, "skew": SKEW}
    for seed in range(COVERAGE_SEEDS):
        estimate = _compare(comparison_frame(seed=100 + seed, correlation_samples=correlation_samples))
        for key, truth in truths.items():
            hits[key] += _covers(getattr(estimate, key), truth)
    for key, count in hits.items():
        assert count >= MIN_COVERAGE * COVERAGE_SEEDS, (key, count)


@needs_ngspice
@pytest.mark.ngspice
def test_other_node_is_refused():
    # the other probe on the sense resistor: a current's rise, not the drive node's decay
    with pytest.raises(AnalysisRefused, match="same"):
        _compare(comparison_frame(seed=1, other_node="sense"))


@needs_ngspice
@pytest.mark.ngspice
def test_one_edge_is_refused():
    with pytest.raises(AnalysisRefused, match="edges"):
        _compare(comparison_frame(seed=2, periods=0.6))


@needs_ngspice
@pytest.mark.ngspice
def test_clipped_record_is_refused():
    # the low settled level (0 V, read as -6 mV by the other channel) lies below the converter's
    # range, and with it the generator's undershoot after each falling edge
    with pytest.raises(AnalysisRefused, match="other channel is clipped"):
        _compare(comparison_frame(seed=3, full_scale=(-0.001, FULL_SCALE[1])))


@needs_ngspice
@pytest.mark.ngspice
def test_different_gain_settings_are_refused():
    frame = comparison_frame(seed=4)
    frame["CH2 (V)"] = 2.0 * frame["CH2 (V)"]  # a probe of another attenuation, or another volts/division
    with pytest.raises(AnalysisRefused, match="gain ratio"):
        _compare(frame)


@pytest.mark.parametrize("samples", [1, 2, 100])
def test_records_without_edges_are_refused(samples):
    t = np.arange(float(samples))
    noise = np.random.default_rng(samples).standard_normal((2, samples))
    with pytest.raises(AnalysisRefused):
        compare_channels(t, noise[0], noise[1])


def test_gaps_and_noise_free_levels_are_refused():
    t = np.arange(4000.0)
    square = np.tile(np.r_[np.zeros(500), np.ones(500)], 4)
    with pytest.raises(AnalysisRefused, match="gaps"):
        compare_channels(t, np.r_[np.nan, square[1:]], square)
    # a computed waveform without noise: no type A uncertainty, and levels that sit on the extremes
    with pytest.raises(AnalysisRefused):
        compare_channels(t, square, square)
