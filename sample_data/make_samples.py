"""Generate the bundled sample captures (invented scenario, fixed seeds).

Scenario: the incoming-inspection bench of Fernhill Drives, an invented small
company that builds motor drives, checks the 220 µH output-filter chokes of
lot 0412 before they are fitted. Every number here is invented; the captures
are computed by ``wavefit.synth`` and dressed with scope noise and 8-bit
quantisation. They demonstrate the tool and are never used as test references.

Run from the repository root:  python sample_data/make_samples.py
"""
from __future__ import annotations

import math
from pathlib import Path

import numpy as np

from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

HERE = Path(__file__).resolve().parent

# the invented choke: 220 µH, 0.12 ohm DCR, 30 pF winding capacitance
CHOKE_L, CHOKE_DCR, CHOKE_CW = 220e-6, 0.12, 30e-12
PREAMBLE = ["Bench,Fernhill Drives incoming inspection 2", "Part,FD-CH220 output choke, lot 0412, sample 07"]


def choke_step_two_channel(rng: np.random.Generator) -> None:
    """Square wave through the choke and a 10 ohm sense resistor; both nodes recorded."""
    t, drive, sense = rl_square_wave(CHOKE_L, CHOKE_DCR, 10.0, 50.0, 5.0, 80e-6, 20e-9, 200e-6,
                                     edge_time=20e-9, winding_capacitance=CHOKE_CW)
    ch1 = ScopeModel(noise_rms=4e-3, correlation_samples=4, bits=8, full_scale=(-4.7, 5.5)).apply(drive, rng)
    ch2 = ScopeModel(noise_rms=1.5e-3, correlation_samples=4, bits=8, full_scale=(-0.08, 0.92)).apply(sense, rng)
    lines = PREAMBLE + ["Probe,CH1 drive node; CH2 across 10 ohm sense resistor", "",
                        "Time (s),CH1 (V),CH2 (mV)"]
    lines += [f"{a:.8e},{b:.5f},{1e3 * c:.3f}" for a, b, c in zip(t, ch1, ch2)]
    _write("choke_step.csv", lines)


def choke_step_sense_only(rng: np.random.Generator) -> None:
    """The same test with one channel, written with semicolons and decimal commas, no time column."""
    t, _, sense = rl_square_wave(CHOKE_L, CHOKE_DCR, 10.0, 50.0, 5.0, 80e-6, 20e-9, 200e-6, edge_time=20e-9)
    ch = ScopeModel(noise_rms=1.5e-3, correlation_samples=4, bits=8, full_scale=(-0.08, 0.92)).apply(sense, rng)
    lines = ["Bench;Fernhill Drives incoming inspection 2", "Sample interval;2e-08", "", "CH2 (V)"]
    lines += [f"{v:.5f}".replace(".", ",") for v in ch]
    _write("choke_step_sense_only.csv", lines)


def _tank(capacitor: float) -> Tank:
    # feed 47 kohm in parallel with a 1 Mohm probe load the tank; 15 pF probe and fixture stray
    return Tank(inductance=CHOKE_L, tank_capacitor=capacitor, dcr=CHOKE_DCR, core_loss_resistance=250e3,
                winding_capacitance=CHOKE_CW, stray_capacitance=15e-12, feed_resistance=47e3,
                probe_resistance=1e6)


def tank_ring(rng: np.random.Generator, capacitor: float, name: str, dt: float, samples: int) -> None:
    """Ring-down of the choke with a known tank capacitor, excited by a 10 V step."""
    t, v = ringdown(_tank(capacitor), dt, samples, step=10.0, pre_trigger=samples // 50)
    amp = float(np.max(np.abs(v)))
    rec = ScopeModel(noise_rms=0.004 * amp, correlation_samples=3, bits=8,
                     full_scale=(-1.1 * amp, 1.1 * amp)).apply(v, rng)
    lines = PREAMBLE + [f"Tank capacitor,{capacitor * 1e9:g} nF", "", "Time (us),Tank (V)"]
    lines += [f"{1e6 * a:.5f},{b:.5f}" for a, b in zip(t - t[0], rec)]
    _write(name, lines)


def lot_0412(rng: np.random.Generator) -> None:
    """Twelve chokes of lot 0412 (production spread of L and DCR), two channels, gzip-compressed."""
    import gzip

    folder = HERE / "lot_0412"
    folder.mkdir(parents=True, exist_ok=True)
    for part in range(1, 13):
        inductance = CHOKE_L * (1.0 + 0.025 * rng.standard_normal())
        dcr = CHOKE_DCR * (1.0 + 0.05 * rng.standard_normal())
        if part == 9:  # one part with a shorted turn: low inductance
            inductance *= 0.88
        t, drive, sense = rl_square_wave(inductance, dcr, 10.0, 50.0, 5.0, 80e-6, 20e-9, 120e-6,
                                         edge_time=20e-9)
        ch1 = ScopeModel(noise_rms=4e-3, correlation_samples=4, bits=8, full_scale=(-4.7, 5.5)).apply(drive, rng)
        ch2 = ScopeModel(noise_rms=1.5e-3, correlation_samples=4, bits=8, full_scale=(-0.08, 0.92)).apply(sense, rng)
        lines = [f"Part,FD-CH220 lot 0412 sample {part:02d}", "", "Time (s),CH1 (V),CH2 (V)"]
        lines += [f"{a:.8e},{b:.5f},{c:.6f}" for a, b, c in zip(t, ch1, ch2)]
        path = folder / f"part{part:02d}.csv.gz"
        with gzip.GzipFile(path, "wb", mtime=0) as f:  # mtime 0: the same bytes on every run
            f.write(("\n".join(lines) + "\n").encode("utf-8"))
        print(f"wrote {path.relative_to(HERE.parent)}")


def _write(name: str, lines: list[str]) -> None:
    path = HERE / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    print(f"wrote {path.relative_to(HERE.parent)} ({len(lines)} lines)")


def main() -> None:
    rng = np.random.default_rng(20261202)
    choke_step_two_channel(rng)
    choke_step_sense_only(rng)
    tank_ring(rng, 10e-9, "tank_ring.csv", 100e-9, 15000)
    for cap, label in ((2.2e-9, "2n2"), (4.7e-9, "4n7"), (10e-9, "10n"), (22e-9, "22n")):
        f0 = 1.0 / (2 * math.pi * math.sqrt(CHOKE_L * (cap + 45e-12)))
        tank_ring(rng, cap, f"tank_sweep/ring_{label}.csv", 1.0 / (60 * f0), 12000)
    lot_0412(rng)


if __name__ == "__main__":
    main()
