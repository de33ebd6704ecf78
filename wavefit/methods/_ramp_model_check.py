"""pulse-ramp's model check: do the splines hold the ramp, or does their smoothing bias it?

Each rising ramp is fitted again on knots with one more knot half-way between each pair of
neighbours. That spline space holds the first (nested spaces), so when the first already
follows the ramp both fits estimate the same curve and their difference is noise with
variance var(finer) − var(first) (Hausman's specification test); a difference beyond
:data:`~wavefit.methods._model_check.MODEL_Z` of that says the chosen knots smooth the ramp
too much (a knee sharper than they can follow). L0 and each saturation current reached are
compared; a significant move enters the budget as a rectangular type B input, as for every
method's model check.

L0 is the slope at zero current of the odd series of the flux linkage in the current to I³
over the lowest part of the curve; it is compared with the slope of the longer series (to
I⁵) on the same curve. Both
are fixed combinations of the same points, so their difference has an exact variance from
the curve's covariance (the shorter series is the efficient estimate when it holds, the longer
one consistent either way: Hausman's pair); a difference beyond MODEL_Z of it says the short
series misses the curve's bend below the first measured current, and that move (and the
saturation currents', which are judged from L0) enters the budget the same way.

References
----------
.. [1] J. A. Hausman, "Specification tests in econometrics", Econometrica 46 (1978) 1251–1271.
.. [2] C. de Boor, *A Practical Guide to Splines*, Springer 2001, ch. IX (knot insertion).
"""
from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np
from uncertainties.unumpy import nominal_values

from ..fit.spline_regression import fits_samples, refined
from ._model_check import ModelCheck, Variation
from ._ramp import RISING, Ramp, fit_ramp
from ._ramp_checks import RELATIVE_FLOOR, fits_only_curves
from ._ramp_curves import crossings_near, saturation_currents, series_weights, small_current

#: What the check varies, in words (the report and the JSON say it).
VARIED = ("each pulse's splines refitted with a knot added half-way between each pair of neighbours; "
          "L0 from the flux linkage's series to I⁵ instead of I³")
#: The power the longer series adds to the one L0 is the slope of.
LONG_POWER = 5


def model_input(quantity: str) -> str:
    """The budget input that holds a significant move of ``quantity``."""
    return f"model_{quantity}"


def ramp_model_check(t: np.ndarray, current: np.ndarray, voltage: np.ndarray, ramps: list[Ramp],
                     settings: Mapping[str, Any], blocks, parts, curves: Mapping[str, Any]) -> ModelCheck:
    """The finer-knot and the longer-series variations of L0 and of each saturation current
    reached; ``curves`` are the ramps' curves with the fits' uncertainty alone
    (:func:`wavefit.methods._ramp_checks.fits_only_curves`)."""
    chosen = _scalars(curves, settings, settings["drops"])
    moves: dict[str, dict[str, tuple[float, float]]] = {name: {} for name in chosen}
    finer = _finer_fits(t, current, voltage, ramps, settings["grid"])
    if finer is not None:
        finer_curves = fits_only_curves(finer, settings, blocks, parts)
        finer_drops = crossings_near(nominal_values(finer_curves["L_inc"]), chosen["L0"].n, settings["drops"])
        for name, other in _scalars(finer_curves, settings, finer_drops).items():
            value = chosen[name]
            spread = other.s ** 2 - value.s ** 2  # independent refit of the same samples: Hausman
            moves[name]["finer_knots"] = (other.n, math.sqrt(spread) if spread > 0 else math.hypot(other.s, value.s))
    powers = (*settings["l0_powers"], LONG_POWER)
    longer = {**settings, "low_weights": series_weights(settings["grid"][settings["low_points"]], powers)}
    longer_l0 = small_current(nominal_values(curves["flux_linkage"]), longer)
    longer_drops = crossings_near(nominal_values(curves["L_inc"]), longer_l0, settings["drops"])
    for name, other in _scalars(curves, longer, longer_drops).items():
        moves[name]["longer_series_L0"] = (other.n, (other - chosen[name]).s)  # the same fits: exact
    variations = []
    for name, varied in moves.items():
        if not varied:
            continue
        value = chosen[name]
        z = max(abs(other - value.n) / max(scale, RELATIVE_FLOOR * abs(value.n)) for other, scale in varied.values())
        variations.append(Variation(name, model_input(name), "H" if name == "L0" else "A", value.n,
                                    {label: other for label, (other, _) in varied.items()}, z))
    return ModelCheck(VARIED, tuple(variations))


def _finer_fits(t: np.ndarray, current: np.ndarray, voltage: np.ndarray, ramps: list[Ramp],
                grid: np.ndarray) -> list[Ramp] | None:
    """Each ramp refitted on its knots with one added between each pair of neighbours, or None
    when a ramp has too few samples per coefficient for that or its refit does not span the
    grid (a noisy record's finer current can end below the grid's top; the longer series is
    still compared)."""
    finer = []
    for ramp in ramps:
        knots = refined(ramp.current.knots)
        if not fits_samples(knots, ramp.samples):
            return None
        start = int(np.searchsorted(t, ramp.start))
        refit = fit_ramp(t, current, voltage, start, start + ramp.samples, ramp.index, RISING, ramp.shunt,
                         ramp.offset, knots)
        if refit.low > grid[0] or refit.high < grid[-1]:
            return None
        finer.append(refit)
    return finer


def _scalars(curves: Mapping[str, Any], settings: Mapping[str, Any], drops: Mapping[int, int | None]) -> dict[str, Any]:
    """L0 and the saturation currents reached of ``curves`` (``uncertainties`` values of the fits
    and the flux before them alone)."""
    curve = curves["L_inc"]
    l0 = small_current(curves["flux_linkage"], settings)
    reached = {d: j for d, j in drops.items() if settings["drops"].get(d) is not None}
    return {"L0": l0, **{f"I_sat_{d}": value
                         for d, value in saturation_currents(settings["grid"], curve, l0, reached).items()}}
