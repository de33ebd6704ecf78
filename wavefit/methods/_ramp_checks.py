"""pulse-ramp's checks between ramps: heating between pulses, and the rising against the
falling current.

Both compare curves of the same coil fitted to different samples, so the fits' coefficients
are independent between them and the scale factors they share (shunt, gains, timebase)
cancel to first order: each difference is judged against the type A uncertainty of the
two fits alone (JCGM 100:2008, 5.2, with the correlated coefficients of each fit).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
from uncertainties import correlated_values

from ._ramp import Ramp
from ._ramp_curves import nominal_inputs, ramp_curves, small_current

#: Pulses whose L0 differ by more than this many standard uncertainties of the difference were
#: not measured on the same coil state (the winding or core warmed between them).
HEATING_Z = 3.0
#: Rising and falling L_inc that differ by more than this many standard uncertainties at any
#: grid point disagree: neighbouring points share coefficients, so a curve holds only as many
#: independent points as its splines have coefficients (up to about a hundred); 4σ keeps the
#: chance of a false warning over them below 1 % for Gaussian errors.
FALLING_Z = 4.0
#: The standard uncertainty of a difference between two fits of the same record is taken as at
#: least this fraction of the value: a record with almost no noise (a simulation) would otherwise
#: call a difference of a few parts per million significant, far below what any instrument
#: resolves (common practice).
RELATIVE_FLOOR = 1e-4


@dataclass(frozen=True)
class FallingComparison:
    """The falling ramps' L_inc against the rising one's on the grid points both cover:
    how many points, the largest |difference|/u and the current where it is."""

    points: int
    max_z: float
    at_current: float


def with_fits(x: dict[str, Any], ramps: list[Ramp], blocks=()) -> dict[str, Any]:
    """``x`` with the coefficients of ``ramps``' fits, and their flux linkage before the fit
    when one of ``blocks`` holds it, as correlated ``uncertainties`` values."""
    x = dict(x)
    for ramp in ramps:
        for spline in (ramp.current, ramp.voltage):
            x.update(zip(spline.fit.names, correlated_values(spline.fit.values, spline.fit.covariance)))
    flux_names = {ramp.flux_name for ramp in ramps}
    for block in blocks:
        if block.names[0] in flux_names:
            x.update(zip(block.names, correlated_values(block.values, block.covariance)))
    return x


def fits_only_curves(ramps: list[Ramp], settings: Mapping[str, Any], blocks, parts) -> dict[str, Any]:
    """The curves of ``ramps`` on ``settings["grid"]`` as ``uncertainties`` values that carry the
    fits' uncertainty (and the flux before them) alone, the parts and scale factors at their
    estimates: what differences between fits of the same record are judged against."""
    x = with_fits(nominal_inputs(blocks, parts), ramps, blocks)
    return ramp_curves(x, settings, [ramp.rows(settings["grid"]) for ramp in ramps])


def heating_warning(ramps: list[Ramp], settings: Mapping[str, Any], blocks, parts) -> str | None:
    """A warning when the first and last pulses' L0 differ by more than :data:`HEATING_Z`
    standard uncertainties of the difference, else None."""
    if len(ramps) < 2:
        return None
    first, last = (fits_only_curves([ramp], settings, blocks, parts)["flux_linkage"] for ramp in (ramps[0], ramps[-1]))
    difference = small_current(first - last, settings)
    if not (difference.std_dev > 0 and abs(difference.nominal_value) > HEATING_Z * difference.std_dev):
        return None
    level = small_current(first, settings).nominal_value
    return (f"the first and last pulses' L0 differ by {100 * abs(difference.nominal_value) / level:.2g} % "
            f"({abs(difference.nominal_value) / difference.std_dev:.1f} standard uncertainties): the winding or "
            "core changed between pulses (heating?); let it cool between pulses or use fewer")


def compare_falling(rising: list[Ramp], falling: list[Ramp], settings: Mapping[str, Any], blocks,
                    parts) -> FallingComparison | None:
    """The falling ramps' mean L_inc against the rising ramps' on the grid points every falling
    ramp covers; None when there are none or they cover fewer than two grid points."""
    if not falling:
        return None
    grid = settings["grid"]
    low, high = max(r.low for r in falling), min(r.high for r in falling)
    inside = np.flatnonzero((grid >= low) & (grid <= high))
    inside = inside[np.all([_reached(ramp, grid[inside]) for ramp in falling], axis=0)]
    if inside.size < 2:
        return None
    part = {**settings, "grid": grid[inside]}
    up, down = (fits_only_curves(ramps, part, blocks, parts)["L_inc"] for ramps in (rising, falling))
    scale = [max(d.std_dev, RELATIVE_FLOOR * abs(level.nominal_value)) for d, level in zip(up - down, up)]
    z = np.array([abs(d.nominal_value) / s if s > 0 else 0.0 for d, s in zip(up - down, scale)])
    worst = int(np.argmax(z))
    return FallingComparison(int(inside.size), float(z[worst]), float(grid[inside][worst]))


def _reached(ramp: Ramp, grid: np.ndarray) -> np.ndarray:
    """Where the ramp's fitted current reaches each grid current at a finite instant while still
    moving in its direction: a quiet record on few codes can leave a falling fit a flat stretch,
    where the instant is not found and L_inc = (v − R·i)/(di/dt) divides by zero (a trial's
    quiet 8-bit capture was refused as a numerical failure)."""
    rows = ramp.rows(grid)
    slope = rows["B1"] @ np.asarray(ramp.current.fit.values, dtype=float)
    return np.isfinite(rows["elapsed"]) & np.isfinite(slope) & (ramp.direction * slope > 0)


def falling_warning(comparison: FallingComparison | None) -> str | None:
    """The warning for a comparison beyond :data:`FALLING_Z`, else None."""
    if comparison is None or comparison.max_z <= FALLING_Z:
        return None
    return (f"the rising and falling current disagree on L_inc by {comparison.max_z:.1f} standard uncertainties "
            f"at {comparison.at_current:.4g} A (hysteresis or eddy currents in the core, or a dut_resistance off "
            "its true value, or a shunt_resistor off its value, which sets the current of that drop: the drop "
            "R·i, taken from the coil voltage, moves L_inc in opposite directions on the rising and falling "
            "ramps; a unit slip in either is off a thousand times): the rising ramp's curve is reported")
