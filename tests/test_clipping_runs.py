"""The longest run of samples at a record's extremes, against a count written out sample by sample."""
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
