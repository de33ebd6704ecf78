"""What the reader finds in a capture reaches the analysis: the setup's time column, the time
axis' own uncertainty, and the reader's warnings and notes, for every method."""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.io import capture_from_frame
from wavefit.methods import get_method
from wavefit.setup import load_setup
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave

# A 100 µH coil with 0.5 Ω DCR in a loop with a 50 Ω generator and a 10 Ω sense resistor:
# tau = L/R_loop = 100e-6/60.5 = 1.65 µs (the rl-step circuit, docs/method-rl-step.md).
L, DCR, R_SENSE, R_SOURCE = 100e-6, 0.5, 10.0, 50.0
SETUP = {
    "method": "rl-step",
    "columns": {"sense": 1},
    "parts": {"sense_resistor": "10 ohm", "source_resistance": "50 ohm", "dut_resistance": "0.5 ohm"},
}


def _step_record(seed: int = 1, interval: float = 4e-8) -> tuple[np.ndarray, np.ndarray]:
    t, _, sense = rl_square_wave(L, DCR, R_SENSE, R_SOURCE, 1.0, 40e-6, interval, 100e-6)
    noise = np.random.default_rng(seed).normal(0.0, 2e-4, t.size)
    return t - 5e-5, sense + noise


def _write(path: Path, rows: list[str]) -> Path:
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    return path


def test_time_axis_rebuilt_from_coarse_stamps_widens_the_timebase_input(tmp_path: Path) -> None:
    t, sense = _step_record()
    path = _write(tmp_path / "coarse.csv", [f"{a:.2E},{b:.6f}" for a, b in zip(t, sense)])
    result = wavefit.analyze(path, {**SETUP, "columns": {"time": 0, "sense": 1}})
    capture = wavefit.io.read_capture(path, time_column=0)
    assert capture.interval_uncertainty > 1e-5
    line = next(b for b in result.budget["L"] if b.source == "timebase")
    # the instrument's ±25 ppm bound (u = a/√3, JCGM 100:2008 4.3.7) and the axis in quadrature (5.1.2)
    assert line.standard_uncertainty == pytest.approx(math.hypot(25e-6 / math.sqrt(3), capture.interval_uncertainty))
    assert any("rebuilt as a uniform grid" in w for w in result.warnings)
    inductance = result.quantities["L"]
    assert abs(inductance.value - L) < inductance.expanded_uncertainty


def test_setup_time_column_is_honoured_for_a_file(tmp_path: Path) -> None:
    t, sense = _step_record(seed=2)
    path = _write(tmp_path / "swapped.csv", [f"{b:.6f},{a:.9e}" for a, b in zip(t, sense)])
    result = wavefit.analyze(path, {**SETUP, "columns": {"time": 1, "sense": 0}})
    inductance = result.quantities["L"]
    assert abs(inductance.value - L) < inductance.expanded_uncertainty


def test_header_less_time_is_noted_in_the_result(tmp_path: Path) -> None:
    t, sense = _step_record(seed=3)
    path = _write(tmp_path / "plain.csv", [f"{a:.9e},{b:.6f}" for a, b in zip(t, sense)])
    result = wavefit.analyze(path, SETUP)
    assert any("read as time" in note for note in result.fit.capture_notes)


def test_lc_ring_carries_the_readers_warnings(tmp_path: Path) -> None:
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.5)
    t, v = ringdown(tank, 2e-8, 4000)
    v = v + np.random.default_rng(4).normal(0.0, 1e-3, v.size)
    rows = [f"{a:.9e},{b:.6f}" for a, b in zip(t, v)]
    rows[2000] = rows[2000].split(",")[0] + ","  # one empty cell: filled, with a warning
    path = _write(tmp_path / "ring.csv", ["Time (s),tank (V)", *rows])
    result = wavefit.analyze(path, {"method": "lc-ring", "columns": {"tank": "tank"},
                                    "parts": {"tank_capacitor": "10 nF"}})
    assert any("filled by linear interpolation" in w for w in result.warnings)


def _one_channel_files(tmp_path: Path, shift: int = 0, rows: int | None = None) -> tuple[Path, Path]:
    """The rl-step record with drive and sense as two files, each ``time,volts`` (one channel per file)."""
    t, drive, sense = rl_square_wave(L, DCR, R_SENSE, R_SOURCE, 1.0, 40e-6, 4e-8, 100e-6)
    rng = np.random.default_rng(5)
    drive, sense = drive + rng.normal(0, 2e-4, t.size), sense + rng.normal(0, 2e-4, t.size)
    t = t - 5e-5
    n = rows or t.size
    sense_file = _write(tmp_path / "ch2.csv", [f"{a:.9e},{b:.6f}" for a, b in zip(t[:n], sense[:n])])
    drive_file = _write(tmp_path / "ch1.csv", [f"{a:.9e},{b:.6f}" for a, b in zip(t[shift:], drive[shift:])])
    return sense_file, drive_file


def test_a_channel_from_another_file(tmp_path: Path) -> None:
    sense_file, drive_file = _one_channel_files(tmp_path)
    setup_file = tmp_path / "setup.toml"
    setup_file.write_text('method = "rl-step"\n[columns]\nsense = 1\ndrive = { file = "ch1.csv", column = 1 }\n'
                          '[parts]\nsense_resistor = "10 ohm"\n', encoding="utf-8")
    result = wavefit.analyze(sense_file, setup_file)
    # with both channels the DCR is measured: R = (ΔD/ΔS − 1)·R_sense (docs/method-rl-step.md)
    for name, truth in (("L", L), ("R", DCR)):
        q = result.quantities[name]
        assert abs(q.value - truth) < q.expanded_uncertainty


def test_a_channel_file_with_another_time_axis_is_refused(tmp_path: Path) -> None:
    sense_file, _ = _one_channel_files(tmp_path, shift=3)
    setup = {"method": "rl-step", "columns": {"sense": 1, "drive": {"file": str(tmp_path / "ch1.csv"), "column": 1}},
             "parts": {"sense_resistor": "10 ohm"}}
    with pytest.raises(wavefit.CaptureError, match="does not share the time axis"):
        wavefit.analyze(sense_file, setup)


def test_skip_with_a_unit_is_the_same_as_in_seconds(tmp_path: Path) -> None:
    t, sense = _step_record(seed=6)
    path = _write(tmp_path / "plain.csv", ["Time (s),CH2 (V)", *[f"{a:.9e},{b:.6f}" for a, b in zip(t, sense)]])
    in_seconds = wavefit.analyze(path, {**SETUP, "options": {"skip": 3e-8}})
    with_unit = wavefit.analyze(path, {**SETUP, "options": {"skip": "30 ns"}})
    assert with_unit.quantities["L"].value == in_seconds.quantities["L"].value
    with pytest.raises(wavefit.SetupError, match="skip"):
        wavefit.analyze(path, {**SETUP, "options": {"skip": "30 nF"}})


def test_ring_window_with_units(tmp_path: Path) -> None:
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.5)
    t, v = ringdown(tank, 2e-8, 4000)
    v = v + np.random.default_rng(7).normal(0.0, 1e-3, v.size)
    path = _write(tmp_path / "ring.csv", ["Time (s),tank (V)", *[f"{a:.9e},{b:.6f}" for a, b in zip(t, v)]])
    setup = {"method": "lc-ring", "columns": {"tank": "tank"}, "parts": {"tank_capacitor": "10 nF"},
             "options": {"fit_start": "2 us", "fit_end": "70 us"}}
    result = wavefit.analyze(path, setup)
    assert result.fit.window_start_s == pytest.approx(2e-6, abs=2e-8)
    assert result.fit.window_end_s == pytest.approx(70e-6, abs=2e-8)
    with pytest.raises(wavefit.SetupError, match="fit_end"):
        wavefit.analyze(path, {**setup, "options": {"fit_end": "seventy"}})


@pytest.mark.parametrize("unit, scale, refused", [("V", 1.0, False), ("mV", 1e3, False), ("A", 0.1, True),
                                                  ("W", 1.0, True)])
def test_a_column_in_another_unit_than_its_role_is_refused(tmp_path: Path, unit, scale, refused) -> None:
    # a current probe's channel in A mapped to rl-step's sense role was read as volts over the
    # sense resistor: L ten times off with a 3 % U, no warning. Millivolts are volts scaled.
    t, sense = _step_record()
    path = _write(tmp_path / "step.csv", [f"Time (s),CH2 ({unit})"] + [f"{a:.9e},{b * scale:.9e}"
                                                                     for a, b in zip(t, sense)])
    setup = {**SETUP, "columns": {"time": "Time (s)", "sense": f"CH2 ({unit})"}}
    if refused:
        with pytest.raises(wavefit.errors.SetupError, match=f"role 'sense'.* is in {unit}, but rl-step reads"):
            wavefit.analyze(path, setup)
    else:
        assert wavefit.analyze(path, setup).value("L") == pytest.approx(L, rel=0.01)


@pytest.mark.parametrize("unit, shunt, refused", [("A", False, False), ("V", True, False), ("V", False, True),
                                                  ("A", True, True)])
def test_pulse_ramp_current_column_unit_follows_the_shunt(unit, shunt, refused) -> None:
    # the current column is the shunt's voltage with a shunt_resistor, a probe's amperes without:
    # the other way round the current was read a shunt's ohms off
    frame = pd.DataFrame({"t": np.arange(20) * 1e-6, f"i ({unit})": np.zeros(20), "v (V)": np.zeros(20)})
    capture = capture_from_frame(frame, time_column="t")
    parts = {"dut_resistance": "0.1 ohm", **({"shunt_resistor": "10 mohm"} if shunt else {})}
    setup = load_setup({"method": "pulse-ramp", "columns": {"time": "t", "current": f"i ({unit})",
                                                             "voltage": "v (V)"}, "parts": parts})
    method = get_method("pulse-ramp")
    if refused:
        with pytest.raises(wavefit.errors.SetupError, match="role 'current'"):
            method.check_channel_units([capture], setup)
    else:
        method.check_channel_units([capture], setup)
