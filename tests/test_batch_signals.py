"""Stopping a batch run: Ctrl-C / SIGTERM to the whole process group while workers start, kill -9.

Required: one line on stderr ("wavefit: interrupted ..."), exit 130 / 143, no traceback and no
warning from any process of the run, every finished row kept, and the next run completes the lot.
"""
from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from wavefit.batch.command import run
from wavefit.batch.stop import Interrupted, StopSignals
from wavefit.cli import build_parser

from test_batch_fakes import command, delayed_analyse, write_lot
from test_batch_runner import descendants, read_rows

needs_proc = pytest.mark.skipif(not Path("/proc/self/status").exists(), reason="needs Linux /proc")


def wait_until(predicate, timeout: float = 60.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if predicate():
            return True
        time.sleep(0.01)
    return False


def cmdline(pid: int) -> bytes:
    try:
        return Path(f"/proc/{pid}/cmdline").read_bytes()
    except OSError:
        return b""


def blocked_signals(pid: int) -> int:
    """The process's blocked-signal mask (bit n-1 for signal n), from /proc."""
    for line in Path(f"/proc/{pid}/status").read_text().splitlines():
        if line.startswith("SigBlk:"):
            return int(line.split()[1], 16)
    raise AssertionError("no SigBlk line")


def test_signal_in_a_deferred_section_is_raised_when_it_ends():
    with StopSignals() as stop:
        with pytest.raises(Interrupted) as caught:
            with stop.deferred():
                os.kill(os.getpid(), signal.SIGTERM)
                time.sleep(0.05)             # the handler has run: it only noted the signal
                finished_section = True
        assert finished_section and caught.value.signum == signal.SIGTERM and caught.value.exit_code == 143
        os.kill(os.getpid(), signal.SIGINT)  # a second signal while stopping does not interrupt the clean-up
        time.sleep(0.05)


def test_signal_outside_a_deferred_section_stops_at_once():
    before = signal.getsignal(signal.SIGINT)
    with StopSignals():
        with pytest.raises(Interrupted) as caught:
            os.kill(os.getpid(), signal.SIGINT)
            for _ in range(100):
                time.sleep(0.01)
            pytest.fail("the signal did not stop the loop")
    assert caught.value.exit_code == 130
    assert signal.getsignal(signal.SIGINT) is before     # handlers restored


@needs_proc
def test_a_process_started_in_a_blocked_section_begins_with_the_signals_masked():
    with StopSignals() as stop:
        with stop.blocked():
            child = subprocess.Popen([sys.executable, "-c", "import sys; sys.stdin.read()"], stdin=subprocess.PIPE)
        try:
            mask = blocked_signals(child.pid)
        finally:
            child.communicate(b"", timeout=30)
        own = blocked_signals(os.getpid())
    for signum in (signal.SIGINT, signal.SIGTERM):
        assert mask & (1 << (signum - 1)), "the child could be stopped before setting its handlers"
        assert not own & (1 << (signum - 1)), "the parent's mask was not restored"


def start_slow_run(folder: Path) -> subprocess.Popen:
    """A batch run with 2 workers in its own process group (as a shell runs a command)."""
    return subprocess.Popen(command(folder), stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                            start_new_session=True)


def finish_lot(folder: Path, count: int) -> None:
    """Resume the lot in this process; every capture then has exactly one row."""
    args = build_parser().parse_args(command(folder, "--workers", "1")[2:])
    assert run(args, analyse=delayed_analyse) == 0
    assert sorted(Path(r["file"]).name for r in read_rows(folder / "out.csv")) == \
        [f"part{i:02d}.txt" for i in range(1, count + 1)]


@needs_proc
@pytest.mark.parametrize("signum", [signal.SIGINT, signal.SIGTERM])
def test_group_signal_while_workers_start(tmp_path, signum):
    write_lot(tmp_path, [100.0] * 6, delay_s=0.1)
    proc = start_slow_run(tmp_path)
    # the moment of the reported traceback: the forkserver exists and is importing the methods
    assert wait_until(lambda: proc.poll() is not None or
                      any(b"forkserver" in cmdline(p) for p in descendants(proc.pid)))
    helpers = descendants(proc.pid)
    os.killpg(proc.pid, signum)
    _, err = proc.communicate(timeout=60)
    assert proc.returncode == 128 + signum, err
    assert err.count("\n") == 1 and err.startswith("wavefit: interrupted"), err
    assert wait_until(lambda: not any(Path(f"/proc/{p}").exists() for p in helpers), 20)
    finish_lot(tmp_path, 6)


@needs_proc
def test_kill_9_leaves_no_warning_and_no_process(tmp_path):
    write_lot(tmp_path, [100.0] * 10, delay_s=0.1)
    proc = start_slow_run(tmp_path)
    out = tmp_path / "out.csv"
    assert wait_until(lambda: out.exists() and len(out.read_text().splitlines()) >= 3)
    helpers = descendants(proc.pid)             # forkserver, resource tracker and workers
    os.kill(proc.pid, signal.SIGKILL)          # the batch process alone: its helpers must notice
    _, err = proc.communicate(timeout=60)       # returns once every process holding stderr has ended
    assert proc.returncode == -signal.SIGKILL
    assert err == "", err                       # no resource tracker "leaked semaphore" warning
    assert wait_until(lambda: not any(Path(f"/proc/{p}").exists() for p in helpers), 20)
    first = read_rows(out)
    assert 2 <= len(first) < 10
    finish_lot(tmp_path, 10)
    assert read_rows(out)[:len(first)] == first        # earlier rows untouched, none doubled
