"""Run ngspice transient simulations for the tests (external reference: the circuit simulator).

``simulate`` writes a netlist with the given circuit lines, runs ``ngspice -b``,
resamples the result onto a uniform time grid with ngspice's own ``linearize``
and returns the time axis and the requested node voltages / branch currents.
"""
from __future__ import annotations

import shutil
import subprocess
import tempfile
from pathlib import Path

import numpy as np
import pytest

NGSPICE = shutil.which("ngspice")

needs_ngspice = pytest.mark.skipif(NGSPICE is None, reason="ngspice is not installed (apt-get install ngspice)")


def simulate(circuit: str, tstep: float, tstop: float, vectors: list[str],
             options: str = ".options reltol=1e-7 abstol=1e-15 vntol=1e-10 chgtol=1e-18 method=gear maxord=2",
             uic: bool = False) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """Simulate ``circuit`` (netlist lines, no .tran/.end) and return (t, {vector: values})."""
    if NGSPICE is None:
        pytest.skip("ngspice is not installed")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "out.dat"
        deck = "\n".join([
            "* wavefit test circuit",
            circuit.strip(),
            options,
            f".tran {tstep:.6e} {tstop:.6e} 0 {tstep / 4:.6e}{' uic' if uic else ''}",
            ".control",
            "set wr_singlescale",
            "set wr_vecnames",
            "run",
            f"linearize {' '.join(vectors)}",
            f"wrdata {out} {' '.join(vectors)}",
            ".endc",
            ".end",
        ])
        (Path(tmp) / "deck.cir").write_text(deck)
        proc = subprocess.run([NGSPICE, "-b", "deck.cir"], cwd=tmp, capture_output=True, text=True, timeout=300)
        # ngspice -b exits 1 after a successful run on some builds: judge by the output file
        # a run that stops early ("timestep too small") says "aborted", not "error", and still
        # writes the vectors it has, padded by linearize
        log = (proc.stdout + proc.stderr).lower()
        if not out.exists() or "error" in log or "aborted" in log:
            raise RuntimeError(f"ngspice failed:\n{proc.stdout[-2000:]}\n{proc.stderr[-2000:]}")
        data = np.loadtxt(out, skiprows=1)
    t = data[:, 0]
    return t, {name: data[:, k + 1] for k, name in enumerate(vectors)}


def rl_loop(ind: float, dcr: float, r_source: float, r_sense: float, period: float, edge: float, *,
            winding_capacitance: float | None = None, high_first: bool = False, extra: str = "") -> str:
    """The rl-step circuit's netlist: a 2 V square wave (``edge`` its rise and fall times, its first
    edge at 0.15 period; falling first with ``high_first``) through ``r_source`` into the coil
    (``ind``, ``dcr`` and optionally its winding capacitance) and ``r_sense`` to ground; nodes
    ``drive`` and ``sense``; ``extra`` lines (a probe's R and C) are added."""
    low, high = (2, 0) if high_first else (0, 2)
    lines = [f"V1 gen 0 PULSE({low} {high} {0.15 * period:.6e} {edge:.3e} {edge:.3e} {period / 2 - edge:.6e} "
             f"{period:.6e})",
             f"Rsrc gen drive {r_source}", f"L1 drive mid {ind:.6e}", f"Rdcr mid sense {dcr}",
             f"Rsense sense 0 {r_sense}"]
    if winding_capacitance is not None:
        lines.append(f"Cw drive sense {winding_capacitance:.3e}")
    return "\n".join(lines) + ("\n" + extra.strip() if extra.strip() else "") + "\n"
