"""wavefit's analysis time and accuracy against the short script a researcher writes by hand.

For each method and record length, fresh synthetic captures (white noise, parts exact) are
analysed by

- the hand script: threshold the drive at mid-level for the edges and fit
  ``a + b·exp(−(t − t0)/tau)`` with ``scipy.optimize.curve_fit`` to each post-edge window
  (rl-step: L = tau·R, R from the settled drive voltage over the settled current), or fit a
  damped cosine seeded by the FFT's peak (lc-ring: L = 1/(w0²·C));
- ``wavefit.analyze`` in the same process, on the same data frame;
- pandas' C reader on the same capture written as CSV (the cost of reading it).

Times are medians of interleaved repeats (one of each per repeat, so load on the machine
hits both alike); the accuracy is the RMS relative error of L over the repeats' noise draws.
The figures are ratios measured in the same run, so they hold on any machine.

Usage::

    python benchmarks/hand_script_comparison.py                  # 1e4 and 1e5 samples
    python benchmarks/hand_script_comparison.py --sizes 1e6 --repeats 3
"""
from __future__ import annotations

import argparse
import statistics
import tempfile
import time
from pathlib import Path

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np
import pandas as pd
from scipy.optimize import curve_fit

from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave

#: The RL circuit: a 470 µH coil with 1.2 Ω DCR behind 50 Ω, sensed across 10 Ω.
L_TRUE, DCR, R_SENSE, R_SOURCE, DRIVE = 470e-6, 1.2, 10.0, 50.0, 2.0
#: Square-wave periods in the record (two edges each); each half period is 8 time constants.
PERIODS = 5
#: Noise on each channel, a fraction of its span (white, unquantised).
NOISE_FRACTION = 1 / 300
#: The tank: 1 mH with 10 nF, fed through 47 kΩ.
TANK = Tank(inductance=1e-3, tank_capacitor=10e-9, dcr=3.0)
#: Periods of the ring in the record.
RING_PERIODS = 40


def rl_capture(samples: int, rng: np.random.Generator) -> pd.DataFrame:
    tau = L_TRUE / (R_SOURCE + DCR + R_SENSE)
    duration = PERIODS * 16 * tau
    t, drive, sense = rl_square_wave(L_TRUE, DCR, R_SENSE, R_SOURCE, DRIVE, duration / PERIODS,
                                     duration / samples, duration, delay=0.0)
    return pd.DataFrame({"time": t,
                         "drive": drive + NOISE_FRACTION * np.ptp(drive) * rng.standard_normal(t.size),
                         "sense": sense + NOISE_FRACTION * np.ptp(sense) * rng.standard_normal(t.size)})


RL_SETUP = {"method": "rl-step", "columns": {"time": "time", "drive": "drive", "sense": "sense"},
            "parts": {"sense_resistor": f"{R_SENSE} ohm ±0.1%"},
            "instrument": {"vertical_gain": "exact", "timebase": "exact"}}


def rl_hand(frame: pd.DataFrame) -> float:
    """The hand script: edges by threshold; per rising window the current's exponential by
    ``curve_fit`` and the coil voltage (drive − sense) on the same exponential by linear least
    squares; v_coil = L·di/dt + DCR·i gives L = tau·(DCR − b_v/b_i), DCR = a_v/a_i (settled)."""
    t, drive, sense = (frame[c].to_numpy() for c in ("time", "drive", "sense"))
    high = drive > 0.5 * (drive.max() + drive.min())
    edges = np.flatnonzero(np.diff(high.astype(int)) == 1) + 1
    falls = np.flatnonzero(np.diff(high.astype(int)) == -1) + 1
    values = []
    for a in edges:
        later = falls[falls > a]
        b = int(later[0]) if later.size else t.size
        if b - a < 20:
            continue
        tw, i = t[a:b] - t[a], sense[a:b] / R_SENSE
        (a_i, b_i, tau), _ = curve_fit(lambda x, c0, c1, tau: c0 + c1 * np.exp(-x / tau), tw, i,
                                       p0=(i[-1], i[0] - i[-1], tw[-1] / 8))
        design = np.column_stack([np.ones_like(tw), np.exp(-tw / tau)])
        a_v, b_v = np.linalg.lstsq(design, drive[a:b] - sense[a:b], rcond=None)[0]
        values.append(tau * (a_v / a_i - b_v / b_i))
    return float(np.median(values))


def lc_capture(samples: int, rng: np.random.Generator) -> pd.DataFrame:
    alpha, wd = TANK.poles()
    dt = RING_PERIODS * 2 * np.pi / wd / samples
    t, v = ringdown(TANK, dt, samples, pre_trigger=samples // 20)
    return pd.DataFrame({"time": t, "tank": v + NOISE_FRACTION * np.ptp(v) * rng.standard_normal(t.size)})


LC_SETUP = {"method": "lc-ring", "columns": {"time": "time", "tank": "tank"},
            "parts": {"tank_capacitor": f"{TANK.tank_capacitor} F ±0.1%"},
            "instrument": {"vertical_gain": "exact", "timebase": "exact"}}


def lc_hand(frame: pd.DataFrame) -> float:
    """The hand script: a damped cosine after the step, seeded by the FFT's peak."""
    t, v = frame["time"].to_numpy(), frame["tank"].to_numpy()
    keep = t > 0
    tw, yw = t[keep], v[keep]
    spectrum = np.abs(np.fft.rfft(yw - yw.mean()))
    f = np.fft.rfftfreq(tw.size, tw[1] - tw[0])[np.argmax(spectrum[1:]) + 1]
    model = lambda x, a, tau, w, ph, c: a * np.exp(-x / tau) * np.cos(w * x + ph) + c  # noqa: E731
    p, _ = curve_fit(model, tw, yw, p0=(np.ptp(yw) / 2, tw[-1] / 3, 2 * np.pi * f, 0.0, yw.mean()))
    w0_squared = p[2] ** 2 + 1 / p[1] ** 2
    return float(1 / (w0_squared * TANK.tank_capacitor))


CASES = {"rl-step": (rl_capture, RL_SETUP, rl_hand, L_TRUE, "L"),
         "lc-ring": (lc_capture, LC_SETUP, lc_hand, TANK.inductance, "L")}


def timed(function, *args):
    started = time.perf_counter()
    value = function(*args)
    return time.perf_counter() - started, value


def read_time(frame: pd.DataFrame) -> float:
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "capture.csv"
        frame.to_csv(path, index=False, float_format="%.9e")
        seconds, _ = timed(pd.read_csv, path)
    return seconds


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    parser.add_argument("--sizes", default="1e4,1e5", help="record lengths, comma-separated")
    parser.add_argument("--repeats", type=int, default=5, help="noise draws (and timed runs) per case")
    parser.add_argument("--methods", default="rl-step,lc-ring")
    args = parser.parse_args()
    print(f"{'method':8} {'samples':>9} {'hand s':>8} {'wavefit s':>9} {'ratio':>6} {'read s':>7} "
          f"{'/read':>6} {'hand rms':>9} {'wavefit rms':>11}")
    for method in args.methods.split(","):
        make, setup, hand, truth, quantity = CASES[method]
        for size in (int(float(s)) for s in args.sizes.split(",")):
            hand_t, ours_t, hand_e, ours_e, reads = [], [], [], [], []
            for seed in range(args.repeats):
                frame = make(size, np.random.default_rng(seed))
                seconds, value = timed(hand, frame)
                hand_t.append(seconds)
                hand_e.append(value / truth - 1)
                seconds, result = timed(wavefit.analyze, frame, setup)
                ours_t.append(seconds)
                ours_e.append(result.quantities[quantity].value / truth - 1)
                if seed == 0:
                    reads.append(read_time(frame))
            h, o, r = statistics.median(hand_t), statistics.median(ours_t), reads[0]
            rms = lambda e: 100 * float(np.sqrt(np.mean(np.square(e))))  # noqa: E731
            print(f"{method:8} {size:>9,} {h:8.3f} {o:9.3f} {o / h:6.1f} {r:7.3f} {o / r:6.1f} "
                  f"{rms(hand_e):8.3f}% {rms(ours_e):10.3f}%", flush=True)


if __name__ == "__main__":
    main()
