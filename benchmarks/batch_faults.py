"""Fault campaign for `wavefit batch`: many runs killed at random moments, then resumed.

The campaign is the one of tests/test_batch_fault_loop.py (SIGKILL and SIGINT to the whole process
group, two runs on one results file at once, results file and history database inside the input
folder) with more rounds. It prints what it saw: rounds per scenario, exit codes, how far the lot
had got after each round, the most rows the database was behind the results file, and every
problem (a capture with two rows, a row missing at the end, a traceback or warning on stderr).
Run from the repository root::

    python benchmarks/batch_faults.py [--rounds 40] [--seed 20260415] [--early-interrupts]

``--early-interrupts`` also sends SIGINT while the interpreter starts, before the batch command
has set its handlers: tracebacks counted then come from Python's start-up and imports.
"""
from __future__ import annotations

import argparse
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))

from test_batch_fault_loop import SEED, campaign  # noqa: E402


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rounds", type=int, default=40)
    parser.add_argument("--seed", type=int, default=SEED)
    parser.add_argument("--early-interrupts", action="store_true")
    args = parser.parse_args()
    start = time.monotonic()
    with tempfile.TemporaryDirectory() as folder:
        figures = campaign(Path(folder), args.rounds, args.seed, args.early_interrupts)
    elapsed = time.monotonic() - start
    print(f"rounds: {args.rounds} in {elapsed:.0f} s (seed {args.seed}) - "
          + ", ".join(f"{name} {count}" for name, count in sorted(figures.rounds.items())))
    print("stops: " + ", ".join(f"{moment} {count}" for moment, count in sorted(figures.stops.items())))
    print("exit codes: " + ", ".join(f"{code}: {count}" for code, count in sorted(figures.exits.items())))
    print("rows after each round: " + " ".join(str(n) for n in figures.rows_after_round)
          + f" ({figures.lots_completed} lots completed and checked)")
    print(f"most rows the database was behind the results file: {figures.max_database_lag}")
    print(f"problems: {len(figures.problems)}")
    for problem in figures.problems:
        print(f"  {problem}")
    return 1 if figures.problems else 0


if __name__ == "__main__":
    sys.exit(main())
