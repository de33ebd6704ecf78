"""One current ramp of a pulse-ramp record: the current and voltage splines of a segment, and
the basis rows at the instants where the fitted current reaches each current of a grid.

A rising ramp is the pulse itself; a falling ramp is the current's decay after the switch
opens (through the freewheeling diode, or a reversed bank), fitted the same way for the
comparison of the two (:mod:`wavefit.methods._ramp_checks`).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy.integrate import trapezoid

from ..fit.spline_regression import SplineCurve, fit_spline, interior_knot_count, undersmoothed_knots

#: Current rising through the segment (the pulse) or falling (after the switch opens).
RISING, FALLING = 1, -1
#: The spline evaluated at this many instants per fitted sample to find where it reaches a
#: grid current (then refined by Newton steps on the spline itself).
SEARCH_DENSITY = 2
#: Newton steps that carry each grid instant onto the spline (each squares the error).
NEWTON_STEPS = 3


@dataclass(frozen=True)
class Ramp:
    """A fitted ramp: its pulse ``index`` (0-based), ``direction`` (RISING or FALLING), the
    current and voltage splines (recorded volts), the shunt (1 when the current is in A), the
    current channel's offset (recorded volts), the interior knot count and fitted samples, and
    the name of its flux-before input (None for a falling ramp, whose flux is not reported)."""

    index: int
    direction: int
    current: SplineCurve
    voltage: SplineCurve
    shunt: float
    offset: float
    interior: int
    samples: int
    flux_name: str | None

    @property
    def start(self) -> float:
        """The first fitted instant (recorded time)."""
        return float(self.current.knots[0])

    @property
    def _times(self) -> np.ndarray:
        return np.linspace(self.current.knots[0], self.current.knots[-1], SEARCH_DENSITY * self.samples + 1)

    def _amperes(self, t: np.ndarray) -> np.ndarray:
        return (self.current(t) - self.offset) / self.shunt

    @property
    def low(self) -> float:
        """The lowest current the fitted ramp passes, A (at the estimates)."""
        return float(np.min(self._amperes(self._times)))

    @property
    def high(self) -> float:
        """The highest current the fitted ramp passes, A (at the estimates)."""
        return float(np.max(self._amperes(self._times)))

    @property
    def start_current(self) -> float:
        """The fitted current at the segment's first instant, A."""
        return float(self._amperes(self.current.knots[:1])[0])

    def rows(self, grid: np.ndarray) -> dict[str, Any]:
        """Basis rows at the instants where the fitted current first reaches each grid current
        (in the ramp's direction), for the measurement function."""
        times = self._times
        level = np.maximum.accumulate(self.direction * self._amperes(times))
        at = np.interp(self.direction * grid, level, times)
        for _ in range(NEWTON_STEPS):
            at = at - (self._amperes(at) - grid) / (self.current(at, 1) / self.shunt)
        t0 = self.current.knots[:1]
        return {"i_names": self.current.fit.names, "v_names": self.voltage.fit.names,
                "B0": self.current.basis(at), "B1": self.current.basis(at, 1), "B2": self.current.basis(at, 2),
                "V0": self.voltage.basis(at), "V1": self.voltage.basis(at, 1),
                "Bint": self.current.basis(at, -1) - self.current.basis(t0, -1),
                "Vint": self.voltage.basis(at, -1) - self.voltage.basis(t0, -1),
                "elapsed": at - t0[0], "peak_rows": self.current.basis(times[[int(np.argmax(level))]]),
                "flux_before": self.flux_name}


def fit_ramp(t: np.ndarray, current: np.ndarray, voltage: np.ndarray, start: int, stop: int, index: int,
             direction: int, shunt: float, offset: float, knots: np.ndarray | None = None,
             records: int = 1) -> Ramp:
    """Fit samples ``start:stop`` of both channels with cubic regression splines on the same
    knots (given, or :func:`~wavefit.fit.spline_regression.undersmoothed_knots` placed at equal
    steps of the current, for a curve averaged over ``records`` pulses)."""
    seg = slice(start, stop)
    ts, i_s, v_s = t[seg], current[seg], voltage[seg]
    if knots is None:
        knots = undersmoothed_knots(ts, [i_s, v_s], direction * i_s, records)
    interior = interior_knot_count(knots)
    tag = f"p{index + 1}" if direction == RISING else f"p{index + 1}_falling"
    i_fit = fit_spline(ts, i_s, knots, "current", f"{tag}_i")
    v_fit = fit_spline(ts, v_s, knots, "voltage", f"{tag}_v")
    return Ramp(index, direction, i_fit, v_fit, shunt, offset, interior, stop - start,
                f"{tag}_flux_before" if direction == RISING else None)


def flux_before(t: np.ndarray, current: np.ndarray, voltage: np.ndarray, on: int, start: int, offsets: tuple[float, float],
                dcr: float, shunt: float, sigma_v: float) -> tuple[float, float]:
    """The flux linkage gathered from the switch-on to the fit's first sample (trapezoid of
    the samples, from the last one before the pulse) and its standard uncertainty: the
    samples' noise (``sigma_v``), and where within the sample interval before the pulse the
    switch closed (rectangular, ±dt/2 at the pulse voltage: the trapezoid takes the voltage as
    rising linearly across it)."""
    head = slice(max(on - 1, 0), start + 1)
    off_i, off_v = offsets
    drop = (voltage[head] - off_v) - dcr * (current[head] - off_i) / shunt
    value = float(trapezoid(drop, t[head]))
    dt = float(t[1] - t[0])
    steps = head.stop - head.start
    u = float(np.hypot(sigma_v * dt * np.sqrt(max(steps, 1)), 0.5 * dt * abs(float(drop[-1])) / np.sqrt(3.0)))
    return value, u
