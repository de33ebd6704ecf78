"""The later-start test of rl-step's start settling is foreseen without refitting where
that cannot change its decision (``projected_shift``, ``SCREEN_Z``).

Truth here is the refit the screen stands in for: with the screen, an analysis must give
the very numbers it gives when every later start is refitted, and the foreseen shift must
follow the refit's Hausman statistic (J. A. Hausman, Econometrica 46 (1978) 1251–1271).
Records are the closed-form RL response (wavefit.synth.rl) with a ring added after each
edge, so that some windows' first samples do not follow the exponential and their starts
move.
"""
from __future__ import annotations

import dataclasses
import math

import numpy as np
import pandas as pd
import pytest

import wavefit
import wavefit.methods._rl_windows as rl_windows
from wavefit.methods.rl_step import RLStep
from wavefit.synth.rl import rl_square_wave

L, DCR, RS, RSRC = 220e-6, 1.0, 10.0, 50.0
TAU = L / (RSRC + DCR + RS)
SETUP = {"method": "rl-step", "columns": {"time": "time", "drive": "drive", "sense": "sense"},
         "parts": {"sense_resistor": "10 ohm"}, "instrument": {"timebase": "±0 ppm", "vertical_gain": "±0%"}}


def record(seed: int, ring: float, samples: int = 4000) -> pd.DataFrame:
    """Six periods of the closed-form response, each edge followed on the sense trace by a
    ring decaying in tau/2 (``ring`` of the sense span), as a winding capacitance rings."""
    duration = 6 * 16 * TAU
    half = duration / 12
    t, drive, sense = rl_square_wave(L, DCR, RS, RSRC, 2.0, 2 * half, duration / samples, duration, delay=0.0)
    since = np.mod(t, half)
    sign = np.where(np.mod(t, 2 * half) < half, 1.0, -1.0)
    sense = sense + ring * np.ptp(sense) * sign * np.exp(-since / (TAU / 2)) * np.sin(2 * np.pi * since / (TAU / 3))
    rng = np.random.default_rng(seed)
    return pd.DataFrame({"time": t, "drive": drive + 0.004 * rng.standard_normal(t.size),
                         "sense": sense + 0.0015 * rng.standard_normal(t.size)})


def numbers(result) -> dict[str, tuple[float, float]]:
    return {k: (q.value, q.standard_uncertainty) for k, q in result.quantities.items()}


# (the record starts on its first edge, whose drive jump is then not in it: the first window is
# timed from the sense trace; a jump read from the relaxation alone had been taken as a
# 2.6 µs generator edge, which started every window 0.7 tau late and hid the stronger rings)
CASES = [(seed, ring) for seed in (1, 2) for ring in (0.0, 0.01, 0.05)]


SENSE_ONLY = {"method": "rl-step", "columns": {"time": "time", "sense": "sense"},
              "parts": {"sense_resistor": "10 ohm", "source_resistance": "50 ohm", "dut_resistance": "1 ohm"},
              "instrument": {"timebase": "±0 ppm", "vertical_gain": "±0%"}}


@pytest.mark.parametrize("seed, ring", CASES)
@pytest.mark.parametrize("channels", ["two", "sense only"])
def test_screened_analysis_equals_refitting_every_later_start(monkeypatch, seed, ring, channels):
    frame = record(seed, ring)
    setup = SETUP
    if channels == "sense only":
        frame, setup = frame[["time", "sense"]], SENSE_ONLY
    calls = []
    screen = rl_windows.projected_shift

    def counted(*args):
        z = screen(*args)
        calls.append(z)
        return z

    monkeypatch.setattr(rl_windows, "projected_shift", counted)
    screened = wavefit.analyze(frame, setup)
    monkeypatch.setattr(rl_windows, "projected_shift", lambda *args: None)
    refitted = wavefit.analyze(frame, setup)
    assert numbers(screened) == numbers(refitted)  # exactly: the same windows, fitted alike
    assert screened.fit.to_dict() == refitted.fit.to_dict()
    # not vacuous: the screen stood in for refits, or starts moved (a strong ring makes the
    # noise model of the windows coloured, where nothing is screened)
    skipped = sum(z is not None and z < rl_windows.SCREEN_Z for z in calls)
    moved = any("start later" in note for note in screened.fit.to_dict()["notes"])
    assert skipped >= 3 or moved
    if ring == 0.01 and channels == "two":
        assert skipped >= 1
    if ring == 0.0:
        assert skipped >= 3


def test_foreseen_shift_follows_the_refit():
    """On windows whose full fit is white the foreseen shift is within 0.3 of the refit's
    statistic where decisions are made (measured up to 0.28 over 1,600 later starts), and
    within 0.7 where the refit turns to an AR model of its own (measured up to 0.6): both
    inside the screen's margin of 1.5 deviations."""
    compared = {"white": 0, "coloured": 0}
    for seed in (3, 4, 5):
        for ring in (0.0, 0.05, 0.1):
            frame = record(seed, ring)
            t = frame["time"].to_numpy()
            sense, drive = frame["sense"].to_numpy(), frame["drive"].to_numpy()
            fits_seen = []
            original = rl_windows.projected_shift

            def spy(t_, s_, d_, w, f, start):
                fits_seen.append((w, f, start))
                return None

            rl_windows.projected_shift = spy
            try:
                wavefit.analyze(frame, SETUP)
            finally:
                rl_windows.projected_shift = original
            for w, f, start in fits_seen:
                z = original(t, sense, drive, w, f, start)
                if z is None or not math.isfinite(z):
                    continue
                refit = RLStep._fit_window(t, sense, drive, dataclasses.replace(w, start=start), "auto", "test")
                var_d = refit.stderr("tau") ** 2 - f.stderr("tau") ** 2
                if var_d <= 0:
                    continue  # the test keeps the start whatever tau does
                real = abs(refit["tau"] - f["tau"]) / math.sqrt(var_d)
                if real < 3.0 + rl_windows.SCREEN_Z:
                    kind = "coloured" if any(m.order for m in refit.whitening.values()) else "white"
                    assert abs(z - real) < (0.3 if kind == "white" else 0.7), (z, real, kind)
                    compared[kind] += 1
    assert compared["white"] >= 20
