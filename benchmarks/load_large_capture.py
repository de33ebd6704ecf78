"""Write a large 3-column capture (time and two channels) and time ``read_capture`` on it.

Prints the row count, the load time, and peak memory relative to the file
size: the peak of allocations seen by tracemalloc (numpy arrays included;
the C parser's own buffers are not traced) during the load, and the peak
resident set size of a fresh process that only imports wavefit and loads.
Then the same file is read again, interleaved, by ``read_capture``, by pandas' C
parser given the path, and by pyarrow's CSV reader into a pandas frame when pyarrow is
installed (it is not a dependency of wavefit); medians of REPEATS runs and their ratios.

Usage::

    python benchmarks/load_large_capture.py            # 10 million rows
    python benchmarks/load_large_capture.py --rows 1e6 --keep DIR
    python benchmarks/load_large_capture.py --time-digits 8   # stamps rounded to 8 digits

With ``--time-digits`` the time column is printed to that many significant digits, as many
exports do, at an interval of 0.937 ns: at 8 digits most stamps are rounded to a ninth of the
interval, and the reader rebuilds the axis as the uniform grid they are a rounding of (a
second path through the time checks).
"""
from __future__ import annotations

import argparse
import subprocess
import sys
import tempfile
import time
import tracemalloc
from pathlib import Path

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np

from process_memory import peak_bytes, reset_peak, status_bytes

from wavefit.io import read_capture

_CHUNK_ROWS = 500_000
#: Interleaved repeats of the reader comparison (the medians are printed).
REPEATS = 5


def write_capture(path: Path, rows: int, dt: float = 1e-9, time_digits: int = 10) -> None:
    """Write ``rows`` lines of ``time,CH1 (V),CH2 (A)`` in chunks, without building the whole text;
    time printed to ``time_digits`` significant digits."""
    with open(path, "w", encoding="ascii", newline="\n") as out:
        out.write(f"Sample interval,{dt:g} s\nTime (s),CH1 (V),CH2 (A)\n")
        for first in range(0, rows, _CHUNK_ROWS):
            index = np.arange(first, min(first + _CHUNK_ROWS, rows))
            t = index * dt
            block = np.column_stack([t, np.sin(2e6 * np.pi * t), 1e-3 * np.cos(2e6 * np.pi * t)])
            np.savetxt(out, block, fmt=[f"%.{time_digits - 1}e", "%.6e", "%.6e"], delimiter=",")


def load(path: Path) -> None:
    """Load ``path`` in this (fresh) process and print the figures."""
    size = path.stat().st_size
    rss_before = status_bytes("VmRSS") or peak_bytes()
    reset = reset_peak()
    tracemalloc.start()
    started = time.perf_counter()
    capture = read_capture(path)
    seconds = time.perf_counter() - started
    _, heap_peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    rss_peak = peak_bytes()
    arrays = capture.time.nbytes + sum(c.values.nbytes for c in capture.channels)
    added = rss_peak - rss_before
    print(f"rows                  {capture.rows:,}")
    print(f"file size             {size / 1e6:,.1f} MB")
    print(f"load time             {seconds:.2f} s ({size / 1e6 / seconds:,.0f} MB/s)")
    print(f"result arrays         {arrays / 1e6:,.1f} MB ({arrays / size:.2f} x file size)")
    print(f"tracemalloc peak      {heap_peak / 1e6:,.1f} MB ({heap_peak / size:.2f} x file size)")
    print(f"RSS before load       {rss_before / 1e6:,.1f} MB (interpreter and imports)")
    print(f"peak RSS during load  {rss_peak / 1e6:,.1f} MB (+{added / 1e6:,.1f} MB = "
          f"{added / size:.2f} x file size{'' if reset else '; peak not reset, upper bound'})")
    print(f"sample interval       {capture.sample_interval:.6g} s, warnings: {len(capture.warnings)}")
    compare_readers(path)


def compare_readers(path: Path) -> None:
    """Median times of read_capture, pandas' C parser and (when installed) pyarrow on ``path``."""
    import pandas as pd

    readers = {"read_capture": lambda: read_capture(path),
               "pandas C parser": lambda: pd.read_csv(path, skiprows=1, engine="c")}
    try:
        from pyarrow import csv as arrow_csv
    except ImportError:
        print("pyarrow               not installed: no comparison with its reader")
    else:
        readers["pyarrow to pandas"] = lambda: arrow_csv.read_csv(
            path, read_options=arrow_csv.ReadOptions(skip_rows=1)).to_pandas()
    times: dict[str, list[float]] = {name: [] for name in readers}
    for _ in range(REPEATS):
        for name, read in readers.items():
            started = time.perf_counter()
            read()
            times[name].append(time.perf_counter() - started)
    ours = float(np.median(times["read_capture"]))
    for name, values in times.items():
        median = float(np.median(values))
        print(f"{name:21s} {median:.2f} s median of {REPEATS} (read_capture / this: {ours / median:.2f})")


def main(argv: list[str] | None = None) -> None:
    """Write the capture, then load it in a fresh interpreter so its memory peak is its own."""
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--rows", type=float, default=10_000_000, help="data rows (default 1e7)")
    parser.add_argument("--keep", type=Path, help="write the file into this folder and keep it")
    parser.add_argument("--time-digits", type=int, help="significant digits of the time stamps (then 0.937 ns apart)")
    parser.add_argument("--load", type=Path, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.load is not None:
        load(args.load)
        return
    rows = int(args.rows)
    with tempfile.TemporaryDirectory() as scratch:
        folder = args.keep or Path(scratch)
        folder.mkdir(parents=True, exist_ok=True)
        path = folder / f"capture_{rows}.csv"
        started = time.perf_counter()
        write_capture(path, rows, *(() if args.time_digits is None else (0.937e-9, args.time_digits)))
        print(f"written in            {time.perf_counter() - started:.1f} s")
        sys.stdout.flush()
        subprocess.run([sys.executable, __file__, "--load", str(path)], check=True)


if __name__ == "__main__":
    main()
