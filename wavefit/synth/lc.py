"""Clean ring-down of a parallel tank excited by a voltage step through a feed resistor.

Circuit (all elements optional except L and the tank capacitor)::

    V step ──R_feed──┬──────────┬─────────┬──────────┐
                     │          │         │          │
                   L (+DCR)   C_total   R_core    R_probe
                     │          │         │          │
    ground ──────────┴──────────┴─────────┴──────────┘

with C_total = winding + tank + stray capacitance. The source is ideal, so the
feed resistor loads the tank as a parallel resistance. The state (tank voltage
v, inductor current i) obeys the linear equations

    C·dv/dt = (V_s − v)/R_feed − v·(1/R_core + 1/R_probe) − i,    L·di/dt = v − DCR·i,

solved exactly through the eigen-decomposition of the 2×2 system matrix; the
pole pair is s = −alpha ± j·w_d with alpha = DCR/(2L) + G/(2C) and
w_d² + alpha² = (1 + DCR·G)/(L·C), G the total parallel conductance.
Used for sample data, demos and the fitter's statistical tests (the truth
for circuit checks comes from ngspice, not from here).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True)
class Tank:
    """Element values of the tank circuit (SI units; ``math.inf`` for an absent resistor)."""

    inductance: float
    tank_capacitor: float
    dcr: float = 0.0
    core_loss_resistance: float = math.inf
    winding_capacitance: float = 0.0
    stray_capacitance: float = 0.0
    feed_resistance: float = 1e3
    probe_resistance: float = math.inf

    @property
    def capacitance(self) -> float:
        return self.winding_capacitance + self.tank_capacitor + self.stray_capacitance

    @property
    def conductance(self) -> float:
        return sum(1.0 / r for r in (self.feed_resistance, self.core_loss_resistance, self.probe_resistance)
                   if math.isfinite(r))

    def system(self) -> tuple[np.ndarray, np.ndarray]:
        """State matrix A and input vector B of x = (v, i) for the source voltage."""
        c, g, l_ = self.capacitance, self.conductance, self.inductance
        a = np.array([[-g / c, -1.0 / c], [1.0 / l_, -self.dcr / l_]])
        b = np.array([1.0 / (self.feed_resistance * c), 0.0])
        return a, b

    def poles(self) -> tuple[float, float]:
        """(alpha, w_d) of the free response, from the eigenvalues of the state matrix."""
        lam = np.linalg.eigvals(self.system()[0])
        top = lam[np.argmax(lam.imag)]
        return float(-top.real), float(abs(top.imag))


def ringdown(tank: Tank, sample_interval: float, samples: int, *, step: float = 1.0,
             pre_trigger: int = 0) -> tuple[np.ndarray, np.ndarray]:
    """Time axis and tank voltage for a step of ``step`` volts after ``pre_trigger`` samples.

    The tank starts at rest; the step happens at t = 0, so the first
    ``pre_trigger`` samples (t < 0) are the flat baseline.
    """
    a, b = tank.system()
    t = (np.arange(samples) - pre_trigger) * sample_interval
    x_final = -np.linalg.solve(a, b * step)
    lam, vec = np.linalg.eig(a)
    coef = np.linalg.solve(vec, -x_final)           # x(0) = 0
    tt = np.clip(t, 0.0, None)
    states = (vec[0, :, None] * coef[:, None] * np.exp(lam[:, None] * tt[None, :])).sum(axis=0).real
    v = x_final[0] + states
    v[t < 0] = 0.0
    return t, v
