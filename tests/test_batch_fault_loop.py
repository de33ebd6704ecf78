"""Fault campaign: batch runs killed at random moments, alone and two at once, then resumed.

Each round starts the batch command (2 workers; results file and history database inside the
input folder) in its own process group, as a shell does, and stops it with SIGKILL or SIGINT to
the whole group at a random moment, or starts two runs on the same results file at once. After
every round the results file and the database must be sound (complete rows, no capture twice, the
database never ahead of the results file); after the last, one undisturbed run must leave exactly
one row per capture in both. No run may print a traceback or a warning.

The seed fixes the choices and delays; where a kill lands still depends on the machine's speed.
``benchmarks/batch_faults.py`` runs more rounds and prints the figures.
"""
from __future__ import annotations

import csv
import hashlib
import io
import os
import random
import signal
import sqlite3
import subprocess
import time
from collections import Counter
from dataclasses import dataclass, field
from pathlib import Path

from test_batch_fakes import command, write_lot

SEED = 20260415
CAPTURES = 12
#: Each fake analysis takes this long, so a run spends about 2.4 s analysing with 2 workers.
ANALYSIS_S = 0.4
#: A stop drawn in time lands this long after the process started: from interpreter start-up to the summary.
START_WINDOW_S = (0.2, 6.0)
#: SIGINT lands this long after the run took its lock (the command's handlers are set by then).
INTERRUPT_WINDOW_S = (0.0, 4.0)
#: Exit codes a run of the campaign may end with: done, refused (another run holds the lot), Ctrl-C, SIGKILL.
ALLOWED_EXITS = {0, 3, 130, -signal.SIGKILL}
SCENARIOS = ("kill", "interrupt", "two at once")


@dataclass
class Figures:
    """What a campaign saw."""

    rounds: Counter = field(default_factory=Counter)
    stops: Counter = field(default_factory=Counter)
    exits: Counter = field(default_factory=Counter)
    max_database_lag: int = 0
    rows_after_round: list[int] = field(default_factory=list)
    lots_completed: int = 0
    problems: list[str] = field(default_factory=list)


def lot_rows(out: Path) -> list[dict[str, str]]:
    """The complete rows of a results file (a kill may leave one partial last line)."""
    if not out.exists():
        return []
    text = out.read_text(encoding="utf-8")
    return list(csv.DictReader(io.StringIO(text[:text.rfind("\n") + 1], newline="")))


def database_rows(db: Path) -> list[tuple[str, str]]:
    if not db.exists():
        return []
    with sqlite3.connect(db) as con:
        try:
            return con.execute("SELECT file, capture_sha256 FROM results").fetchall()
        except sqlite3.OperationalError:   # killed before the table was made
            return []


def check_state(lot: Path, figures: Figures, label: str) -> None:
    captures = {str(p) for p in lot.glob("part*.txt")}
    rows = lot_rows(lot / "out.csv")
    files = [row["file"] for row in rows]
    if len(files) != len(set(files)):
        figures.problems.append(f"{label}: a capture has two rows: {sorted(f for f in files if files.count(f) > 1)}")
    if set(files) - captures:
        figures.problems.append(f"{label}: rows for files that are not captures: {sorted(set(files) - captures)}")
    recorded = database_rows(lot / "h.sqlite")
    if {f for f, _ in recorded} - set(files):
        figures.problems.append(f"{label}: the database is ahead of the results file")
    figures.max_database_lag = max(figures.max_database_lag, len(set(files)) - len(recorded))


def check_output(proc: subprocess.Popen, err: str, figures: Figures, label: str) -> None:
    figures.exits[proc.returncode] += 1
    if proc.returncode not in ALLOWED_EXITS:
        figures.problems.append(f"{label}: exit {proc.returncode}: {err!r}")
    if "Traceback" in err or "arning" in err or err.count("\n") > 1:
        figures.problems.append(f"{label}: stderr {err!r}")
    if proc.returncode == 130 and not err.startswith("wavefit: interrupted"):
        figures.problems.append(f"{label}: stopped without saying so: {err!r}")
    if proc.returncode == 3 and "in use by another run" not in err:
        figures.problems.append(f"{label}: refused for another reason: {err!r}")


class Run:
    """One batch run in its own process group."""

    def __init__(self, argv: list[str]) -> None:
        self.proc = subprocess.Popen(argv, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True,
                                     start_new_session=True)
        self.started = time.monotonic()

    def signal_group(self, signum: int) -> None:
        try:
            os.killpg(self.proc.pid, signum)
        except ProcessLookupError:    # it ended on its own meanwhile
            pass

    def finish(self) -> str:
        return self.proc.communicate(timeout=120)[1]


def holds_lock(pid: int, lock: Path) -> bool:
    """Whether process ``pid`` holds the flock on ``lock`` (Linux /proc/locks)."""
    try:
        inode = os.stat(lock).st_ino
        table = Path("/proc/locks").read_text()
    except OSError:
        return False
    for line in table.splitlines():
        fields = line.split()
        if len(fields) > 5 and fields[1] == "FLOCK" and fields[4] == str(pid) and \
                fields[5].rsplit(":", 1)[-1] == str(inode):
            return True
    return False


def wait_for_lock(run: Run, lock: Path) -> bool:
    """Wait until the run holds its lock; False if it ended (or was refused) first."""
    while run.proc.poll() is None:
        if holds_lock(run.proc.pid, lock):
            return True
        time.sleep(0.005)
    return False


def wait_for_rows(run: Run, out: Path, rows: int) -> bool:
    """Wait until the results file has ``rows`` complete rows; False if the run ended first."""
    while run.proc.poll() is None:
        if len(lot_rows(out)) >= rows:
            return True
        time.sleep(0.005)
    return False


def stop_at_random(run: Run, how: str, rng: random.Random, lock: Path, early: bool = False) -> str:
    """Stop the run's group: SIGKILL ("kill") or SIGINT ("interrupt"); returns when it was sent.

    Half the time the moment is drawn in time: from the start for SIGKILL (and for SIGINT when
    ``early``), from when the run took its lock for SIGINT. The other half it is drawn in the
    lot: shortly after a random number of new rows, so that stops land within the lot too.
    """
    signum = signal.SIGKILL if how == "kill" else signal.SIGINT
    out = lock.with_suffix("")                  # lot/out.csv.lock -> lot/out.csv
    if rng.random() < 0.5:
        target = len(lot_rows(out)) + rng.randint(1, CAPTURES - 1)
        if not wait_for_rows(run, out, target):
            return "ended first"
        time.sleep(rng.uniform(0.0, ANALYSIS_S))
        moment = f"after row {target}"
    elif how == "kill" or early:
        time.sleep(max(0.0, run.started + rng.uniform(*START_WINDOW_S) - time.monotonic()))
        moment = "in time from start"
    elif wait_for_lock(run, lock):
        time.sleep(rng.uniform(*INTERRUPT_WINDOW_S))
        moment = "in time from the lock"
    else:
        return "ended first"
    if signum == signal.SIGINT and not early and not holds_lock(run.proc.pid, lock):
        return "ended first"                    # no longer inside the command, whose handlers are set
    run.signal_group(signum)
    return moment


def campaign(folder: Path, rounds: int, seed: int = SEED, early_interrupts: bool = False) -> Figures:
    """Stop and resume lots for ``rounds`` rounds; returns what was seen.

    The scenarios take turns in a seeded order. When a lot is complete, one undisturbed run
    checks it (exactly one row per capture in the results file and the database) and the next
    round starts a new lot. ``early_interrupts`` also sends SIGINT before the batch command has
    set its handlers (while the interpreter starts and imports): what happens then is the
    command line's entry point's.
    """
    rng = random.Random(seed)
    lot = folder / "lot"
    write_lot(lot, [96.0 + 0.5 * i for i in range(CAPTURES)], delay_s=ANALYSIS_S)
    lock = lot / "out.csv.lock"
    figures = Figures()
    order = [SCENARIOS[k % len(SCENARIOS)] for k in range(rounds)]
    rng.shuffle(order)
    for number, scenario in enumerate(order):
        inputs = rng.choice([str(lot), str(lot / "*")])
        argv = command(lot, "--db", str(lot / "h.sqlite"), inputs=inputs)
        label = f"round {number} ({scenario}, inputs {Path(inputs).name})"
        figures.rounds[scenario] += 1
        runs = [Run(argv)] + ([Run(argv)] if scenario == "two at once" else [])
        for run in runs:
            how = scenario if scenario != "two at once" else rng.choice(("kill", "interrupt", "none"))
            if how != "none":
                figures.stops[stop_at_random(run, how, rng, lock, early_interrupts)] += 1
        for run in runs:
            check_output(run.proc, run.finish(), figures, label)
        check_state(lot, figures, label)
        done = len(lot_rows(lot / "out.csv"))
        figures.rows_after_round.append(done)
        if done == CAPTURES or number == rounds - 1:
            check_complete_lot(lot, figures, label)
            for name in ("out.csv", "h.sqlite"):
                (lot / name).unlink()
    return figures


def check_complete_lot(lot: Path, figures: Figures, label: str) -> None:
    """Finish the lot with one undisturbed run; then every capture has exactly one row in both files."""
    final = Run(command(lot, "--db", str(lot / "h.sqlite")))
    err = final.finish()
    if final.proc.returncode != 0 or err:
        figures.problems.append(f"{label}, finishing run: exit {final.proc.returncode}: {err!r}")
    captures = sorted(lot.glob("part*.txt"))
    files = sorted(row["file"] for row in lot_rows(lot / "out.csv"))
    if files != [str(p) for p in captures]:
        figures.problems.append(f"{label}, finished results file: {files}")
    hashes = sorted((str(p), hashlib.sha256(p.read_bytes()).hexdigest()) for p in captures)
    if sorted(database_rows(lot / "h.sqlite")) != hashes:
        figures.problems.append(f"{label}, finished database: {sorted(database_rows(lot / 'h.sqlite'))}")
    figures.lots_completed += 1


def test_killed_and_doubled_runs_leave_one_row_per_capture(tmp_path):
    figures = campaign(tmp_path, rounds=6)
    assert figures.problems == []
    assert figures.rounds == {scenario: 2 for scenario in SCENARIOS} and figures.lots_completed >= 1
