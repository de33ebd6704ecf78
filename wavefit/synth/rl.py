"""Clean responses of the rl-step circuit: generator (EMF, output resistance) -> drive ->
inductor (L, DCR, optional winding capacitance across it) -> sense -> sense resistor -> ground.

With an instantaneous generator edge and no winding capacitance the response is
written in closed form (piecewise exponentials with the loop time constant
L/(R_source + DCR + R_sense)); otherwise the circuit's state equations are
integrated exactly for the piecewise-linear generator waveform
(``scipy.signal.lsim`` with linear input interpolation on a grid that contains
every breakpoint).
"""
from __future__ import annotations

import numpy as np
from scipy import signal


def generator_waveform(t: np.ndarray, low: float, high: float, period: float, delay: float,
                       edge_time: float) -> np.ndarray:
    """Trapezoidal square wave: ``low`` until ``delay``, then half periods high/low, linear edges."""
    phase = np.mod(np.asarray(t, dtype=float) - delay, period)
    half = 0.5 * period
    frac = np.clip(phase / edge_time, 0.0, 1.0) if edge_time > 0 else (phase >= 0).astype(float)
    rise = np.where(phase < half, frac, 0.0)
    frac_f = np.clip((phase - half) / edge_time, 0.0, 1.0) if edge_time > 0 else np.ones_like(phase)
    level = np.where(phase < half, rise, 1.0 - frac_f)
    level = np.where(np.asarray(t) < delay, 0.0, level)
    return low + (high - low) * level


def rl_square_wave(inductance: float, dcr: float, sense_resistor: float, source_resistance: float,
                   amplitude: float, period: float, sample_interval: float, duration: float, *,
                   delay: float | None = None, low: float = 0.0, edge_time: float = 0.0,
                   winding_capacitance: float = 0.0) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Time axis, drive-node voltage and sense-resistor voltage of the RL circuit.

    Parameters
    ----------
    inductance, dcr, sense_resistor, source_resistance
        Circuit values in H and ohm.
    amplitude, low
        Generator EMF steps from ``low`` to ``low + amplitude`` (V).
    period, delay
        Square-wave period and the instant of the first rising edge (default: a tenth of
        the period); a period longer than ``duration`` gives a single step.
    sample_interval, duration
        Sampling of the returned record.
    edge_time
        Generator 0–100 % transition time (linear ramp).
    winding_capacitance
        Capacitance across the inductor (F).

    Returns
    -------
    t, drive, sense : numpy.ndarray
    """
    n = int(round(duration / sample_interval))
    t = np.arange(n) * sample_interval
    delay = 0.1 * min(period, duration) if delay is None else delay
    r_loop = source_resistance + dcr + sense_resistor
    if edge_time <= 0 and winding_capacitance <= 0:
        i = _closed_form_current(t, inductance, r_loop, amplitude, low, period, delay)
        e = generator_waveform(t, low, low + amplitude, period, delay, 0.0)
        return t, e - source_resistance * i, sense_resistor * i
    # state x = [i_L, v_C]; node voltage v across the DUT = v_C (capacitor across L+DCR)
    re = source_resistance + sense_resistor
    c = winding_capacitance if winding_capacitance > 0 else 1e-18
    a = np.array([[-dcr / inductance, 1.0 / inductance], [-1.0 / c, -1.0 / (re * c)]])
    b = np.array([[0.0], [1.0 / (re * c)]])
    cm = np.array([[0.0, 1.0]])
    fine = max(4, int(np.ceil(sample_interval / max(edge_time / 4, re * c / 4, 1e-30))) if edge_time > 0 else 4)
    fine = min(fine, 64)
    tf = np.arange(n * fine) * (sample_interval / fine)
    breaks = _breakpoints(tf[-1], period, delay, edge_time)
    tg = np.unique(np.concatenate((tf, breaks)))
    eg = generator_waveform(tg, low, low + amplitude, period, delay, edge_time)
    x0 = np.linalg.solve(a, -b[:, 0] * low) if low else np.zeros(2)
    _, v_dut, x = signal.lsim((a, b, cm, np.zeros((1, 1))), eg, tg, X0=x0)
    i_total = (eg - v_dut) / re
    idx = np.searchsorted(tg, t)
    sense = sense_resistor * i_total[idx]
    drive = eg[idx] - source_resistance * i_total[idx]
    return t, drive, sense


def _closed_form_current(t, inductance, r_loop, amplitude, low, period, delay):
    tau = inductance / r_loop
    i = np.full(t.size, low / r_loop)
    level_now = low / r_loop
    edges = []
    k = 0
    while delay + 0.5 * k * period <= t[-1]:
        edges.append(delay + 0.5 * k * period)
        k += 1
    current_start = level_now
    for j, te in enumerate(edges):
        target = (low + amplitude) / r_loop if j % 2 == 0 else low / r_loop
        end = edges[j + 1] if j + 1 < len(edges) else np.inf
        sel = (t >= te) & (t < end)
        i[sel] = target + (current_start - target) * np.exp(-(t[sel] - te) / tau)
        current_start = target + (current_start - target) * np.exp(-(end - te) / tau) if np.isfinite(end) else 0
    return i


def _breakpoints(t_end, period, delay, edge_time):
    pts = []
    k = 0
    while delay + 0.5 * k * period <= t_end:
        te = delay + 0.5 * k * period
        pts += [te, te + edge_time]
        k += 1
    return np.array(pts)
