"""The code likelihood's sandwich covariance against the scatter over repeated records.

A straight line over six codes (2000 samples, grid step 1) in AR(1) noise of σ codes,
quantised and fitted on its codes (:func:`wavefit.fit.code_likelihood.fit_codes`); for each
parameter the mean sandwich variance (:func:`wavefit.fit.code_sandwich.godambe_covariance`)
and the mean inverse-information variance are printed as ratios to the empirical variance
of the estimates, with the rms of the standardised errors.

Usage: PYTHONPATH=. python benchmarks/code_sandwich_study.py [--records 300]
"""
from __future__ import annotations

import argparse
import sys

import numpy as np
from scipy.signal import lfilter

from wavefit.fit.code_likelihood import fit_codes
from wavefit.fit.code_sandwich import godambe_covariance
from wavefit.fit.jacobian import as_jacobian

N = 2000
TRUTH = np.array([0.3, 6.0])
CASES = ((0.1, 0.5), (0.1, 0.0), (0.3, 0.5))  # (σ in codes, AR(1) coefficient)


def study(sigma: float, phi: float, records: int) -> str:
    design = np.column_stack([np.ones(N), np.linspace(0.0, 1.0, N)])
    groups = np.zeros(N, dtype=int)
    estimates, sandwich, information, failed = [], [], [], 0
    for seed in range(records):
        rng = np.random.default_rng(seed)
        noise = lfilter([1.0], [1.0, -phi], rng.standard_normal(N + 200))[200:] * sigma * np.sqrt(1 - phi ** 2)
        codes = np.round(design @ TRUTH + noise)
        start = np.linalg.lstsq(design, codes, rcond=None)[0]
        found = fit_codes(codes, 1.0, lambda x: design @ x, lambda x: design, start, groups,
                          np.array([max(sigma, 0.25)]))
        cov = godambe_covariance(codes, 1.0, float(codes.min()), design @ found.values, as_jacobian(design),
                                 found.sigma, groups, [(0, N)], False) if found.converged else None
        if cov is None:
            failed += 1
            continue
        estimates.append(found.values)
        sandwich.append(np.diag(cov))
        information.append(np.diag(found.covariance))
    est, sand, info = np.array(estimates), np.array(sandwich), np.array(information)
    empirical = est.var(axis=0, ddof=1)
    z = np.sqrt(np.mean((est - TRUTH) ** 2 / sand, axis=0))
    return (f"sigma {sigma:.1f} code  phi {phi:.1f}  records {len(est):4d} (failed {failed})  "
            f"sandwich/empirical {np.round(sand.mean(0) / empirical, 2)}  "
            f"information/empirical {np.round(info.mean(0) / empirical, 2)}  z rms {np.round(z, 2)}")


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--records", type=int, default=300)
    args = parser.parse_args(argv)
    for sigma, phi in CASES:
        print(study(sigma, phi, args.records), flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
