"""A ring whose baseline moves (drift, hum slower than the fit window) is warned about.

Truth: the tank's own poles (wavefit.synth.lc.Tank.poles, the exact roots of its second-order
equation). A drift under the ring tilts the fitted decay away from the true one by more than
its stated standard uncertainty; the warning says so, with the decay's move when the trend is
taken out, toward the truth.
"""
from __future__ import annotations

import math

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.scope import ScopeModel

TANK = Tank(inductance=22e-6, tank_capacitor=47e-9, dcr=0.25, feed_resistance=20e3)
SETUP = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
         "parts": {"tank_capacitor": "47 nF ±1%", "parallel_load": "20 kohm ±1%"}}


def ring(drift: float, seed: int) -> tuple[pd.DataFrame, float]:
    """A ring with a baseline that moves by ``drift`` of its peak over the record (a hum of a
    period four records long and a straight drift), and the true decay rate."""
    alpha, w_d = TANK.poles()
    dt = 2 * math.pi / (w_d * 200)  # 40,000 samples: 1.3 ms, about two decay times of the ring
    t, v = ringdown(TANK, dt, 40_000, pre_trigger=200)
    peak = float(np.max(np.abs(v)))
    span = t[-1] - t[0]
    baseline = drift * peak * (0.6 * np.sin(2 * math.pi * t / (4 * span) + 0.4) + 0.4 * t / span)
    y = ScopeModel(noise_rms=0.004 * peak, correlation_samples=4).apply(v + baseline, np.random.default_rng(seed))
    return pd.DataFrame({"t": t, "v": y}), alpha


@pytest.mark.parametrize("seed", [0, 1])
def test_a_moving_baseline_is_warned_with_its_effect(seed):
    frame, alpha = ring(0.15, seed)
    result = wavefit.analyze(frame, SETUP)
    q = result.quantities["alpha"]
    assert abs(q.value - alpha) > q.standard_uncertainty  # so the warning matters
    (warned,) = [w for w in result.warnings if w.startswith("the baseline moves during the ring")]
    moved = float(warned.split("moves the decay by ")[1].split()[0])
    assert abs(moved) > 1.0
    assert moved * (alpha - q.value) > 0  # taking the trend out moves the decay toward the truth


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_a_still_baseline_is_not(seed):
    frame, alpha = ring(0.0, seed)
    result = wavefit.analyze(frame, SETUP)
    assert not [w for w in result.warnings if "baseline moves" in w]
    q = result.quantities["alpha"]
    assert abs(q.value - alpha) <= q.expanded_uncertainty
