"""Saturation method "pulse-ramp": inductance against current from the current ramp of a voltage pulse.

A charged capacitor bank (or a stiff supply) is switched across the coil for a short pulse;
the current ramps up, faster where the core saturates. With the coil's terminal voltage v
and its current i recorded, Faraday's law with the winding's resistive drop removed gives
the flux linkage λ(t) = λ(t_on) + ∫ (v − R·i) dt, and

* the incremental inductance L_inc(i) = dλ/di = (v − R·i) / (di/dt),
* the apparent (secant) inductance L_app(i) = λ(i) / i,
* the energy stored up to a current, E = ∫ i dλ = ∫₀^I i·L_inc(i) di.

The current and the voltage of each pulse are fitted by least-squares cubic regression
splines on the same knots (:mod:`wavefit.fit.spline_regression`; knot count by Schwarz's
criterion, knots at equal steps of the current), so di/dt is the derivative of a smooth
fit, not a difference of noisy samples, and the value, slope and integral of either
channel anywhere in the pulse are the spline coefficients times fixed basis rows. The
curves are reported on a fixed grid of currents: at each grid current the instant where the
fitted current reaches it is found at the estimates and the measurement function carries it
to first order (a Newton step) when the inputs move, so the sensitivity of every point to
the current scale, the shunt, the gains and the offsets is exact to first order and the
curve's full covariance keeps the correlation between neighbouring points. Several pulses
are averaged point by point (equal weights); their knots are then finer, so that the
splines' smoothing bias, the same in every pulse, stays below the average's smaller noise.

Scalars: ``L0``, the small-current inductance, the slope at zero current of the flux linkage
λ(I) = L0·I + b·I³ fitted to the lowest :data:`L0_SPAN` of the fitted current range (checked
against the series to I⁵); ``I_sat_10``, ``I_sat_20``, ``I_sat_30``, the current beyond which
L_inc stays below a fall of 10, 20, 30 % from L0 (the saturation current of IEC 62024-2 is defined
by a stated fall of inductance; the fractions are option ``saturation_drops``); ``E`` up to
the highest current all pulses reach; ``I_peak``. Option ``at_currents`` gives the curve
``L_at``: L_inc at the currents named.

Safety: the bank stores C·V²/2 and the coil L·I²/2 at the peak; without a freewheeling path
the coil's current, interrupted, makes a voltage spike that hurts people and destroys scope
inputs. See ``docs/method-pulse-ramp.md``.

References
----------
.. [1] IEC 62024-2:2020, High frequency inductive components - Electrical characteristics and
   measuring methods - Part 2: Rated current of inductors for DC-to-DC converters
   (saturation current by a stated fall of inductance; from memory of its scope).
.. [2] C. de Boor, *A Practical Guide to Splines*, Springer 2001 (B-splines).
.. [3] JCGM 100:2008 (GUM), 5.1.2 and 5.2 (propagation with correlated inputs).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np

from ..errors import AnalysisRefused, SetupError
from ..fit.engine import Block, fit_least_squares
from ..fit_summary import FitSummary, optional_entry
from ..measurement import Measurement
from ..outputs import Axis, Curve, Scalar
from ..results import TracePlot
from ..setup import Setup
from ..fit.quantisation import DITHER_LIMIT
from ..signal.clipping import extremes
from ..signal.codes import record_levels
from ..uncertainty import InputQuantity
from ..values import parse_number_with_unit
from . import register
from ._pulses import MIN_EDGE_SKIP, Pulse, falling_segment, find_pulses
from ._ramp import FALLING, RISING, Ramp, fit_ramp, flux_before
from ._ramp_checks import compare_falling, falling_warning, fits_only_curves, heating_warning
from ._model_check import ModelCheck, added
from ._ramp_model_check import model_input, ramp_model_check
from ._ramp_curves import (VOLTAGE_LEVEL, drop_points, nominal_inputs, ramp_curves, saturation_currents,
                           series_weights, significant_falls, small_current)
from .base import Method, PartSpec
from .estimate import Estimate, FittedBlock

#: Points of the reported current grid (fine enough that linear interpolation between them
#: for a saturation current errs far below its uncertainty).
GRID_POINTS = 201
#: L0 is the slope at zero current of the flux linkage λ(I) = L0·I + b·I³, fitted by least
#: squares to the grid points in this lowest fraction of the current range. The flux is
#: counted from the switch-on, where the current is zero, so the series passes through the
#: origin and the extrapolation below the first grid current (the ring masked at the
#: switch-on) is anchored there; λ is an integral, so its points carry less noise than the
#: derivative L_inc, and its bend is (n + 1) times smaller than L_inc's for a fall in I^n
#: (L_app = λ/I). A core without bias has λ odd in i, so the series holds odd powers only; a
#: quarter of the range averages over many points. The model check compares L0 with the
#: series to I⁵ and a significant difference enters the budget (:mod:`._ramp_model_check`).
#: Measured on ngspice cores (exponents 2.5–12, 8-bit records): the standard uncertainty of
#: L0 about half that of the intercept of L_inc = L0 + a·I² over the same span. The same
#: fraction bounds where the grid may start: a grid that starts above it of its top current
#: (pulses that begin on the previous pulse's current share only their high currents) would put
#: L0 and the head of E on an extrapolation longer than the range it rests on (three pulses
#: from 0, 3.9 and 9.6 A gave L0 = 18.9 ± 0.8 µH for 150 µH), and is refused.
L0_SPAN = 0.25
#: The odd powers of the current in the flux-linkage series whose slope at zero is L0.
L0_POWERS = (1, 3)
#: A pulse that does not start from rest has its flux counted from a current above zero: the
#: series then takes a constant term as well.
NOT_FROM_REST_POWERS = (0, 1, 3)
#: The grid stays this fraction of the range inside the fitted currents: a spline's end
#: coefficients are fitted to few samples.
GRID_INSET = 0.01
#: A voltage code step (as a share of the pulse's voltage, times L0) larger than this many of
#: L0's fitted standard uncertainties (about its expanded uncertainty) is warned
#: (:func:`_coarse_voltage`).
COARSE_VOLTAGE_U = 2.0
#: Fewest samples a pulse's ramp must keep between its masked edges (and below a clipped top).
MIN_RAMP_SAMPLES = 64
#: A ramp of fewer samples than this is warned (the method page asks for a few thousand): the
#: splines' knots then hold a few dozen samples each (a square wave's steps of an rl-step bench,
#: analysed as 12 pulses of 98 samples, gave an L0 off by 2.3 U with no word: a trial's file).
ADVISED_RAMP_SAMPLES = 1000
#: Samples averaged for the supply voltage at each end of a pulse's fit.
SUPPLY_SAMPLES = 16
#: Samples before the first pulse needed to measure the channels' offsets.
MIN_BASELINE_SAMPLES = 16
#: A pulse that starts at a current above this fraction of its peak did not start from rest
#: (the previous pulse's current had not decayed).
START_CURRENT_FRACTION = 0.02
#: The current before a pulse is the mean of this many samples before its rising edge (one
#: sample of an 8-bit record can be a whole code step off)...
REST_SAMPLES = 16
#: ...and counts as not at rest only beyond this many standard errors of that mean as well
#: (three: a false "not from rest", which changes how L0 is fitted, stays rare).
START_CURRENT_Z = 3.0
#: A saturation current is reported only when L_inc beyond its crossing lies below the level
#: (1 − drop)·L0 by more than this many standard uncertainties of the fits at some point: a
#: fall made by the noise of the curve's last points, whose uncertainty grows where the fitted
#: samples end, is not a saturation. Three, not two: the largest of the points beyond a
#: crossing is a maximum over a few independent ones (they share spline coefficients); at two,
#: 1 in 19 noisy records of a linear coil still reported a false I_sat_10 (measured), and a
#: false saturation current fails a good part against a ">= limit" spec, where a missing one
#: only asks for a longer pulse.
FALL_Z = 3.0


@dataclass(frozen=True, kw_only=True)
class RampSummary(FitSummary):
    """The ramp fit, written under ``fit`` in the JSON.

    Attributes
    ----------
    model
        The fitted model.
    pulses
        Number of pulses fitted.
    interior_knots
        Interior knots of each pulse's splines (Schwarz's criterion).
    fitted_samples
        Samples fitted per pulse.
    masked_after_on_s, masked_before_off_s
        Time masked after each pulse's switch-on and before its switch-off (ringing), s.
    current_range_A
        Lowest and highest grid current, A.
    peak_current_A
        The highest fitted current of each pulse, A.
    saturation_reached
        Per fall fraction (percent), whether L_inc fell that far within the range.
    model_check
        The finer-knot check of the splines (:mod:`wavefit.methods._ramp_model_check`).
    baseline_samples
        Samples before the first pulse that gave the channels' offsets.
    supply_V
        With a ``supply`` column: the supply's voltage at the start and the end of each pulse's
        fit (mean of :data:`SUPPLY_SAMPLES` samples), V: the bank's droop, for the record (v is
        measured, so the droop needs no model).
    falling_points_compared, falling_max_z
        When the record shows the current's decay after the switch opens: the grid points
        where its L_inc was compared with the rising ramp's, and the largest difference in
        standard uncertainties.
    """

    model: str
    pulses: int
    interior_knots: tuple[int, ...]
    fitted_samples: tuple[int, ...]
    masked_after_on_s: tuple[float, ...]
    masked_before_off_s: tuple[float, ...]
    current_range_A: tuple[float, float]
    peak_current_A: tuple[float, ...]
    saturation_reached: dict[str, bool]
    model_check: ModelCheck
    baseline_samples: int | None = optional_entry()
    supply_V: tuple[tuple[float, float], ...] | None = optional_entry()
    falling_points_compared: int | None = optional_entry()
    falling_max_z: float | None = optional_entry()


@register
class PulseRamp(Method):
    """Inductance against current from the current ramp of a voltage pulse (module docstring)."""

    name = "pulse-ramp"
    summary = "L against current, saturation currents and flux linkage from the current ramp of a voltage pulse"
    roles = {"current": True, "voltage": True, "supply": False}
    parts = {
        "shunt_resistor": PartSpec("ohm", False, "current shunt (the current column is its voltage)"),
        "dut_resistance": PartSpec("ohm", True, "DCR of the coil from an ohmmeter: its drop R·i is removed from "
                                   "the coil voltage"),
    }
    options = {"saturation_drops": [10, 20, 30], "at_currents": []}
    no_substitution = ("its measurement function is built on each capture's own ramps (their knots and current "
                       "grid), so the reference's cannot be evaluated beside another part's")
    outputs = {
        "L0": Scalar("H"),
        "I_sat_10": Scalar("A"),
        "I_sat_20": Scalar("A"),
        "I_sat_30": Scalar("A"),
        "E": Scalar("J"),
        "I_peak": Scalar("A"),
        "L_inc": Curve("H", axis=Axis("I", "A")),
        "L_app": Curve("H", axis=Axis("I", "A")),
        "flux_linkage": Curve("Wb", axis=Axis("I", "A")),
        "L_at": Curve("H", axis=Axis("I_at", "A")),
    }
    #: a channel comparison of the two channels replaces the ratio of their gains (L_inc scales
    #: with g_current/g_voltage) and gives their skew (a late current record is moved back)
    channel_ratio_roles = ("current", "voltage")
    optional = ("I_sat_10", "I_sat_20", "I_sat_30", "L_at")
    positive = ("L0", "E", "I_peak", "L_inc", "L_app", "flux_linkage", "L_at")
    determined = ("L0",)
    undetermined_hint = "check that the pulse rises from near zero current, well above the noise"
    unphysical_hint = "check [columns] (current and voltage) and the shunt_resistor"

    def check_setup(self, setup: Setup) -> None:
        super().check_setup(setup)
        drops = self.option(setup, "saturation_drops")
        if sorted(map(float, drops)) != [10.0, 20.0, 30.0]:
            raise SetupError(f"{setup.source}: option saturation_drops must be [10, 20, 30] (the reported "
                             f"I_sat_10, I_sat_20, I_sat_30), got {drops!r}")
        for text in self.option(setup, "at_currents"):
            _current(text, setup.source)

    # -- estimate ------------------------------------------------------------------------------

    def role_unit(self, role: str, setup: Setup) -> str:
        """The current column is the shunt's voltage when a shunt_resistor is given, else a
        current probe's output in A."""
        return "A" if role == "current" and "shunt_resistor" not in setup.parts else "V"

    def unit_hint(self, role: str, setup: Setup) -> str:
        if role != "current":
            return super().unit_hint(role, setup)
        return ("give shunt_resistor in [parts] when the current column is the shunt's voltage, and leave it "
                "out when the column is a current probe's output in A")

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        bound = measurement.first
        capture, parts = bound.capture, bound.parts
        t = np.asarray(capture.time, dtype=float)
        current = np.asarray(self.channel(capture, setup, "current").values, dtype=float)
        voltage = np.asarray(self.channel(capture, setup, "voltage").values, dtype=float)
        if not (np.all(np.isfinite(current)) and np.all(np.isfinite(voltage))):
            raise AnalysisRefused(f"{capture.source}: the current or voltage channel has missing samples; "
                                  "pulse-ramp needs a gap-free record")
        shunt = parts["shunt_resistor"].value if "shunt_resistor" in parts else 1.0
        dcr = parts["dut_resistance"].value
        pulses = find_pulses(voltage)
        if not pulses:
            raise AnalysisRefused(f"{capture.source}: no voltage pulse found (the voltage channel never stands "
                                  "above half its largest value for 64 samples); check [columns]")
        warnings: list[str] = []
        blocks: list[FittedBlock] = []
        offsets, baseline = self._offsets(current, voltage, pulses[0])
        if offsets is None:
            warnings.append("no samples before the first pulse: the channels' offsets are taken as zero "
                            "(record some time before the switch closes)")
        else:
            blocks.append(offsets)
        off = (float(offsets.values[0]), float(offsets.values[1])) if offsets is not None else (0.0, 0.0)
        clip_top = self._clip_level(current)
        if clip_top is not None:
            warnings.append("the current trace is clipped at the converter's limit: the curves end below it "
                            "(reduce the current channel's sensitivity)")
        amperes = (current - off[0]) / shunt
        ramps, falling = [], []
        not_from_rest = False
        shortest = t.size
        for k, pulse in enumerate(pulses):
            stop = pulse.stop
            if clip_top is not None:
                at_top = np.flatnonzero(current[pulse.start:stop] >= clip_top)
                stop = pulse.start + int(at_top[0]) if at_top.size else stop
            if stop - pulse.start < MIN_RAMP_SAMPLES:
                raise AnalysisRefused(f"{capture.source}: pulse {k + 1} leaves fewer than {MIN_RAMP_SAMPLES} samples "
                                      "between its masked edges; sample faster or lengthen the pulse")
            ramp = fit_ramp(t, current, voltage, pulse.start, stop, k, RISING, shunt, off[0], records=len(pulses))
            ramps.append(ramp)
            shortest = min(shortest, stop - pulse.start)
            flux, flux_u = flux_before(t, current, voltage, pulse.rise, pulse.start, off, dcr, shunt,
                                       ramp.voltage.fit.noise_sigma["voltage"])
            blocks += [_block(ramp.current, f"pulse {k + 1} current"), _block(ramp.voltage, f"pulse {k + 1} voltage"),
                       FittedBlock((ramp.flux_name,), np.array([flux]), np.array([[flux_u ** 2]]), ("Wb",), np.inf,
                                   group=f"pulse {k + 1} flux before the fit")]
            at_rise, at_rise_u = _current_before(amperes, pulse.rise)
            if at_rise > max(START_CURRENT_FRACTION * ramp.high, START_CURRENT_Z * at_rise_u):
                not_from_rest = True
                warnings.append(f"pulse {k + 1} starts at {at_rise:.3g} A, not from rest (the previous "
                                "pulse's current had not decayed): its flux linkage is counted from there")
            if pulse.off >= t.size:
                warnings.append(f"pulse {k + 1} runs to the end of the record: its turn-off is not recorded, so "
                                "the ramp's top is where the record stops and the end of the curve rests on the "
                                "last samples alone (record past the switch-off)")
            warnings += [*ramp.current.fit.warnings, *ramp.voltage.fit.warnings]
            segment = falling_segment(amperes, voltage, pulse, pulses[k + 1].on if k + 1 < len(pulses) else t.size)
            if segment is not None and clip_top is None:
                falling.append(fit_ramp(t, current, voltage, *segment, k, FALLING, shunt, off[0], records=len(pulses)))
        if shortest < ADVISED_RAMP_SAMPLES:
            warnings.append(f"the shortest ramp spans {shortest} samples, fewer than {ADVISED_RAMP_SAMPLES} (a few "
                            "thousand are asked for): the curves rest on few samples per knot; sample faster or "
                            "lengthen the pulse (a square wave's steps of an rl-step bench look like many short "
                            "pulses: is this a pulse-ramp capture?)")
        low, high = max(r.low for r in ramps), min(r.high for r in ramps)
        if not high > low:
            raise AnalysisRefused(f"{capture.source}: the {len(ramps)} pulses found share no current range to compare "
                                  "(a ring at the switch-on that dips below half the pulse voltage cuts one pulse "
                                  "into several: damp it, with shorter leads or a snubber across the switch)")
        inset = GRID_INSET * (high - low)
        grid = np.linspace(low + inset, high - inset, GRID_POINTS)
        if grid[0] > L0_SPAN * grid[-1]:
            raise AnalysisRefused(
                f"{capture.source}: the pulses share currents only from {grid[0]:.4g} A to {grid[-1]:.4g} A (a pulse "
                "that starts on the previous one's current sets the common range's low end): L0 and E would be "
                f"extrapolated from there to zero current, and the range must start below {L0_SPAN:.0%} of its top; "
                "record one pulse from rest, or let the current decay to zero between pulses")
        settings = {"ramps": [r.rows(grid) for r in ramps], "has_offsets": offsets is not None,
                    "has_shunt": "shunt_resistor" in parts, "grid": grid}
        nominal = ramp_curves(nominal_inputs(blocks, parts), settings, settings["ramps"])
        l_inc = np.asarray(nominal["L_inc"], dtype=float)
        if not np.all(l_inc > 0):
            raise AnalysisRefused(f"{capture.source}: the fitted current does not rise through the pulse "
                                  "(L_inc not positive): check [columns], the current's sign, and dut_resistance "
                                  "(a DCR too large, a unit slip, takes more than the coil's voltage as R·i)")
        low_points = np.flatnonzero(grid <= grid[0] + L0_SPAN * (grid[-1] - grid[0]))
        powers = NOT_FROM_REST_POWERS if not_from_rest else L0_POWERS
        settings.update(low_points=low_points, l0_powers=powers, low_weights=series_weights(grid[low_points], powers))
        l0 = float(small_current(np.asarray(nominal["flux_linkage"], dtype=float), settings))
        fitted = fits_only_curves(ramps, settings, blocks, parts)
        l0_fitted = small_current(fitted["flux_linkage"], settings)
        drops, weak = significant_falls(fitted["L_inc"], l0_fitted,
                                        drop_points(l_inc, l0, self.option(setup, "saturation_drops")), FALL_Z)
        coarse = _voltage_code(t, voltage, ramps)
        warnings += _coarse_voltage(coarse, l0, l0_fitted.std_dev)
        warnings += _unreported_drops(drops, weak, fitted["L_inc"][0], l0_fitted, grid)
        at = np.array([_current(x, setup.source) for x in self.option(setup, "at_currents")], dtype=float)
        inside = (at >= grid[0]) & (at <= grid[-1])
        if not inside.all():
            # as a saturation current not reached: the others, L0 and the curves are still given
            warnings.append(f"at_currents {', '.join(f'{a:g} A' for a in at[~inside])} outside the measured range "
                            f"{grid[0]:.4g}–{grid[-1]:.4g} A: no L_at there (a longer pulse or a larger bank voltage "
                            "reaches further)")
            at = at[inside]
        settings.update(drops=drops, at=at,
                        at_index=np.searchsorted(grid, at).clip(1, grid.size - 1))
        check = ramp_model_check(t, current, voltage, ramps, settings, blocks, parts, fitted)
        warnings += [w for w in (check.warning("spline fit of the ramp", "a knee sharper than the chosen knots "
                                               "follow"),) if w]
        comparison = compare_falling(ramps, falling, settings, blocks, parts)
        warnings += [w for w in (heating_warning(ramps, settings, blocks, parts), falling_warning(comparison)) if w]
        summary = RampSummary(
            model="cubic regression splines of current and voltage per pulse; L_inc = (v − R·i)/(di/dt)",
            pulses=len(ramps), interior_knots=tuple(r.interior for r in ramps),
            fitted_samples=tuple(r.samples for r in ramps),
            masked_after_on_s=tuple(float(t[p.start] - t[p.on]) for p in pulses),
            masked_before_off_s=tuple(float(t[p.off - 1] - t[p.stop - 1]) for p in pulses),
            current_range_A=(float(grid[0]), float(grid[-1])), peak_current_A=tuple(r.high for r in ramps),
            saturation_reached={str(d): j is not None for d, j in drops.items()},
            model_check=check, baseline_samples=baseline,
            supply_V=self._supply(capture, setup, ramps),
            falling_points_compared=comparison.points if comparison else None,
            falling_max_z=comparison.max_z if comparison else None)
        level_input = () if coarse is None else (
            InputQuantity(VOLTAGE_LEVEL, 0.0, coarse[0] * math.sqrt(2.0 / 3.0), "V", "B"),)
        return Estimate(tuple(blocks), summary, inputs=(*check.budget_inputs(), *level_input),
                        warnings=tuple(dict.fromkeys(warnings)),
                        adequate=check.adequate,
                        plot=_trace_plot(t, current, voltage, ramps), settings=settings, axes={"I": grid, "I_at": at})

    @staticmethod
    def _offsets(current, voltage, first: Pulse) -> tuple[FittedBlock | None, int | None]:
        """The channels' offsets from the samples before the first pulse (both fitted as
        constants with the engine's noise model), or (None, None) when there are too few."""
        n = first.rise - MIN_EDGE_SKIP
        if n < MIN_BASELINE_SAMPLES:
            return None, None
        y = np.concatenate((current[:n], voltage[:n]))
        design = np.zeros((2 * n, 2))
        design[:n, 0] = 1.0
        design[n:, 1] = 1.0
        fit = fit_least_squares(lambda x: y - design @ x, lambda x: -design,
                                [float(np.mean(current[:n])), float(np.mean(voltage[:n]))],
                                ["current_offset", "voltage_offset"], [Block(0, n, "current"), Block(n, 2 * n, "voltage")],
                                model="channel offsets before the pulse")
        return FittedBlock(fit.names, fit.values, fit.covariance, ("V", "V"), fit.dof, group="offsets"), n

    def _supply(self, capture, setup: Setup, ramps: list[Ramp]) -> tuple[tuple[float, float], ...] | None:
        """The supply's mean voltage over the first and last samples of each ramp's fit, or None
        without a ``supply`` column."""
        if "supply" not in setup.columns:
            return None
        supply = np.asarray(self.channel(capture, setup, "supply").values, dtype=float)
        t = np.asarray(capture.time, dtype=float)
        ends = []
        for ramp in ramps:
            a = int(np.searchsorted(t, ramp.current.knots[0]))
            b = a + ramp.samples
            ends.append((float(np.nanmean(supply[a:a + SUPPLY_SAMPLES])), float(np.nanmean(supply[b - SUPPLY_SAMPLES:b]))))
        return tuple(ends)

    @staticmethod
    def _clip_level(current) -> float | None:
        """The current channel's top value when the trace sits there clipped, else None."""
        facts = extremes(current)
        sigma = float(np.std(np.diff(current))) / np.sqrt(2.0)
        if facts.flat(sigma) or facts.piles_up(sigma):
            return float(np.max(current))
        return None

    # -- measurement function ---------------------------------------------------------------

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        """The measurement function (module docstring), with ``uncertainties`` numbers or floats."""
        curves = ramp_curves(x, settings, settings["ramps"])
        grid = settings["grid"]
        l_inc = curves["L_inc"]
        l0 = small_current(curves["flux_linkage"], settings)
        out = {"L0": l0 + added(x, model_input("L0")), "L_inc": l_inc, "L_app": curves["L_app"], "flux_linkage": curves["flux_linkage"],
               "I_peak": curves["I_peak"]}
        reached = saturation_currents(grid, l_inc, l0, settings["drops"])
        for drop in settings["drops"]:
            name = f"I_sat_{drop}"
            out[name] = reached[drop] + added(x, model_input(name)) if drop in reached else None
        # E = ∫ i dλ = ∫ i·L_inc di: from zero to the grid's start at L0, then along the grid
        head = 0.5 * l0 * grid[0] ** 2
        along = sum(0.5 * (grid[j + 1] - grid[j]) * (grid[j] * l_inc[j] + grid[j + 1] * l_inc[j + 1])
                    for j in range(grid.size - 1))
        out["E"] = head + along
        at, index = settings["at"], settings["at_index"]
        if at.size:
            fraction = (at - grid[index - 1]) / (grid[index] - grid[index - 1])
            out["L_at"] = l_inc[index - 1] + (l_inc[index] - l_inc[index - 1]) * fraction
        return out


def _voltage_code(t: np.ndarray, voltage: np.ndarray, ramps: list[Ramp]) -> tuple[float, float] | None:
    """The voltage channel's code step and the pulses' (lowest mean) voltage when the noise
    does not dither the codes (below ``DITHER_LIMIT`` of a code), else None.

    Nearly constant during a pulse, the coil voltage is then known only to within its code: the
    fit of its codes cannot place the level, or the bank's droop, inside one, so the flux
    ∫(v − R·i)dt and with it L0, E and the curves may be off by about a code over the pulse's
    voltage (8 bits over five times the voltage: a code 4.4 % of it, L0 2 % low with a U of
    0.5 % in a trial; 5.4 % and 4.9 % low in a test). The fit of a quiet level may land anywhere
    in its code, so it is off by up to one code, and so is the baseline's that sets the offset:
    two rectangular bounds of ± one code (JCGM 100:2008, 4.3.7) on one shift of the voltage, a
    standard uncertainty of code·√(2/3), which enters the budget as ``VOLTAGE_LEVEL``."""
    code = record_levels(voltage).step
    if not code or any(r.voltage.fit.noise_sigma["voltage"] >= DITHER_LIMIT * code for r in ramps):
        return None
    level = min(abs(float(np.mean(voltage[int(np.searchsorted(t, r.start)):][:r.samples]))) for r in ramps)
    return code, level


def _coarse_voltage(found: tuple[float, float] | None, l0: float, u_l0: float) -> list[str]:
    """The warning when the code of a voltage its noise does not dither (:func:`_voltage_code`)
    is a larger share of the pulse voltage than ``COARSE_VOLTAGE_U`` of L0's fitted standard
    uncertainties."""
    if found is None:
        return []
    code, level = found
    share = code / level if level > 0 else math.inf
    if not share * l0 > COARSE_VOLTAGE_U * u_l0:
        return []
    return [f"the voltage channel's code step, {code:.3g} V, is {100 * share:.2g} % of the pulse's {level:.3g} V and "
            "its noise does not dither it: the flux and with it L0, E and the curves may be off by about that "
            f"much; it is in the budget as {VOLTAGE_LEVEL!r} (the pulse's and the baseline's levels, each within "
            "one code), and more of the screen for the voltage channel would shrink it"]


def _unreported_drops(drops: Mapping[int, int | None], weak: Mapping[int, float], first: Any, l0: Any,
                      grid: np.ndarray) -> list[str]:
    """The warnings for the saturation currents not reported: a fall within the noise
    (``weak``, with its largest z), a curve whose first point (``first``, an ``uncertainties``
    value carrying the fits' uncertainty, as ``l0`` does) lies below the level by more than
    :data:`FALL_Z` standard uncertainties of the difference, or a curve that never falls that
    far. (The first point's nominal value alone was taken: a short pulse's first point, 18.6 ±
    9.9 µH against a level of 23 µH, was said to have fallen already, with advice for the
    wrong cause.)"""
    def percents(ds) -> str:
        return ", ".join(f"{d} %" for d in ds)

    def names(ds) -> str:
        return ", ".join(f"I_sat_{d}" for d in ds)

    out = []
    if weak:
        out.append(f"L_inc dips {percents(weak)} below L0 only within its noise (at most {max(weak.values()):.1f} "
                   f"standard uncertainties below those levels, where {FALL_Z:g} are needed; the range ends at "
                   f"{grid[-1]:.4g} A): no {names(weak)} (a longer pulse reaches further into saturation)")
    # the first point's fall below each level, judged as every other fall is (from grid point 0)
    below, _ = significant_falls([first], l0, {d: 0 for d, j in drops.items() if j is None and d not in weak}, FALL_Z)
    early = [d for d, j in below.items() if j is not None]
    if early:
        out.append(f"L_inc is already {percents(early)} below L0 at the lowest measured current {grid[0]:.4g} A: "
                   f"no {names(early)} (the ring at the switch-on masks the start of the ramp; faster sampling or a "
                   "lower bank voltage puts more samples at low current)")
    missing = [d for d, j in drops.items() if j is None and d not in early and d not in weak]
    if missing:
        out.append(f"L_inc did not fall by {percents(missing)} up to {grid[-1]:.4g} A: no {names(missing)} (a longer "
                   "pulse or a larger bank voltage reaches further)")
    return out


def _current_before(amperes: np.ndarray, rise: int) -> tuple[float, float]:
    """The mean current over the :data:`REST_SAMPLES` samples before a pulse's rising edge
    (clear of it by MIN_EDGE_SKIP) and the standard error of that mean."""
    end = max(rise - MIN_EDGE_SKIP, 1)
    window = amperes[max(end - REST_SAMPLES, 0):end]
    spread = float(np.std(window, ddof=1)) if window.size > 1 else 0.0
    return float(np.mean(window)), spread / np.sqrt(window.size)


def _block(spline, group: str) -> FittedBlock:
    """A spline's coefficients as a fitted block (recorded volts)."""
    fit = spline.fit
    return FittedBlock(fit.names, fit.values, fit.covariance, ("V",) * spline.size, fit.dof, group=group)


def _current(text: Any, source: str) -> float:
    """A current from an option (a number in A or a string such as "2.5 A")."""
    if isinstance(text, (int, float)) and not isinstance(text, bool):
        return float(text)
    try:
        current, _ = parse_number_with_unit(str(text), "A")
    except (ValueError, SetupError) as exc:
        raise SetupError(f"{source}: at_currents entry {text!r} is not a current ({exc})") from None
    return float(current)


def _trace_plot(t, current, voltage, ramps: list[Ramp]) -> TracePlot:
    """The recorded channels with the fitted splines over each pulse's fit window."""
    fitted_i = np.full(t.size, np.nan)
    fitted_v = np.full(t.size, np.nan)
    for ramp in ramps:
        sel = (t >= ramp.current.knots[0]) & (t <= ramp.current.knots[-1])
        fitted_i[sel] = ramp.current(t[sel])
        fitted_v[sel] = ramp.voltage(t[sel])
    return TracePlot(t, (("current", "V", current, fitted_i), ("voltage", "V", voltage, fitted_v)))
