"""Throughput of `wavefit batch`: captures per second with 1 and N worker processes.

The lot is invented (closed-form RL responses with scope noise and 10-bit
quantisation, two channels, 20 000 samples each), written as CSV to a
temporary folder; each run starts from an empty results file. Run::

    python benchmarks/batch_throughput.py [--captures 24] [--workers N] [--repeat 2]

The worker processes start once per run (about 1.5 s); a lot of a few dozen
captures includes that, as a real lot does.
"""
from __future__ import annotations

import argparse
import contextlib
import os
import tempfile
import time
from pathlib import Path

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np
import pandas as pd

from wavefit.batch.arguments import available_cores
from wavefit.batch.command import run
from wavefit.cli import build_parser
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

SETUP = ('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\nsense = "CH2"\n'
         '[parts]\nsense_resistor = "10 ohm ±0.1%"\n')
SPEC = '[limits]\nL = "100 uH ±10%"\nR = "<= 1 ohm"\n[decision]\nrule = "guard-band"\n'
SAMPLES = 20_000


def write_lot(folder: Path, count: int, seed: int = 6) -> None:
    rng = np.random.default_rng(seed)
    for i in range(count):
        inductance = rng.normal(100e-6, 4e-6)
        tau = inductance / 60.5
        interval = 100 * tau / SAMPLES
        t, drive, sense = rl_square_wave(inductance, 0.5, 10.0, 50.0, 1.0, 40 * tau, interval, 100 * tau)
        ch1 = ScopeModel(noise_rms=1e-3, bits=10, full_scale=(-1.0, 1.1)).apply(drive, rng)
        ch2 = ScopeModel(noise_rms=2e-4, bits=10, full_scale=(-0.02, 0.2)).apply(sense, rng)
        pd.DataFrame({"Time (s)": t, "CH1 (V)": ch1, "CH2 (V)": ch2}).to_csv(
            folder / f"part{i + 1:04d}.csv", index=False, float_format="%.7g")
    (folder / "setup.toml").write_text(SETUP, encoding="utf-8")
    (folder / "spec.toml").write_text(SPEC, encoding="utf-8")


def captures_per_second(folder: Path, workers: int, run_number: int = 0) -> float:
    """Analyse the whole lot into a fresh results file; captures per second of wall time."""
    out = folder / f"out-{workers}-{run_number}.csv"
    args = build_parser().parse_args(["batch", str(folder / "part*.csv"), "--setup", str(folder / "setup.toml"),
                                      "--spec", str(folder / "spec.toml"), "--out", str(out),
                                      "--workers", str(workers), "--json"])
    start = time.perf_counter()
    with open(os.devnull, "w") as sink, contextlib.redirect_stdout(sink):
        code = run(args)
    elapsed = time.perf_counter() - start
    if code != 0:
        raise SystemExit(f"batch exited with {code}")
    rows = out.read_text(encoding="utf-8").count("\n") - 1
    return rows / elapsed


def _burn(n: int) -> float:
    """Pure CPU work with no memory traffic: the machine's own ceiling for process scaling."""
    x = 0.0
    for i in range(n):
        x += i * 0.5
    return x


def machine_ceiling(workers: int, n: int = 30_000_000) -> float:
    """Speed-up of ``workers`` processes of pure CPU work over one: what the cores allow."""
    import multiprocessing

    start = time.perf_counter()
    _burn(n)
    single = time.perf_counter() - start
    with multiprocessing.get_context("spawn").Pool(workers) as pool:
        pool.map(_burn, [1] * workers)  # start the workers before timing
        start = time.perf_counter()
        pool.map(_burn, [n] * workers)
        parallel = time.perf_counter() - start
    return workers * single / parallel


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--captures", type=int, default=24)
    parser.add_argument("--workers", type=int, default=available_cores())
    parser.add_argument("--repeat", type=int, default=2, help="runs per setting; the fastest is reported")
    args = parser.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        write_lot(folder, args.captures)
        size = sum(p.stat().st_size for p in folder.glob("part*.csv")) / args.captures
        print(f"lot: {args.captures} captures, 2 channels x {SAMPLES} samples, {size / 1e6:.2f} MB each; "
              f"{os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f} before the runs")
        one = max(captures_per_second(folder, 1, k) for k in range(args.repeat))
        print(f"1 worker : {one:6.2f} captures/s")
        if args.workers > 1:
            many = max(captures_per_second(folder, args.workers, k) for k in range(args.repeat))
            print(f"{args.workers} workers: {many:6.2f} captures/s  (speed-up {many / one:.2f}, "
                  f"efficiency {many / one / args.workers:.0%})")
            ceiling = machine_ceiling(args.workers)
            print(f"machine ceiling: {ceiling:.2f}x for {args.workers} processes of pure CPU work "
                  f"(batch reaches {many / one / ceiling:.0%} of it)")


if __name__ == "__main__":
    main()
