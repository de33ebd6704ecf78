"""Wall time of whole ``wavefit`` processes: start-up (``--version``, ``--help``) and a small analysis.

Each command runs as a fresh subprocess of this interpreter, the way the ``wavefit`` console
script runs (``from wavefit.cli import main``), without the shell wrapper an environment
manager may put in front of it. Beside them, in the same run, a bare interpreter
(``python -c pass``) and one that imports numpy: the ratios against them are what to compare
between machines and runs. The repeats are interleaved (one of each command, then the next
round) so that a change in the machine's load falls on every command alike; the median of
``--repeat`` runs is reported.

The analysed capture is invented: a two-channel rl-step record of 10 000 samples (ten edges,
closed-form RL response with scope noise and 10-bit quantisation) written to a temporary
folder. Run from the repository root::

    PYTHONPATH=$PWD python benchmarks/startup_time.py [--repeat 5]
"""
from __future__ import annotations

import argparse
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd

import wavefit
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

SAMPLES = 10_000
SETUP = ('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\nsense = "CH2"\n'
         '[parts]\nsense_resistor = "10 ohm ±0.1%"\n')
#: What the ``wavefit`` console script runs.
ENTRY_POINT = "import sys; from wavefit.cli import main; sys.exit(main())"


def write_capture(folder: Path, seed: int = 19) -> tuple[Path, Path]:
    """An rl-step capture (100 uH, 60.5 ohm loop, ten edges) and its setup; their paths."""
    rng = np.random.default_rng(seed)
    inductance = 100e-6
    tau = inductance / 60.5
    t, drive, sense = rl_square_wave(inductance, 0.5, 10.0, 50.0, 1.0, 20 * tau, 100 * tau / SAMPLES, 100 * tau)
    ch1 = ScopeModel(noise_rms=1e-3, bits=10, full_scale=(-1.0, 1.1)).apply(drive, rng)
    ch2 = ScopeModel(noise_rms=2e-4, bits=10, full_scale=(-0.02, 0.2)).apply(sense, rng)
    capture, setup = folder / "capture.csv", folder / "setup.toml"
    pd.DataFrame({"Time (s)": t, "CH1 (V)": ch1, "CH2 (V)": ch2}).to_csv(capture, index=False, float_format="%.9g")
    setup.write_text(SETUP, encoding="utf-8")
    return capture, setup


def commands(capture: Path, setup: Path) -> dict[str, list[str]]:
    """The timed command lines, by the label printed for each."""
    python = sys.executable
    return {
        "python -c pass": [python, "-c", "pass"],
        'python -c "import numpy"': [python, "-c", "import numpy"],
        "wavefit --version": [python, "-c", ENTRY_POINT, "--version"],
        "wavefit --help": [python, "-c", ENTRY_POINT, "--help"],
        f"wavefit analyze ({SAMPLES} samples)": [python, "-c", ENTRY_POINT, "analyze", str(capture),
                                                 "--setup", str(setup), "--json"],
    }


def wall_time(command: list[str], folder: Path) -> float:
    """Seconds from start to exit of one run of ``command`` in ``folder``, with the wavefit this
    script imported first on the path; a failing command stops the benchmark."""
    source_tree = str(Path(wavefit.__file__).resolve().parents[1])
    path = os.pathsep.join(filter(None, [source_tree, os.environ.get("PYTHONPATH")]))
    start = time.perf_counter()
    done = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True, cwd=folder,
                          env={**os.environ, "PYTHONPATH": path})
    elapsed = time.perf_counter() - start
    if done.returncode != 0:
        raise SystemExit(f"{' '.join(command)} exited with {done.returncode}: {done.stderr.strip()}")
    return elapsed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=5, help="runs of each command; the median is reported")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        timed = commands(*write_capture(folder))
        load_before = os.getloadavg()[0]
        times: dict[str, list[float]] = {label: [] for label in timed}
        for _ in range(args.repeat):
            for label, command in timed.items():
                times[label].append(wall_time(command, folder))
        load_after = os.getloadavg()[0]
    medians = {label: statistics.median(values) for label, values in times.items()}
    bare, numpy_only = medians["python -c pass"], medians['python -c "import numpy"']
    print(f"Python {sys.version.split()[0]}, {os.cpu_count()} cores, load average {load_before:.2f} before "
          f"and {load_after:.2f} after; median of {args.repeat} interleaved runs")
    print(f"{'command':<34} {'wall time':>10} {'x python':>9} {'x numpy':>8}")
    for label, median in medians.items():
        print(f"{label:<34} {1e3 * median:>7.0f} ms {median / bare:>9.2f} {median / numpy_only:>8.2f}")


if __name__ == "__main__":
    main()
