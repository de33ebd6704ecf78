"""The glitch rule of :mod:`wavefit.signal.glitches` against its definition, written out.

A sample is a glitch candidate when its departure from its neighbours' mean exceeds
GLITCH_SHAPE times the waveform's local curvature plus GLITCH_NOISE noise standard deviations
(the rule's own definition, module docstring; the thresholds are common practice).
"""
from __future__ import annotations

import numpy as np

from wavefit.signal.codes import CHUNK_VALUES
from wavefit.signal.glitches import GLITCH_NOISE, GLITCH_SHAPE, find_glitches


def _by_definition(y: np.ndarray, sigma: float) -> np.ndarray:
    departure = np.abs(y[2:-2] - 0.5 * (y[1:-3] + y[3:-1]))
    curvature = np.abs(y[3:-1] - y[1:-3]) + np.abs(y[4:] - y[3:-1]) + np.abs(y[1:-3] - y[:-4])
    return np.flatnonzero(departure > GLITCH_SHAPE * curvature + GLITCH_NOISE * sigma) + 2


def test_candidates_are_the_rules_across_chunks() -> None:
    # a slow sinusoid over more than one chunk, with noise well below the stated sigma (so the
    # curvature term is small and the threshold near GLITCH_NOISE·sigma), and samples displaced
    # by 11 to 15 sigma, either side of it, on flat and on sloping stretches
    rng = np.random.default_rng(11)
    n = CHUNK_VALUES + 300_000
    sigma = 0.01
    y = np.sin(2 * np.pi * np.arange(n) / 200_000) + rng.normal(0.0, 0.05 * sigma, n)
    where = rng.choice(np.arange(10, n - 10), 400, replace=False)
    where = np.r_[where, CHUNK_VALUES - 1, CHUNK_VALUES, CHUNK_VALUES + 1, CHUNK_VALUES + 2]
    y[where] += rng.choice([-1.0, 1.0], where.size) * rng.uniform(11.0, 15.0, where.size) * sigma
    expected = _by_definition(y, sigma)
    assert 100 < expected.size < where.size  # both sides of the threshold are represented
    assert np.array_equal(find_glitches(y, None, sigma), expected)


def test_jumps_are_the_rules_across_chunks() -> None:
    # a step from one sample to the next is a jump when it exceeds GLITCH_SHAPE times the steps
    # either side plus GLITCH_NOISE sigma; the mask marks it and the COINCIDENCE samples after it
    from wavefit.signal.glitches import COINCIDENCE, _after_jumps

    rng = np.random.default_rng(12)
    n = CHUNK_VALUES + 200_000
    sigma = 0.01
    y = np.cumsum(rng.choice([0.0, 1.0], n, p=[0.9995, 0.0005]) * rng.uniform(0.11, 0.15, n))
    y += rng.normal(0.0, 0.05 * sigma, n)
    step = np.abs(np.diff(y))
    leaps = np.flatnonzero(step[1:-1] > GLITCH_SHAPE * (step[:-2] + step[2:]) + GLITCH_NOISE * sigma) + 2
    expected = np.zeros(n, dtype=bool)
    for shift in range(COINCIDENCE + 1):
        expected[np.minimum(leaps + shift, n - 1)] = True
    assert 100 < leaps.size < np.count_nonzero(step > 0.1)  # both sides of the threshold
    assert np.array_equal(_after_jumps(y, None, sigma), expected)
