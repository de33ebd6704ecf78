"""pulse-ramp's rules for where a curve crosses a level and where a pulse's edge begins.

Plain arrays with the answer known by construction: the rules are definitions (the
saturation current as the current beyond which L_inc stays below a stated fall from L0,
IEC 62024-2's stated fall; the edge as the samples that leave the level before a pulse).
"""
from __future__ import annotations

import numpy as np
import pytest

from wavefit.methods._pulses import edge_start
from wavefit.methods._ramp_curves import crossings_near, final_crossing, significant_falls


def test_final_crossing_passes_over_an_early_dip():
    curve = np.array([1.0, 1.0, 0.85, 1.0, 0.95, 0.88, 0.8, 0.7])
    assert final_crossing(curve, 0.9) == 5


def test_final_crossing_is_none_when_the_curve_ends_above_or_starts_below():
    assert final_crossing(np.array([1.0, 0.85, 0.95]), 0.9) is None
    assert final_crossing(np.array([0.8, 0.7, 0.6]), 0.9) is None


def test_crossing_near_another_curves_crossing_skips_a_far_bump():
    # falls through 0.8 at index 3, then a bump above it at index 7 and down again at 8
    curve = np.array([1.0, 0.95, 0.85, 0.75, 0.7, 0.72, 0.78, 0.82, 0.7, 0.6])
    assert crossings_near(curve, 1.0, {20: 3, 30: None}) == {20: 3, 30: None}
    assert final_crossing(curve, 0.8) == 8


def test_edge_start_after_a_previous_pulses_freewheeling():
    rng = np.random.default_rng(0)
    freewheel = np.full(400, -5.0)
    rest = np.zeros(600)
    edge = np.array([3.0, 9.0])  # the two samples before the half-voltage crossing
    before = np.concatenate((freewheel, rest, edge)) + 0.01 * rng.standard_normal(1002)
    assert edge_start(before) == 1000


def test_a_fall_counts_only_beyond_the_noise():
    # rule by construction: L0 = 1 (its uncertainty negligible), the 10 % level is 0.9
    from uncertainties import ufloat
    l0 = ufloat(1.0, 1e-9)
    deep = [ufloat(v, 0.01) for v in (1.0, 0.95, 0.85, 0.7)]      # 0.2 below at 0.01: z 20
    shallow = [ufloat(v, 0.1) for v in (1.0, 0.95, 0.85, 0.7)]    # 0.2 below at 0.1: z 2
    kept, weak = significant_falls(deep, l0, {10: 2}, 3.0)
    assert kept == {10: 2} and weak == {}
    kept, weak = significant_falls(shallow, l0, {10: 2}, 3.0)
    assert kept == {10: None} and weak[10] == pytest.approx(2.0)
    # a drop that had no crossing stays without one and is not called weak
    assert significant_falls(deep, l0, {30: None}, 3.0) == ({30: None}, {})


def test_a_first_point_below_the_level_only_within_its_noise_is_not_a_fall_already_made():
    # a short pulse's first point, 18.6 ± 9.9 µH under 0.7·33 µH, was said to have fallen by
    # 10-30 % already (with advice for the wrong cause); a fall is FALL_Z (3) standard uncertainties
    from uncertainties import ufloat

    from wavefit.methods.pulse_ramp import _unreported_drops

    grid = np.linspace(0.065, 2.93, 50)
    drops = {10: None, 20: None, 30: None}
    l0 = ufloat(33e-6, 1e-6)
    noisy = _unreported_drops(drops, {}, ufloat(18.6e-6, 9.9e-6), l0, grid)
    assert not any("already" in w for w in noisy) and any("did not fall by 10 %, 20 %, 30 %" in w for w in noisy)
    fallen = _unreported_drops(drops, {}, ufloat(15e-6, 1e-6), l0, grid)
    assert any("already 10 %, 20 %, 30 % below L0" in w for w in fallen)
