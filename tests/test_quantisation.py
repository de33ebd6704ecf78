"""Resolution-limited records: noise below one converter code (Widrow & Kollár 2008, ch. 4-5)."""
import sys
from pathlib import Path

import numpy as np
import pytest

from wavefit.fit.quantisation import code_step, quantisation_shift

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from estimator_quality import Scenario, run_scenario  # noqa: E402


def test_code_step_of_a_quantised_record():
    y = 0.004 * np.round(np.sin(np.linspace(0, 20, 5000)) / 0.004) + 0.001
    assert code_step(y) == pytest.approx(0.004, rel=1e-9)
    assert code_step(np.random.default_rng(0).normal(size=5000)) is None


def test_shift_is_the_least_squares_image_of_the_quantisation_error():
    t = np.linspace(0, 5, 2000)
    model = 1 - np.exp(-t)
    jac = np.column_stack([np.ones_like(t), -np.exp(-t), -t * np.exp(-t)])
    step = 1 / 64
    quantised = step * np.round(model / step)
    shift, codes = quantisation_shift(quantised, model, jac, residual_rms=0.2 * step)
    # rms over eight sub-code positions of the grid of the least-squares image of Q(m) - m
    images = [np.linalg.lstsq(jac, step * (np.round(model / step + p) - p) - model, rcond=None)[0]
              for p in np.arange(8) / 8]
    assert np.abs(shift) == pytest.approx(np.sqrt(np.mean(np.square(images), axis=0)), rel=1e-6)
    assert codes == pytest.approx(0.2)
    assert quantisation_shift(quantised, model, jac, residual_rms=0.6 * step) is None  # dithered


@pytest.mark.parametrize("method", ["rl-step", "lc-ring"])
def test_undithered_8_bit_records_keep_honest_intervals(method):
    # 60 dB SNR with 8-bit codes: the noise is about 0.2 codes, so quantisation error is
    # deterministic; without its term the intervals covered the truth in 0-40 % of trials
    rows = run_scenario(Scenario(method, "8-bit", 60, "short"), trials=30, seed=8)
    for row in rows:
        assert row.coverage >= 0.9, row


@pytest.mark.parametrize("noise_codes", [0.0, 0.05])
def test_two_coarse_channels_with_flat_levels_are_analysed(noise_codes):
    # both channels 8-bit with noise far below a code: each pre-edge level reads one code.
    # This stopped the analysis with a singular matrix (one shift for both channels made the
    # levels' covariance rank one; a channel with zero scatter looked rank-deficient)
    import pandas as pd

    import wavefit
    from wavefit.synth.rl import rl_square_wave
    from wavefit.synth.scope import ScopeModel

    tau = 100e-6 / 60.5
    t, drive, sense = rl_square_wave(100e-6, 0.5, 10.0, 50.0, 1.0, 1.0, tau / 40, 25 * tau, delay=5 * tau)
    rng = np.random.default_rng(3)
    scopes = [ScopeModel(noise_rms=noise_codes * 1.2 / 256, bits=8, full_scale=(-0.1, 1.1)),
              ScopeModel(noise_rms=noise_codes * 0.2 / 256, bits=8, full_scale=(-0.02, 0.18))]
    frame = pd.DataFrame({"time": t, "drive": scopes[0].apply(drive, rng), "sense": scopes[1].apply(sense, rng)})
    result = wavefit.analyze(frame, {"method": "rl-step", "columns": {"time": "time", "drive": "drive", "sense": "sense"},
                                     "parts": {"sense_resistor": 10.0}})
    inductance = result.quantities["L"]
    assert abs(inductance.value - 100e-6) <= inductance.expanded_uncertainty
    assert inductance.expanded_uncertainty < 0.2 * inductance.value


def test_limiting_step_decided_from_a_few_values_agrees_with_the_whole_record():
    """The probe of the first values (``has_gap_below``) only spares sorting the record: a grid
    is resolution-limiting when the noise is below DITHER_LIMIT of its step, and the answer is
    the one the whole record's levels give (code_step), for fine and coarse grids, printed
    values, continuous values, and a record whose first values sit on one code."""
    from wavefit.fit.quantisation import DITHER_LIMIT, limiting_step

    rng = np.random.default_rng(3)
    wave = np.sin(np.linspace(0, 30, 20000))
    records = [0.004 * np.round((wave + s * rng.standard_normal(wave.size)) / 0.004) for s in (0.0005, 0.002, 0.02)]
    records += [np.round(wave + 0.01 * rng.standard_normal(wave.size), 4),  # printed to 4 decimals
                wave + 0.001 * rng.standard_normal(wave.size),              # continuous
                np.concatenate((np.full(300, 0.5), 0.004 * np.round(wave / 0.004)))]
    checked = {True: 0, False: 0}
    for y in records:
        whole = code_step(y)
        for rms in (1e-5, 1e-4, 0.001, 0.0019, 0.0021, 0.01, 0.1):
            expected = whole if whole is not None and rms < DITHER_LIMIT * whole else None
            assert limiting_step(y, rms) == expected
            checked[expected is not None] += 1
    assert min(checked.values()) >= 5  # both answers were exercised
