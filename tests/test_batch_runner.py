"""The batch runner and command with an injected analysis: rows, errors, resume, interrupts, history.

The fake analysis reads "L U" from each capture file; it stands in for a method
so that the batch machinery is tested on its own (the real method is exercised
in test_batch_cli.py).
"""
from __future__ import annotations

import csv
import json
import os
import signal
import sqlite3
import subprocess
import sys
import time
from pathlib import Path

import pytest

from wavefit.batch.command import run
from wavefit.batch.rows import RowMaker
from wavefit.batch.runner import run_rows
from wavefit.batch.spec import parse_spec
from wavefit.cli import build_parser
from wavefit.errors import AnalysisRefused
from wavefit.results import AnalysisResult, QuantityResult
from wavefit.setup import load_setup

SETUP = ('method = "rl-step"\n[columns]\nsense = "CH2"\ndrive = "CH1"\n[parts]\nsense_resistor = "10 ohm"\n'
         '[instrument]\ntimebase = "±50 ppm"\n')
SPEC = '[limits]\nL = "100 uH ±10%"\n[decision]\nrule = "guard-band"\n'


def fake_analyse(path: str, setup) -> AnalysisResult:
    """L and its expanded uncertainty from the file's text; "refuse" raises; "crash" is a bug."""
    text = Path(path).read_text(encoding="utf-8").split()
    if text[0] == "refuse":
        raise AnalysisRefused("no edge found in\nthe capture")
    if text[0] == "crash":
        raise ZeroDivisionError("division by zero")
    value, expanded = float(text[0]), float(text[1])
    quantities = {"L": QuantityResult("L", value, "H", expanded / 2, expanded, 2.0)}
    return AnalysisResult("rl-step", path, quantities, {}, {}, ("a warning",))


def slow_fake_analyse(path: str, setup) -> AnalysisResult:
    time.sleep(0.1)
    return fake_analyse(path, setup)


def interrupting_fake_analyse(path: str, setup) -> AnalysisResult:
    if Path(path).name == "part05.txt":
        raise KeyboardInterrupt
    return fake_analyse(path, setup)


def make_lot(folder: Path, values_uh: list[float]) -> list[Path]:
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for i, value in enumerate(values_uh, start=1):
        path = folder / f"part{i:02d}.txt"
        path.write_text(f"{value * 1e-6!r} 2e-6 part {i}\n", encoding="utf-8")   # each capture its own bytes
        paths.append(path)
    (folder / "setup.toml").write_text(SETUP, encoding="utf-8")
    (folder / "spec.toml").write_text(SPEC, encoding="utf-8")
    return paths


def batch_args(folder: Path, *extra: str):
    return build_parser().parse_args(["batch", str(folder / "part*.txt"), "--setup", str(folder / "setup.toml"),
                                      "--spec", str(folder / "spec.toml"), "--out", str(folder / "out.csv"),
                                      *extra])


def read_rows(path: Path) -> list[dict[str, str]]:
    with path.open(encoding="utf-8", newline="") as stream:
        return list(csv.DictReader(stream))


VALUES = [100.0, 109.0, 111.0, 115.0, 100.0, 95.0, 89.0, 80.0]
EXPECTED = ["pass", "conditional pass", "conditional fail", "fail", "pass", "pass", "conditional fail", "fail"]


def test_rows_verdicts_and_traceability(tmp_path, capsys):
    paths = make_lot(tmp_path, VALUES)
    paths[2].write_text("refuse\n", encoding="utf-8")
    paths[3].write_text("crash\n", encoding="utf-8")
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse) == 0
    rows = read_rows(tmp_path / "out.csv")
    assert [Path(r["file"]).name for r in rows] == [p.name for p in paths]
    assert [r["verdict"] for r in rows] == EXPECTED[:2] + ["error", "error"] + EXPECTED[4:]
    assert rows[2]["message"] == "no edge found in the capture"
    assert rows[3]["message"] == "unexpected ZeroDivisionError: division by zero"
    assert rows[1]["message"] == "L conditional pass against 100 uH ±10%; a warning"
    assert float(rows[0]["L"]) == 100.0 * 1e-6 and float(rows[0]["L_U"]) == 2e-6 and rows[0]["R"] == ""
    import hashlib
    assert rows[0]["capture_sha256"] == hashlib.sha256(paths[0].read_bytes()).hexdigest()
    assert rows[0]["setup_sha256"] == hashlib.sha256((tmp_path / "setup.toml").read_bytes()).hexdigest()
    assert rows[0]["analysed_at"].endswith("+00:00")
    out = capsys.readouterr().out
    assert "pass: 3" in out and "error: 2" in out
    assert "yield: 37.5 % pass" in out and "the 2 error rows counted as not passed" in out   # 3 of all 8


def test_workers_give_the_same_rows(tmp_path):
    make_lot(tmp_path, VALUES)
    assert run(batch_args(tmp_path, "--workers", "3"), analyse=fake_analyse) == 0
    rows = read_rows(tmp_path / "out.csv")
    by_name = {Path(r["file"]).name: r["verdict"] for r in rows}
    assert len(rows) == len(VALUES)
    assert [by_name[f"part{i:02d}.txt"] for i in range(1, 9)] == EXPECTED


def test_ctrl_c_keeps_rows_and_rerun_resumes(tmp_path, capsys):
    make_lot(tmp_path, VALUES)
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=interrupting_fake_analyse) == 130
    assert "run the same command again" in capsys.readouterr().err
    assert [Path(r["file"]).name for r in read_rows(tmp_path / "out.csv")] == [f"part0{i}.txt" for i in range(1, 5)]
    assert run(batch_args(tmp_path, "--workers", "1", "--json"), analyse=fake_analyse) == 0
    summary = json.loads(capsys.readouterr().out)
    rows = read_rows(tmp_path / "out.csv")
    assert sorted(Path(r["file"]).name for r in rows) == [f"part0{i}.txt" for i in range(1, 9)]
    assert summary["rows_written"] == 4 and summary["rows_resumed"] == 4
    assert summary["summary"]["counts"]["pass"] == 3 and summary["summary"]["total"] == 8
    assert run(batch_args(tmp_path, "--workers", "1", "--json"), analyse=fake_analyse) == 0
    assert json.loads(capsys.readouterr().out)["rows_written"] == 0
    assert len(read_rows(tmp_path / "out.csv")) == 8


def batch_script(folder: Path, analyse: str) -> str:
    """A Python program that runs the batch command on ``folder`` with the named fake analysis."""
    return ("import sys; sys.path.insert(0, {tests!r})\n"
            "from test_batch_runner import batch_args, {analyse}\n"
            "from pathlib import Path\n"
            "from wavefit.batch.command import run\n"
            "sys.exit(run(batch_args(Path({folder!r}), '--workers', '2'), analyse={analyse}))\n"
            ).format(tests=str(Path(__file__).parent), folder=str(folder), analyse=analyse)


def start_and_wait_for_rows(folder: Path, lines: int) -> subprocess.Popen:
    """Start a slow batch run in a subprocess; return once the results file has ``lines`` lines."""
    proc = subprocess.Popen([sys.executable, "-c", batch_script(folder, "slow_fake_analyse")],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    out = folder / "out.csv"
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline and (not out.exists() or len(out.read_text().splitlines()) < lines):
        time.sleep(0.02)
    return proc


def descendants(pid: int) -> set[int]:
    """Process ids below ``pid`` (Linux /proc); empty where /proc is missing."""
    parents: dict[int, int] = {}
    for stat in Path("/proc").glob("[0-9]*/stat"):
        try:
            fields = stat.read_text().rsplit(")", 1)[1].split()
        except OSError:
            continue
        parents[int(stat.parent.name)] = int(fields[1])
    found, frontier = set(), {pid}
    while frontier:
        frontier = {child for child, parent in parents.items() if parent in frontier} - found
        found |= frontier
    return found


def test_sigterm_stops_with_143_and_valid_file(tmp_path):
    make_lot(tmp_path, [100.0] * 12)
    proc = start_and_wait_for_rows(tmp_path, 3)
    out = tmp_path / "out.csv"
    proc.send_signal(signal.SIGTERM)
    assert proc.wait(timeout=30) == 143
    rows = read_rows(out)
    assert 2 <= len(rows) < 12 and all(r["verdict"] == "pass" for r in rows)


def test_changed_setup_or_foreign_file_is_refused(tmp_path, capsys):
    make_lot(tmp_path, VALUES[:3])
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse) == 0
    (tmp_path / "setup.toml").write_text(SETUP.replace("50 ppm", "40 ppm"), encoding="utf-8")
    from wavefit.errors import SetupError
    with pytest.raises(SetupError, match="another setup file"):
        run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse)


def test_changed_capture_keeps_its_row_and_warns(tmp_path, capsys):
    paths = make_lot(tmp_path, VALUES[:3])
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse) == 0
    paths[0].write_text("80e-6 2e-6\n", encoding="utf-8")
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse) == 0
    assert "part01.txt changed since its row was written" in capsys.readouterr().err
    rows = read_rows(tmp_path / "out.csv")
    assert len(rows) == 3 and rows[0]["verdict"] == "pass"


def test_history_database_gets_each_row_once(tmp_path, capsys):
    make_lot(tmp_path, VALUES)
    db = tmp_path / "history.sqlite"
    assert run(batch_args(tmp_path, "--workers", "1", "--db", str(db)), analyse=interrupting_fake_analyse) == 130
    capsys.readouterr()
    assert run(batch_args(tmp_path, "--workers", "2", "--db", str(db), "--lot", "L-17", "--json"),
               analyse=fake_analyse) == 0
    history = json.loads(capsys.readouterr().out)["history"]
    with sqlite3.connect(db) as con:
        rows = con.execute("SELECT lot, file, verdict, quantities FROM results ORDER BY file").fetchall()
    # one row per capture: the first run recorded 4 under lot "out" (the results file's stem), the
    # resumed run under its own lot name only the 4 it analysed, and said which it did not add again
    assert len(rows) == 8 and [r[2] for r in rows] == EXPECTED
    assert [r[0] for r in rows] == ["out"] * 4 + ["L-17"] * 4
    assert history["added"] == 4 and history["caught_up"] == 0
    assert sorted(Path(r["file"]).name for r in history["already_recorded"]) == [f"part0{i}.txt" for i in range(1, 5)]
    assert {r["recorded_in_lot"] for r in history["already_recorded"]} == {"out"}
    assert json.loads(rows[0][3])["L"] == {"value": 100.0 * 1e-6, "U": 2e-6}


def test_plot_is_drawn(tmp_path, capsys):
    make_lot(tmp_path, VALUES)
    png = tmp_path / "lot.png"
    assert run(batch_args(tmp_path, "--workers", "1", "--plot", str(png)), analyse=fake_analyse) == 0
    assert png.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"


def test_run_rows_hands_every_row_to_the_sink(tmp_path):
    paths = [str(p) for p in make_lot(tmp_path, VALUES)]
    spec = parse_spec({"limits": {"L": "100 uH ±10%"}, "decision": {"rule": "guard-band"}})
    maker = RowMaker(load_setup(tmp_path / "setup.toml"), spec, ("L", "R"), "s1", "s2", "test", fake_analyse)
    rows: list[dict] = []
    assert run_rows(paths, maker, rows.append, workers=2) == len(paths)
    assert sorted(r["file"] for r in rows) == sorted(paths)
    missing = maker(str(tmp_path / "nope.txt"))
    assert missing["verdict"] == "error" and "cannot read" in missing["message"]


def dying_fake_analyse(path: str, setup) -> AnalysisResult:
    if Path(path).name == "part03.txt":
        os._exit(1)          # a worker killed mid-analysis (out of memory, segfault)
    return fake_analyse(path, setup)


def test_capture_that_kills_its_worker_gets_an_error_row(tmp_path):
    make_lot(tmp_path, VALUES)
    assert run(batch_args(tmp_path, "--workers", "2"), analyse=dying_fake_analyse) == 0
    rows = {Path(r["file"]).name: r for r in read_rows(tmp_path / "out.csv")}
    assert sorted(rows) == [f"part{i:02d}.txt" for i in range(1, 9)]
    assert rows["part03.txt"]["verdict"] == "error" and "process died" in rows["part03.txt"]["message"]
    assert [rows[f"part{i:02d}.txt"]["verdict"] for i in (1, 2, 4, 5, 6, 7, 8)] == EXPECTED[:2] + EXPECTED[3:]


def test_bad_spec_exits_3_before_anything_is_written(tmp_path, capsys):
    from wavefit.cli import main

    make_lot(tmp_path, VALUES[:2])
    (tmp_path / "spec.toml").write_text('[limits]\nQ = ">= 40"\n', encoding="utf-8")
    args = ["batch", str(tmp_path / "part*.txt"), "--setup", str(tmp_path / "setup.toml"),
            "--spec", str(tmp_path / "spec.toml"), "--out", str(tmp_path / "out.csv")]
    assert main(args) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "limit for 'Q'" in err and "reports only: L, R" in err
    assert not (tmp_path / "out.csv").exists()


def test_no_progress_output_when_stderr_is_not_a_terminal(tmp_path, capsys):
    make_lot(tmp_path, VALUES[:3])
    assert run(batch_args(tmp_path, "--workers", "1"), analyse=fake_analyse) == 0
    assert capsys.readouterr().err == ""


def test_progress_bar_when_asked(tmp_path, capsys):
    paths = [str(p) for p in make_lot(tmp_path, VALUES[:3])]
    spec = parse_spec({"limits": {"L": "100 uH ±10%"}})
    maker = RowMaker(load_setup(tmp_path / "setup.toml"), spec, ("L",), "s1", "s2", "test", fake_analyse)
    run_rows(paths, maker, lambda row: None, workers=1, progress=True)
    assert "3/3" in capsys.readouterr().err
