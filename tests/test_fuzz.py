"""A seeded fuzz loop over mutated captures and setups through the command line, in-process.

Asserted for every case: exit 0, 3 or 4 only; on an error exactly one line on
stderr and no traceback; on exit 0 stdout is JSON whose numbers are all
finite and whose L (where reported) is positive; no case runs over 60 s.
A larger campaign with the same cases runs in fresh processes:
``benchmarks/fuzz_campaign.py``.
"""
from __future__ import annotations

import contextlib
import io
import json
import math
import signal
from pathlib import Path

import pytest

from fuzz_cases import cases, numbers_in
from wavefit.cli import main

#: Cases in the suite (the campaign script runs thousands).
SUITE_CASES = 160
#: No case may take longer (a hang is a failure).
CASE_SECONDS = 60


def _alarm(signum, frame):
    raise TimeoutError(f"a case ran over {CASE_SECONDS} s")


@pytest.mark.parametrize("chunk", range(4))
def test_mutated_inputs_give_a_result_or_one_line(tmp_path: Path, chunk: int) -> None:
    previous = signal.signal(signal.SIGALRM, _alarm)
    try:
        for k, case in enumerate(cases(SUITE_CASES // 4, seed=1000 + chunk)):
            capture = tmp_path / f"case{k}.csv"
            setup = tmp_path / f"case{k}.toml"
            capture.write_bytes(case.capture)
            setup.write_text(case.setup, encoding="utf-8")
            out, err = io.StringIO(), io.StringIO()
            signal.alarm(CASE_SECONDS)
            with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
                code = main(["analyze", str(capture), "--setup", str(setup), "--json"])
            signal.alarm(0)
            label = f"case {k} ({case.what})"
            assert code in (0, 3, 4), label
            if code:
                assert err.getvalue().count("\n") == 1 and "Traceback" not in err.getvalue(), label
                assert out.getvalue() == "", label
                continue
            result = json.loads(out.getvalue())
            assert all(math.isfinite(x) for x in numbers_in(result["quantities"])), label
            if "L" in result["quantities"]:
                assert result["quantities"]["L"]["value"] > 0, label
    finally:
        signal.alarm(0)
        signal.signal(signal.SIGALRM, previous)
