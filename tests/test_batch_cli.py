"""End to end: `wavefit batch` on a small lot of two-channel rl-step captures, interrupted and resumed.

Truth: each capture is the closed-form response of an RL circuit (the ODE solution in
wavefit.synth.rl, an analytic reference) with scope noise and 10-bit quantisation; the
inductance used to compute it is the part's true L. The check is the acceptance rule of
the issue: a part whose true L lies more than 2·U inside the limits is `pass`, more than
2·U outside `fail` (ILAC-G8:09/2019 §4.2.3 guard band w = U).
"""
from __future__ import annotations

import csv
import json
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd

from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

DCR, RS, RSRC = 0.5, 10.0, 50.0
TRUE_L_UH = [100.0, 104.0, 95.0, 120.0, 80.0, 108.5, 111.0, 99.0]
SETUP = ('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\nsense = "CH2"\n'
         '[parts]\nsense_resistor = "10 ohm ±0.1%"\n[instrument]\nvertical_gain = "±0.5%"\n')
SPEC = '[limits]\nL = "100 uH ±10%"\n[decision]\nrule = "guard-band"\n'


def write_lot(folder: Path) -> dict[str, float]:
    rng = np.random.default_rng(20260601)
    truth = {}
    for i, l_uh in enumerate(TRUE_L_UH, start=1):
        inductance = l_uh * 1e-6
        tau = inductance / (RSRC + DCR + RS)
        t, drive, sense = rl_square_wave(inductance, DCR, RS, RSRC, 1.0, 40 * tau, tau / 40, 100 * tau)
        ch1 = ScopeModel(noise_rms=1e-3, bits=10, full_scale=(-1.0, 1.1)).apply(drive, rng)
        ch2 = ScopeModel(noise_rms=2e-4, bits=10, full_scale=(-0.02, 0.2)).apply(sense, rng)
        name = folder / f"part{i}.csv"
        pd.DataFrame({"Time (s)": t, "CH1 (V)": ch1, "CH2 (V)": ch2}).to_csv(name, index=False)
        truth[name.name] = inductance
    (folder / "part9.csv").write_text("Time (s),CH1 (V),CH2 (V)\n0,0.1,\nnot,a,capture\n", encoding="utf-8")
    (folder / "part10.csv").write_bytes(b"\x1f\x8b\x08\x00broken gzip")
    (folder / "setup.toml").write_text(SETUP, encoding="utf-8")
    (folder / "spec.toml").write_text(SPEC, encoding="utf-8")
    return truth


def command(folder: Path, *extra: str) -> list[str]:
    return [sys.executable, "-m", "wavefit.cli", "batch", str(folder / "part*.csv"), "--setup",
            str(folder / "setup.toml"), "--spec", str(folder / "spec.toml"), "--out", str(folder / "out.csv"),
            "--workers", "2", *extra]


def test_interrupted_lot_resumes_with_one_row_per_file(tmp_path):
    truth = write_lot(tmp_path)
    out = tmp_path / "out.csv"
    proc = subprocess.Popen(command(tmp_path), stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and proc.poll() is None and (
            not out.exists() or len(out.read_text(encoding="utf-8").splitlines()) < 3):
        time.sleep(0.02)
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=60)
    # 130: stopped part-way (the usual case, the message says how to resume) or while printing
    # the summary on a slow machine; 0 if it finished before the signal
    assert proc.returncode in (0, 130), err
    assert proc.returncode == 0 or "interrupted" in err
    done = subprocess.run(command(tmp_path, "--json", "--db", str(tmp_path / "h.sqlite")),
                          capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    summary = json.loads(done.stdout)
    with out.open(encoding="utf-8", newline="") as stream:
        rows = list(csv.DictReader(stream))
    names = [Path(r["file"]).name for r in rows]
    assert sorted(names) == sorted([*truth, "part9.csv", "part10.csv"])      # one row each, none doubled
    assert summary["summary"]["total"] == 10 and summary["summary"]["counts"]["error"] == 2
    by_name = {Path(r["file"]).name: r for r in rows}
    assert by_name["part9.csv"]["verdict"] == "error" and by_name["part9.csv"]["message"]
    assert by_name["part10.csv"]["verdict"] == "error" and by_name["part10.csv"]["message"]
    lower, upper = 90e-6, 110e-6
    checked = 0
    for name, true_l in truth.items():
        row = by_name[name]
        expanded = float(row["L_U"])
        assert 0 < expanded < 3e-6, row
        inside = min(true_l - lower, upper - true_l)
        if inside > 2 * expanded:
            assert row["verdict"] == "pass", row
            checked += 1
        elif inside < -2 * expanded:
            assert row["verdict"] == "fail", row
            checked += 1
    assert checked >= 5


def _lot_against(folder: Path, limit: str, inputs: str) -> subprocess.CompletedProcess:
    """The lot's captures ``inputs`` judged by one worker against ``L = limit``."""
    write_lot(folder)
    (folder / "spec.toml").write_text(f'[limits]\nL = "{limit}"\n', encoding="utf-8")
    return subprocess.run([sys.executable, "-m", "wavefit.cli", "batch", str(folder / inputs), "--setup",
                           str(folder / "setup.toml"), "--spec", str(folder / "spec.toml"), "--out",
                           str(folder / "out.csv"), "--workers", "1"], capture_output=True, text=True, timeout=300)


def test_spec_every_part_lies_far_beyond_ends_the_run_refused(tmp_path):
    # a limit written without its unit prefix ("100 ±10%" is read as 100 H): every part fails
    # by a factor of 10⁶, and the run ended with exit 0 and a warning, its fail rows and a
    # capability of 271462.97 printed as a lot's outcome; now the verdicts are refused (exit 4),
    # the rows kept in the results file
    proc = _lot_against(tmp_path, "100 ±10%", "part[12].csv")
    assert proc.returncode == 4, proc.stderr
    assert "unit prefix missing from the spec" in proc.stderr and "not to be used" in proc.stderr
    assert "Traceback" not in proc.stderr
    with open(tmp_path / "out.csv", newline="", encoding="utf-8") as handle:
        assert len(list(csv.DictReader(line for line in handle if not line.startswith("#")))) == 2


def test_spec_with_its_unit_far_from_every_part_is_only_warned(tmp_path):
    # "100 H ±10%" written with its unit: a missing prefix is less likely, the run ends as usual
    proc = _lot_against(tmp_path, "100 H ±10%", "part1.csv")
    assert proc.returncode == 0, proc.stderr
    assert "wavefit: warning: every L measured lies at least" in proc.stderr
