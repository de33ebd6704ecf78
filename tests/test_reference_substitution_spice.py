"""Reference-part substitution against ngspice (external reference: the circuit simulator).

One RL fixture (generator with output resistance and finite edges, coil with its DCR and
winding capacitance, sense resistor loaded by a probe) is simulated twice: with a reference
coil of known L and DCR, and with the coil under test. The synthetic scope applies the channel
gains 0.98 (drive) and 1.015 (sense), and the sense resistor's real value is 1 % above the
nominal the setup states (±1 %). The truth is the netlist's L of the coil under test.
"""
from __future__ import annotations

import contextlib
import io

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.cli import main
from wavefit.synth.scope import ScopeModel

from spice import needs_ngspice, simulate

R_SENSE_NOMINAL, R_SENSE_REAL = 10.0, 10.1  # the real resistor 1 % above its marking
R_SOURCE, PERIOD, TSTEP = 50.0, 400e-6, 100e-9
GAIN_DRIVE, GAIN_SENSE = 0.98, 1.015  # the synthetic scope's channel gain errors
PROBE_R, PROBE_C = 1e6, 12e-12
REFERENCE = (1.0e-3, 2.0)  # reference coil: L, DCR (netlist values)
DUT = (1.2e-3, 2.6)  # coil under test
KNOWN = "1 mH ±0.05%"  # the reference coil's calibration (its netlist value; a standard's certificate)


def fixture_capture(coil: tuple[float, float], seed: int) -> pd.DataFrame:
    """The fixture's drive and sense nodes, simulated by ngspice and recorded by the synthetic scope."""
    ind, dcr = coil
    edge = 20e-9
    netlist = f"""
V1 gen 0 PULSE(0 2 {0.15 * PERIOD:.6e} {edge:.3e} {edge:.3e} {PERIOD / 2 - edge:.6e} {PERIOD:.6e})
Rsrc gen drive {R_SOURCE}
L1 drive mid {ind:.6e}
Rdcr mid sense {dcr}
Cw drive sense 10p
Rsense sense 0 {R_SENSE_REAL}
Rprobe sense 0 {PROBE_R:.3e}
Cprobe sense 0 {PROBE_C:.3e}
"""
    t, v = simulate(netlist, TSTEP, 2.4 * PERIOD, ["v(drive)", "v(sense)"])
    rng = np.random.default_rng(seed)
    sense_amp = 2.0 * R_SENSE_REAL / (R_SOURCE + dcr + R_SENSE_REAL)
    sense = ScopeModel(noise_rms=sense_amp / 300, offset=0.003 * sense_amp, gain=GAIN_SENSE,
                       bits=8).apply(v["v(sense)"], rng)
    drive = ScopeModel(noise_rms=2.0 / 300, correlation_samples=8, gain=GAIN_DRIVE, bits=8).apply(v["v(drive)"], rng)
    return pd.DataFrame({"time": t - t[0], "drive": drive, "sense": sense})


SETUP = f"""method = "rl-step"
[columns]
time = "time"
sense = "sense"
drive = "drive"
[parts]
sense_resistor = "{R_SENSE_NOMINAL} ohm ±1%"
probe_resistance = "1 Mohm ±1%"
probe_capacitance = "12 pF ±2 pF"
[instrument]
vertical_gain = "±2%"
"""


@pytest.fixture(scope="module")
def bench(tmp_path_factory):
    """The reference capture analysed into ref.toml, and the two setups (with and without it)."""
    folder = tmp_path_factory.mktemp("bench")
    fixture_capture(REFERENCE, seed=11).to_csv(folder / "ref.csv", index=False)
    fixture_capture(DUT, seed=12).to_csv(folder / "dut.csv", index=False)
    (folder / "plain.toml").write_text(SETUP)
    (folder / "setup.toml").write_text(SETUP + '[calibration]\nreference = "ref.toml"\n')
    out = io.StringIO()
    with contextlib.redirect_stdout(out):
        code = main(["calibrate", "reference", str(folder / "ref.csv"), "--setup", str(folder / "plain.toml"),
                     "--part", f"L = {KNOWN}", "--out", str(folder / "ref.toml")])
    assert code == 0
    assert "correction factor" in out.getvalue()
    return folder


@needs_ngspice
@pytest.mark.ngspice
def test_substitution_brings_L_within_0p3_percent(bench):
    truth = DUT[0]
    corrected = wavefit.analyze(bench / "dut.csv", bench / "setup.toml")
    plain = wavefit.analyze(bench / "dut.csv", bench / "plain.toml")
    L, L_plain = corrected.quantities["L"], plain.quantities["L"]
    assert abs(L.value / truth - 1) < 0.003, L.value
    assert abs(L.value - truth) <= L.expanded_uncertainty, (L.value, L.expanded_uncertainty)
    # without the reference the gain ratio (3.6 %) and the sense resistor (1 %) are in the value
    assert abs(L_plain.value / truth - 1) > 3 * abs(L.value / truth - 1)
    assert abs(L_plain.value / truth - 1) > 0.02
    # the reference's known uncertainty (0.05 % bound) and the two captures' type A are what is left
    assert L.expanded_uncertainty / L.value < 0.005
    # the quantities the reference does not correct keep their plain values
    for name in ("R", "tau", "I_final"):
        assert corrected.quantities[name].value == pytest.approx(plain.quantities[name].value, rel=1e-12)


@needs_ngspice
@pytest.mark.ngspice
def test_budget_shows_shared_inputs_cancelled(bench):
    corrected = wavefit.analyze(bench / "dut.csv", bench / "setup.toml")
    plain = wavefit.analyze(bench / "dut.csv", bench / "plain.toml")
    lines = {line.source: line for line in corrected.budget["L"]}
    plain_lines = {line.source: line for line in plain.budget["L"]}
    # pure scale factors of L: they cancel exactly in the ratio of the two evaluations
    for name in ("sense_resistor", "timebase", "vertical_gain_sense", "vertical_gain_drive"):
        before = plain_lines[name].contribution
        after = lines[name].contribution if name in lines else 0.0
        assert after < 1e-3 * before, (name, before, after)
    assert "known reference L (ref.toml)" in lines
    assert "reference tau_fit" in lines
    assert not any(w.startswith("L is") for w in corrected.warnings)


@needs_ngspice
@pytest.mark.ngspice
def test_reference_far_from_the_part_is_warned(bench, tmp_path):
    (tmp_path / "setup.toml").write_text(SETUP + f'[calibration]\nreference = "{bench / "ref.toml"}"\n')
    fixture_capture((0.3e-3, 1.0), seed=13).to_csv(tmp_path / "far.csv", index=False)
    result = wavefit.analyze(tmp_path / "far.csv", tmp_path / "setup.toml")
    assert any("times the reference part's" in w for w in result.warnings)


@needs_ngspice
@pytest.mark.ngspice
@pytest.mark.parametrize("known", ["1 H ±0.05%", "1 ±0.05%", "1 MH ±0.05%", "1.3 mH ±0.05%"])
def test_a_known_value_far_from_the_measured_one_is_refused(bench, tmp_path, known):
    # a prefix left out or mistyped (1 H, a plain 1 read in henries, 1 MH for 1 mH) gave
    # factors of 10³ to 10⁹ that every later analysis applied with exit 0; 30 % off is no
    # fixture's error either (MAX_CORRECTION_DEVIATION, 20 %)
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["calibrate", "reference", str(bench / "ref.csv"), "--setup", str(bench / "plain.toml"),
                     "--part", f"L = {known}", "--out", str(tmp_path / "ref.toml")])
    assert code == 4 and out.getvalue() == "" and not (tmp_path / "ref.toml").exists()
    assert "times what the capture measures, more than 20% from 1" in err.getvalue()
    # a file whose known value was edited afterwards is refused where it is used
    text = (bench / "ref.toml").read_text(encoding="utf-8")
    (tmp_path / "edited.toml").write_text(text.replace(f'known = "{KNOWN}"', f'known = "{known}"'), encoding="utf-8")
    assert f'known = "{known}"' in (tmp_path / "edited.toml").read_text(encoding="utf-8")
    (tmp_path / "setup.toml").write_text(SETUP + f'[calibration]\nreference = "{tmp_path / "edited.toml"}"\n')
    with pytest.raises(wavefit.SetupError, match="more than 20% from 1"):
        wavefit.analyze(bench / "dut.csv", tmp_path / "setup.toml")


# -- lc-ring: the tank capacitor as the shared input ----------------------------------------

C_TANK_MARKED, C_TANK_REAL = 1e-9, 1.02e-9  # the real capacitor 2 % above its marking
C_WINDING, C_PROBE_RING, R_FEED, R_PROBE_RING = 10e-12, 12e-12, 100e3, 10e6
RING_SETUP = {"method": "lc-ring", "columns": {"time": "t", "tank": "tank"},
              "parts": {"tank_capacitor": "1 nF ±5%", "stray_capacitance": "22 pF ±10%",
                        "parallel_load": f"{1 / (1 / R_FEED + 1 / R_PROBE_RING)} ohm ±1%"}}


def ring_capture(ind: float, dcr: float, seed: int) -> pd.DataFrame:
    """A tank of the coil and the capacitor rung by a step through the feed resistor (ngspice),
    recorded by the synthetic scope with its tank channel's gain 1.015."""
    c_total = C_TANK_REAL + C_WINDING + C_PROBE_RING
    dt = 2 * np.pi * np.sqrt(ind * c_total) / 30
    netlist = f"""
V1 in 0 PULSE(0 1 {8 * dt:.6e} {dt / 50:.6e} {dt / 50:.6e} 1 2)
Rf in tank {R_FEED:.6g}
L1 tank mid {ind:.6g}
R1 mid 0 {dcr:.6g}
Cw tank 0 {C_WINDING:.6g}
Ct tank 0 {C_TANK_REAL:.6g}
Rpr tank 0 {R_PROBE_RING:.6g}
Cpr tank 0 {C_PROBE_RING:.6g}
"""
    t, vec = simulate(netlist, dt / 4, 40 * 30 * dt, ["v(tank)"])
    t, v = t[::4], vec["v(tank)"][::4]
    y = ScopeModel(noise_rms=0.01 * float(np.abs(v).max()), gain=GAIN_SENSE, bits=8).apply(v, np.random.default_rng(seed))
    return pd.DataFrame({"t": t, "tank": y})


@needs_ngspice
@pytest.mark.ngspice
def test_lc_ring_substitution_cancels_the_tank_capacitor(tmp_path):
    ring_capture(1.0e-3, 20.0, seed=3).to_csv(tmp_path / "ref.csv", index=False)
    ring_capture(1.2e-3, 24.0, seed=4).to_csv(tmp_path / "dut.csv", index=False)
    import tomli_w

    (tmp_path / "plain.toml").write_bytes(tomli_w.dumps(RING_SETUP).encode())
    (tmp_path / "setup.toml").write_bytes(tomli_w.dumps(RING_SETUP | {"calibration": {"reference": "ref.toml"}})
                                          .encode())
    with contextlib.redirect_stdout(io.StringIO()):
        assert main(["calibrate", "reference", str(tmp_path / "ref.csv"), "--setup", str(tmp_path / "plain.toml"),
                     "--part", "L = 1 mH ±0.05%", "--out", str(tmp_path / "ref.toml")]) == 0
    corrected = wavefit.analyze(tmp_path / "dut.csv", tmp_path / "setup.toml").quantities["L"]
    plain = wavefit.analyze(tmp_path / "dut.csv", tmp_path / "plain.toml").quantities["L"]
    truth = 1.2e-3
    assert abs(plain.value / truth - 1) > 0.015  # the capacitor's 2 % is in the plain value
    assert abs(corrected.value / truth - 1) < 0.003, corrected.value
    assert abs(corrected.value - truth) <= corrected.expanded_uncertainty
    assert corrected.expanded_uncertainty < 0.2 * plain.expanded_uncertainty
