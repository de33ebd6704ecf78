"""Model adequacy against ngspice: circuits whose waveform is not the fitted model.

* A coil with an eddy-current loop: the coil L1 is coupled (K) to a shorted secondary L2-R2, as
  a conducting core or armature is. Its current is a sum of two exponentials whose time
  constants are the roots of the two coupled loops' characteristic equation
  (L1·s + R1)(L2·s + R2) − M²·s² = 0, M = k·√(L1·L2), R1 the primary loop's resistance
  (Kirchhoff's voltage law for two coupled meshes; an identity).
* A tank whose loss rises with amplitude: a conductance i = g3·v³ across it. Its first
  harmonic at amplitude A is ¾·g3·A² (cos³x = (3 cos x + cos 3x)/4, an identity), so the
  damping falls from alpha0 + ¾·g3·A0²/(2C) at the first amplitude A0 towards the
  small-signal alpha0 = (DCR/L + 1/(R_feed·C))/2 of the characteristic equation in
  docs/method-lc-ring.md (the describing function of the nonlinearity; common practice).

Scope noise comes from wavefit.synth.scope with fixed seeds.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import wavefit
from spice import needs_ngspice, simulate
from wavefit.methods._model_check import MODEL_Z
from wavefit.synth.scope import ScopeModel

pytestmark = [needs_ngspice, pytest.mark.ngspice]

L1, DCR, R_SENSE, R_SOURCE = 1e-3, 2.0, 10.0, 50.0
R_LOOP = R_SOURCE + DCR + R_SENSE
PERIOD, TSTEP = 400e-6, 100e-9


def coil_capture(secondary: str, snr_db: float = 60.0, seed: int = 0) -> pd.DataFrame:
    """Square-wave response of the coil with the given secondary netlist lines."""
    delay, edge = 0.15 * PERIOD, TSTEP / 10
    netlist = f"""
V1 gen 0 PULSE(0 2 {delay:.6e} {edge:.3e} {edge:.3e} {PERIOD / 2 - edge:.6e} {PERIOD:.6e})
Rsrc gen drive {R_SOURCE}
L1 drive mid {L1:.6e}
Rdcr mid sense {DCR}
Rsense sense 0 {R_SENSE}
{secondary}
"""
    t, v = simulate(netlist, TSTEP, 2.4 * PERIOD, ["v(drive)", "v(sense)"])
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame({"time": t - t[0]})
    for name in ("drive", "sense"):
        y = v[f"v({name})"]
        frame[name] = ScopeModel(noise_rms=float(np.ptp(y)) / 10 ** (snr_db / 20)).apply(y, rng)
    return frame


def eddy_loop(l2: float, r2: float, k: float) -> str:
    return f"L2 ea eb {l2:.6e}\nR2 ea eb {r2:.6e}\nRg eb 0 1e9\nK1 L1 L2 {k}"


def coil_setup(two_channel: bool) -> dict:
    columns = {"time": "time", "sense": "sense"}
    parts = {"sense_resistor": f"{R_SENSE} ohm ±0.1%"}
    if two_channel:
        columns["drive"] = "drive"
    else:
        parts |= {"source_resistance": f"{R_SOURCE} ohm ±1%", "dut_resistance": f"{DCR} ohm ±1%"}
    # a calibrated scope (gain ±0.1 %), so that the fit and the model dominate L's budget
    return {"method": "rl-step", "columns": columns, "parts": parts,
            "instrument": {"vertical_gain": "±0.1%", "timebase": "±10 ppm"}}


def slow_time_constant(l2: float, r2: float, k: float) -> float:
    """The longer root of (L1·s + R1)(L2·s + R2) − M²·s² = 0, as a time constant."""
    m = k * math.sqrt(L1 * l2)
    poles = np.roots([L1 * l2 - m * m, L1 * r2 + l2 * R_LOOP, R_LOOP * r2])
    return float(max(-1.0 / poles.real))


@pytest.mark.parametrize("two_channel", [True, False], ids=["two-channel", "sense-only"])
def test_eddy_current_loop_is_flagged_and_covered(two_channel):
    # an eddy loop of 2 us against the coil's 16 us: 1.4 % of the step decays with 1.8 us
    l2, r2, k = 10e-6, 5.0, 0.3
    result = wavefit.analyze(coil_capture(eddy_loop(l2, r2, k)), coil_setup(two_channel))
    assert not result.adequate
    entry = result.fit.model_check.variation("tau")
    assert entry.significant and entry.z > MODEL_Z
    inductance = result.quantities["L"]
    model = next(line for line in result.budget["L"] if line.source == "model")
    # the expanded uncertainty has grown at least to the size of the variation, relative
    assert inductance.expanded_uncertainty / inductance.value >= entry.half_width / entry.reported
    # the inductance a single exponential stands for is that of the dominant (slow) mode,
    # tau_slow·R_loop from the coupled loops' characteristic equation: covered
    l_slow = slow_time_constant(l2, r2, k) * R_LOOP
    assert abs(inductance.value - l_slow) <= inductance.expanded_uncertainty
    if two_channel:
        # with both channels only the fit and the model are left in L's budget, and the fit
        # alone would have missed it
        fit_only = math.sqrt(inductance.standard_uncertainty ** 2 - model.contribution ** 2)
        assert abs(inductance.value - l_slow) > inductance.coverage_factor * fit_only


def test_coil_without_eddy_loop_is_adequate():
    result = wavefit.analyze(coil_capture(""), coil_setup(True))
    assert result.adequate
    assert all(line.source != "model" for line in result.budget["L"])
    inductance = result.quantities["L"]
    assert abs(inductance.value - L1) <= inductance.expanded_uncertainty


L_TANK, C_TANK, DCR_TANK, R_FEED = 100e-6, 10e-9, 0.5, 20e3


def test_loss_that_rises_with_amplitude_is_flagged():
    g3 = 0.3  # S/V²
    w0 = 1 / math.sqrt(L_TANK * C_TANK)
    dt = 2 * math.pi / (w0 * 40)
    netlist = f"""
V1 in 0 PULSE(0 1 {8 * dt:.6e} {dt / 50:.6e} {dt / 50:.6e} 1 2)
Rf in tank {R_FEED}
L1 tank mid {L_TANK}
R1 mid 0 {DCR_TANK}
Ct tank 0 {C_TANK}
B1 tank 0 I = {g3} * V(tank) * V(tank) * V(tank)
"""
    t, vec = simulate(netlist, dt / 4, 60 * 2 * math.pi / w0, ["v(tank)"])
    t, v = t[::4], vec["v(tank)"][::4]
    y = ScopeModel(noise_rms=0.001 * float(np.abs(v).max())).apply(v, np.random.default_rng(0))
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "tank"},
             "parts": {"tank_capacitor": "10 nF ±1%", "parallel_load": "20 kohm ±1%"}}
    result = wavefit.analyze(pd.DataFrame({"t": t, "tank": y}), setup)
    assert not result.adequate
    entry = result.fit.model_check.variation("alpha")
    assert entry.significant and entry.input_name == "model_decay"
    alpha0 = (DCR_TANK / L_TANK + 1 / (R_FEED * C_TANK)) / 2
    amplitude = float(np.abs(v).max())
    alpha_first = alpha0 + 0.75 * g3 * amplitude ** 2 / (2 * C_TANK)
    assert alpha0 < entry.varied["late"] < entry.varied["early"] < alpha_first
    alpha = result.quantities["alpha"]
    assert alpha.expanded_uncertainty >= entry.half_width
    assert any(line.source == "model_decay" for line in result.budget["Q"])
