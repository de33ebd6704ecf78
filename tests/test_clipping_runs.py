"""Clipping checks: the longest run at a record's extremes (against a count written out sample by
sample) and the pile-up of samples at an extreme."""
from __future__ import annotations

import numpy as np
import pytest

from wavefit.signal.clipping import longest_run_at_extremes


def _counted(y: np.ndarray, value: float) -> int:
    best = run = 0
    for v in y:
        run = run + 1 if v == value else 0
        best = max(best, run)
    return best


@pytest.mark.parametrize("seed", range(40))
def test_longest_runs_at_minimum_and_maximum(seed: int) -> None:
    # three-level records, short and long, with runs at the start, inside and at the end
    rng = np.random.default_rng(seed)
    y = rng.integers(0, 3, size=int(rng.integers(1, 400))).astype(float)
    assert longest_run_at_extremes(y) == (_counted(y, y.min()), _counted(y, y.max()))


def test_values_printed_with_few_digits_do_not_pile_up_at_their_extreme():
    # a settling exponential in noise printed to three significant digits (about 1 mV near a
    # quarter volt, finer near zero: no single grid) repeats its top value as a code would; its
    # top holds no more samples than the value one printing step below it, so it is not a pile-up.
    # The same record cut at a limit inside its range piles up there.
    from wavefit.signal.clipping import piles_up_at_limit

    t = np.arange(40_000) * 1e-8
    clean = 0.257 * (1 - np.exp(-t / 6e-6)) - 0.02 * (t < 2e-5)
    for sigma in (0.0005, 0.002):   # noise within the printing step (thousands at the top), and beyond it
        noisy = clean + np.random.default_rng(8).normal(0, sigma, t.size)
        printed = np.array([float(f"{v:.2e}") for v in noisy])
        assert not piles_up_at_limit(printed, sigma, None)
    clipped = np.minimum(noisy, 0.255)
    assert piles_up_at_limit(clipped, 0.002, None)
    assert piles_up_at_limit(np.array([float(f"{v:.2e}") for v in clipped]), 0.002, None)


def test_a_few_samples_on_the_extreme_code_are_no_pile_up():
    # noise over several codes: 5 samples on the record's top code and 1 one code inside happen
    # by chance (1 in 9 for samples equally likely on either), as the first samples after a
    # drive's rising edges did in a clean record; 15 against 2 do not (a chance of 0.0012)
    from wavefit.signal.clipping import piles_up_at_limit

    code = 0.01
    body = np.repeat(np.arange(-20, 19) * code, 40)
    for top, inside, piled in ((5, 1, False), (15, 2, True)):
        y = np.concatenate([body, np.full(inside, 19 * code), np.full(top, 20 * code)])
        assert piles_up_at_limit(y, 3 * code, code) == piled
