"""pulse-ramp against ngspice: a capacitor bank switched across a flux-controlled saturating coil.

External reference: the ngspice transient of the bench in ``tests/saturation_capture.py``; the
coil's current is an explicit function of its flux linkage, so L_inc(i), λ(i) and the
saturation currents are exact (the law's closed forms, checked against ngspice's own λ in
``tests/test_saturation_fixture.py``). The noisy captures go through the synthetic scope:
noise 1/500 of full scale, correlated over 3 samples, 8 bits, the waveform filling 80 % of
the range.
"""
from __future__ import annotations

import functools
import re

import numpy as np
import pandas as pd
import pytest

import wavefit
from saturation_capture import PowerSaturation, PulseBench, noisy_scopes, pulse_capture, scope_for
from spice import needs_ngspice, simulate
from wavefit.synth.scope import ScopeModel

pytestmark = [needs_ngspice, pytest.mark.ngspice]

BENCH = PulseBench()
SOFT = PowerSaturation.with_saturation_current(100e-6, 4.0, 2.0)
HARD = PowerSaturation.with_saturation_current(220e-6, 3.0, 10.0)
LINEAR = PowerSaturation.linear(47e-6)


def setup(dcr_tolerance: str = "±2%") -> dict:
    return {"method": "pulse-ramp",
            "columns": {"time": "time", "current": "i_shunt", "voltage": "v_coil"},
            "parts": {"shunt_resistor": f"{BENCH.shunt_resistance} ohm ±0.1%",
                      "dut_resistance": f"{BENCH.dcr} ohm {dcr_tolerance}"},
            "instrument": {"vertical_gain": "exact", "timebase": "exact"}}


@functools.lru_cache(maxsize=None)
def analysed(law, noisy: bool, seed: int = 0):
    scopes = noisy_scopes(law, BENCH) if noisy else None
    frame, truth = pulse_capture(law, BENCH, scopes=scopes, seed=seed)
    return wavefit.analyze(frame, setup()), truth


def middle(curve) -> np.ndarray:
    """The points over 10–90 % of the reported current range."""
    x = curve.axis_values
    return (x >= x[0] + 0.1 * (x[-1] - x[0])) & (x <= x[0] + 0.9 * (x[-1] - x[0]))


#: Known defect (issue 18 stays open): at a hard core's knee the splines' smoothing bias is not
#: all in the band (z rms 1.3 there over six noise draws; 80–100 % of points inside per draw).
KNEE_BAND = pytest.mark.xfail(strict=True, reason="the band at a hard core's knee is too narrow")


@pytest.mark.parametrize("law, noisy", [
    pytest.param(SOFT, False, id="clean-soft"), pytest.param(HARD, False, id="clean-hard"),
    pytest.param(SOFT, True, id="8-bit-soft"), pytest.param(HARD, True, id="8-bit-hard", marks=KNEE_BAND)])
def test_incremental_inductance_and_saturation_current_against_the_law(law, noisy):
    result, truth = analysed(law, noisy)
    curve = result.curves["L_inc"]
    true_curve = law.incremental_inductance(curve.axis_values)
    error = curve.values / true_curve - 1
    assert np.max(np.abs(error[middle(curve)])) < 0.02, np.max(np.abs(error[middle(curve)]))
    inside = np.abs(curve.values - true_curve) <= curve.expanded_uncertainty
    assert inside.mean() >= 0.9, inside.mean()
    i_sat = result.quantities["I_sat_20"]
    true_sat = law.saturation_current(0.2)
    assert abs(i_sat.value / true_sat - 1) < 0.03
    assert abs(i_sat.value - true_sat) <= i_sat.expanded_uncertainty
    l0 = result.quantities["L0"]
    assert abs(l0.value - law.L0) <= l0.expanded_uncertainty


def test_a_quiet_record_keeps_the_saturated_end_of_the_ramp():
    """Without noise the scatter of the pulse's middle is nearly nothing, and the bank's droop
    as the core saturates was taken for ringing and masked: the hard core's curve ended at 51 %
    of the peak current. With the floor on that scatter it reaches 95 % of the peak (the
    coil's current from ngspice), and I_sat_20 matches the law's closed form to 0.5 %."""
    result, truth = analysed(HARD, False)
    assert result.curves["L_inc"].axis_values[-1] >= 0.95 * truth.peak_current
    assert abs(result.quantities["I_sat_20"].value / HARD.saturation_current(0.2) - 1) < 0.005


def test_flux_linkage_apparent_inductance_and_energy_against_the_law():
    result, truth = analysed(SOFT, True)
    flux = result.curves["flux_linkage"]
    true_flux = SOFT.flux_linkage(flux.axis_values)
    assert np.mean(np.abs(flux.values - true_flux) <= flux.expanded_uncertainty) >= 0.9
    apparent = result.curves["L_app"]
    assert np.max(np.abs(apparent.values / SOFT.apparent_inductance(apparent.axis_values) - 1)[middle(apparent)]) < 0.02
    e = result.quantities["E"]
    top = flux.axis_values[-1]
    assert abs(e.value - SOFT.energy(top)) <= e.expanded_uncertainty


def test_air_core_coil_is_flat_with_no_saturation_current():
    result, truth = analysed(LINEAR, True)
    curve = result.curves["L_inc"]
    assert np.mean(np.abs(curve.values - LINEAR.L0) <= curve.expanded_uncertainty) >= 0.9
    assert not {"I_sat_10", "I_sat_20", "I_sat_30"} & set(result.quantities)
    l0 = result.quantities["L0"]
    assert abs(l0.value / LINEAR.L0 - 1) < 0.01 and abs(l0.value - LINEAR.L0) <= l0.expanded_uncertainty


def test_falling_current_after_turn_off_is_compared_and_agrees():
    result, _ = analysed(SOFT, False)
    assert result.fit.falling_points_compared and result.fit.falling_points_compared > 10
    assert result.fit.falling_max_z < 4.0
    assert not any("rising and falling" in w for w in result.warnings)


def test_a_wrong_dcr_is_named_among_the_causes_of_a_rising_falling_disagreement():
    # the DCR's drop R·i is taken from the coil voltage: 15 % off, it moves L_inc one way on the
    # rising ramp and the other on the falling one; the warning named only the core
    frame, _ = pulse_capture(SOFT, BENCH, scopes=None, seed=0)
    wrong = setup()
    wrong["parts"] = {**wrong["parts"], "dut_resistance": f"{1.15 * BENCH.dcr} ohm ±2%"}
    result = wavefit.analyze(frame, wrong)
    assert any("rising and falling" in w and "dut_resistance off its true value" in w for w in result.warnings)


def test_a_voltage_on_few_undithered_codes_is_warned_with_its_bound():
    # the coil voltage is nearly constant through a pulse: on 8 bits over five times its span and
    # with noise far below a code, its level is known only to within a code, and L0 came out 2 %
    # low with an uncertainty of 0.5 % and no warning (a trial); the error is within the code's
    # share of the voltage that the warning gives, and within U
    clean, _ = pulse_capture(SOFT, BENCH)
    scopes = {"i_shunt": scope_for(clean["i_shunt"].to_numpy()),
              "v_coil": scope_for(clean["v_coil"].to_numpy(), span_fraction=0.2, noise_fraction=1e-5)}
    frame, _ = pulse_capture(SOFT, BENCH, scopes=scopes, seed=1)
    result = wavefit.analyze(frame, setup())
    (warning,) = [w for w in result.warnings if "voltage channel's code step" in w]
    share = float(re.search(r"is ([\d.]+) % of the pulse's", warning)[1]) / 100
    l0 = result.quantities["L0"]
    assert abs(l0.value / SOFT.L0 - 1) <= share
    # the level's input (± one code) carries it into the budget: the truth inside U (it was not)
    assert abs(l0.value - SOFT.L0) <= l0.expanded_uncertainty
    assert any(line.source == "voltage_level_in_code" for line in result.budget["L0"])
    assert not any("voltage channel's code step" in w for w in analysed(SOFT, True)[0].warnings)  # dithered
    # the same quiet voltage over 80 % of the screen: its falling ramp's fit had flat stretches
    # where L_inc divided by zero, and the capture was refused as a numerical failure
    scopes["v_coil"] = scope_for(clean["v_coil"].to_numpy(), span_fraction=0.8, noise_fraction=1e-5)
    frame, _ = pulse_capture(SOFT, BENCH, scopes=scopes, seed=1)
    result = wavefit.analyze(frame, setup())
    assert result.fit.falling_points_compared and any("voltage channel's code step" in w for w in result.warnings)


@functools.lru_cache(maxsize=1)
def three_pulses():
    """The soft core's record with three pulses, 8 bits and noise (analysed once for the tests)."""
    frame, _ = pulse_capture(SOFT, BENCH, pulses=3, scopes=noisy_scopes(SOFT, BENCH), seed=4)
    return wavefit.analyze(frame, setup())


def test_several_pulses_in_one_record_are_combined():
    result = three_pulses()
    assert result.fit.pulses == 3
    i_sat = result.quantities["I_sat_20"]
    assert abs(i_sat.value - SOFT.saturation_current(0.2)) <= i_sat.expanded_uncertainty
    assert not any("heating" in w for w in result.warnings)


#: Known defect (issue 18 stays open): on this record the first pulse's own band is too narrow
#: (z rms 1.74 over its curve, the other pulses 0.7–0.95), so the average's is too (80.6 % of
#: the points inside before the knots were raised for the average, 82.6 % after).
SEVERAL_PULSES_BAND = pytest.mark.xfail(strict=True, reason="the first pulse's band is too narrow")


@SEVERAL_PULSES_BAND
def test_the_band_of_several_pulses_holds_the_law():
    curve = three_pulses().curves["L_inc"]
    inside = np.abs(curve.values - SOFT.incremental_inductance(curve.axis_values)) <= curve.expanded_uncertainty
    assert inside.mean() >= 0.9, inside.mean()


def test_later_pulses_count_their_flux_from_their_own_switch_on():
    """After the first pulse the record holds its turn-off and freewheeling (negative voltage)
    before the next pulse: each later pulse's switching edge is found next to it, so every
    pulse starts from rest and the flux linkage of each is counted from its own switch-on.
    The clean record's L0 then matches the law's (closed form) to 0.1 %: counted from the
    previous pulse's turn-off it was 0.3 % low and the pulses were said not to start from rest."""
    frame, truth = pulse_capture(SOFT, BENCH, pulses=3)
    result = wavefit.analyze(frame, setup())
    assert result.fit.pulses == 3
    assert not any("not from rest" in w for w in result.warnings), result.warnings
    assert abs(result.quantities["L0"].value / SOFT.L0 - 1) < 1e-3


def test_air_core_L0_agrees_with_rl_step_on_the_same_coil():
    """The same 47 µH coil (and DCR) in an ngspice RL step circuit, measured by rl-step: the two
    methods agree within their combined expanded uncertainty (|E_n| <= 1, ISO 13528:2015, the
    normalised error)."""
    period, tstep, r_sense, r_source = 20e-6, 10e-9, 10.0, 50.0
    netlist = f"""
V1 gen 0 PULSE(0 2 {0.15 * period:.6e} 2e-9 2e-9 {period / 2 - 2e-9:.6e} {period:.6e})
Rsrc gen drive {r_source}
L1 drive mid {LINEAR.L0:.6e}
Rdcr mid sense {BENCH.dcr}
Rsense sense 0 {r_sense}
"""
    t, v = simulate(netlist, tstep, 2.4 * period, ["v(drive)", "v(sense)"])
    rng = np.random.default_rng(3)
    frame = pd.DataFrame({"time": t - t[0],
                          "drive": ScopeModel(noise_rms=2.0 / 300, bits=8).apply(v["v(drive)"], rng),
                          "sense": ScopeModel(noise_rms=0.3 / 300, bits=8).apply(v["v(sense)"], rng)})
    step = wavefit.analyze(frame, {"method": "rl-step", "columns": {"time": "time", "drive": "drive", "sense": "sense"},
                                   "parts": {"sense_resistor": f"{r_sense} ohm ±0.1%"},
                                   "instrument": {"vertical_gain": "exact", "timebase": "exact"}})
    ramp, _ = analysed(LINEAR, True)
    l_step, l0 = step.quantities["L"], ramp.quantities["L0"]
    normalised_error = abs(l0.value - l_step.value) / np.hypot(l0.expanded_uncertainty, l_step.expanded_uncertainty)
    assert normalised_error <= 1.0, (l0, l_step)
    assert abs(l_step.value / LINEAR.L0 - 1) < 0.01
