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
from wavefit.measurement import CaptureCount, bind, capture_sources, takes_entries
from wavefit.methods import get_method
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


# -- how many captures a measurement is: the setup decides, the method's declaration checks ------

def _sweep_setup(entries: int, **changes):
    data = {"method": "lc-sweep", "columns": {"tank": "tank"}, "parts": {"parallel_load": "100 kohm"},
            "captures": [{"file": f"c{k}.csv", "tank_capacitor": f"{k + 1} nF"} for k in range(entries)]}
    data.update(changes)
    return load_setup(data)


def test_the_setup_decides_and_the_declaration_checks():
    several = CaptureCount(minimum=2, maximum=3)
    assert takes_entries(_sweep_setup(2), several)
    assert not takes_entries(_sweep_setup(0), CaptureCount())
    with pytest.raises(SetupError, match="takes its capture from the command line, not from"):
        takes_entries(_sweep_setup(1), CaptureCount())
    with pytest.raises(SetupError, match="takes two to three captures, the setup names 4"):
        takes_entries(_sweep_setup(4), several)
    with pytest.raises(SetupError, match=r"takes several captures \(at least two captures\); name each"):
        takes_entries(_sweep_setup(0), CaptureCount(minimum=2, maximum=None))


def test_sources_of_a_measurement():
    setup = _sweep_setup(3)
    count = get_method("lc-sweep").capture_count
    sources, entries = capture_sources(None, setup, count)
    assert sources == [entry.file for entry in setup.captures] and entries == setup.captures
    sources, entries = capture_sources(("x.csv", "y.csv", "z.csv"), setup, count)  # one per entry, in order
    assert sources == ["x.csv", "y.csv", "z.csv"] and entries == setup.captures
    # not one per entry: the captures cannot be bound to the entries' parts (they had been taken
    # with the setup's parts only, and refused as "no tank_capacitor for this capture")
    with pytest.raises(SetupError, match="two capture\\(s\\) given for 3 \\[\\[captures\\]\\] entries"):
        capture_sources(("x.csv", "y.csv"), setup, count)
    with pytest.raises(SetupError, match="one capture\\(s\\) given for 3"):  # not one per entry, whatever the count
        capture_sources(["a.csv"], setup, count)
    with pytest.raises(wavefit.AnalysisRefused) as err:  # entries too few for the method
        capture_sources(["a.csv"], _sweep_setup(1), count)
    assert "lc-sweep needs at least two captures with different tank capacitors" in str(err.value)
    assert capture_sources("one.csv", load_setup({"method": "lc-ring"}), CaptureCount()) == (["one.csv"], None)
    with pytest.raises(SetupError, match="needs a capture to analyse"):
        capture_sources(None, load_setup({"method": "lc-ring"}), CaptureCount())


def test_cli_refuses_a_sweep_without_entries_in_one_line(tmp_path, capsys):
    setup = tmp_path / "s.toml"
    setup.write_text('method = "lc-sweep"\n[columns]\ntank = "tank"\n[parts]\ntank_capacitor = "1 nF"\n')
    capture = tmp_path / "c.csv"
    shutil.copy(SWEEP / "ring_10n.csv", capture)
    assert main(["analyze", str(capture), str(capture), "--setup", str(setup)]) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "takes several captures" in err
