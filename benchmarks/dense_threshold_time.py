"""Where a least-squares fit is faster on its dense rows than through their triangular factor.

Fits one exponential window (``fit_exponential_window``, white noise) of one and two
channels at several lengths, once with every problem held densely and once with every
problem reduced to its triangular factor (``wavefit.fit.jacobian.DENSE_VALUES`` set either
way), interleaved, one BLAS thread; prints the median time of each and the largest relative
difference of the fitted values (the rounding of the other order of arithmetic). The
bound ``DENSE_VALUES`` sits where the two times meet.

    python benchmarks/dense_threshold_time.py [--repeats 15]
"""
from __future__ import annotations

import argparse
import time

import numpy as np
from threadpoolctl import threadpool_limits

import wavefit.fit.jacobian as jacobian_module
from wavefit.fit.exponential import WindowChannel, fit_exponential_window

SAMPLES = (1000, 3000, 10000, 30000, 100000)
ALL_DENSE, NONE_DENSE = 1 << 40, 0


def window(samples: int, channels: int, rng: np.random.Generator) -> list[WindowChannel]:
    t = np.arange(samples) * 1e-8
    tau = t[-1] / 8
    shapes = [("sense", 1 - np.exp(-t / tau), 0.003), ("drive", 2 + 0.1 * np.exp(-t / tau), 0.006)]
    return [WindowChannel(g, t, y + s * rng.standard_normal(samples)) for g, y, s in shapes[:channels]]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeats", type=int, default=15)
    args = parser.parse_args(argv)
    threadpool_limits(1)
    print("| channels | samples | Jacobian values | dense rows | triangular factor | ratio | largest difference |")
    print("|---|---|---|---|---|---|---|")
    for channels in (1, 2):
        for n in SAMPLES:
            chans = window(n, channels, np.random.default_rng(n))
            tau0 = 1.3 * n * 1e-8 / 8
            times: dict[int, list[float]] = {ALL_DENSE: [], NONE_DENSE: []}
            fits = {}
            for _ in range(args.repeats if n < 30000 else max(3, args.repeats // 3)):
                for bound in times:
                    jacobian_module.DENSE_VALUES = bound
                    t0 = time.perf_counter()
                    fits[bound] = fit_exponential_window(chans, tau0)
                    times[bound].append(time.perf_counter() - t0)
            dense, factor = (1e3 * float(np.median(times[b])) for b in (ALL_DENSE, NONE_DENSE))
            diff = float(np.max(np.abs(fits[ALL_DENSE].values / fits[NONE_DENSE].values - 1)))
            print(f"| {channels} | {n} | {n * channels * (1 + 2 * channels)} | {dense:.1f} ms | {factor:.1f} ms "
                  f"| {dense / factor:.2f} | {diff:.1e} |")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
