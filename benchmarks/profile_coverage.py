"""Coverage of linear and profile-likelihood intervals on short, noisy rings.

Damped-sine records of a few cycles (``--cycles``) at signal-to-noise ratios of 10 to
20 dB (mean power of the ring over the record against the noise variance, white Gaussian
noise) are fitted by :func:`wavefit.fit_model` with the :class:`~wavefit.fit.models.DampedSine`
model and the default noise model (``noise="auto"``). For alpha and w_d the table gives the
share of records whose true value lies inside

- the linear interval, value ± k·u with k the Student t quantile at the fit's degrees of
  freedom for 68.27 % and 95.45 % (the GUM's coverage factor, JCGM 100:2008 G.3), and
- the profile-likelihood interval of ``lmfit.conf_interval`` at 1 and 2 sigma
  (:func:`wavefit.fit.model_fit.profile_intervals`),

each with its binomial standard error, the median width of the profile interval relative
to the linear one, and how many profile intervals lmfit could not close (the likelihood
never fell to that level within its search: an unbounded interval, which contains the
truth). Fits that fail are counted and left out.

Usage::

    python benchmarks/profile_coverage.py                    # 100 records per SNR
    python benchmarks/profile_coverage.py --trials 300 --snr 10,15,20 --cycles 1 --samples-per-cycle 16
"""
from __future__ import annotations

import argparse
import math
import re
import time
import warnings

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np
from scipy import stats

from wavefit.fit.model_fit import profile_intervals
from wavefit.fit.models import DampedSine

LEVELS = {1: 0.6827, 2: 0.9545}
NAMES = ("alpha", "w_d")


def record(rng: np.random.Generator, snr_db: float, cycles: float, samples_per_cycle: int = 100):
    """A ring of ``cycles`` cycles whose envelope falls by e over the record, in white noise."""
    f = 1e5
    dt = 1.0 / (f * samples_per_cycle)
    n = int(cycles * samples_per_cycle)
    t = np.arange(n) * dt
    truth = {"alpha": 1.0 / (n * dt), "w_d": 2 * math.pi * f}
    phase = rng.uniform(0, 2 * math.pi)
    clean = np.exp(-truth["alpha"] * t) * np.cos(truth["w_d"] * t + phase)
    sigma = math.sqrt(float(np.mean(clean ** 2)) / 10 ** (snr_db / 10))
    start = {"offset": 0.0, "a": math.cos(phase), "b": -math.sin(phase), **truth}
    return t, clean + rng.normal(0, sigma, n), truth, start


def one(rng, snr_db, cycles, samples_per_cycle):
    """Per parameter and level: (inside linear, inside profile, linear width, profile width,
    whether lmfit left the profile interval open)."""
    t, y, truth, start = record(rng, snr_db, cycles, samples_per_cycle)
    model = DampedSine()
    found = wavefit.fit_model(model, (t, y), model.make_params(t_ref=0.0, **start))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        profile = profile_intervals(found, names=NAMES, sigmas=list(LEVELS))
    # lmfit warns "maxiter=… reached and prob(name=value) = p < max(sigmas)" for an end whose
    # search stopped at probability p: the interval is open at every level above p
    open_ends = set()
    for w in caught:
        m = re.search(r"prob\((\w+)=[^)]*\) = ([-+0-9.eE]+)", str(w.message))
        if m:
            open_ends |= {(m.group(1), level) for level, p in LEVELS.items() if p > float(m.group(2))}
    out = {}
    for name in NAMES:
        value, u = found.params[name].value, found.params[name].stderr
        for level, p in LEVELS.items():
            k = float(stats.t.ppf(0.5 + p / 2, found.fit.dof))
            lo, hi = profile[name][len(LEVELS) - level][1], profile[name][len(LEVELS) + level][1]
            unbounded = (name, level) in open_ends or not np.isfinite(hi - lo)
            out[name, level] = (abs(value - truth[name]) <= k * u, unbounded or lo <= truth[name] <= hi,
                                2 * k * u, hi - lo, unbounded)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=100)
    parser.add_argument("--snr", default="10,20", help="comma-separated SNRs in dB")
    parser.add_argument("--cycles", type=float, default=2.0)
    parser.add_argument("--samples-per-cycle", type=int, default=100)
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)
    print(f"{'SNR dB':>6} {'param':>6} {'level':>6} {'linear':>14} {'profile':>14} {'width p/l':>9} "
          f"{'open':>5} {'failed':>6} {'s/record':>8}")
    for snr in (float(s) for s in args.snr.split(",")):
        rows, failed = [], 0
        start = time.perf_counter()
        for _ in range(args.trials):
            try:
                rows.append(one(rng, snr, args.cycles, args.samples_per_cycle))
            except (ValueError, FloatingPointError, ArithmeticError, RuntimeError):
                failed += 1
        per = (time.perf_counter() - start) / args.trials
        n = len(rows)
        for name in NAMES:
            for level, p in LEVELS.items():
                lin = np.mean([r[name, level][0] for r in rows])
                pro = np.mean([r[name, level][1] for r in rows])
                width = np.median([r[name, level][3] / r[name, level][2] for r in rows if not r[name, level][4]])
                unbounded = sum(r[name, level][4] for r in rows)
                se = math.sqrt(p * (1 - p) / max(n, 1))
                print(f"{snr:6.0f} {name:>6} {p:6.2%} {lin:7.1%} ±{se:5.1%} {pro:7.1%} ±{se:5.1%} {width:9.3f} "
                      f"{unbounded:5d} {failed:6d} {per:8.2f}")


if __name__ == "__main__":
    main()
