"""Rounding of proposed settings: the 1-2-5 sequence of scope ranges (common practice) and the
E12 resistor series of IEC 60063 (values from memory)."""
from __future__ import annotations

import pytest

from wavefit.suggest.series import nearest_e12, round_down_125, round_up_125


@pytest.mark.parametrize("x, up, down", [(3.1e-6, 5e-6, 2e-6), (1e-3, 1e-3, 1e-3), (0.0099, 0.01, 5e-3),
                                         (7.0, 10.0, 5.0), (1.01, 2.0, 1.0)])
def test_one_two_five(x, up, down):
    assert round_up_125(x) == pytest.approx(up) and round_down_125(x) == pytest.approx(down)


@pytest.mark.parametrize("x, nearest", [(0.098, 0.1), (0.8, 0.82), (4.5, 4.7), (2.4, 2.2), (2.5, 2.7),
                                        (9.5, 10.0), (130.0, 120.0)])
def test_nearest_e12(x, nearest):
    assert nearest_e12(x) == pytest.approx(nearest)
