"""The run's own files: never taken as captures, never the same file twice, and one run per results file.

The lock is flock(2) on RESULTS.lock, held from before the results file is opened until after the
plot is drawn; the kernel releases it when the process ends, so a killed run blocks nothing.
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
from pathlib import Path

import pytest

from wavefit.batch import command as batch_command
from wavefit.batch.command import run
from wavefit.batch.run_lock import RunLock, RunLockedError, lock_path
from wavefit.cli import build_parser
from wavefit.errors import WavefitError

from test_batch_fakes import delayed_analyse, write_lot
from test_batch_runner import read_rows

LOCK_PROBE = ("import sys\nfrom wavefit.batch.run_lock import RunLock, RunLockedError\n"
              "try:\n    RunLock(sys.argv[1]).acquire()\nexcept RunLockedError:\n    sys.exit(7)\n")


def other_process_can_lock(results: Path) -> bool:
    """Whether another process could take the results file's lock now."""
    probe = subprocess.run([sys.executable, "-c", LOCK_PROBE, str(results)], capture_output=True, timeout=60)
    assert probe.returncode in (0, 7), probe.stderr
    return probe.returncode == 0


def args_for(*argv: str):
    return build_parser().parse_args(["batch", *argv])


def lot_with_outputs_inside(tmp_path, monkeypatch) -> list[str]:
    monkeypatch.chdir(tmp_path)
    write_lot(tmp_path / "lot", [100.0 + i for i in range(5)])
    return ["--setup", "lot/setup.toml", "--spec", "lot/spec.toml", "--workers", "1"]


@pytest.mark.parametrize("inputs", [["lot"], ["lot/*"], ["lot/*.txt", "lot/part0*"], ["./lot/"]])
def test_outputs_inside_the_input_folder_are_not_captures(tmp_path, monkeypatch, capsys, inputs):
    common = lot_with_outputs_inside(tmp_path, monkeypatch)
    outputs = ["--out", "lot/results.csv", "--db", "lot/history.csv", "--plot", "lot/lot.png"]
    assert run(args_for(*inputs, *common, *outputs), analyse=delayed_analyse) == 0
    # the second run sees the results file, the database (named like a capture on purpose) and
    # the plot in the folder, and with a shell-expanded list names them one by one
    expanded = sorted(f"lot/{p.name}" for p in (tmp_path / "lot").iterdir())
    for again in (inputs, expanded):
        assert run(args_for(*again, *common, *outputs), analyse=delayed_analyse) == 0
        assert "0 rows written, 5 found from earlier runs" in capsys.readouterr().out
    rows = read_rows(tmp_path / "lot" / "results.csv")
    assert sorted(Path(r["file"]).name for r in rows) == [f"part{i:02d}.txt" for i in range(1, 6)]


def test_an_output_named_by_another_spelling_is_still_excluded(tmp_path, monkeypatch):
    common = lot_with_outputs_inside(tmp_path, monkeypatch)
    (tmp_path / "link").symlink_to(tmp_path / "lot")
    assert run(args_for("link/*", *common, "--out", str(tmp_path / "lot" / "out.csv")),
               analyse=delayed_analyse) == 0
    assert run(args_for("link/*", *common, "--out", "lot/../lot/out.csv"), analyse=delayed_analyse) == 0
    assert len(read_rows(tmp_path / "lot" / "out.csv")) == 5


@pytest.mark.parametrize("outputs, fragment", [
    (["--out", "lot/r.csv", "--plot", "lot/r.csv"], "--out and --plot name the same file"),
    (["--out", "lot/r.csv", "--db", "./lot/r.csv"], "--out and --db name the same file"),
    (["--out", "lot/r.csv", "--db", "lot/h.db", "--plot", "lot/h.db"], "--db and --plot name the same file"),
    (["--out", "lot/setup.toml"], "--out and --setup name the same file"),
    (["--out", "lot/r.csv", "--db", "lot/spec.toml"], "--db and --spec name the same file"),
    (["--out", "lot/r.csv", "--plot", "lot/r.csv.lock"], "lock file and --plot name the same file"),
    (["--out", "/dev/full"], "is not a regular file"),
    (["--out", "lot"], "is not a regular file"),
    (["--out", "lot/r.csv", "--plot", "lot/plot.csv"], "give it a suffix of an image format"),
    (["--out", "lot/r.csv", "--plot", "nowhere/plot.png"], "does not exist"),
    # a folder whose name is longer than any file system takes (the check itself raised
    # "File name too long", exit 5 after the whole lot was analysed)
    (["--out", "lot/r.csv", "--plot", "d" * 300 + "/plot.png"], "does not exist"),
    (["--out", "d" * 300 + "/r.csv"], "does not exist"),
])
def test_unusable_outputs_are_refused_before_anything_is_written(tmp_path, monkeypatch, outputs, fragment):
    common = lot_with_outputs_inside(tmp_path, monkeypatch)
    before = {p.name: p.read_bytes() for p in (tmp_path / "lot").iterdir()}
    with pytest.raises(WavefitError) as caught:
        run(args_for("lot", *common, *outputs), analyse=delayed_analyse)
    assert caught.value.exit_code == 3 and fragment in str(caught.value), str(caught.value)
    assert {p.name: p.read_bytes() for p in (tmp_path / "lot").iterdir()} == before


def test_lock_is_held_from_the_first_row_to_the_plot(tmp_path, monkeypatch):
    common = lot_with_outputs_inside(tmp_path, monkeypatch)
    out = tmp_path / "lot" / "out.csv"
    seen: list[bool] = []

    def analyse_and_probe(path, setup):
        with open(out, "rb"):        # a read of the results file (the old record lock fell with it)
            pass
        if path.endswith("part03.txt"):
            seen.append(other_process_can_lock(out))
        return delayed_analyse(path, setup)

    real_report = batch_command._report

    def report_and_probe(*args, **kwargs):
        seen.append(other_process_can_lock(out))
        real_report(*args, **kwargs)

    monkeypatch.setattr(batch_command, "_report", report_and_probe)
    assert run(args_for("lot", *common, "--out", "lot/out.csv", "--plot", "lot/p.png"),
               analyse=analyse_and_probe) == 0
    assert seen == [False, False]
    assert not lock_path(out).exists() and other_process_can_lock(out)   # released, the lock file removed


def test_second_run_on_the_same_results_file_is_refused_in_one_line(tmp_path):
    write_lot(tmp_path, [100.0] * 3)
    out = tmp_path / "out.csv"
    with RunLock(out):
        done = subprocess.run([sys.executable, "-m", "wavefit.cli", "batch", str(tmp_path), "--setup",
                               str(tmp_path / "setup.toml"), "--spec", str(tmp_path / "spec.toml"),
                               "--out", str(out)], capture_output=True, text=True, timeout=120)
    assert done.returncode == 3
    assert done.stderr.count("\n") == 1 and "in use by another run" in done.stderr
    assert not out.exists()                            # nothing written


def test_lock_of_a_killed_run_blocks_nothing(tmp_path):
    out = tmp_path / "out.csv"
    holder = subprocess.Popen([sys.executable, "-c", LOCK_PROBE + "print('held', flush=True)\nsys.stdin.read()\n",
                               str(out)], stdin=subprocess.PIPE, stdout=subprocess.PIPE, text=True)
    assert holder.stdout.readline().strip() == "held"
    with pytest.raises(RunLockedError, match="in use by another run"):
        RunLock(out).acquire()
    os.kill(holder.pid, signal.SIGKILL)
    holder.wait(timeout=30)
    assert lock_path(out).exists()                     # left behind by the killed run...
    with RunLock(out):                                 # ...and free at once
        pass
    assert not lock_path(out).exists()


def test_a_results_file_named_through_a_link_is_still_taken(tmp_path):
    # the check shared with --plot refuses links, which a renamed temporary would replace; the
    # results file and the database are written in place, so a link to a regular file is theirs
    from wavefit.batch.outputs import RunFiles

    real = tmp_path / "real.csv"
    real.write_text("", encoding="utf-8")
    link = tmp_path / "results.csv"
    link.symlink_to(real)
    RunFiles(link).check()
    plot = tmp_path / "lot.png"
    plot.symlink_to(tmp_path / "elsewhere.png")
    with pytest.raises(Exception, match="is not a regular file"):
        RunFiles(tmp_path / "r2.csv", plot=plot).check()
