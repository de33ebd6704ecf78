"""``wavefit batch``: inspect a lot of captures against a spec, resumably.

Exit codes: 0 every input has a row (``error`` rows included); 3 bad setup,
spec, inputs or results file, before anything is analysed; 130 after Ctrl-C,
143 after SIGTERM (rows written so far are kept; run again to resume).
"""
from __future__ import annotations

import argparse
import json
import os
import sys
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from ..errors import SetupError
from .inputs import capture_order, expand_inputs
from .rows import Analyse, RowMaker, analyse_file, sha256_file
from .runner import Interrupted, run_rows
from .spec import Spec, load_spec
from .statistics import LotSummary, summarize


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
    p.add_argument("--workers", type=_positive_int, default=available_cores(), metavar="N",
                   help="worker processes (default: the cores this process may use)")
    p.add_argument("--json", action="store_true", help="print the lot summary as JSON")
    p.add_argument("--plot", metavar="FILE.png", help="draw histograms with the limits and run charts")
    p.add_argument("--db", metavar="HISTORY.sqlite", help="also append the rows to this SQLite history")
    p.add_argument("--lot", help="lot name in the history (default: the results file's name without suffix)")
    return p


@dataclass(frozen=True)
class BatchOutcome:
    """What a batch run did: rows written now, rows found from earlier runs, the summary."""

    written: int
    resumed: int
    changed: tuple[str, ...]
    rows: list[dict[str, Any]]
    summary: LotSummary


def run(args: argparse.Namespace, analyse: Analyse = analyse_file) -> int:
    """Run the subcommand; returns the exit code."""
    from .. import __version__
    from ..methods import get_method
    from ..setup import load_setup
    from .history_db import HistoryDB
    from .results_file import ResultsFile, result_columns

    setup = load_setup(args.setup)
    method = get_method(setup.method)
    method.check_setup(setup)
    if method.uses_setup_captures:
        raise SetupError(f"{setup.source}: method {setup.method!r} takes its captures from the setup; "
                         "batch needs a method that analyses one capture per part")
    if not method.quantities:
        raise SetupError(f"method {setup.method!r} declares no quantities to report")
    spec = load_spec(args.spec)
    spec.check_quantities(method.quantities, method.name)
    paths = expand_inputs(args.inputs)
    maker = RowMaker(setup, spec, tuple(method.quantities), sha256_file(args.setup), sha256_file(args.spec),
                     __version__, analyse)
    lot = args.lot or Path(args.out).stem
    written = 0
    with ResultsFile(args.out, result_columns(method.quantities)) as results:
        _check_same_setup_and_spec(results.rows, maker, args.out)
        done = {row["file"]: row for row in results.rows}
        todo = [p for p in paths if p not in done]
        changed = tuple(p for p in paths if p in done and _sha_changed(p, done[p]))
        for path in changed:
            print(f"wavefit: warning: {path} changed since its row was written; the row is kept "
                  f"(remove it from {args.out} to analyse the file again)", file=sys.stderr)
        db = HistoryDB(args.db, lot, method.name, method.quantities) if args.db else None
        try:
            if db is not None:
                db.add_many(results.rows)

            def sink(row: dict[str, Any]) -> None:
                nonlocal written
                results.append(row)
                written += 1
                if db is not None:
                    db.add(row)

            try:
                run_rows(todo, maker, sink, workers=args.workers, progress=sys.stderr.isatty())
            except (KeyboardInterrupt, Interrupted) as stop:
                print(f"wavefit: interrupted after {written} new rows ({len(todo) - written} captures left); "
                      f"{args.out} is complete up to there: run the same command again to resume",
                      file=sys.stderr)
                return 143 if isinstance(stop, Interrupted) else 130
        finally:
            if db is not None:
                db.close()
        rows = sorted(results.rows, key=lambda row: capture_order(row["file"]))
    summary = summarize(rows, spec.limits)
    outcome = BatchOutcome(written, len(paths) - len(todo), changed, rows, summary)
    _report(outcome, spec, lot, args)
    return 0


def _check_same_setup_and_spec(rows: list[dict[str, Any]], maker: RowMaker, out: str) -> None:
    for key, what, now in (("setup_sha256", "setup", maker.setup_sha256), ("spec_sha256", "spec", maker.spec_sha256)):
        before = {row[key] for row in rows if row[key]}
        if before - {now}:
            raise SetupError(f"{out} holds rows made with another {what} file (sha256 "
                             f"{sorted(before - {now})[0][:12]}…); one results file is one lot under one "
                             f"{what}: restore that {what} or use another --out")


def _sha_changed(path: str, row: dict[str, Any]) -> bool:
    try:
        return bool(row["capture_sha256"]) and sha256_file(path) != row["capture_sha256"]
    except OSError:
        return True


def _report(outcome: BatchOutcome, spec: Spec, lot: str, args: argparse.Namespace) -> None:
    if args.plot:
        from ..report.lot_plot import LotSeries, save_lot_plot

        series = [LotSeries(name, limit.unit, [row.get(name) if row["verdict"] != "error" else None
                                               for row in outcome.rows], limit.lower, limit.upper)
                  for name, limit in spec.limits.items()]
        save_lot_plot(series, args.plot, title=f"lot {lot}")
    if args.json:
        payload = {"lot": lot, "results_file": str(args.out), "rule": spec.rule,
                   "guard_factor": spec.guard_factor, "rows_written": outcome.written,
                   "rows_resumed": outcome.resumed, "changed_since_analysed": list(outcome.changed),
                   "limits": {name: {"lower": lim.lower, "upper": lim.upper, "unit": lim.unit, "text": lim.text}
                              for name, lim in spec.limits.items()},
                   "summary": outcome.summary.to_dict()}
        print(json.dumps(payload, indent=2, allow_nan=False))
        return
    from .summary_text import render_summary

    print(render_summary(outcome.summary, spec, lot))
    print(f"  {outcome.written} rows written, {outcome.resumed} found from earlier runs -> {args.out}")


def available_cores() -> int:
    """The cores this process may run on (its CPU affinity where the OS tells it)."""
    if hasattr(os, "sched_getaffinity"):
        return max(1, len(os.sched_getaffinity(0)))
    return os.cpu_count() or 1  # pragma: no cover - not on Linux


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if value < 1:
        raise argparse.ArgumentTypeError("must be at least 1")
    return value
