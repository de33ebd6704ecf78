"""Time of the sandwich's lagged Gram matrices, summed directly and through the FFT.

For a tall matrix of n rows and q columns, ``wavefit.fit.lagged.lag_grams`` sums xᵀ·T_k·x for
k = 0 … lags either with one matrix product per lag or from the FFT of each chunk; it
switches at ``DIRECT_LAGS`` (``DIRECT_LAGS_WIDE`` for more than ``FEW_COLUMNS`` columns). This prints both times (medians of ``--repeat`` runs) and their
largest relative difference, so the switches can be checked on any machine::

    python benchmarks/lag_grams_time.py [--rows 100000] [--repeat 3]

(the wide matrices, 25 and 100 columns, get a fifth of the rows).
"""
from __future__ import annotations

import argparse
import statistics
import time

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np

from wavefit.fit import lagged


def timed(rows: np.ndarray, lags: int, direct: bool, repeat: int) -> tuple[float, np.ndarray]:
    saved = lagged.DIRECT_LAGS, lagged.DIRECT_LAGS_WIDE
    lagged.DIRECT_LAGS = lagged.DIRECT_LAGS_WIDE = lags if direct else -1
    try:
        times, out = [], None
        for _ in range(repeat):
            start = time.perf_counter()
            out = lagged.lag_grams(lagged.array_rows(rows), rows.shape[0], rows.shape[1], lags)
            times.append(time.perf_counter() - start)
        return statistics.median(times), out
    finally:
        lagged.DIRECT_LAGS, lagged.DIRECT_LAGS_WIDE = saved


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--rows", type=float, default=1e5)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    rng = np.random.default_rng(0)
    print(f"switch at DIRECT_LAGS = {lagged.DIRECT_LAGS} up to {lagged.FEW_COLUMNS} columns, "
          f"DIRECT_LAGS_WIDE = {lagged.DIRECT_LAGS_WIDE} beyond")
    print(f"{'rows':>7} {'columns':>7} {'lags':>5} {'direct s':>9} {'fft s':>8} {'direct/fft':>10} {'max rel diff':>12}")
    cases = [(int(args.rows), columns, (8, 16, 32, 64, 128, 1000)) for columns in (3, 7)]
    cases += [(int(args.rows) // 5, columns, (100, 200, 400, 1000)) for columns in (25, 100)]
    for count, columns, lag_counts in cases:
        rows = rng.standard_normal((count, columns))
        for lags in lag_counts:
            direct, a = timed(rows, lags, True, args.repeat)
            fft, b = timed(rows, lags, False, args.repeat)
            diff = float(np.max(np.abs(a - b)) / np.max(np.abs(a)))
            print(f"{count:>7} {columns:>7} {lags:>5} {direct:>9.4f} {fft:>8.4f} {direct / fft:>10.2f} {diff:>12.1e}")


if __name__ == "__main__":
    main()
