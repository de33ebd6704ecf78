"""Provenance in the JSON: tool version, setup as parsed, capture metadata and sha256 of the files.

The hashes are checked against Python's hashlib (SHA-256 of NIST FIPS 180-4); the setup
against the parser itself: ``parse_setup`` of the provenance's setup must give the setup back.
"""
from __future__ import annotations

import dataclasses
import hashlib
import json
import math
import shutil
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.io import read_capture
from wavefit.provenance import capture_record, setup_as_parsed
from wavefit.setup import load_setup, parse_setup

SAMPLES = Path(__file__).resolve().parent.parent / "sample_data"


def _sha256(path: Path) -> str:
    return hashlib.sha256(path.read_bytes()).hexdigest()


def _round_trip(setup):
    again = parse_setup(json.loads(json.dumps(setup_as_parsed(setup))), source=setup.source, base_dir=Path("/"))
    assert again == setup


@pytest.fixture(scope="module")
def step_json():
    result = wavefit.analyze(SAMPLES / "choke_step.csv", SAMPLES / "choke_step.toml")
    return json.loads(json.dumps(result.to_dict(), allow_nan=False))


def test_json_provenance_hashes_the_capture_and_the_setup(step_json):
    prov = step_json["provenance"]
    assert prov["tool"]["version"] == wavefit.__version__
    assert prov["setup_file"]["sha256"] == _sha256(SAMPLES / "choke_step.toml")
    (capture,) = prov["captures"]
    assert capture["sha256"] == _sha256(SAMPLES / "choke_step.csv")
    assert capture["rows"] == 10000
    # the sample's preamble names the part measured: it is kept and repeated as an identifier
    assert capture["metadata"]["Part"].startswith("FD-CH220")
    assert capture["identifiers"] == {"Part": capture["metadata"]["Part"]}


def test_json_setup_as_parsed_round_trips(step_json):
    setup = load_setup(SAMPLES / "choke_step.toml")
    again = parse_setup(step_json["provenance"]["setup"], source=setup.source, base_dir=SAMPLES)
    assert again == setup


def test_setup_with_captures_and_every_table_round_trips(tmp_path):
    _round_trip(load_setup(SAMPLES / "tank_sweep" / "sweep.toml"))
    other = tmp_path / "ch1.csv"
    other.write_text("t,v\n0,1\n")
    _round_trip(load_setup({
        "method": "rl-step", "sample_interval": "20 ns",
        "columns": {"sense": 1, "drive": {"file": str(other), "column": "v"}},
        "parts": {"sense_resistor": "10 ohm ±0.1%", "dut_resistance": 0.25, "source_resistance": "50 ohm ±1% k=2"},
        "instrument": {"timebase": 0, "vertical_gain": "exact", "vertical_gain_sense": "±1%"},
        "options": {"skip": "30 ns", "noise": "white"},
        "calibration": {"channels": str(tmp_path / "channels.toml"), "max_age_days": 30},
    }))


def test_a_serial_number_in_the_preamble_is_an_identifier(tmp_path):
    path = tmp_path / "serial.csv"
    rows = "\n".join(f"{k * 1e-6:.6e},{math.sin(k / 5):.5f}" for k in range(64))
    path.write_text(f"Serial number,SN-0042\nOperator,bench 3\nDUT S/N 7731 after soak\nwarm start\n\n"
                    f"Time (s),CH1 (V)\n{rows}\n")
    record = capture_record(str(path), read_capture(path))
    assert record["sha256"] == _sha256(path)
    assert record["metadata"]["Serial number"] == "SN-0042"
    free = [k for k, v in record["metadata"].items() if v == "DUT S/N 7731 after soak"]
    assert len(free) == 1
    assert record["identifiers"] == {"Serial number": "SN-0042", free[0]: "DUT S/N 7731 after soak"}


def test_compressed_capture_is_hashed_as_stored_and_frames_have_no_hash(tmp_path):
    gz = sorted((SAMPLES / "lot_0412").glob("part*.csv.gz"))[0]
    record = capture_record(gz, read_capture(gz))
    assert record["sha256"] == _sha256(gz)
    frame = pd.DataFrame({"Time (s)": np.arange(64) * 1e-6, "CH1 (V)": np.sin(np.arange(64) / 5)})
    record = capture_record(frame, wavefit.analysis.load_capture(frame, None))
    assert record["file"] is None and record["sha256"] is None


def test_sweep_provenance_hashes_every_capture_of_the_setup(tmp_path):
    folder = tmp_path / "sweep"
    shutil.copytree(SAMPLES / "tank_sweep", folder)
    result = wavefit.analyze(None, folder / "sweep.toml")
    prov = result.to_dict()["provenance"]
    files = [Path(c["file"]) for c in prov["captures"]]
    assert [f.name for f in files] == ["ring_2n2.csv", "ring_4n7.csv", "ring_10n.csv", "ring_22n.csv"]
    assert [c["sha256"] for c in prov["captures"]] == [_sha256(f) for f in files]
    assert prov["setup_file"]["sha256"] == _sha256(folder / "sweep.toml")
    assert dataclasses.replace(load_setup(folder / "sweep.toml"), source="<dict>") == parse_setup(
        prov["setup"], source="<dict>", base_dir=folder)


def test_a_capture_changed_after_reading_is_told(tmp_path, monkeypatch):
    """The sha256 is taken after the load; a file rewritten in between is flagged in the
    record and warned in the result, never passed off as the bytes analysed."""
    capture_file = tmp_path / "choke_step.csv"
    shutil.copy(SAMPLES / "choke_step.csv", capture_file)
    capture = read_capture(capture_file)
    assert capture_record(capture_file, capture)["changed_since_read"] is False
    with open(capture_file, "a") as handle:
        handle.write("\n")
    assert capture_record(capture_file, capture)["changed_since_read"] is True

    import wavefit.analysis as front_door

    shutil.copy(SAMPLES / "choke_step.csv", capture_file)
    analysed = front_door.without_glitches

    def rewritten_meanwhile(loaded):
        with open(capture_file, "a") as handle:
            handle.write("\n")
        return analysed(loaded)

    monkeypatch.setattr(front_door, "without_glitches", rewritten_meanwhile)
    result = wavefit.analyze(capture_file, SAMPLES / "choke_step.toml")
    assert result.provenance["captures"][0]["changed_since_read"] is True
    assert any("changed after it was read" in w for w in result.warnings)
    assert result.provenance["captures"][0]["sha256"] == _sha256(capture_file)


def test_hashes_taken_beside_the_analysis_are_those_of_the_files(tmp_path):
    """The hashes started before an analysis (in a thread of their own) are hashlib's of each
    file; a file that cannot be read raises as the hash taken at once would; a file not given
    at the start is hashed when asked for."""
    from wavefit.provenance import PendingHashes

    gone = tmp_path / "gone.csv"
    later = tmp_path / "later.csv"
    later.write_text("t,v\n0,2\n")
    gz = sorted((SAMPLES / "lot_0412").glob("part*.csv.gz"))[0]
    pending = PendingHashes([SAMPLES / "choke_step.csv", str(gz), gone, SAMPLES / "choke_step.csv"])
    assert pending.sha256(SAMPLES / "choke_step.csv") == _sha256(SAMPLES / "choke_step.csv")
    assert pending.sha256(gz) == _sha256(gz)
    assert pending.sha256(later) == _sha256(later)
    with pytest.raises(FileNotFoundError):
        pending.sha256(gone)
