"""The typed fit summaries and the JSON object ``fit`` they write.

The JSON ``fit`` object is a contract (docs/json-output.md): users' scripts read its keys,
in its order. Each method's summary is a frozen dataclass (wavefit/fit_summary.py); these
tests check that the keys stay those the contract lists, that every typed field is written
under its own name with its own value, and that the summary agrees with the fitted block
the measurement function was given. The records are closed-form circuit responses
(wavefit.synth: the RL step, the RLC ring) with scope-like noise, used only to obtain
results, never as a reference for their values.
"""
from __future__ import annotations

import dataclasses
import json
import math
from collections.abc import Mapping
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.fit_summary import PlainSummary
from wavefit.methods._model_check import MODEL_Z, CaptureChecks, ModelCheck
from wavefit.methods._ring import RingSummary
from wavefit.methods._rl_summary import StepFitSummary
from wavefit.methods.lc_sweep import SweepSummary
from wavefit.results import AnalysisResult, QuantityResult
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

# the keys of ``fit`` per method, in order (the contract of docs/json-output.md)
STEP_KEYS = ["model", "edges_fitted", "tau_fit", "tau_fit_standard_error", "tau_per_edge_spread",
             "skip_after_edge_s", "sample_interval_s", "type_a_dof", "type_a_estimator", "baseline_samples",
             "edges", "notes", "tau_rising", "tau_rising_standard_error", "tau_falling",
             "tau_falling_standard_error", "birge_ratio", "estimator", "model_check"]
EDGE_KEYS = ["direction", "t0", "window_start", "samples", "tau", "tau_standard_error", "noise_model",
             "ljung_box_p"]
RING_KEYS = ["model", "window_start_s", "window_end_s", "cycles", "cycles_above_noise", "samples_per_period",
             "amplitude_to_noise", "drift_check", "model_check", "residual_peak", "parameters", "n_samples",
             "n_effective", "dof", "noise_sigma", "noise_model", "diagnostics", "coil_loss"]
SWEEP_KEYS = ["model", "coil_loss", "slope", "intercept", "chi2", "dof", "p_value", "birge_ratio", "captures",
              "model_check"]
SWEEP_POINT_KEYS = ["source", "tank_capacitor", "f0", "inverse_w_squared", "u_inverse_w_squared", "cycles",
                    "adequate", "model_check"]
CHECK_KEYS = ["adequate", "varied", "threshold_z", "parameters"]

L_COIL, DCR, R_SENSE, R_SOURCE = 220e-6, 1.0, 10.0, 50.0
TAU = L_COIL / (R_SOURCE + DCR + R_SENSE)


def fit_json(result: AnalysisResult) -> dict:
    """``fit`` as a reader of the CLI's JSON gets it."""
    return json.loads(json.dumps(result.to_dict()))["fit"]


def assert_written(typed, data) -> None:
    """Every field of ``typed`` is in ``data`` under its own name with its own value (nested
    summaries alike); ``data`` holds nothing else but the class's properties."""
    if isinstance(typed, ModelCheck):
        assert list(data) == CHECK_KEYS[:3] + (["skipped"] if typed.skipped is not None else []) + ["parameters"]
        assert (data["adequate"], data["varied"], data["threshold_z"]) == (typed.adequate, typed.varied, MODEL_Z)
        assert data.get("skipped") == typed.skipped
        assert list(data["parameters"]) == [v.parameter for v in typed.variations]
        for v in typed.variations:
            entry = data["parameters"][v.parameter]
            assert (entry["reported"], entry["z"], entry["significant"]) == (v.reported, v.z, v.significant)
            assert all(entry[k] == x for k, x in {**v.basis, **v.varied}.items())
        return
    if dataclasses.is_dataclass(typed):
        written = set()
        for f in dataclasses.fields(typed):
            value = getattr(typed, f.name)
            if f.name == "fit_details":  # the ring fit's own summary, written at this level
                for key, x in value.items():
                    assert_written(x, data[key])
                written |= set(value)
            elif f.name == "capture_notes":  # written last, only when there are any
                if value:
                    assert list(data)[-1] == "capture_notes" and data["capture_notes"] == list(value)
                    written.add(f.name)
                else:
                    assert "capture_notes" not in data
            elif value is None and f.name not in data:
                continue  # an entry only some fits have
            else:
                assert_written(value, data[f.name])
                written.add(f.name)
        for key in set(data) - written:
            assert isinstance(getattr(type(typed), key, None), property), key
            assert data[key] == getattr(typed, key)
        return
    if isinstance(typed, Mapping):
        assert list(data) == [str(k) for k in typed]
        for key, x in typed.items():
            assert_written(x, data[str(key)])
        return
    if isinstance(typed, (tuple, list)):
        assert len(data) == len(typed)
        for x, d in zip(typed, data):
            assert_written(x, d)
        return
    if isinstance(typed, (float, np.floating)) and not math.isfinite(typed):
        assert data is None  # JSON has no inf/NaN
        return
    assert data == typed and type(data) is not dict


def _block(result: AnalysisResult, name: str) -> tuple[float, float, float]:
    """Value, standard error and degrees of freedom of a fitted parameter as propagated."""
    for block in result.fitted:
        if name in block.names:
            i = block.names.index(name)
            return block.values[i], math.sqrt(block.covariance[i][i]), block.degrees_of_freedom
    raise KeyError(name)


def test_rl_step_summary_is_its_json_and_its_fitted_block():
    t, drive, sense = rl_square_wave(L_COIL, DCR, R_SENSE, R_SOURCE, 1.0, 40 * TAU, TAU / 40, 130 * TAU,
                                     delay=5 * TAU)
    rng = np.random.default_rng(11)
    frame = pd.DataFrame({"time": t, "drive": ScopeModel(noise_rms=2e-3).apply(drive, rng),
                          "sense": ScopeModel(noise_rms=2e-4).apply(sense, rng)})
    setup = {"method": "rl-step", "columns": {"time": "time", "drive": "drive", "sense": "sense"},
             "parts": {"sense_resistor": "10 ohm ±0.1%"}}
    result = wavefit.analyze(frame, setup)
    fit, data = result.fit, fit_json(result)
    assert isinstance(fit, StepFitSummary)
    # rising and falling edges, several of them, the drive recorded: every optional key but the two
    # of edges placed from the sense trace alone (tests/test_rl_step_synthetic.py reads those)
    assert list(data) == STEP_KEYS
    assert all(list(edge) == EDGE_KEYS for edge in data["edges"])
    assert_written(fit, data)
    assert fit.edges_fitted == len(fit.edges) >= 4
    value, error, dof = _block(result, "tau_fit")
    assert (fit.tau_fit, fit.tau_fit_standard_error, fit.type_a_dof) == pytest.approx((value, error, dof),
                                                                                         rel=1e-12)


def _ring_frame(c_tank: float, seed: int) -> pd.DataFrame:
    tank = Tank(inductance=47e-6, tank_capacitor=c_tank, dcr=0.3, feed_resistance=1e6, winding_capacitance=30e-12)
    alpha, w_d = tank.poles()
    t, v = ringdown(tank, 2 * math.pi / (25 * w_d), 1000, pre_trigger=50)
    noise = ScopeModel(noise_rms=float(np.abs(v).max()) / 1000)  # 60 dB below the ring's start
    return pd.DataFrame({"t": t, "v": noise.apply(v, np.random.default_rng(seed))})


def test_lc_ring_summary_is_its_json_and_its_fitted_block():
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
             "parts": {"tank_capacitor": "10 nF ±1%", "parallel_load": "1 Mohm ±1%"}}
    result = wavefit.analyze(_ring_frame(10e-9, seed=1), setup)
    fit, data = result.fit, fit_json(result)
    assert isinstance(fit, RingSummary)
    assert list(data) == RING_KEYS
    assert_written(fit, data)
    assert fit.coil_loss == "series"  # the option's default
    for parameter in ("alpha", "w_d"):
        value, error, dof = _block(result, f"fit {parameter}")
        entry = data["parameters"][parameter]
        assert (entry["value"], entry["standard_error"], data["dof"]) == pytest.approx((value, error, dof),
                                                                                        rel=1e-12)
    assert fit.model_check.variation("w_d").reported == data["parameters"]["w_d"]["value"]


def test_lc_sweep_summary_is_its_json_and_its_fitted_block(tmp_path: Path):
    entries = []
    for k, c_tank in enumerate((4.7e-9, 10e-9, 22e-9)):
        _ring_frame(c_tank, seed=k).to_csv(tmp_path / f"ring{k}.csv", index=False)
        entries.append(f'[[captures]]\nfile = "ring{k}.csv"\ntank_capacitor = "{c_tank} F ±1%"\n')
    (tmp_path / "sweep.toml").write_text('method = "lc-sweep"\n[columns]\ntime = "t"\ntank = "v"\n[parts]\n'
                                         'parallel_load = "1 Mohm ±1%"\n' + "".join(entries))
    result = wavefit.analyze(None, tmp_path / "sweep.toml")
    fit, data = result.fit, fit_json(result)
    assert isinstance(fit, SweepSummary) and isinstance(fit.model_check, CaptureChecks)
    assert list(data) == SWEEP_KEYS
    assert all(list(point) == SWEEP_POINT_KEYS for point in data["captures"])
    assert list(data["model_check"]) == ["adequate", "varied", "inadequate_captures"]
    assert_written(fit, data)
    assert [p.source for p in fit.captures] == [str(tmp_path / f"ring{k}.csv") for k in range(3)]
    assert (fit.slope, fit.intercept) == (_block(result, "line slope")[0], _block(result, "line intercept")[0])


def test_a_plain_mapping_is_written_as_given_with_the_capture_notes_last():
    quantity = QuantityResult("L", 1e-6, "H", 1e-8, 2e-8, 2.0)
    result = AnalysisResult("outside", "x.csv", {"L": quantity}, {}, {"model": "a line", "points": 3})
    assert isinstance(result.fit, PlainSummary)
    assert result.to_dict()["fit"] == {"model": "a line", "points": 3}
    noted = result.fit.with_capture_notes(("first column read as time",))
    assert list(noted.to_dict().items()) == [("model", "a line"), ("points", 3),
                                             ("capture_notes", ["first column read as time"])]
