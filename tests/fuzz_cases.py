"""Seeded mutations of a good capture and a good setup, for the fuzz test and its campaign script.

Every mutation is generated here from two small synthetic captures (an rl-step
square wave with both channels, an lc-ring ring); nothing is copied from any
real file.
"""
from __future__ import annotations

import random
from dataclasses import dataclass

import numpy as np

from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.rl import rl_square_wave
from wavefit.synth.scope import ScopeModel

RL_SETUP = ('method = "rl-step"\n[columns]\ndrive = "CH1"\nsense = "CH2"\n'
            '[parts]\nsense_resistor = "10 ohm ±0.1%"\n')
RING_SETUP = 'method = "lc-ring"\n[columns]\ntank = "V"\n[parts]\ntank_capacitor = "10 nF ±1%"\n'


@dataclass(frozen=True)
class Case:
    """One mutated capture (bytes) with its setup (TOML text) and what was done to them."""

    capture: bytes
    setup: str
    what: str


def good_captures() -> list[tuple[bytes, str]]:
    """The two unmutated captures, as CSV bytes, with their setups."""
    rng = np.random.default_rng(11)
    t, drive, sense = rl_square_wave(100e-6, 0.5, 10.0, 50.0, 1.0, 40e-6, 4e-8, 100e-6)
    scope = ScopeModel(noise_rms=3e-4, bits=10)
    drive, sense = scope.apply(drive, rng), scope.apply(sense, rng)
    rl = "\n".join(["Sample interval,4e-8", "Time (s),CH1 (V),CH2 (V)",
                    *[f"{a:.9e},{b:.5f},{c:.5f}" for a, b, c in zip(t, drive, sense)]])
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=0.5)
    tt, v = ringdown(tank, 2e-8, 3000, pre_trigger=200)
    v = ScopeModel(noise_rms=1e-3, bits=10).apply(v, rng)
    ring = "\n".join(["Time (s),V (V)", *[f"{a:.9e},{b:.5f}" for a, b in zip(tt, v)]])
    return [(rl.encode(), RL_SETUP), (ring.encode(), RING_SETUP)]


_JUNK = ["", "nan", "inf", "-inf", "1e308", "-1e308", "x", "\x00", "\x1b[2J", "0,5", ";", "\"", "1e-320",
         "999999999999999999999", "é", "\u202e", "12:00:00", ",,,,", "\t", "-0"]
_SETUP_VALUES = ['"abc"', "5", "-1", "1e400", "[1,2]", "{a=1}", "true", '"1e308 ohm"', '"1e-300 ohm"',
                 '"10 ohm ±1% k=(2"', '"10 ohm ±1% k=2 k=3"', '"k=abc"', '"10R"', '"-10 ohm"', '"0 ohm"',
                 '"10 ohm ±1000%"', '"30 ns"', '"auto"', '""', "9" * 400]


def _mutate_capture(data: bytes, rng: random.Random) -> tuple[bytes, str]:
    lines = data.decode().split("\n")
    kind = rng.randrange(11)
    if kind == 0:  # a cell replaced by junk
        k = rng.randrange(1, len(lines))
        cells = lines[k].split(",")
        cells[rng.randrange(len(cells))] = rng.choice(_JUNK)
        lines[k] = ",".join(cells)
        return "\n".join(lines).encode(), "cell junk"
    if kind == 1:  # lines dropped
        for _ in range(rng.randrange(1, 50)):
            lines.pop(rng.randrange(1, len(lines)))
        return "\n".join(lines).encode(), "lines dropped"
    if kind == 2:  # truncated
        return data[: rng.randrange(0, len(data))], "truncated"
    if kind == 3:  # random bytes overwritten
        out = bytearray(data)
        for _ in range(rng.randrange(1, 20)):
            out[rng.randrange(len(out))] = rng.randrange(256)
        return bytes(out), "bytes overwritten"
    if kind == 4:  # rows swapped
        a, b = rng.randrange(2, len(lines)), rng.randrange(2, len(lines))
        lines[a], lines[b] = lines[b], lines[a]
        return "\n".join(lines).encode(), "rows swapped"
    if kind == 5:  # a column scaled or inverted
        col = rng.randrange(1, lines[-1].count(",") + 1)
        factor = rng.choice([-1.0, 0.0, 1e6, 1e-6, 10.0])
        for k in range(2, len(lines)):
            cells = lines[k].split(",")
            if col < len(cells):
                try:
                    cells[col] = f"{float(cells[col]) * factor:.6g}"
                except ValueError:
                    pass
            lines[k] = ",".join(cells)
        return "\n".join(lines).encode(), f"column {col} times {factor:g}"
    if kind == 6:  # text inserted
        lines.insert(rng.randrange(len(lines)), rng.choice(["pause", "# note", "1,2,3,4,5", "Time,CH1", "\x1b]0;title\x07"]))
        return "\n".join(lines).encode(), "text inserted"
    if kind == 7:  # a very long line
        lines.insert(0, "Note," + "x" * rng.choice([1000, 200_000]))
        return "\n".join(lines).encode(), "long line"
    if kind == 8:  # line ends changed
        return "\r".join(lines).encode(), "bare CR"
    if kind == 9:  # one glitch sample
        k = rng.randrange(3, len(lines))
        cells = lines[k].split(",")
        cells[-1] = "0"
        lines[k] = ",".join(cells)
        return "\n".join(lines).encode(), "glitch"
    return b"", "empty"


def _mutate_setup(setup: str, rng: random.Random) -> tuple[str, str]:
    lines = setup.split("\n")
    kind = rng.randrange(4)
    value_lines = [k for k, line in enumerate(lines) if "=" in line]
    if kind == 0:
        k = rng.choice(value_lines)
        lines[k] = lines[k].split("=")[0] + "= " + rng.choice(_SETUP_VALUES)
        return "\n".join(lines), "value"
    if kind == 1:
        lines.insert(rng.randrange(len(lines)), rng.choice(["colums = 1", "[instrument]\nvertical_gain_CH9 = \"1%\"",
                                                           "sample_interval = \"400 ns\"", "captures = 5",
                                                           "[options]\nskip = [[[[1]]]]"]))
        return "\n".join(lines), "key"
    if kind == 2:
        return setup.replace("sense", "drive") if "sense" in setup else setup.replace("tank", "time"), "roles"
    return setup[: rng.randrange(len(setup))], "setup truncated"


def cases(count: int, seed: int) -> list[Case]:
    """``count`` seeded cases: mostly mutated captures, some mutated setups, some both."""
    rng = random.Random(seed)
    good = good_captures()
    out = []
    for _ in range(count):
        data, setup = rng.choice(good)
        what = []
        if rng.random() < 0.75:
            data, w = _mutate_capture(data, rng)
            what.append(w)
        if rng.random() < 0.35 or not what:
            setup, w = _mutate_setup(setup, rng)
            what.append(w)
        out.append(Case(data, setup, "; ".join(what)))
    return out


def numbers_in(obj):
    """Every float in a JSON-like object (dicts and lists walked), for the finiteness checks."""
    if isinstance(obj, dict):
        for value in obj.values():
            yield from numbers_in(value)
    elif isinstance(obj, list):
        for value in obj:
            yield from numbers_in(value)
    elif isinstance(obj, float):
        yield obj
