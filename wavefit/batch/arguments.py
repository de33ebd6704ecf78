"""The ``batch`` subcommand's arguments, apart from its run (:mod:`.command`) so that the
command line's parser is built without loading the numerical libraries."""
from __future__ import annotations

import argparse
import os
from typing import Any

from ..argument_types import whole_number


def add_batch_parser(sub: Any) -> argparse.ArgumentParser:
    """Add the ``batch`` subcommand to the CLI's subparsers."""
    p = sub.add_parser("batch", help="inspect a lot: one verdict per capture against a spec, lot statistics",
                       description="Analyse every capture of a lot, judge each against the spec limits "
                                   "and append one row per capture to a results CSV; running the same "
                                   "command again resumes.")
    p.add_argument("inputs", nargs="+", metavar="INPUT", help="capture files, folders or glob patterns")
    p.add_argument("--setup", required=True, help="setup file (TOML): method, columns, parts")
    p.add_argument("--spec", required=True, help="spec file (TOML): [limits] and [decision]")
    p.add_argument("--out", required=True, metavar="RESULTS.csv", help="results CSV, appended to and resumed")
    p.add_argument("--workers", type=whole_number(1, "must be at least 1"), default=available_cores(), metavar="N",
                   help="worker processes (default: the cores this process may use)")
    p.add_argument("--json", action="store_true", help="print the lot summary as JSON")
    p.add_argument("--plot", metavar="FILE.png", help="draw histograms with the limits and run charts")
    p.add_argument("--db", metavar="HISTORY.sqlite", help="also append the rows to this SQLite history")
    p.add_argument("--lot", help="lot name in the history (default: the results file's name without suffix)")
    return p


def available_cores() -> int:
    """The cores this process may run on (its CPU affinity where the OS tells it)."""
    if hasattr(os, "sched_getaffinity"):
        return max(1, len(os.sched_getaffinity(0)))
    return os.cpu_count() or 1  # pragma: no cover - not on Linux
