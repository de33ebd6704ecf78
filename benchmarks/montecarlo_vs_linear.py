"""Where the Monte Carlo interval (JCGM 101) and the linear one (GUM) differ, and which covers.

lc-ring records of a tank (47 µH, 10 nF, DCR 0.3 ohm, 1 Mohm load; 40 cycles, 25 samples a
cycle, white noise) at several SNR. The tank capacitor is stated as ±2 % (rectangular, as a
tolerance band is read) and each trial's true capacitor is drawn from that band, so the type
B input is tested as well as the fit. Every record is analysed with
``wavefit.analyze(..., uncertainty="montecarlo")`` and the study prints, per SNR and
quantity:

- coverage of the linear interval y ± U and of the Monte Carlo probabilistically symmetric
  interval (nominal 95.45 %), with the sampling error of a coverage, sqrt(p(1 − p)/N);
- the median ratio of the Monte Carlo interval's width to 2U;
- the median asymmetry of the Monte Carlo interval, (high − y)/(y − low) (1 when symmetric);
  medians, since a ratio of two small numbers in a rare trial would lead a mean.

The two agree where the measurement function is near-linear in inputs that are near-Gaussian
(f0 at any SNR here). They part where an input's band is rectangular and leads the budget (L:
the Monte Carlo interval is shorter, as in JCGM 101:2008 9.2.4), and where a quantity is a
strongly curved function of a noisy input at low SNR (Q and tau_decay ∝ 1/alpha: the Monte
Carlo interval leans to higher values). The figure (``--figure``) shows both.

Run:  python benchmarks/montecarlo_vs_linear.py [--trials 100] [--quick] [--figure FILE.png]
"""
from __future__ import annotations

import argparse
import math
import sys
import time
from dataclasses import dataclass

import wavefit  # first: it sets one BLAS thread, which takes effect only before numpy loads

import numpy as np
import pandas as pd
from wavefit.synth.lc import Tank, ringdown

#: Coverage probability of both intervals (wavefit's default, k = 2 at infinite dof).
NOMINAL = 0.9545
#: Stated tolerance of the tank capacitor (rectangular) and the load across the tank.
CAPACITOR_TOLERANCE = 0.02
NOMINAL_CAPACITOR = 10e-9
LOAD = 1e6
QUANTITIES = ("f0", "tau_decay", "Q", "L")
#: Monte Carlo draws per analysis: enough for a 95 % interval's ends to about 1 % of its
#: width (JCGM 101:2008, 7.2.2, scaled from 10⁶), and a study that runs in minutes.
DRAWS = 50_000
#: From the lowest SNR at which lc-ring fits at all (it refuses a ring under 5 times the noise
#: rms, about 14 dB) to where the fit no longer leads the budget.
SNRS_DB = (15.0, 17.5, 20.0, 25.0, 30.0, 40.0)
CYCLES, SAMPLES_PER_CYCLE, PRE_TRIGGER = 40, 25, 50


@dataclass(frozen=True)
class Row:
    snr_db: float
    quantity: str
    linear_coverage: float
    mc_coverage: float
    width_ratio: float
    asymmetry: float
    trials: int


def truths(tank: Tank) -> dict[str, float]:
    """The quantities the method reports, from the tank's poles (docs/method-lc-ring.md)."""
    alpha, wd = tank.poles()
    w0 = math.hypot(alpha, wd)
    alpha_c = alpha - 1.0 / (2.0 * LOAD * tank.tank_capacitor)
    return {"f0": w0 / (2 * math.pi), "tau_decay": 1.0 / alpha, "Q": w0 / (2.0 * alpha_c), "L": tank.inductance}


def ring_amplitude(t: np.ndarray, clean: np.ndarray, alpha: float, wd: float) -> float:
    """Initial amplitude A of the clean ring offset + A·exp(−alpha t)·cos(wd t + phi) (exact: two poles)."""
    post = t >= 0
    tp = t[post]
    basis = np.column_stack([np.ones(tp.size), np.exp(-alpha * tp) * np.cos(wd * tp),
                             np.exp(-alpha * tp) * np.sin(wd * tp)])
    coef = np.linalg.lstsq(basis, clean[post], rcond=None)[0]
    return math.hypot(coef[1], coef[2])


def run_snr(snr_db: float, trials: int, rng: np.random.Generator) -> list[Row]:
    setup = {"method": "lc-ring", "columns": {"time": "time", "tank": "tank"},
             "parts": {"tank_capacitor": f"{NOMINAL_CAPACITOR} F ±{100 * CAPACITOR_TOLERANCE:g}%",
                       "parallel_load": LOAD},
             "instrument": {"timebase": "±0 ppm", "vertical_gain": "±0%"}}
    hits = {q: [0, 0] for q in QUANTITIES}
    ratios = {q: [] for q in QUANTITIES}
    leans = {q: [] for q in QUANTITIES}
    done = 0
    for _ in range(trials):
        capacitor = NOMINAL_CAPACITOR * (1 + rng.uniform(-CAPACITOR_TOLERANCE, CAPACITOR_TOLERANCE))
        tank = Tank(inductance=47e-6, tank_capacitor=capacitor, dcr=0.3, feed_resistance=LOAD)
        alpha, wd = tank.poles()
        dt = 2 * math.pi / math.hypot(alpha, wd) / SAMPLES_PER_CYCLE
        t, clean = ringdown(tank, dt, CYCLES * SAMPLES_PER_CYCLE, step=1.0, pre_trigger=PRE_TRIGGER)
        amplitude = ring_amplitude(t, clean, alpha, wd)
        y = clean + rng.normal(0.0, amplitude / 10 ** (snr_db / 20), clean.size)
        try:
            r = wavefit.analyze(pd.DataFrame({"time": t, "tank": y}), setup, uncertainty="montecarlo",
                                draws=DRAWS, seed=int(rng.integers(2 ** 31)))
        except wavefit.WavefitError:
            continue
        done += 1
        for name, truth in truths(tank).items():
            q, mc = r.quantities[name], r.monte_carlo.quantities[name]
            low, high = mc.interval
            hits[name][0] += abs(q.value - truth) <= q.expanded_uncertainty
            hits[name][1] += low <= truth <= high
            ratios[name].append((high - low) / (2 * q.expanded_uncertainty))
            leans[name].append((high - q.value) / (q.value - low))
    return [Row(snr_db, name, hits[name][0] / max(done, 1), hits[name][1] / max(done, 1),
                float(np.median(ratios[name])) if done else math.nan,
                float(np.median(leans[name])) if done else math.nan, done) for name in QUANTITIES]


def format_table(rows: list[Row]) -> str:
    lines = [f"{'SNR dB':>6}  {'quantity':<9}  {'cover linear':>12}  {'cover MC':>9}  {'± (1 sd)':>8}  "
             f"{'width MC/lin':>12}  {'asymmetry':>9}  {'trials':>6}"]
    for r in rows:
        sd = math.sqrt(NOMINAL * (1 - NOMINAL) / max(r.trials, 1))
        lines.append(f"{r.snr_db:6.1f}  {r.quantity:<9}  {100 * r.linear_coverage:11.1f}%  {100 * r.mc_coverage:8.1f}%"
                     f"  {100 * sd:7.1f}%  {r.width_ratio:12.3f}  {r.asymmetry:9.3f}  {r.trials:6d}")
    return "\n".join(lines)


def draw_figure(rows: list[Row], path: str) -> None:
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    fig, axes = plt.subplots(1, 3, figsize=(13, 4))
    for name, colour in zip(QUANTITIES, ("tab:blue", "tab:orange", "tab:green", "tab:red")):
        sel = [r for r in rows if r.quantity == name]
        snr = [r.snr_db for r in sel]
        axes[0].plot(snr, [r.width_ratio for r in sel], "o-", color=colour, label=name)
        axes[1].plot(snr, [r.asymmetry for r in sel], "o-", color=colour, label=name)
        axes[2].plot(snr, [100 * r.linear_coverage for r in sel], "o--", color=colour, label=f"{name} linear")
        axes[2].plot(snr, [100 * r.mc_coverage for r in sel], "s-", color=colour, label=f"{name} Monte Carlo")
    axes[0].set_ylabel("Monte Carlo width / linear width (2U)")
    axes[1].set_ylabel("Monte Carlo asymmetry (high − y)/(y − low)")
    axes[2].set_ylabel("coverage of the truth (%)")
    axes[2].axhline(100 * NOMINAL, color="k", lw=0.8)
    for ax in axes[:2]:
        ax.axhline(1.0, color="0.6", lw=0.6)
    for ax in axes:
        ax.set_xlabel("SNR (dB)")
        ax.legend(fontsize=7)
    fig.suptitle(f"lc-ring, {CYCLES} cycles, tank capacitor ±{100 * CAPACITOR_TOLERANCE:g} % (rectangular)")
    fig.tight_layout()
    fig.savefig(path, dpi=100)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--trials", type=int, default=100)
    parser.add_argument("--quick", action="store_true", help="30 trials, for a smoke run")
    parser.add_argument("--figure", metavar="FILE.png", help="draw the comparison into this file")
    parser.add_argument("--seed", type=int, default=2026)
    args = parser.parse_args(argv)
    trials = 30 if args.quick else args.trials
    rng = np.random.default_rng(args.seed)
    start = time.perf_counter()
    rows = [row for snr in SNRS_DB for row in run_snr(snr, trials, rng)]
    print(format_table(rows))
    print(f"({time.perf_counter() - start:.0f} s; nominal coverage {100 * NOMINAL:.2f} %)")
    if args.figure:
        draw_figure(rows, args.figure)
        print(f"figure: {args.figure}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
