"""``wavefit calibrate channels`` on the command line: the file, the summary, the exit codes.

The comparison captures are ngspice simulations of an RL fixture's drive node with the issue's
channel gains (0.98, 1.015), offsets and 3 ns skew applied (tests/channel_capture.py).
"""
from __future__ import annotations

import hashlib
import json
import os
import re
import subprocess
import sys
from pathlib import Path

import pytest
from scipy import stats

from wavefit.calibration.channel_file import read_channel_comparison
from wavefit.calibration.command import channel_roles
from wavefit.cli import main
from wavefit.errors import SetupError

from channel_capture import OTHER_GAIN, REFERENCE_GAIN, SKEW, comparison_frame
from spice import needs_ngspice

SETUP = ('method = "rl-step"\n[columns]\ntime = "Time (s)"\nsense = "CH2"\ndrive = "CH1"\n'
         '[parts]\nsense_resistor = "10 ohm ±0.1%"\n')


def _files(tmp_path: Path, other_node: str = "drive", **capture_options) -> tuple[Path, Path]:
    capture = tmp_path / "comparison.csv"
    comparison_frame(seed=7, other_node=other_node, **capture_options).to_csv(capture, index=False)
    setup = tmp_path / "setup.toml"
    setup.write_text(SETUP, encoding="utf-8")
    return capture, setup


@needs_ngspice
@pytest.mark.ngspice
def test_writes_the_file_and_prints_the_summary(tmp_path, capsys):
    capture, setup = _files(tmp_path)
    out = tmp_path / "channels.toml"
    code = main(["calibrate", "channels", str(capture), "--setup", str(setup), "--out", str(out)])
    printed = capsys.readouterr()
    assert code == 0, printed.err
    comparison = read_channel_comparison(out)
    # the default reference is the drive channel, the other the remaining role
    assert (comparison.reference.role, comparison.reference.column) == ("drive", "CH1")
    assert (comparison.other.role, comparison.other.column) == ("sense", "CH2")
    assert comparison.capture_sha256 == hashlib.sha256(capture.read_bytes()).hexdigest()
    ratio, skew = comparison.gain_ratio, comparison.skew
    for q, truth in ((ratio, OTHER_GAIN / REFERENCE_GAIN), (skew, SKEW)):
        assert abs(q.value - truth) <= stats.t.ppf(0.975, q.degrees_of_freedom) * q.standard_uncertainty
    assert "gain ratio" in printed.out and "skew" in printed.out and str(out) in printed.out
    assert f"{ratio.value:.6f} ± {2 * ratio.standard_uncertainty:.6f}" in printed.out
    assert "Safety:" in printed.out  # the step where probes are moved (a trial found no caution)


@needs_ngspice
@pytest.mark.ngspice
def test_coherent_sampling_is_noted_in_the_summary_the_file_and_the_json(tmp_path, capsys):
    # 5 ns samples, a 2 µs period (400 samples), 2 ns edges: every edge at one phase of the clock
    capture, setup = _files(tmp_path, sample_interval=5e-9, edge=2e-9, periods=6.3)
    out = tmp_path / "channels.toml"
    assert main(["calibrate", "channels", str(capture), "--setup", str(setup), "--out", str(out)]) == 0
    printed = capsys.readouterr().out
    assert "note: coherent sampling" in printed
    # the bound's infinite degrees of freedom make the skew's count huge: it is not printed
    assert re.search(r"skew .*\(over 10000 degrees of freedom\)", printed)
    skew = read_channel_comparison(out).skew
    assert read_channel_comparison(out).note.startswith("coherent sampling")
    assert abs(skew.value - SKEW) <= 2 * skew.standard_uncertainty
    assert main(["calibrate", "channels", str(capture), "--setup", str(setup), "--out", str(out), "--json"]) == 0
    assert json.loads(capsys.readouterr().out)["note"].startswith("coherent sampling")


@needs_ngspice
@pytest.mark.ngspice
def test_json_and_reference_role(tmp_path, capsys):
    capture, setup = _files(tmp_path)
    out = tmp_path / "channels.toml"
    code = main(["calibrate", "channels", str(capture), "--setup", str(setup), "--out", str(out),
                 "--reference", "sense", "--json"])
    assert code == 0
    data = json.loads(capsys.readouterr().out)
    assert data["reference"]["role"] == "sense" and data["other"]["role"] == "drive"
    # the drive channel against the sense channel: the inverse ratio, the skew reversed
    assert abs(data["gain_ratio"]["value"] * OTHER_GAIN / REFERENCE_GAIN - 1) < 0.02
    assert abs(data["skew"]["value"] + SKEW) < 0.3e-9
    assert read_channel_comparison(out).skew.value == data["skew"]["value"]


@needs_ngspice
@pytest.mark.ngspice
def test_refused_comparison_leaves_an_existing_file_alone(tmp_path, capsys):
    capture, setup = _files(tmp_path, other_node="sense")
    out = tmp_path / "channels.toml"
    out.write_text("kept\n")
    code = main(["calibrate", "channels", str(capture), "--setup", str(setup), "--out", str(out)])
    err = capsys.readouterr().err
    assert code == 4
    assert err.count("\n") == 1 and "same waveform" in err
    assert out.read_text() == "kept\n"
    assert sorted(p.name for p in tmp_path.iterdir()) == ["channels.toml", "comparison.csv", "setup.toml"]


def test_bad_inputs_are_one_line_errors(tmp_path, capsys):
    setup = tmp_path / "setup.toml"
    setup.write_text(SETUP.replace('drive = "CH1"\n', 'drive = "CH1"\nspare = "CH3"\n'), encoding="utf-8")
    missing = tmp_path / "missing.csv"
    code = main(["calibrate", "channels", str(missing), "--setup", str(setup), "--out", str(tmp_path / "c.toml")])
    err = capsys.readouterr().err
    assert code == 3 and "exactly two channel roles" in err  # the setup's roles are checked before the capture
    setup.write_text(SETUP, encoding="utf-8")
    code = main(["calibrate", "channels", str(missing), "--setup", str(setup), "--out", str(tmp_path / "c.toml")])
    err = capsys.readouterr().err
    assert code == 3 and err.count("\n") == 1 and "missing.csv" in err
    assert main(["calibrate"]) == 2
    code = main(["calibrate", "channels", str(missing), "--setup", str(setup), "--out", str(setup)])
    assert code == 3 and "input" in capsys.readouterr().err
    assert setup.read_text(encoding="utf-8") == SETUP


def test_channel_roles_rule():
    assert channel_roles({"time": "t", "sense": "CH2", "drive": "CH1"}, None, "s") == ("drive", "sense")
    assert channel_roles({"time": "t", "sense": "CH2", "drive": "CH1"}, "sense", "s") == ("sense", "drive")
    with pytest.raises(SetupError, match="--reference"):
        channel_roles({"a": "CH1", "b": "CH2"}, None, "s")
    with pytest.raises(SetupError, match="exactly two"):
        channel_roles({"time": "t", "sense": "CH2"}, None, "s")


def test_no_traceback_from_the_module(tmp_path):
    setup = tmp_path / "setup.toml"
    setup.write_text(SETUP, encoding="utf-8")
    bad = tmp_path / "bad.csv"
    bad.write_text("not,a\ncapture,at all\n")
    env = dict(os.environ, PYTHONPATH=str(Path(__file__).resolve().parents[1]))
    proc = subprocess.run([sys.executable, "-m", "wavefit.cli", "calibrate", "channels", str(bad), "--setup",
                           str(setup), "--out", str(tmp_path / "c.toml")], capture_output=True, text=True,
                          env=env, timeout=120)
    assert proc.returncode == 3, proc.stderr
    assert "Traceback" not in proc.stderr and proc.stderr.count("\n") == 1
    assert not (tmp_path / "c.toml").exists()


@needs_ngspice
@pytest.mark.ngspice
def test_a_channel_from_another_file_keeps_the_setup_column(tmp_path, capsys):
    frame = comparison_frame(seed=8)
    frame[["Time (s)", "CH1 (V)"]].to_csv(tmp_path / "ch1.csv", index=False)
    frame[["Time (s)", "CH2 (V)"]].to_csv(tmp_path / "ch2.csv", index=False)
    setup = tmp_path / "setup.toml"
    setup.write_text(SETUP.replace('sense = "CH2"', 'sense = { file = "ch2.csv", column = "CH2" }'), encoding="utf-8")
    out = tmp_path / "channels.toml"
    code = main(["calibrate", "channels", str(tmp_path / "ch1.csv"), "--setup", str(setup), "--out", str(out)])
    assert code == 0, capsys.readouterr().err
    comparison = read_channel_comparison(out)
    assert (comparison.other.role, comparison.other.column) == ("sense", "CH2")
    assert abs(comparison.skew.value - SKEW) < 0.3e-9
