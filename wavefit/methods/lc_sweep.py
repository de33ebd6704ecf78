"""lc-sweep: L and the always-present capacitance from rings against several capacitors.

Each ``[[captures]]`` entry is one lc-ring capture with its own ``tank_capacitor``.
With C_i the added capacitance (tank capacitor plus the optional shared
``stray_capacitance``) and w_i² = w0_i² − Δ_i the corrected resonance of capture i
(see :mod:`wavefit.methods.lc_ring`), the points

    y_i = 1/w_i² = L·C_i + L·C

lie on a line of slope L and intercept L·C, C being the capacitance that is
always there (coil self-capacitance; fixture and probe too unless given as
``stray_capacitance``). The line is fitted with uncertainty in both axes
(:func:`wavefit.fit.line_eiv.york_line`); then L = slope·k_t², C = intercept/slope
and srf = 1/(2π·√(L·C)), k_t being the timebase factor common to all captures.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np
from uncertainties import ufloat

from ..errors import AnalysisRefused
from ..fit.line_eiv import york_line
from ..measurement import CaptureCount, Measurement
from ..outputs import Scalar
from ..results import LinePlot
from ..setup import Setup
from ..uncertainty import InputSet, Propagation
from . import register
from ._model_check import ModelCheck
from ._ring import check_time_options, coil_loss_option, loss_correction, measure_ring
from ..scale_factor import birge_ratio, scale_factor
from ._scale_factor import LINE_SCATTER_P
from .base import Method
from .estimate import Estimate, FittedBlock
from .lc_ring import LOSS_SPLIT, LcRing


@register
class LcSweep(Method):
    """Rings of one coil against several capacitors: L, self-capacitance C and SRF."""

    name = "lc-sweep"
    summary = "rings against several known capacitors: L, self-capacitance, self-resonance"
    roles = LcRing.roles
    parts = LcRing.parts
    options = LcRing.options
    outputs = {"L": Scalar("H"), "C": Scalar("F"), "srf": Scalar("Hz")}
    positive = ("L",)
    unphysical_hint = "check each capture's tank_capacitor and that every capture holds a free ring"
    capture_count = CaptureCount(minimum=2, maximum=None, reason="with different tank capacitors (three or more "
                                 "to check that they lie on a line)")

    def check_setup(self, setup: Setup) -> None:
        super().check_setup(setup)
        check_time_options(self, setup)

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        coil_loss = coil_loss_option(self, setup)
        warnings, per_capture, rings = [], [], []
        for bound in measurement.captures:
            if "tank_capacitor" not in bound.parts:
                raise AnalysisRefused(f"{bound.source}: no tank_capacitor for this capture; "
                                      "give one in its [[captures]] table")
            meas = measure_ring(self, bound.capture, setup)
            rings.append((meas, bound.parts))
            warnings += [f"{bound.source}: {w}" for w in meas.warnings]
        x = np.array([parts["tank_capacitor"].value for _, parts in rings])
        u_x = np.array([parts["tank_capacitor"].standard_uncertainty for _, parts in rings])
        if np.ptp(x) <= 0:
            raise AnalysisRefused(f"{setup.source}: all captures use the same tank capacitor; "
                                  "L and C need at least two different values")
        # the load's damping depends on the whole capacitance, self-capacitance included:
        # a first line without it gives C, the second pass uses it (the correction is second order)
        extra = 0.0
        for _ in range(2):
            pts = [_corrected_point(meas.ring, parts, coil_loss, extra, meas.model_check)
                   for meas, parts in rings]
            y = np.array([p[0] for p in pts])
            u_y = np.array([p[1] for p in pts])
            try:
                line = york_line(x, y, u_x, u_y)
            except ValueError as exc:
                raise AnalysisRefused(f"{setup.source}: the line fit failed ({exc})") from None
            extra = max(line.intercept / line.slope, 0.0) if line.slope > 0 else 0.0
        for bound, (meas, parts), yi, ui in zip(measurement.captures, rings, y, u_y):
            per_capture.append({"source": bound.source,
                                "tank_capacitor": parts["tank_capacitor"].value,
                                "f0": meas.ring.w0 / (2 * math.pi), "inverse_w_squared": float(yi),
                                "u_inverse_w_squared": float(ui), "cycles": meas.info["cycles"],
                                "adequate": meas.model_check.adequate, "model_check": meas.info["model_check"]})
        cov = line.covariance
        dof = math.inf
        birge = 1.0
        if line.dof == 0:
            warnings.append("two captures: a line always passes through two points, so nothing checks "
                            "that the model holds; add a third capacitor")
        elif (factor := scale_factor(*birge_ratio(line.chi2, line.dof), LINE_SCATTER_P)) > 1.0:
            birge = factor  # (the rule's factor is the Birge ratio itself when it applies)
            cov = cov * birge ** 2
            dof = float(line.dof)
            warnings.append(f"the points do not lie on a line (chi-square {line.chi2:.3g} for {line.dof} "
                            f"degrees of freedom, p = {line.p_value:.1e}); uncertainties are scaled by "
                            f"{birge:.2f}: check the capacitor values and the rings")
        if line.slope <= 0 or line.intercept <= 0:
            raise AnalysisRefused(
                f"{setup.source}: the line 1/w0² against capacitance has slope {line.slope:.3g} and intercept "
                f"{line.intercept:.3g}; both must be positive for L and C (check the tank_capacitor values)")
        block = FittedBlock(("line slope", "line intercept"), np.array([line.slope, line.intercept]), cov,
                            ("H", "s2"), dof, group="line")
        inadequate = [bound.source for bound, (meas, _) in zip(measurement.captures, rings)
                      if not meas.model_check.adequate]
        unchecked = [meas for meas, _ in rings if meas.model_check.skipped is not None]
        fit = {"model": "1/w0^2 = L*(C_added + C), York line", "coil_loss": coil_loss,
               "slope": line.slope, "intercept": line.intercept, "chi2": line.chi2, "dof": line.dof,
               "p_value": line.p_value, "birge_ratio": birge, "captures": per_capture,
               "model_check": {"adequate": not inadequate, "varied": "each ring checked alone (see captures)",
                               "inadequate_captures": inadequate}}
        if len(unchecked) == len(rings):
            fit["model_check"]["skipped"] = "no ring's check was possible (see captures)"
        plot = LinePlot(x, y, u_x, u_y, line.slope, line.intercept, "added capacitance (F)", "1/w0² (s²)")
        return Estimate((block,), fit, settings={"has_stray": "stray_capacitance" in measurement.parts},
                        warnings=tuple(warnings), plot=plot, adequate=not inadequate)

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        """L = slope·k_t², C = intercept/slope (less the stray given), srf = 1/(2π√(L·C))."""
        tb = x["timebase"]
        inductance = x["line slope"] * tb ** 2
        cap = x["line intercept"] / x["line slope"] - (x["stray_capacitance"] if settings["has_stray"] else 0.0)
        return {"L": inductance, "C": cap, "srf": 1.0 / (2 * math.pi * (inductance * cap) ** 0.5)}

    def review(self, estimate: Estimate, inputs: InputSet, propagation: Propagation) -> tuple[str, ...]:
        if estimate.settings["has_stray"] and propagation.quantities["C"].value <= 0:
            return ("the fitted capacitance is smaller than the stray_capacitance given: "
                    "C and srf are not meaningful",)
        return ()


def _corrected_point(ring: Any, parts: dict, coil_loss: str, extra: float,
                     check: ModelCheck) -> tuple[float, float]:
    """y = 1/(w0² − Δ) of one ring and its standard uncertainty (fit, the ring's model-check
    inputs when its check fired, and loss split; the added capacitance is the abscissa, stray
    is common to all points and enters C only). ``extra`` is the self-capacitance estimate
    used for the load's damping rate."""
    values, cov = ring.fit.subset(("alpha", "w_d"))
    for v in check.inputs:
        k = ("alpha", "w_d").index(v.parameter)
        cov[k, k] += v.standard_uncertainty ** 2
    alpha_w = _correlated_pair(values, cov)
    alpha, w_d = alpha_w
    cap = parts["tank_capacitor"].value + extra
    g = 1.0 / (parts["parallel_load"].value * cap) if "parallel_load" in parts else 0.0
    if float(alpha.nominal_value) <= g / 2.0:
        g = 0.0  # the load seems to explain all damping: leave the second-order correction out
    split = ufloat(LOSS_SPLIT.value, LOSS_SPLIT.standard_uncertainty) if coil_loss == "unknown" else None
    w2 = w_d ** 2 + alpha ** 2 - loss_correction(alpha - g / 2.0, g, coil_loss, split)
    y = 1.0 / w2
    return float(y.nominal_value), float(y.std_dev)


def _correlated_pair(values: np.ndarray, cov: np.ndarray) -> tuple[Any, Any]:
    from uncertainties import correlated_values

    return tuple(correlated_values(values, cov))
