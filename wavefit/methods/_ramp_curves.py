"""pulse-ramp's curves on the current grid, as one function of the inputs.

For each ramp, at each grid current I_k: the instant t_k where the fitted current reaches
I_k at the estimates is fixed (its basis rows are in the settings), and the function moves
it to first order, δt = (I_k − i(t_k))/(di/dt), when the inputs move (a Newton step, zero at
the estimates), so that each point's sensitivity to every input is exact to first order.
Written with arithmetic and :func:`wavefit.montecarlo.linear_combination` only, so that
``uncertainties`` numbers and Monte Carlo draws go through it as floats do.

References
----------
.. [1] JCGM 100:2008 (GUM), 5.1.2 (first-order propagation), 5.2 (correlated inputs).
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np
from uncertainties import covariance_matrix

from ..calibration.in_use import RATIO_INPUT, SKEW_INPUT
from ..fitted import FittedBlock
from ..montecarlo import linear_combination

#: The input for the level of a pulse voltage its noise does not dither (the budget's name).
VOLTAGE_LEVEL = "voltage_level_in_code"
#: Points of the curve at which :func:`significant_falls` judges a fall (even steps from the
#: earliest crossing to the end).
FALL_POINTS = 12


def ramp_curves(x: Mapping[str, Any], settings: Mapping[str, Any], ramps: list[dict[str, Any]]) -> dict[str, Any]:
    """L_inc and (for rising ramps) the flux linkage λ and L_app = λ/I on ``settings["grid"]``,
    averaged over ``ramps`` (each a :meth:`wavefit.methods._ramp.Ramp.rows`), and the mean
    peak current."""
    grid = settings["grid"]
    g_i = x["vertical_gain_current"]
    g_v = g_i / x[RATIO_INPUT] if RATIO_INPUT in x else x["vertical_gain_voltage"]
    skew = x[SKEW_INPUT] if SKEW_INPUT in x else 0.0
    timebase = x["timebase"]
    scale = (x["shunt_resistor"] if settings["has_shunt"] else 1.0) * g_i  # recorded V per true A
    r = x["dut_resistance"]
    off_i = x["current_offset"] if settings["has_offsets"] else 0.0
    # a pulse voltage its noise does not dither is known only to within a code: its level's
    # input (pulse_ramp._voltage_code) shifts it through the pulse as an offset would
    off_v = (x["voltage_offset"] if settings["has_offsets"] else 0.0) + (x[VOLTAGE_LEVEL] if VOLTAGE_LEVEL in x else 0.0)
    sums: dict[str, Any] = {}
    peaks = []
    for rows in ramps:
        ci = [x[n] for n in rows["i_names"]]
        cv = [x[n] for n in rows["v_names"]]
        # a current record late by skew shows at t the current of t − skew: read it at t + skew
        # (to first order; skew is a few sample intervals at most)
        slope, curvature = linear_combination(rows["B1"], ci), linear_combination(rows["B2"], ci)
        i = (linear_combination(rows["B0"], ci) + skew * slope - off_i) / scale
        di = timebase * (slope + skew * curvature) / scale
        d2i = timebase ** 2 * curvature / scale
        v = (linear_combination(rows["V0"], cv) - off_v) / g_v
        dv = timebase * linear_combination(rows["V1"], cv) / g_v
        u = v - r * i
        du = dv - r * di
        shift = (grid - i) / di  # time to the grid current, to first order (zero at the estimates)
        _add(sums, "L_inc", u / di + (du * di - u * d2i) / di ** 2 * shift)
        if rows["flux_before"] is not None:
            flux = (x[rows["flux_before"]]
                    + ((linear_combination(rows["Vint"], cv) - off_v * rows["elapsed"]) / g_v
                       - r * (linear_combination(rows["Bint"], ci) - off_i * rows["elapsed"]) / scale) / timebase
                    + u * shift)
            _add(sums, "flux_linkage", flux)
            peaks.append((linear_combination(rows["peak_rows"], ci)[0] - off_i) / scale)
    out = {"L_inc": sums["L_inc"] / len(ramps)}
    if peaks:
        out["flux_linkage"] = sums["flux_linkage"] / len(peaks)
        out["L_app"] = out["flux_linkage"] / grid
        out["I_peak"] = sum(peaks) / len(peaks)
    return out


def _add(sums: dict[str, Any], key: str, value: Any) -> None:
    sums[key] = value if key not in sums else sums[key] + value


def nominal_inputs(blocks: list[FittedBlock], parts: Mapping[str, Any]) -> dict[str, Any]:
    """The inputs at their estimates (gains and timebase 1), for the estimate's own use."""
    x: dict[str, Any] = {"vertical_gain_current": 1.0, "vertical_gain_voltage": 1.0, "timebase": 1.0}
    for block in blocks:
        x.update(zip(block.names, map(float, block.values)))
    for name, part in parts.items():
        x[name] = part.value
    return x


def series_weights(currents: np.ndarray, powers: tuple[int, ...]) -> np.ndarray:
    """Weights w such that w·λ gives the coefficient of I¹ in the least-squares fit of
    λ = Σ c_p·I^p (p in ``powers``, 1 among them) to the points λ at ``currents``: a fixed linear
    combination of the curve's points, so the coefficient's uncertainty sees their covariance."""
    return np.linalg.pinv(np.column_stack([currents ** p for p in powers]))[powers.index(1)]


def small_current(flux: Any, settings: Mapping[str, Any], weights: np.ndarray | None = None) -> Any:
    """L0, the slope at zero current of the flux linkage ``flux`` (floats, ``uncertainties``
    numbers or draws on the grid): its lowest points (``settings["low_points"]``) combined with
    ``weights`` (``settings["low_weights"]`` unless given, :func:`series_weights`)."""
    weights = settings["low_weights"] if weights is None else weights
    return sum(w * flux[j] for w, j in zip(weights, settings["low_points"]))


def drop_points(curve: np.ndarray, l0: float, drops) -> dict[int, int | None]:
    """For each drop (percent), :func:`final_crossing` of the nominal ``curve`` at (1 − drop)·L0."""
    return {int(d): final_crossing(curve, (1 - float(d) / 100) * l0) for d in drops}


def crossings_near(curve: np.ndarray, l0: float, near: Mapping[int, int | None]) -> dict[int, int | None]:
    """For each drop (percent) found on another curve at grid point ``near[drop]``, the grid
    point j of ``curve`` where it passes from above (1 − drop)·L0 to at or below it nearest
    to that point (None when it never does, or the other curve had none): a varied curve
    is compared at the same crossing, not at a noise dip or bump far from it."""
    out: dict[int, int | None] = {}
    for d, j0 in near.items():
        target = (1 - d / 100) * l0
        down = np.flatnonzero((curve[:-1] > target) & (curve[1:] <= target)) + 1
        out[d] = int(down[np.argmin(np.abs(down - j0))]) if j0 is not None and down.size else None
    return out


def significant_falls(curve: Any, l0: Any, drops: Mapping[int, int | None],
                      threshold: float) -> tuple[dict[int, int | None], dict[int, float]]:
    """The drops of ``drops`` whose fall is significant, and the largest z of the others.

    ``curve`` and ``l0`` are ``uncertainties`` values carrying the fits' uncertainty alone. A
    drop found at grid point j is kept when some point k ≥ j lies below (1 − drop)·L0 by more
    than ``threshold`` standard uncertainties of that difference (L0 and the point are
    correlated, and both uncertainties count): the fall then exists beyond the noise. A
    crossing made only by the noise of the curve's last points (their uncertainty grows where
    the fitted samples end) is returned in the second dict with its largest z, not kept.
    Points k are taken at :data:`FALL_POINTS` even steps from the earliest crossing to the
    curve's end (the last point always): neighbouring points share spline coefficients, so a
    few spread points see a fall as all would (and each point's covariance with L0 costs an
    expansion of L0's dependence on the coefficients of its span).
    """
    found = [j for j in drops.values() if j is not None]
    if not found:
        return dict(drops), {}
    points = np.unique(np.linspace(min(found), len(curve) - 1, FALL_POINTS).round().astype(int))
    l0_variance = l0.std_dev ** 2
    moments = {}
    for k in points:
        (_, shared), (_, variance) = covariance_matrix([l0, curve[k]])
        moments[k] = (curve[k].nominal_value, shared, variance)
    kept: dict[int, int | None] = {}
    weak: dict[int, float] = {}
    for d, j in drops.items():
        if j is None:
            kept[d] = None
            continue
        level = 1 - d / 100
        z = -np.inf
        for k in points[points >= j]:
            value, shared, variance = moments[k]
            spread = level ** 2 * l0_variance + variance - 2 * level * shared
            fall = level * l0.nominal_value - value
            z = max(z, fall / np.sqrt(spread) if spread > 0 else np.inf * np.sign(fall))
        if z > threshold:
            kept[d] = j
        else:
            kept[d] = None
            weak[d] = float(z)
    return kept, weak


def saturation_currents(grid: np.ndarray, curve: Any, l0: Any, drops: Mapping[int, int | None]) -> dict[int, Any]:
    """The current where ``curve`` reaches (1 − drop)·L0, for each drop whose grid point
    (:func:`drop_points`) was found."""
    return {d: interpolated_crossing(grid, curve, j, (1 - d / 100) * l0) for d, j in drops.items() if j is not None}


def final_crossing(curve: np.ndarray, target: float) -> int | None:
    """Index j ≥ 1 of the grid point where ``curve`` goes below ``target`` for the last time
    (the first of the points at or below it to the curve's end), or None when the curve ends
    above it or is below it from its first point (the crossing lies outside the grid). The last
    crossing, not the first: a noisy point that dips below the target short of the knee is
    followed by points above it, and saturation only deepens with current."""
    above = np.flatnonzero(curve > target)
    if not above.size or above[-1] == curve.size - 1:
        return None
    return int(above[-1]) + 1


def interpolated_crossing(grid: np.ndarray, curve: Any, j: int, target: Any) -> Any:
    """The current where ``curve`` reaches ``target``, by linear interpolation between grid
    points j − 1 and j (found at the estimates)."""
    return grid[j - 1] + (grid[j] - grid[j - 1]) * (curve[j - 1] - target) / (curve[j - 1] - curve[j])
