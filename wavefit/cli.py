"""Command line: parse arguments, call the library, print, set the exit code.

Exit codes: 0 done; 2 usage error; 3 unreadable capture or bad setup;
4 analysis refused (no result that could be trusted); 5 an output could not be written.
"""
from __future__ import annotations

import argparse
import json
import os
import signal
import sys
from pathlib import Path
from typing import Any, NoReturn, Sequence

from . import __version__
from .argument_types import whole_number
from .batch.arguments import add_batch_parser
from .calibration.arguments import add_calibrate_parser
from .errors import OutputError, SetupError, WavefitError
from .report.safe_text import visible
from .report.stdout import discard_stdout

EXIT_OK, EXIT_USAGE, EXIT_INPUT, EXIT_REFUSED, EXIT_OUTPUT = 0, 2, 3, 4, 5


#: Fewest Monte Carlo draws the command line takes: a 95 % coverage interval cut from fewer than
#: 10⁴ draws moves in its first significant digit from one seed to the next (common practice;
#: JCGM 101:2008, 7.2.2, expects 10⁶ for one or two correct digits).
MIN_DRAWS = 10_000


#: ``--draws``: a whole number of at least MIN_DRAWS; ``--seed``: one of zero or more (numpy's
#: generators take no negative seed).
_draws = whole_number(MIN_DRAWS, "{value} draws is too few for a coverage interval; give at least {least}")
_seed = whole_number(0, "{value} is negative; give a whole number of zero or more")


class OneLineParser(argparse.ArgumentParser):
    """An argument parser whose usage errors are one line on stderr, as every other error is
    (argparse prints the whole usage block first: six lines for ``analyze``), and exit 2."""

    def error(self, message: str) -> NoReturn:
        self.exit(2, f"{self.prog}: error: {message} (see {self.prog} --help)\n")


def build_parser() -> argparse.ArgumentParser:
    parser = OneLineParser(
        prog="wavefit",
        description="Measure inductors (L, DCR, Q, self-capacitance) from recorded scope waveforms.",
    )
    parser.add_argument("--version", action="version", version=f"wavefit {__version__}")
    parser.add_argument("--debug", action="store_true", help="show tracebacks instead of one-line errors")
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")

    p_an = sub.add_parser("analyze", help="fit captures and report component values with uncertainties")
    p_an.add_argument("captures", nargs="*", metavar="CAPTURE", help="capture files (CSV, optionally .gz)")
    p_an.add_argument("--setup", required=True, help="setup file (TOML): method, columns, parts")
    output = p_an.add_mutually_exclusive_group()
    output.add_argument("--json", action="store_true", help="print only the result as JSON")
    output.add_argument("--csv", action="store_true",
                        help="print only a CSV table: one row per quantity and per point of each curve")
    p_an.add_argument("--plot", metavar="FILE.png", help="draw capture, fitted model and residuals")
    p_an.add_argument("--sample-interval", type=float, metavar="SECONDS",
                      help="sample interval when the capture has no time column")
    p_an.add_argument("--no-budget", action="store_true", help="leave the budget out of the text report")
    p_an.add_argument("--uncertainty", choices=("linear", "montecarlo"), default="linear",
                      help="montecarlo: also propagate the inputs' distributions by Monte Carlo (JCGM 101, "
                           "10^6 draws) and report its coverage intervals beside the linear ones")
    p_an.add_argument("--draws", type=_draws, default=None, metavar="N",
                      help=f"Monte Carlo draws (default 10^6, at least {MIN_DRAWS})")
    p_an.add_argument("--seed", type=_seed, default=None, metavar="N",
                      help="seed of the Monte Carlo draws (default: a fixed one, so runs repeat)")

    p_in = sub.add_parser("inspect", help="show what the reader sees in a capture file")
    p_in.add_argument("file", metavar="FILE")
    p_in.add_argument("--json", action="store_true", help="print as JSON")
    p_in.add_argument("--sample-interval", type=float, metavar="SECONDS")
    p_in.add_argument("--time-column", metavar="COLUMN",
                      help="the time column by header or 0-based place in the file, when it is not found")

    p_su = sub.add_parser("suggest", help="propose a setup and the next capture's settings from a first capture")
    p_su.add_argument("file", metavar="CAPTURE")
    p_su.add_argument("--json", action="store_true", help="print the suggestion as JSON")
    p_su.add_argument("--sense-resistor", metavar="VALUE",
                      help='the sense resistor of this capture as a part value, e.g. "10 ohm ±0.1%%"')
    p_su.add_argument("--bits", type=int, default=8, metavar="N", help="the converter's resolution (default 8)")

    add_batch_parser(sub)
    add_calibrate_parser(sub)
    return parser


def main(argv: Sequence[str] | None = None) -> int:
    closed = _standard_streams()
    if closed is not None:
        return closed
    parser = build_parser()
    args = parser.parse_args(argv)
    if args.command is None:
        parser.print_help(sys.stderr)
        return EXIT_USAGE
    handler = {"analyze": _analyze, "inspect": _inspect, "batch": _batch, "calibrate": _calibrate,
               "suggest": _suggest}[args.command]
    previous = _on_sigterm(args.command)
    try:
        return handler(args)
    except Terminated:
        print("wavefit: terminated", file=sys.stderr)
        return 128 + signal.SIGTERM
    except WavefitError as exc:
        if args.debug:
            raise
        print(f"wavefit: error: {_one_line(str(exc))}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("wavefit: interrupted", file=sys.stderr)
        return 130
    except MemoryError:
        # the analysis refuses its own fits in one line; this is the rest (a capture too large to
        # read: 400 million rows in a 4.6 MB gzip file ended in a 42-line traceback)
        if args.debug:
            raise
        print("wavefit: error: not enough memory to read or analyse the capture; analyse a shorter or "
              "decimated record", file=sys.stderr)
        return EXIT_REFUSED
    except BrokenPipeError:
        # the reader of our output went away (e.g. `| head`): stop quietly, as Unix tools do
        discard_stdout()
        return 141
    except OSError as exc:  # the output could not be written (a full disk, a closed terminal)
        print(f"wavefit: error: cannot write the output ({exc.strerror or exc})", file=sys.stderr)
        return EXIT_OUTPUT
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


class Terminated(BaseException):
    """SIGTERM arrived: raised where the run is, so that files half written are removed on the
    way out as after Ctrl-C (a terminated ``--plot`` left its hidden temporary files behind); a
    BaseException, as KeyboardInterrupt is, so that no ``except Exception`` stops it."""


def _terminated(signum: int, frame: object) -> None:
    """The SIGTERM handler of a command other than batch: raise :class:`Terminated`."""
    raise Terminated


def _on_sigterm(command: str) -> Any:
    """Install :func:`_terminated` for SIGTERM and return the handler it replaces (None for batch,
    which stops its workers and rows on SIGTERM itself, and outside the main thread, where no
    handler can be installed)."""
    if command == "batch":
        return None
    try:
        return signal.signal(signal.SIGTERM, _terminated)
    except ValueError:  # not the main thread
        return None


def _standard_streams() -> int | None:
    """Make the standard streams safe to print to: a character the stream's encoding cannot
    show (Ω, µ, ± under a Latin-1 or ASCII locale) is written as a backslash escape instead of
    ending the run in a traceback; a closed stderr is replaced by the null device (messages are
    lost, the exit code still tells). A closed stdout would lose every result printed to it
    (exit 0, or a traceback), so the run is refused: EXIT_OUTPUT, with the reason on stderr."""
    if sys.stderr is None:
        sys.stderr = open(os.devnull, "w", encoding="utf-8")  # noqa: SIM115 (for the process's life)
    for stream in (sys.stdout, sys.stderr):
        if stream is not None and hasattr(stream, "reconfigure"):
            stream.reconfigure(errors="backslashreplace")
    if sys.stdout is None:
        print("wavefit: error: standard output is closed, so no result could be shown; redirect it "
              "(to /dev/null to discard it)", file=sys.stderr)
        return EXIT_OUTPUT
    return None


def _analyze(args: argparse.Namespace) -> int:
    from .analysis import analyze
    from .measurement import takes_entries
    from .methods import get_method
    from .setup import load_setup

    monte_carlo = _monte_carlo_options(args)
    if monte_carlo is None:
        return EXIT_USAGE
    if args.plot:
        from .report.figure_file import check_figure_path

        check_figure_path(args.plot)  # a format or folder that cannot be, before any analysis
    setup = load_setup(args.setup)
    method = get_method(setup.method)
    if takes_entries(setup, method.capture_count):  # one measurement: the entries' captures
        jobs = [args.captures or None]
    elif not args.captures:
        print("wavefit: error: name at least one CAPTURE file to analyse", file=sys.stderr)
        return EXIT_USAGE
    else:
        jobs = list(args.captures)
    if args.plot:
        from .output_files import check_output

        inputs = (*args.captures, args.setup, *setup.named_files())
        for k in range(len(jobs)):  # each plot, before any analysis: none may be an input
            check_output("--plot", _plot_path(args.plot, k, len(jobs)), inputs)
    results, worst = [], EXIT_OK
    for k, source in enumerate(jobs):
        try:
            result = analyze(source, setup, sample_interval=args.sample_interval, uncertainty=args.uncertainty,
                             **monte_carlo)
        except WavefitError as exc:
            if args.debug:
                raise
            label = source if isinstance(source, str) else "setup captures"
            message = _one_line(str(exc))
            # with several captures each error must say which one; the reader's already do, and so
            # do the methods' refusals that begin with the capture's name
            said = exc.source is not None or message.startswith(f"{_one_line(label)}: ")
            named = message if said or len(jobs) == 1 else f"{_one_line(label)}: {message}"
            print(f"wavefit: error: {named}", file=sys.stderr)
            worst = max(worst, exc.exit_code)
            continue
        results.append(result)
        if not (args.json or args.csv):
            from .report.text import render

            print(_shown(render(result, budget=not args.no_budget)))
            print()
            sys.stdout.flush()
        if args.plot:
            from .report.plot import save_plot

            try:
                save_plot(result, _plot_path(args.plot, k, len(jobs)))
            except OutputError as exc:  # the result is still reported
                print(f"wavefit: error: {_one_line(str(exc))}", file=sys.stderr)
                worst = max(worst, exc.exit_code)
    if args.csv and results:
        from .report.csv_table import render_csv

        print(_shown(render_csv(results)), end="")
    elif args.json and results:
        payload = results[0].to_dict() if len(jobs) == 1 else [r.to_dict() for r in results]
        print(json.dumps(payload, indent=2, allow_nan=False))
    return worst


def _monte_carlo_options(args: argparse.Namespace) -> dict[str, int] | None:
    """``--draws`` and ``--seed`` as given (the library's defaults otherwise); None, with the
    reason on stderr, when they come without ``--uncertainty montecarlo``, which they would not affect."""
    given = {k: v for k, v in (("draws", args.draws), ("seed", args.seed)) if v is not None}
    if given and args.uncertainty != "montecarlo":
        print(f"wavefit: error: --{next(iter(given))} applies only with --uncertainty montecarlo", file=sys.stderr)
        return None
    return given


def _batch(args: argparse.Namespace) -> int:
    from .batch.command import run

    return run(args)


def _calibrate(args: argparse.Namespace) -> int:
    from .calibration.command import run

    return run(args)


def _inspect(args: argparse.Namespace) -> int:
    from .io import read_capture

    time_column = args.time_column
    if time_column is not None and time_column.isdigit():
        time_column = int(time_column)
    capture = read_capture(args.file, sample_interval=args.sample_interval, time_column=time_column)
    info = capture.describe()
    if args.json:
        print(json.dumps(info, indent=2, allow_nan=False))
        return EXIT_OK
    from .values import eng

    lines = [f"{info['source']}: {info['rows']} rows, sample interval {eng(info['sample_interval_s'], 's')}"
             f", time from {info['time_column'] or 'sample interval'}"]
    def shown(value: object) -> str:
        """A column's extreme as printed: seven significant digits (-1.587109, not the float's
        -1.5871089999999999), the full value stays in the JSON."""
        return f"{value:.7g}" if isinstance(value, float) else str(value)

    lines += [f"  {col['header']!r:<24} unit {col['unit'] or '-':<4} min {shown(col['min']):<14} max {shown(col['max'])}"
              for col in info["columns"]]
    lines += [f"  {col['header']!r:<24} left out (see below)" for col in info["left_out"]]
    lines += [f"  meta {key}: {value}" for key, value in info["metadata"].items()]
    lines += [f"  ! {w}" for w in info["warnings"]]
    lines += [f"  note: {note}" for note in info["notes"]]
    print(_shown("\n".join(lines)))
    return EXIT_OK


def _suggest(args: argparse.Namespace) -> int:
    from .io import read_capture
    from .numerics import collected
    from .suggest import suggest
    from .suggest.render import render_toml
    from .values import parse_part

    if not 1 <= args.bits <= 32:
        print("wavefit: error: --bits takes a whole number from 1 to 32", file=sys.stderr)
        return EXIT_USAGE
    resistor = None if args.sense_resistor is None else parse_part(args.sense_resistor, "ohm")
    if resistor is not None and not resistor.value > 0:
        raise SetupError(f"--sense-resistor must be positive, got {args.sense_resistor!r}")
    capture = read_capture(args.file)
    with collected():  # a shape tried and given up (a ring's fit of a pulse) warns in numpy: not shown
        found = suggest(capture, sense_resistor=resistor, bits=args.bits)
    if args.json:
        print(json.dumps(found.to_dict(), indent=2, allow_nan=False))
    else:
        print(_shown(render_toml(found)), end="")
    return EXIT_OK


def _plot_path(path: str, k: int, total: int) -> Path:
    p = Path(path)
    return p if total == 1 else p.with_name(f"{p.stem}-{k + 1}{p.suffix}")


def _one_line(text: str) -> str:
    """A message on one line, with any control character from a file or a name shown escaped."""
    return visible(" ".join(text.split()))


def _shown(text: str) -> str:
    """Lines of a report with any control character from a file or a name shown escaped (the
    terminal must never obey a preamble value, a header or a file name)."""
    return "\n".join(visible(line) for line in text.split("\n"))


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
