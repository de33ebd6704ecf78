"""Light stand-ins for batch tests that run whole processes (no tests here; nothing imports pytest).

A fake capture is a text file "L U DELAY TAG": the fake analysis sleeps DELAY seconds and
reports L with expanded uncertainty U, so the batch machinery is tested on its own and a
worker process starts without importing the test framework. ``python test_batch_fakes.py
batch ...`` runs the batch command with that analysis, reporting errors in one line as the
command line does.
"""
from __future__ import annotations

import sys
import time
from pathlib import Path

SETUP = ('method = "rl-step"\n[columns]\nsense = "CH2"\ndrive = "CH1"\n[parts]\nsense_resistor = "10 ohm"\n'
         '[instrument]\ntimebase = "±50 ppm"\n')
SPEC = '[limits]\nL = "100 uH ±10%"\n[decision]\nrule = "guard-band"\n'


def write_lot(folder: Path, values_uh: list[float], delay_s: float = 0.0) -> list[Path]:
    """One capture per value (each with its own bytes), and setup.toml and spec.toml, in ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    paths = []
    for i, value in enumerate(values_uh, start=1):
        path = folder / f"part{i:02d}.txt"
        path.write_text(f"{value * 1e-6!r} 2e-6 {delay_s!r} part{i}\n", encoding="utf-8")
        paths.append(path)
    (folder / "setup.toml").write_text(SETUP, encoding="utf-8")
    (folder / "spec.toml").write_text(SPEC, encoding="utf-8")
    return paths


def delayed_analyse(path: str, setup):
    """L and U from the capture's text, after sleeping the capture's DELAY."""
    from wavefit.results import AnalysisResult, QuantityResult

    fields = Path(path).read_text(encoding="utf-8").split()
    time.sleep(float(fields[2]))
    value, expanded = float(fields[0]), float(fields[1])
    return AnalysisResult("rl-step", path, {"L": QuantityResult("L", value, "H", expanded / 2, expanded, 2.0)},
                          {}, {}, ())


def main(argv: list[str]) -> int:
    """The batch command with :func:`delayed_analyse`; a user error is one line, as on the command line."""
    from test_batch_fakes import delayed_analyse as by_module_name   # workers import it by this name
    from wavefit.batch.command import run
    from wavefit.cli import build_parser
    from wavefit.errors import WavefitError

    args = build_parser().parse_args(argv)
    try:
        return run(args, analyse=by_module_name)
    except WavefitError as exc:
        print(f"wavefit: error: {exc}", file=sys.stderr)
        return exc.exit_code


def command(folder: Path, *extra: str, inputs: str | None = None) -> list[str]:
    """The argv of a run of :func:`main` on ``folder`` (or ``inputs``), results in
    ``folder/out.csv``, 2 workers, for ``subprocess``."""
    return [sys.executable, __file__, "batch", inputs or str(folder), "--setup", str(folder / "setup.toml"),
            "--spec", str(folder / "spec.toml"), "--out", str(folder / "out.csv"), "--workers", "2", *extra]


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
