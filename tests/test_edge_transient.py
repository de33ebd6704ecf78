"""rl-step with a drive channel: a transient after every edge that the exponential does not
hold (a probe's ringing, generator overshoot) is left out of every window
(wavefit/methods/_rl_transient.py).

References: the loop's L is the truth the records are made from (the circuit equations, and
ngspice for the probe's ground lead); coverage as in JCGM 100:2008 6.2 (U at about 95 %).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.methods._rl_transient import FALSE_ALARM, Transient, edge_transient
from wavefit.synth.rl import rl_square_wave

from spice import needs_ngspice, rl_loop, simulate


@dataclass
class _Window:
    start: int
    stop: int


class _Fit:
    """What edge_transient reads of a window's fit: the residuals of its channels one after
    another, tau and each channel's amplitude."""

    def __init__(self, residuals: np.ndarray, tau: float):
        self.residuals = residuals
        self.values = {"tau": tau, "coef_sense": 1.0, "coef_drive": 1.0}

    def __getitem__(self, name: str) -> float:
        return self.values[name]


def _windows(rng, count=10, n=4000, transient=None, tau=400.0):
    windows, fits = [], []
    for k in range(count):
        sense, drive = rng.standard_normal(n), rng.standard_normal(n)
        if transient is not None:
            drive[:transient.size] += transient
        windows.append(_Window(k * n, (k + 1) * n))
        fits.append(_Fit(np.concatenate([sense, drive]), tau))
    return windows, fits


def test_ring_free_windows_are_left_alone():
    # FALSE_ALARM per channel: 300 records of two channels expect 0.6 false moves
    rng = np.random.default_rng(7)
    moved = sum(edge_transient(*_windows(rng), ("sense", "drive"), 1.0).samples > 0 for _ in range(300))
    assert FALSE_ALARM == 1e-3 and moved <= 4  # P(≥ 5 | Poisson 0.6) ≈ 4e-4


def test_a_ring_on_the_drive_is_found_and_its_end_placed():
    k = np.arange(200)
    ring = 30.0 * np.exp(-k / 10.0) * np.sin(2 * math.pi * k / 7.0)  # 30 noise rms, decaying in 10 samples
    found = edge_transient(*_windows(np.random.default_rng(3), transient=ring), ("sense", "drive"), 1.0)
    # it stands above the noise until 30·e^(−k/10) falls to about twice the rms: 25–35 samples
    assert found.channel == "drive" and 20 <= found.samples <= 45 and not found.too_long


def test_a_misfit_longer_than_three_tenths_of_tau_is_left_to_the_model_check():
    k = np.arange(1000)
    slow = 20.0 * np.exp(-k / 80.0)  # a second time constant, tau/5, 20 noise rms: above it for ~180 samples
    found = edge_transient(*_windows(np.random.default_rng(4), transient=slow), ("sense", "drive"), 1.0)
    assert found.samples == 0 and found.too_long > 120


def test_noise_free_residuals_are_not_judged():
    windows, fits = _windows(np.random.default_rng(5))
    for f in fits:
        f.residuals = f.residuals * 1e-15
    assert edge_transient(windows, fits, ("sense", "drive"), 1.0) == Transient()


# a 100 µH coil, 0.5 Ω, behind 50 Ω and a 10 Ω sense resistor: tau = 1.65 µs
L_COIL, DCR, R_SENSE, R_SOURCE = 100e-6, 0.5, 10.0, 50.0
TAU = L_COIL / (DCR + R_SENSE + R_SOURCE)
SETUP = {"method": "rl-step", "columns": {"time": "t", "drive": "drive", "sense": "sense"},
         "parts": {"sense_resistor": f"{R_SENSE} ohm"}, "instrument": {"timebase": "exact", "vertical_gain": "exact"}}


def _overshoot_record(seed: int, share: float) -> pd.DataFrame:
    """Ten edges; after each, the drive probe's trace overshoots and rings at 30 MHz, decaying
    in 50 ns (``share`` of the drive's step), over white noise of 0.2 % of each channel's span."""
    t, drive, sense = rl_square_wave(L_COIL, DCR, R_SENSE, R_SOURCE, 2.0, 20 * TAU, 5e-9, 100 * TAU, delay=2 * TAU)
    rng = np.random.default_rng(seed)
    step = float(np.ptp(drive))
    ring = np.zeros_like(drive)
    for k in np.flatnonzero(np.abs(np.diff(drive)) > 0.5 * step) + 1:
        u = t[k:] - t[k]
        ring[k:] += np.sign(drive[k] - drive[k - 1]) * share * step * np.exp(-u / 50e-9) * np.sin(2 * math.pi * 30e6 * u)
    return pd.DataFrame({"t": t, "drive": drive + ring + 2e-3 * step * rng.standard_normal(t.size),
                         "sense": sense + 2e-3 * np.ptp(sense) * rng.standard_normal(t.size)})


@pytest.mark.parametrize("share", [0.05, 0.5])
def test_a_drive_overshoot_after_each_edge_no_longer_biases_l(share):
    # before: the ring, which hardly moves tau, moved the drive's amplitude against the sense's,
    # and with it L, with no warning: over these 8 draws L was off by +1.0 U (share 0.05) and
    # −0.9 U (0.5) on average, 5 and 4 of 8 inside U; now −0.2 and −0.1 U, 7 and 8 of 8
    errors = []
    for seed in range(10, 18):
        result = wavefit.analyze(_overshoot_record(seed, share), SETUP)
        q = result.quantities["L"]
        errors.append((q.value - L_COIL) / q.expanded_uncertainty)
        assert any("drive channel's first samples after each edge" in n for n in result.fit.notes)
    errors = np.array(errors)
    # U covers about 95 %: 6 or fewer of 8 inside happens 6 % of the time; the mean of 8 errors in U
    # scatters by about 0.18
    assert np.count_nonzero(np.abs(errors) <= 1.0) >= 6 and abs(errors.mean()) <= 0.5, errors


def test_ring_free_records_keep_their_windows():
    result = wavefit.analyze(_overshoot_record(11, 0.0), SETUP)
    assert not any("first samples after each edge" in n for n in result.fit.notes)


def test_ring_free_records_in_band_limited_noise_keep_their_windows():
    # correlated noise makes neighbouring averages go together and the scale less certain (its
    # tails heavier than χ²): none of five records moves
    from wavefit.synth.scope import ScopeModel

    t, drive, sense = rl_square_wave(L_COIL, DCR, R_SENSE, R_SOURCE, 2.0, 20 * TAU, 5e-9, 100 * TAU, delay=2 * TAU)
    for seed in range(5):
        rng = np.random.default_rng(seed)
        frame = pd.DataFrame({"t": t})
        for name, y in (("drive", drive), ("sense", sense)):
            frame[name] = ScopeModel(noise_rms=2e-3 * float(np.ptp(y)), bits=10,
                                     correlation_samples=6).apply(y, rng)
        result = wavefit.analyze(frame, SETUP)
        assert not any("first samples after each edge" in n for n in result.fit.notes), seed


@needs_ngspice
def test_a_probe_ground_lead_ring_behind_a_low_impedance_driver():
    """ngspice: a 10 µH coil driven through 2 Ω with a 1 ns edge; the drive probe (15 pF behind
    3 Ω) returns through a 150 nH ground lead, which rings at about 100 MHz for tens of ns
    (Q ≈ 20). The ring has little net area, so it hardly biases L; but an AR noise model
    followed it and U grew 2.6-fold over the same bench without the lead's inductance. Left
    out, U is within twice that, and the loop's L is inside it."""
    ind, dcr, r_src, r_sense = 10e-6, 0.1, 2.0, 1.0
    period = 20 * ind / (dcr + r_src + r_sense)

    def capture(lead: str, seed: int) -> pd.DataFrame:
        probe = f"Rtip drive ptip 3\nCin ptip pgnd 15p\nRin ptip pgnd 1e6\n{lead}"
        t, v = simulate(rl_loop(ind, dcr, r_src, r_sense, period, 1e-9, extra=probe), 2e-9, 5.2 * period,
                        ["v(ptip)", "v(pgnd)", "v(sense)"])
        drive, sense = v["v(ptip)"] - v["v(pgnd)"], v["v(sense)"]
        rng = np.random.default_rng(seed)
        return pd.DataFrame({"t": t, "drive": drive + 5e-4 * np.ptp(drive) * rng.standard_normal(t.size),
                             "sense": sense + 5e-4 * np.ptp(sense) * rng.standard_normal(t.size)})

    setup = {**SETUP, "parts": {"sense_resistor": f"{r_sense} ohm"}}
    ringing = wavefit.analyze(capture("Lgnd pgnd 0 150n", 0), setup)
    quiet = wavefit.analyze(capture("Vgnd pgnd 0 0", 0), setup)
    q, q0 = ringing.quantities["L"], quiet.quantities["L"]
    assert any("drive channel's first samples after each edge" in n for n in ringing.fit.notes)
    assert not any("first samples after each edge" in n for n in quiet.fit.notes)
    assert q.expanded_uncertainty <= 2.0 * q0.expanded_uncertainty, (q.expanded_uncertainty, q0.expanded_uncertainty)
    assert abs(q.value - ind) <= q.expanded_uncertainty


def _quantised_record(seed: int, ring_share: float) -> pd.DataFrame:
    """20 edges at 100 samples per tau on an 8-bit converter whose noise is 0.2 of a code, the
    settled levels near code centres, with a drive ring after each edge (``ring_share`` of the
    drive's step, decaying in tau/20): the settled tails sit on one or two codes."""
    t, drive, sense = rl_square_wave(L_COIL, DCR, R_SENSE, R_SOURCE, 1.0, 18 * TAU, TAU / 100, 183 * TAU,
                                     delay=2 * TAU)
    step = float(np.ptp(drive))
    ring = np.zeros_like(drive)
    for k in np.flatnonzero(np.abs(np.diff(drive)) > 0.5 * step) + 1:
        u = t[k:] - t[k]
        ring[k:] += np.sign(drive[k] - drive[k - 1]) * ring_share * step * np.exp(-u / (0.05 * TAU)) * np.sin(
            2 * math.pi * u / (0.045 * TAU))
    rng = np.random.default_rng(seed)
    out = {"t": t}
    for name, y, top, codes, below in (("sense", sense, 10 / 61, 170, 20), ("drive", drive + ring, 11 / 61, 23, 115)):
        code = top / codes
        low = -below * code
        noisy = y + 0.2 * code * rng.standard_normal(y.size)
        out[name] = low + code * np.clip(np.round((noisy - low) / code), 0, 255)
    return pd.DataFrame(out)


def test_a_quantised_record_with_noise_below_half_a_code():
    # the noise scale came from the windows' settled tails, which sit on one or two codes: the
    # ring-free profile averaged 1.5–1.8 and late exceedances voided the correction of a real
    # ring (L −1.26 U on average, 1 of 6 inside) or moved every window of a ring-free record
    for seed in (0, 1, 2):
        quiet = wavefit.analyze(_quantised_record(seed, 0.0), SETUP)
        assert not any("first samples after each edge" in n for n in quiet.fit.notes), seed
        ringing = wavefit.analyze(_quantised_record(seed, 0.1), SETUP)
        assert any("drive channel's first samples after each edge" in n for n in ringing.fit.notes), seed
