"""Fuzz campaign: mutated captures and setups through `wavefit analyze --json`, each in a fresh process.

Prints how many cases ended in each way; the targets (issue "hostile and broken
input") are 0 tracebacks, 0 hangs, 0 exit-0 results with a non-finite or
non-positive L, and stdout that is JSON whenever the exit code is 0.

    python benchmarks/fuzz_campaign.py --cases 2000 --workers 2
"""
from __future__ import annotations

import argparse
import collections
import json
import math
import subprocess
import sys
import tempfile
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from fuzz_cases import Case, cases, numbers_in  # noqa: E402

HANG_SECONDS = 60


def run(case: Case, folder: Path, k: int) -> str:
    """How one case ended: 'ok', 'refused 3', 'refused 4', or the name of a failure."""
    capture, setup = folder / f"c{k}.csv", folder / f"c{k}.toml"
    capture.write_bytes(case.capture)
    setup.write_text(case.setup, encoding="utf-8")
    try:
        done = subprocess.run([sys.executable, "-m", "wavefit.cli", "analyze", str(capture), "--setup", str(setup),
                               "--json"], capture_output=True, text=True, timeout=HANG_SECONDS)
    except subprocess.TimeoutExpired:
        return "HANG"
    if "Traceback" in done.stderr:
        return "TRACEBACK"
    if done.returncode not in (0, 3, 4):
        return f"EXIT {done.returncode}"
    if done.returncode:
        return f"refused {done.returncode}" if done.stderr.count("\n") == 1 and not done.stdout else "NOT ONE LINE"
    try:
        result = json.loads(done.stdout)
    except json.JSONDecodeError:
        return "STDOUT NOT JSON"
    if not all(math.isfinite(x) for x in numbers_in(result["quantities"])):
        return "NON-FINITE"
    if "L" in result["quantities"] and not result["quantities"]["L"]["value"] > 0:
        return "NON-POSITIVE L"
    return "ok"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--cases", type=int, default=2000)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--workers", type=int, default=2)
    args = parser.parse_args()
    todo = cases(args.cases, args.seed)
    with tempfile.TemporaryDirectory() as tmp, ThreadPoolExecutor(args.workers) as pool:
        ends = list(pool.map(lambda kc: (kc[1], run(kc[1], Path(tmp), kc[0])), enumerate(todo)))
    counts = collections.Counter(end for _, end in ends)
    print(f"cases {len(ends)}")
    for end, count in sorted(counts.items()):
        print(f"  {end:<16} {count}")
    failures = [(case.what, end) for case, end in ends if end.isupper() or end.startswith("EXIT")]
    print(f"failures {len(failures)} (target 0)")
    for what, end in failures[:20]:
        print(f"  {end}: {what}")


if __name__ == "__main__":
    main()
