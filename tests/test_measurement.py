"""Captures bound to their own parts (wavefit.measurement), and batch running a method that takes
several captures per part: each part's folder holds a file of each [[captures]] entry's name.

These tests compare two ways into the same analysis (no reference values): the lc-sweep
results themselves are checked against ngspice in test_lc_sweep.py.
"""
from __future__ import annotations

import shutil
from pathlib import Path

import pandas as pd
import pytest

import wavefit
from wavefit.cli import main
from wavefit.errors import SetupError
from wavefit.io import read_capture
from wavefit.measurement import bind
from wavefit.setup import load_setup

SWEEP = Path(__file__).resolve().parents[1] / "sample_data" / "tank_sweep"


def test_each_capture_carries_its_entry_parts_over_the_setup_parts():
    setup = load_setup(SWEEP / "sweep.toml")
    captures = [read_capture(entry.file) for entry in setup.captures]
    measurement = bind(captures, setup, setup.captures)
    for bound, entry in zip(measurement.captures, setup.captures):
        assert bound.parts["tank_capacitor"] == entry.parts["tank_capacitor"]
        assert bound.parts["parallel_load"] == setup.parts["parallel_load"]
    assert "tank_capacitor" not in measurement.parts
    with pytest.raises(SetupError):
        bind(captures[:2], setup, setup.captures)


def test_a_folder_of_one_parts_captures_is_bound_by_file_name(tmp_path):
    for name in ("ring_22n.csv", "ring_10n.csv", "ring_4n7.csv", "ring_2n2.csv"):
        shutil.copy(SWEEP / name, tmp_path / name)
    from_setup = wavefit.analyze(None, SWEEP / "sweep.toml")
    from_folder = wavefit.analyze(str(tmp_path), SWEEP / "sweep.toml")
    assert from_folder.quantities == from_setup.quantities


def test_batch_runs_a_several_capture_method_one_folder_per_part(tmp_path, capsys):
    for part in ("part1", "part2"):
        (tmp_path / part).mkdir()
        for capture in SWEEP.glob("*.csv"):
            shutil.copy(capture, tmp_path / part / capture.name)
    (tmp_path / "part2" / "ring_10n.csv").unlink()
    spec = tmp_path / "spec.toml"
    spec.write_text('[limits]\nL = "220 uH ±10%"\n')
    out = tmp_path / "lot.csv"
    code = main(["batch", "--setup", str(SWEEP / "sweep.toml"), "--spec", str(spec), "--out", str(out),
                 "--workers", "1", str(tmp_path / "part*")])
    capsys.readouterr()
    assert code == 0
    rows = pd.read_csv(out).set_index("file")
    direct = wavefit.analyze(str(tmp_path / "part1"), SWEEP / "sweep.toml")
    first = rows.loc[str(tmp_path / "part1")]
    assert first["L"] == direct.value("L") and first["C"] == direct.value("C")
    assert first["verdict"] != "error"
    second = rows.loc[str(tmp_path / "part2")]
    assert second["verdict"] == "error" and "ring_10n.csv" in second["message"]
