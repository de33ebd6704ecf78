"""``wavefit batch``: inspect a lot of captures against a spec, resumably.

Exit codes: 0 every input has a row (``error`` rows included); 3 bad setup,
spec, inputs, outputs, results or curves file, or another run holds the results file,
before anything is analysed; 5 an output could not be written (rows written so
far are kept; run again to resume); 130 after Ctrl-C, 143 after SIGTERM (the
same).
"""
from __future__ import annotations

import argparse
import json
import signal
import sys
from dataclasses import dataclass, field
from pathlib import Path
from typing import TYPE_CHECKING, Any

from ..errors import CaptureError, SetupError
from ..report.safe_text import visible
from ..report.stdout import discard_stdout
from .inputs import capture_order, expand_inputs, expand_part_folders
from .outputs import RunFiles
from .dcr_reading import DCR
from .rows import Analyse, RowMaker, analyse_file, sha256_file
from .spec import Spec, load_spec
from .statistics import LotSummary, far_from_limits, summarize, usable
from .stop import Interrupted, StopSignals
from ..write_errors import write_failed

if TYPE_CHECKING:
    from ..methods.base import Method
    from .curves_file import CurvesFile
    from .results_file import ResultsFile


@dataclass
class _Progress:
    """How far a run got, for the line printed when it is stopped."""

    todo: int | None = None
    written: int = 0
    finished: bool = False

    def stopped_line(self, out: str, signum: int) -> str:
        how = signal.Signals(signum).name
        if self.todo is None:
            return f"wavefit: interrupted ({how}) before any capture was analysed"
        if self.finished:
            return f"wavefit: interrupted ({how}) after the last row; {visible(out)} has every row"
        return (f"wavefit: interrupted ({how}) after {self.written} new rows ({self.todo - self.written} "
                f"captures left); {visible(out)} has every finished row: run the same command again to resume")


@dataclass(frozen=True)
class BatchOutcome:
    """What a batch run did: rows written now, rows found from earlier runs, the summary."""

    written: int
    resumed: int
    changed: tuple[str, ...]
    rows: list[dict[str, Any]]
    summary: LotSummary
    history: dict[str, Any] | None = field(default=None)
    #: Each part's curves (:meth:`CurvesFile.by_part`), ``None`` for a method without curves.
    curves: dict[str, dict[str, Any]] | None = field(default=None)


def run(args: argparse.Namespace, analyse: Analyse = analyse_file) -> int:
    """Run the subcommand; returns the exit code.

    SIGINT and SIGTERM stop the run at any moment with one line on stderr and the
    exit code 128 + the signal number (130, 143); every finished row is kept.
    """
    progress = _Progress()
    with StopSignals() as stop:
        try:
            return _run(args, analyse, stop, progress)
        except KeyboardInterrupt:  # Ctrl-C where no handler could be set (not the main thread)
            stopped = Interrupted(signal.SIGINT)
        except Interrupted as exc:
            stopped = exc
        print(progress.stopped_line(args.out, stopped.signum), file=sys.stderr)
        return stopped.exit_code


#: The exit code of a run whose every row is written but whose spec, a limit written without a
#: unit, every part lies a thousand times or more beyond
#: (:func:`~wavefit.batch.statistics.far_from_limits`): the verdicts are refused as the analyze
#: command refuses a result it cannot trust (its exit code 4).
SPEC_MISMATCH = 4


@dataclass(frozen=True)
class _Plan:
    """What a run will do, all checked before any file is written."""

    method: Method
    spec: Spec
    own: RunFiles
    paths: list[str]
    maker: RowMaker
    lot: str


def _plan(args: argparse.Namespace, analyse: Analyse) -> _Plan:
    """Read and check the setup, spec, outputs and inputs; raise on anything unusable."""
    from .. import __version__
    from ..measurement import takes_entries
    from ..methods import get_method
    from ..outputs import curve_names
    from ..setup import load_setup
    from .curves_file import curves_path

    setup = load_setup(args.setup)
    method = get_method(setup.method)
    method.check_setup(setup)
    curves = curve_names(method.outputs)
    spec = load_spec(args.spec, need_limits=bool(method.quantities))
    units = {name: method.outputs[name].unit for name in method.quantities} | {DCR: "ohm"}
    spec.check_quantities(method.quantities, method.name, curves, readings=(DCR,), units=units)
    own = RunFiles(Path(args.out), Path(args.db) if args.db else None, Path(args.plot) if args.plot else None,
                   Path(args.setup), Path(args.spec), curves_path(args.out) if curves else None,
                   setup.named_files())
    own.check()
    if args.plot and not spec.limits:
        raise SetupError(f"{spec.source}: --plot draws the limited quantities, and the spec has no limits")
    if args.plot:
        from ..report.figure_file import check_figure_path

        check_figure_path(args.plot)
    expand = expand_part_folders if takes_entries(setup, method.capture_count) else expand_inputs
    paths = expand(args.inputs, skip=own.is_own)
    maker = RowMaker(setup, spec, tuple(method.quantities), sha256_file(args.setup), sha256_file(args.spec),
                     __version__, analyse, with_curves=bool(curves), reads_dcr=DCR in spec.limits)
    return _Plan(method, spec, own, paths, maker, args.lot or Path(args.out).stem)


def _run(args: argparse.Namespace, analyse: Analyse, stop: StopSignals, progress: _Progress) -> int:
    from .curves_file import CurvesFile
    from .results_file import ResultsFile, result_columns
    from .run_lock import RunLock

    plan = _plan(args, analyse)
    with RunLock(plan.own.results):
        with stop.deferred():
            results = ResultsFile(plan.own.results, result_columns(
                plan.method.quantities, DCR if plan.maker.reads_dcr else None))
            results.open()
        curves = CurvesFile(plan.own.curves) if plan.own.curves else None
        try:
            _check_same_setup_and_spec(results.rows, plan.maker, args.out)
            done = {row["file"]: row for row in results.rows}
            if curves is not None:
                with stop.deferred():
                    curves.open_beside(done)
            todo = [p for p in plan.paths if p not in done]
            changed = tuple(p for p in plan.paths if p in done and _sha_changed(p, done[p]))
            for path in changed:
                print(f"wavefit: warning: {visible(path)} changed since its row was written; the row is kept "
                      f"(remove it from {visible(args.out)} to analyse the file again)", file=sys.stderr)
            history = _analyse(plan, todo, results, curves, args.workers, stop, progress)
            rows = sorted(results.rows, key=lambda row: capture_order(row["file"]))
            by_part = curves.by_part([row["file"] for row in rows]) if curves is not None else None
        finally:
            results.close()
            if curves is not None:
                curves.close()
        summary = summarize(rows, plan.spec.limits, plan.method.positive)
        outcome = BatchOutcome(progress.written, len(plan.paths) - len(todo), changed, rows, summary, history,
                               by_part)
        far = False
        lines = []
        for name, limit in plan.spec.limits.items():
            factor = far_from_limits([usable(row, name, name in plan.method.positive) for row in rows], limit)
            if factor is None:
                continue
            if limit.unit:  # a unit written makes a missing prefix less likely: said, not refused
                lines.append(f"wavefit: warning: every {name} measured lies at least {factor:.3g} times beyond its "
                             f"limit {visible(limit.text)!r}: a wrong unit prefix in the spec?")
                continue
            far = True
            lines.append(f"wavefit: error: every {name} measured lies at least {factor:.3g} times beyond its limit "
                         f"{visible(limit.text)!r} (no unit written: SI): a unit prefix missing from the spec? The "
                         "verdicts against it are not to be used; correct the spec and run again into another "
                         f"results file ({visible(args.out)} keeps these rows)")
        try:
            _report(outcome, plan.spec, plan.lot, args, plan.method.positive)
        finally:  # said after the summary, and also when the plot cannot be written
            for line in lines:
                print(line, file=sys.stderr)
    return SPEC_MISMATCH if far else 0


def _analyse(plan: _Plan, todo: list[str], results: ResultsFile, curves: CurvesFile | None, workers: int,
             stop: StopSignals, progress: _Progress) -> dict[str, Any] | None:
    """Analyse ``todo``, each part's curves to the curves file, then its row to the results file
    and then the history database; returns what was done to the database (``None`` without
    ``--db``)."""
    from .history_db import HistoryDB
    from .runner import run_rows

    db = HistoryDB(plan.own.db, plan.lot, plan.method.name, plan.method.quantities) if plan.own.db else None
    try:
        if db is not None:
            with stop.deferred():
                db.catch_up(results.rows)

        def sink(row: dict[str, Any]) -> None:
            part_curves = row.pop("curves", [])
            if curves is not None:
                curves.append_rows(part_curves)
            results.append(row)
            progress.written += 1
            if db is not None:
                db.add(row)

        progress.todo = len(todo)
        run_rows(todo, plan.maker, sink, workers=workers, progress=sys.stderr.isatty(), stop=stop)
        progress.finished = True
    finally:
        if db is not None:
            db.close()
    return {"database": str(plan.own.db), **db.report.to_dict()} if db is not None else None


def _check_same_setup_and_spec(rows: list[dict[str, Any]], maker: RowMaker, out: str) -> None:
    for key, what, now in (("setup_sha256", "setup", maker.setup_sha256), ("spec_sha256", "spec", maker.spec_sha256)):
        before = {row[key] for row in rows if row[key]}
        if before - {now}:
            raise SetupError(f"{visible(out)} holds rows made with another {what} file (sha256 "
                             f"{visible(sorted(before - {now})[0][:12])}…); one results file is one lot under "
                             f"one {what}: restore that {what} or use another --out")


def _sha_changed(path: str, row: dict[str, Any]) -> bool:
    try:
        return bool(row["capture_sha256"]) and sha256_file(path) != row["capture_sha256"]
    except (OSError, CaptureError):
        return True


def _report(outcome: BatchOutcome, spec: Spec, lot: str, args: argparse.Namespace,
            positive: tuple[str, ...]) -> None:
    """The summary (text or JSON), then the plot: a plot that cannot be written leaves the
    summary printed."""
    _summarise(outcome, spec, lot, args)
    if args.plot:
        from ..report.lot_plot import LotSeries, save_lot_plot

        series = [LotSeries(name, limit.unit, [usable(row, name, name in positive) for row in outcome.rows],
                            limit.lower, limit.upper)
                  for name, limit in spec.limits.items()]
        try:
            save_lot_plot(series, args.plot, title=f"lot {lot}")
        except OSError as exc:
            raise write_failed("plot", args.plot, exc, f"{visible(args.out)} has every row and the summary is "
                               "printed") from None


def _summarise(outcome: BatchOutcome, spec: Spec, lot: str, args: argparse.Namespace) -> None:
    if args.json:
        payload = {"lot": lot, "results_file": str(args.out), "rule": spec.rule,
                   "guard_factor": spec.guard_factor, "rows_written": outcome.written,
                   "rows_resumed": outcome.resumed, "changed_since_analysed": list(outcome.changed),
                   "limits": {name: {"lower": lim.lower, "upper": lim.upper, "unit": lim.unit, "text": lim.text}
                              for name, lim in spec.limits.items()},
                   "summary": outcome.summary.to_dict(), "history": outcome.history,
                   "curves": outcome.curves}
        _emit(json.dumps(payload, indent=2, allow_nan=False), args.out)
        return
    from .summary_text import render_history, render_summary

    lines = [render_summary(outcome.summary, spec, lot),
             f"  {outcome.written} {'row' if outcome.written == 1 else 'rows'} written, {outcome.resumed} found from "
             f"earlier runs -> {visible(args.out)}"]
    if outcome.curves is not None:
        from .curves_file import curves_path

        lines.append(f"  curves: {len(outcome.curves)} parts -> {visible(curves_path(args.out))}")
    if outcome.history is not None:
        lines.append(render_history(outcome.history))
    _emit("\n".join(lines), args.out)


def _emit(text: str, out: str) -> None:
    """Print the summary. When standard output cannot take it (a full disk), say so in one line;
    a closed pipe is left to the command line, which ends quietly as Unix tools do."""
    try:
        sys.stdout.write(text + "\n")
        sys.stdout.flush()
    except BrokenPipeError:
        raise
    except OSError as exc:
        discard_stdout()
        raise write_failed("the summary to", "standard output", exc, f"{visible(out)} has every row") from None
