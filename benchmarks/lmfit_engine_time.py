"""Time per analysis of the bundled samples: the fit engine through lmfit against scipy directly.

The engine minimises through :class:`lmfit.Minimizer` (``wavefit.fit.engine.minimise``).
The reference, measured in the same run, is the same whitened problem handed to
``scipy.optimize.least_squares`` directly, with the same start, bounds, scale, tolerances
and evaluation limit: :func:`scipy_minimise` replaces ``minimise`` for its runs. The two
are interleaved, each analysis repeated ``--repeats`` times, and the fastest run of each
kept (the machine is shared, so slower runs measure the neighbours). The table gives both
times, their ratio (lmfit / scipy; the target is at most 1.10), and the largest relative
difference of any quantity or uncertainty between the two (the results must not move).

Usage::

    python benchmarks/lmfit_engine_time.py              # every sample, 3 repeats
    python benchmarks/lmfit_engine_time.py --repeats 5 --cases tank_ring,choke_step
"""
from __future__ import annotations

import argparse
import glob
import os
import time

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np
from scipy import optimize

from wavefit.fit import engine

SAMPLES = os.path.join(os.path.dirname(os.path.dirname(os.path.abspath(__file__))), "sample_data")


def scipy_minimise(params, names, residuals, jacobian, x_scale):
    """The reference: ``engine.minimise`` without lmfit (scipy's solver on the same problem)."""
    x0 = np.array([params[n].value for n in names])
    lower = np.array([params[n].min for n in names])
    upper = np.array([params[n].max for n in names])
    res = optimize.least_squares(residuals, x0, jac=jacobian, bounds=(lower, upper), method="trf",
                                 x_scale=x_scale, ftol=engine.TOLERANCE, xtol=engine.TOLERANCE,
                                 gtol=engine.TOLERANCE, max_nfev=engine.MAX_EVALUATIONS)
    return res.x


def cases() -> list[tuple[str, str | None, str]]:
    """(name, capture, setup) of every bundled sample."""
    out = [("choke_step", f"{SAMPLES}/choke_step.csv", f"{SAMPLES}/choke_step.toml"),
           ("sense_only", f"{SAMPLES}/choke_step_sense_only.csv", f"{SAMPLES}/choke_step_sense_only.toml"),
           ("tank_ring", f"{SAMPLES}/tank_ring.csv", f"{SAMPLES}/tank_ring.toml"),
           ("sweep", None, f"{SAMPLES}/tank_sweep/sweep.toml")]
    for p in sorted(glob.glob(f"{SAMPLES}/lot_0412/part*.csv.gz")):
        out.append((os.path.basename(p).split(".")[0], p, f"{SAMPLES}/lot_0412/setup.toml"))
    return out


def timed(capture, setup, solver) -> tuple[float, dict]:
    """Seconds of one analysis with ``solver`` as the engine's minimiser, and its quantities."""
    engine.minimise = solver
    start = time.perf_counter()
    result = wavefit.analyze(capture, setup)
    elapsed = time.perf_counter() - start
    return elapsed, {k: (q.value, q.standard_uncertainty) for k, q in result.quantities.items()}


def largest_difference(a: dict, b: dict) -> float:
    out = 0.0
    for k, (va, ua) in a.items():
        vb, ub = b[k]
        for x, y in ((va, vb), (ua, ub)):
            if x is not None and y is not None:
                out = max(out, abs(x - y) / max(abs(x), 1e-300))
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=3)
    parser.add_argument("--cases", default="", help="comma-separated names (default: all)")
    args = parser.parse_args()
    through_lmfit = engine.minimise
    chosen = [c for c in cases() if not args.cases or c[0] in args.cases.split(",")]
    print(f"{'case':<12} {'scipy s':>9} {'lmfit s':>9} {'ratio':>7} {'max rel diff':>13}")
    total_ref = total_new = 0.0
    for name, capture, setup in chosen:
        ref_times, new_times = [], []
        for _ in range(args.repeats):
            t, ref = timed(capture, setup, scipy_minimise)
            ref_times.append(t)
            t, new = timed(capture, setup, through_lmfit)
            new_times.append(t)
        ref_t, new_t = min(ref_times), min(new_times)
        total_ref += ref_t
        total_new += new_t
        print(f"{name:<12} {ref_t:9.3f} {new_t:9.3f} {new_t / ref_t:7.3f} {largest_difference(ref, new):13.2e}")
    engine.minimise = through_lmfit
    print(f"{'all':<12} {total_ref:9.3f} {total_new:9.3f} {total_new / total_ref:7.3f}")


if __name__ == "__main__":
    main()
