"""Peak memory and time of analyses of long synthetic captures, each in a fresh process.

For every case (rl-step with the sense channel only, in white and in band-limited noise,
and with the drive channel too, at 2, 20 and 200 edges; lc-ring) and record length, the
parent makes the capture with ``wavefit.synth``, writes it to a temporary ``.npy`` file,
and starts a fresh interpreter that imports wavefit, loads the array into a pandas
DataFrame and runs ``wavefit.analyze`` on it. The child reports its peak resident set
size (``VmHWM``, reset after the DataFrame is built, or ``ru_maxrss`` where that is not
possible, an upper bound), its wall and CPU time, and what the analysis said.

The table gives the memory the analysis adds to the process: its peak above the resident
size once the DataFrame it is given exists (the caller's frame is the caller's; the
capture's own float64 copy of it, the fits and every temporary count), as a ratio to the
capture's float64 size, rows × columns (time and each channel) × 8 bytes, next to the bound
the issue set: peak ≤ 3 × size + 200 MB. A capture read from a file has no frame beside
it, so this is also what ``wavefit analyze FILE`` adds once the file is read. A child is limited to ``--limit-gb`` of address space
(resource.RLIMIT_AS), so that a runaway allocation ends in a MemoryError instead of
crowding a shared machine.

Usage::

    python benchmarks/memory_long_records.py                       # 1e5 and 1e6 samples
    python benchmarks/memory_long_records.py --samples 1e7         # one case at a time
    python benchmarks/memory_long_records.py --cases lc-ring --samples 1e6,1e7
"""
from __future__ import annotations

import argparse
import json
import os
import resource
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np

from process_memory import peak_bytes, reset_peak, status_bytes

from wavefit.methods._rl_summary import StepFitSummary
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

#: The issue's bound: peak ≤ BOUND_FACTOR × capture size + BOUND_EXTRA bytes.
BOUND_FACTOR = 3.0
BOUND_EXTRA = 200e6
#: Sampling interval of the synthetic time axis (s); only its ratio to tau matters.
SAMPLE_INTERVAL = 1e-8
#: Samples per tau, as in benchmarks/estimator_quality.py; a half period of the drive lasts
#: the record's length over edges + 1, at least MIN_HALF_PERIOD_TAU tau (the method asks for 5–10).
TAU_SAMPLES = 40
MIN_HALF_PERIOD_TAU = 10
#: Noise rms as a fraction of the step or of the ring's first amplitude (40 dB).
NOISE = 0.01
#: Correlation of the band-limited noise (samples), as in benchmarks/estimator_quality.py.
CORRELATED_SAMPLES = 10.0
#: lc-ring: cycles in the record, and the decay over the record (nepers): the ring
#: stands above the noise over most of it.
RING_CYCLES = 100
RING_DECAY = 7.0
RL_PARTS = {"sense_resistor": 10.0, "source_resistance": 50.0, "dut_resistance": 0.5}
EXACT_INSTRUMENT = {"timebase": "±0 ppm", "vertical_gain": "±0%"}
CASES = ("rl-sense", "rl-sense-correlated", "rl-drive", "lc-ring")


def rl_record(samples: int, edges: int, drive: bool, correlated: bool, rng: np.random.Generator):
    """A square-wave response with ``edges`` switching instants, one segment before the first,
    ``samples`` rounded down to a whole number of segments (the next edge falls after the end).

    Returns the columns (time first), their names and the setup."""
    segment = samples // (edges + 1)
    if segment < MIN_HALF_PERIOD_TAU * TAU_SAMPLES:
        raise ValueError(f"{samples} samples hold fewer than {MIN_HALF_PERIOD_TAU} tau per edge for {edges} edges")
    samples = segment * (edges + 1)
    tau = TAU_SAMPLES * SAMPLE_INTERVAL
    r_loop = sum(RL_PARTS.values())
    t, v_drive, v_sense = rl_square_wave(tau * r_loop, RL_PARTS["dut_resistance"], RL_PARTS["sense_resistor"],
                                         RL_PARTS["source_resistance"], 1.0, 2 * segment * SAMPLE_INTERVAL,
                                         SAMPLE_INTERVAL, samples * SAMPLE_INTERVAL,
                                         delay=(segment + 0.3) * SAMPLE_INTERVAL)
    step = float(v_sense.max() - v_sense.min())
    scope = ScopeModel(noise_rms=NOISE * step, correlation_samples=CORRELATED_SAMPLES if correlated else 0.0)
    columns = [t, scope.apply(v_sense, rng)]
    names = ["time", "sense"]
    setup = {"method": "rl-step", "columns": {"time": "time", "sense": "sense"}, "parts": dict(RL_PARTS),
             "instrument": EXACT_INSTRUMENT}
    if drive:
        columns.append(ScopeModel(noise_rms=NOISE * float(np.ptp(v_drive))).apply(v_drive, rng))
        names.append("drive")
        setup["columns"]["drive"] = "drive"
        setup["parts"] = {"sense_resistor": RL_PARTS["sense_resistor"]}
    return columns, names, setup


def lc_record(samples: int, rng: np.random.Generator):
    """A ring of RING_CYCLES cycles that decays by RING_DECAY nepers over the record."""
    capacitor = 10e-9
    period = samples / RING_CYCLES * SAMPLE_INTERVAL
    inductance = 1.0 / ((2 * np.pi / period) ** 2 * capacitor)
    alpha = RING_DECAY / (samples * SAMPLE_INTERVAL)
    # the coil's series resistance damps the ring; the feed resistor is large enough not to
    tank = Tank(inductance=inductance, tank_capacitor=capacitor, dcr=2 * alpha * inductance, feed_resistance=1e12)
    t, v = ringdown(tank, SAMPLE_INTERVAL, samples, step=1e3, pre_trigger=samples // 50)
    y = ScopeModel(noise_rms=NOISE * float(np.max(np.abs(v)))).apply(v, rng)
    setup = {"method": "lc-ring", "columns": {"time": "time", "tank": "tank"},
             "parts": {"tank_capacitor": capacitor}, "instrument": EXACT_INSTRUMENT}
    return [t, y], ["time", "tank"], setup


def make_record(case: str, samples: int, edges: int, seed: int):
    rng = np.random.default_rng(seed)
    if case == "lc-ring":
        return lc_record(samples, rng)
    return rl_record(samples, edges, drive=case == "rl-drive", correlated=case == "rl-sense-correlated", rng=rng)


def child(path: Path, setup_json: str, names: list[str]) -> None:
    """Analyse the capture in ``path`` in this fresh process and print one JSON line."""
    import pandas as pd

    frame = pd.DataFrame(np.load(path), columns=names)
    given = status_bytes("VmRSS") or peak_bytes()  # the interpreter, its imports and the frame
    reset = reset_peak()
    wall, cpu = time.perf_counter(), time.process_time()
    try:
        result = wavefit.analyze(frame, json.loads(setup_json))
        outcome = (result.fit.estimator if isinstance(result.fit, StepFitSummary)
                   else "ring fitted" if result.method == "lc-ring" else "done")
    except MemoryError as exc:
        outcome = f"MemoryError: {str(exc)[:70]}"
    except wavefit.WavefitError as exc:
        outcome = f"{type(exc).__name__}: {str(exc)[:90]}"
    report = {"given": given, "peak": peak_bytes(), "reset": reset, "outcome": outcome,
              "wall": time.perf_counter() - wall, "cpu": time.process_time() - cpu}
    print(json.dumps(report))


def run_case(case: str, samples: int, edges: int, limit_gb: float, timeout: float, scratch: Path) -> dict:
    columns, names, setup = make_record(case, samples, edges, seed=samples + edges)
    array = np.column_stack(columns)
    size = array.nbytes
    path = scratch / "capture.npy"
    np.save(path, array)
    del array, columns

    def limit() -> None:
        cap = int(limit_gb * 2 ** 30)
        resource.setrlimit(resource.RLIMIT_AS, (cap, cap))

    try:
        proc = subprocess.run([sys.executable, __file__, "--child", str(path), json.dumps(setup), ",".join(names)],
                              capture_output=True, text=True, preexec_fn=limit, timeout=timeout)
    except subprocess.TimeoutExpired:
        return {"size": size, "peak": None, "outcome": f"stopped after {timeout:.0f} s", "wall": None}
    finally:
        path.unlink()
    lines = proc.stdout.strip().splitlines()
    if proc.returncode != 0 or not lines:
        tail = (proc.stderr.strip().splitlines() or ["no output"])[-1]
        return {"size": size, "peak": None, "outcome": f"child failed: {tail[:90]}", "wall": None}
    report = json.loads(lines[-1])
    report["size"] = size
    report["above"] = report["peak"] - report["given"]
    return report


def main(argv: list[str] | None = None) -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--samples", default="1e5,1e6", help="record lengths, comma-separated (default 1e5,1e6)")
    parser.add_argument("--edges", default="2,20,200", help="rl-step edges, comma-separated (default 2,20,200)")
    parser.add_argument("--cases", default=",".join(CASES), help=f"cases, comma-separated, of {', '.join(CASES)}")
    parser.add_argument("--limit-gb", type=float, default=8.0, help="address-space limit of each child (GiB)")
    parser.add_argument("--timeout", type=float, default=1800.0, help="seconds before a child is stopped")
    parser.add_argument("--child", nargs=3, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.child:
        child(Path(args.child[0]), args.child[1], args.child[2].split(","))
        return
    samples = [int(float(s)) for s in args.samples.split(",")]
    edges = [int(e) for e in args.edges.split(",")]
    cases = args.cases.split(",")
    unknown = set(cases) - set(CASES)
    if unknown:
        parser.error(f"unknown case(s) {', '.join(sorted(unknown))}; known: {', '.join(CASES)}")
    print(f"bound: peak the analysis adds <= {BOUND_FACTOR:g} x capture float64 size + "
          f"{BOUND_EXTRA / 1e6:.0f} MB; children limited to {args.limit_gb:g} GiB of address space "
          f"and {args.timeout:g} s", flush=True)
    head = (f"{'case':<20} {'samples':>9} {'edges':>5} {'capture MB':>10} {'peak MB':>8} {'ratio':>6} "
            f"{'bound':>6} {'ok':>3} {'wall s':>7} {'cpu s':>7}  result")
    print(head)
    print("-" * len(head), flush=True)
    with tempfile.TemporaryDirectory() as scratch:
        for case in cases:
            for n in samples:
                for e in (edges if case != "lc-ring" else [0]):
                    r = run_case(case, n, e, args.limit_gb, args.timeout, Path(scratch))
                    size = r["size"]
                    bound = BOUND_FACTOR * size + BOUND_EXTRA
                    if r.get("peak") is None:
                        figures = f"{'-':>8} {'-':>6} {bound / size:>6.2f} {'-':>3} {'-':>7} {'-':>7}"
                    else:
                        ok = "yes" if r["above"] <= bound else "NO"
                        mark = "" if r["reset"] else "*"
                        figures = (f"{r['above'] / 1e6:>7.0f}{mark or ' '} {r['above'] / size:>6.2f} "
                                   f"{bound / size:>6.2f} {ok:>3} {r['wall']:>7.1f} {r['cpu']:>7.1f}")
                    print(f"{case:<20} {n:>9.0e} {e if e else '':>5} {size / 1e6:>10.1f} {figures}  {r['outcome']}",
                          flush=True)
    print("ratio: peak the analysis adds (above the interpreter with the DataFrame it is given) / capture "
          "size; bound: the same for the "
          "issue's bound (* the peak could not be reset: an upper bound)")


if __name__ == "__main__":
    main()
