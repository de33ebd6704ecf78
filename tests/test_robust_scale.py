"""The robust noise scales against their definitions.

The median is checked against ``numpy.median`` (the definition it must reproduce exactly), the
noise scales against the formulas they are documented by: 1.4826·MAD (Rousseeuw and Croux,
J. Amer. Statist. Assoc. 88 (1993) 1273–1283), the second difference's variance 6σ² of white
noise, and the distance to the nearer state level (IEEE Std 181-2011 state levels).
"""
from __future__ import annotations

import numpy as np
import pytest

from wavefit.signal.edges import state_noise_rms
from wavefit.signal.glitches import record_noise
from wavefit.signal.levels import StateLevels, state_levels
from wavefit.signal.robust import BRACKET_FROM, MAD_TO_SIGMA, mad_sigma, median


def _records() -> list[np.ndarray]:
    rng = np.random.default_rng(7)
    n = BRACKET_FROM + 1001
    out = []
    for size in (n, n + 1, 4 * n, 4 * n + 1, 17):  # odd and even lengths, and one below the bracket
        out += [rng.normal(size=size), rng.standard_t(2, size=size),
                np.round(rng.normal(0.0, 3.0, size)),  # integer codes: the median among many ties
                np.sort(rng.normal(size=size)),        # ordered: the sample brackets nothing useful
                np.sort(rng.normal(size=size))[::-1].copy()]
    ring = np.sin(0.001 * np.arange(n)) + rng.normal(0.0, 1e-3, n)
    spiky = rng.normal(size=n)
    spiky[::50] = np.inf
    out += [ring, spiky, np.full(n, 2.5), np.r_[np.zeros(n // 2), np.ones(n - n // 2)]]
    # evenly spaced samples that misrepresent the record: its median lies beyond the bracket,
    # on either side (the median is then found among all the values)
    for outlier in (-10.0, 10.0):
        misleading = rng.normal(size=n)
        misleading[::n // 4096] = outlier
        out.append(misleading)
    # ties at the bracket's bounds: a record of a few integer codes
    out.append(rng.integers(-2, 3, size=n).astype(float))
    return out


@pytest.mark.parametrize("k", range(len(_records())))
def test_median_is_numpys(k: int) -> None:
    values = _records()[k]
    assert median(values.copy()) == np.median(values)


def test_median_of_a_record_with_nan_is_nan() -> None:
    values = np.random.default_rng(1).normal(size=BRACKET_FROM * 2)
    values[12345] = np.nan
    assert np.isnan(median(values.copy()))


def test_mad_sigma_is_the_scaled_median_absolute_deviation() -> None:
    values = np.random.default_rng(2).standard_t(3, size=3 * BRACKET_FROM)
    expected = MAD_TO_SIGMA * np.median(np.abs(values - np.median(values)))
    assert mad_sigma(values.copy()) == pytest.approx(expected, rel=1e-15)


def _record_noise_by_definition(y: np.ndarray, code: float | None) -> float:
    second = y[2:] - 2.0 * y[1:-1] + y[:-2]
    scale = MAD_TO_SIGMA * np.median(np.abs(second - np.median(second))) / np.sqrt(6.0)
    changes = np.abs(np.diff(y))
    changes = changes[changes > 0]
    return max(scale, code or 0.0, float(changes.min()) if changes.size else 0.0)


@pytest.mark.parametrize("kind", ["noisy", "quiet grid", "quiet grid, step unknown", "coarse grid, step unknown",
                                  "flat"])
def test_record_noise_is_its_definition(kind: str) -> None:
    rng = np.random.default_rng(3)
    n = 3 * BRACKET_FROM
    y = np.where(np.arange(n) % 20000 < 10000, 1.0, 0.0)
    code = None
    if kind == "noisy":
        y = y + rng.normal(0.0, 0.01, n)
    elif kind.startswith("quiet grid"):
        # a quiet quantised trace: changes of one step, only now and then (late in the record)
        step = 0.004
        y = np.round((y + rng.normal(0.0, 0.0005, n)) / step) * step
        code = step if kind == "quiet grid" else None
    elif kind.startswith("coarse grid"):
        # noise of 0.6 steps: the second differences' scale is below one step, which the least
        # change (one step, from the first samples on) then is
        step = 0.004
        y = np.round((y + rng.normal(0.0, 0.6 * step, n)) / step) * step
    assert record_noise(y, code) == pytest.approx(_record_noise_by_definition(y, code), rel=1e-15)


@pytest.mark.parametrize("chunk", [None, 1000])
@pytest.mark.parametrize("amplitude, swapped", [(1.0, False), (-1.0, False), (1.0, True), (0.0, False)])
def test_state_noise_rms_is_the_spread_about_the_nearer_level(monkeypatch, amplitude: float, swapped: bool,
                                                              chunk: int | None) -> None:
    if chunk is not None:  # a long record, a chunk at a time
        monkeypatch.setattr("wavefit.signal.edges.CHUNK_VALUES", chunk)
    rng = np.random.default_rng(4)
    n = 3 * BRACKET_FROM
    # exponential relaxations between the levels, so that samples lie at every distance from them
    phase = np.arange(n) % 30000
    rising = phase < 15000
    clean = amplitude * np.where(rising, 1.0 - np.exp(-phase / 300.0), np.exp(-(phase - 15000) / 300.0))
    y = clean + rng.normal(0.0, 0.02, n)
    levels = state_levels(y) if amplitude else StateLevels(0.0, 0.0)
    if swapped:  # levels given high first: a negative amplitude
        levels = StateLevels(levels.high, levels.low)
    low, high = levels.low, levels.high
    dev = np.where(np.abs(y - low) < np.abs(y - high), y - low, y - high)
    near = dev[np.abs(dev) < 0.25 * abs(levels.amplitude)] if levels.amplitude else dev
    expected = MAD_TO_SIGMA * np.median(np.abs(near - np.median(near)))
    assert state_noise_rms(y, levels) == pytest.approx(expected, rel=1e-15)
    assert state_noise_rms(y, levels) == pytest.approx(0.02, rel=0.1)  # the relaxations widen it a little
    assert state_noise_rms(y[:0], levels) == 0.0
