"""`wavefit batch` judges pulse-ramp's saturation current against a spec limit on a lot.

External reference: ngspice transients of the pulse bench (``tests/saturation_capture.py``)
for hard-saturating coils whose I_sat_20 is known from the flux law's closed form; 8-bit
scope noise. The spec is ``I_sat_20 = ">= 3 A"`` with the guard-band rule of ILAC-G8:09/2019
(a part passes when its value lies beyond the limit by more than U, fails when short of it
by more than U). A pulse too short to saturate reports no I_sat_20: the part is an error,
not a pass.
"""
from __future__ import annotations

import csv
import subprocess
import sys

import pytest

from saturation_capture import PowerSaturation, PulseBench, noisy_scopes, pulse_capture
from spice import needs_ngspice

pytestmark = [needs_ngspice, pytest.mark.ngspice]

BENCH = PulseBench()
#: (file, the law's I_sat_20 in A, the pulse's peak current as a multiple of it, expected verdict)
LOT = [("part1.csv", 2.6, 1.5, "fail"), ("part2.csv", 3.5, 1.5, "pass"), ("part3.csv", 3.5, 0.5, "error")]
SETUP = ('method = "pulse-ramp"\n[columns]\ntime = "time"\ncurrent = "i_shunt"\nvoltage = "v_coil"\n'
         f'[parts]\nshunt_resistor = "{BENCH.shunt_resistance} ohm ±0.1%"\n'
         f'dut_resistance = "{BENCH.dcr} ohm ±2%"\n[instrument]\nvertical_gain = "±0.5%"\n')
SPEC = '[limits]\nI_sat_20 = ">= 3 A"\n[decision]\nrule = "guard-band"\n'


def test_lot_is_judged_on_its_saturation_current(tmp_path):
    for seed, (name, i_sat, reach, _) in enumerate(LOT):
        law = PowerSaturation.with_saturation_current(220e-6, i_sat, 10.0)
        frame, _ = pulse_capture(law, BENCH, peak_current=reach * i_sat, seed=seed,
                                 scopes=noisy_scopes(law, BENCH, peak_current=reach * i_sat))
        frame.to_csv(tmp_path / name, index=False)
    (tmp_path / "setup.toml").write_text(SETUP, encoding="utf-8")
    (tmp_path / "spec.toml").write_text(SPEC, encoding="utf-8")
    out = tmp_path / "out.csv"
    proc = subprocess.run([sys.executable, "-m", "wavefit.cli", "batch", str(tmp_path / "part*.csv"), "--setup",
                           str(tmp_path / "setup.toml"), "--spec", str(tmp_path / "spec.toml"), "--out", str(out),
                           "--workers", "2"], capture_output=True, text=True, timeout=600)
    assert "Traceback" not in proc.stderr
    rows = {r["file"].rsplit("/", 1)[-1]: r for r in csv.DictReader(out.open(encoding="utf-8"))}
    for name, _, _, verdict in LOT:
        assert rows[name]["verdict"] == verdict, rows[name]
    assert "I_sat_20" in rows["part3.csv"]["message"]
