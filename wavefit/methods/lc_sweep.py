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
from dataclasses import dataclass
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
from ..values import eng
from . import register
from ._model_check import CaptureChecks, ModelCheck
from ._ring import check_time_options, coil_loss_option, loss_correction, measure_ring
from ..scale_factor import birge_ratio, scale_factor
from ._scale_factor import LINE_SCATTER_P
from .base import Method
from .estimate import Estimate, FittedBlock
from ..fit_summary import FitSummary
from .lc_ring import LOSS_SPLIT, LcRing


@dataclass(frozen=True)
class SweepPoint:
    """One capture's point of the line.

    Attributes
    ----------
    source
        The capture.
    tank_capacitor
        Its tank capacitor (the abscissa, without the stray capacitance), F.
    f0
        The ring's undamped resonance frequency, Hz.
    inverse_w_squared
        The ordinate 1/(w0² − Δ), s² (per rad²).
    u_inverse_w_squared
        Its standard uncertainty, s².
    cycles
        Periods of the ring in its fit window.
    model_check
        The ring's own model check (:mod:`wavefit.methods._model_check`).
    """

    source: str
    tank_capacitor: float
    f0: float
    inverse_w_squared: float
    u_inverse_w_squared: float
    cycles: float
    model_check: ModelCheck

    @property
    def adequate(self) -> bool:
        """Whether the ring's model check passed."""
        return self.model_check.adequate

    def to_dict(self) -> dict[str, Any]:
        """The JSON entry of ``fit.captures`` (``adequate`` before ``model_check``)."""
        return {"source": self.source, "tank_capacitor": self.tank_capacitor, "f0": self.f0,
                "inverse_w_squared": self.inverse_w_squared, "u_inverse_w_squared": self.u_inverse_w_squared,
                "cycles": self.cycles, "adequate": self.adequate, "model_check": self.model_check.to_dict()}


@dataclass(frozen=True, kw_only=True)
class SweepSummary(FitSummary):
    """What lc-sweep says about its line fit (JSON ``fit`` of an lc-sweep result).

    Attributes
    ----------
    model
        The line fitted, in words.
    coil_loss
        The option coil_loss (how each coil's loss is split).
    slope
        The line's slope, H (with the timebase factor k_t² still to apply).
    intercept
        Its intercept, s².
    chi2, dof, p_value
        The line's chi-square, its degrees of freedom (captures less two) and the p-value.
    birge_ratio
        The factor the line's covariance was scaled by (1 when it was not).
    captures
        Each capture's point, in capture order.
    model_check
        The rings' model checks taken together.
    """

    model: str
    coil_loss: str
    slope: float
    intercept: float
    chi2: float
    dof: int
    p_value: float
    birge_ratio: float
    captures: tuple[SweepPoint, ...]
    model_check: CaptureChecks


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
    resolvable = ("L", "C", "srf")
    determined = ("L",)
    common_parts = ("stray_capacitance",)
    undetermined_hint = ("check each capture's tank_capacitor (a wrong value puts its point off the line of "
                         "1/w0² against C and swells U) and that the capacitors are far enough apart")
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
            per_capture.append(SweepPoint(bound.source, parts["tank_capacitor"].value, meas.ring.w0 / (2 * math.pi),
                                          float(yi), float(ui), meas.info.cycles, meas.model_check))
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
            # each point's distance from the line in its own combined standard uncertainty (York's
            # weights: u_y² + slope²·u_x²), to say which capacitor or ring to check first
            off = (y - line.intercept - line.slope * x) / np.sqrt(u_y ** 2 + (line.slope * u_x) ** 2)
            far = int(np.argmax(np.abs(off)))
            warnings.append(f"the points do not lie on a line (chi-square {line.chi2:.3g} for {line.dof} "
                            f"degrees of freedom, p = {line.p_value:.1e}); uncertainties are scaled by "
                            f"{birge:.2f}: check the capacitor values and the rings, first "
                            f"{measurement.captures[far].source} (tank_capacitor "
                            f"{eng(rings[far][1]['tank_capacitor'].value, 'F')}, {off[far]:+.2g} standard "
                            "uncertainties off the line)")
        if line.slope <= 0 or line.intercept <= 0:
            raise AnalysisRefused(
                f"{setup.source}: the line 1/w0² against capacitance has slope {line.slope:.3g} and intercept "
                f"{line.intercept:.3g}; both must be positive for L and C (check the tank_capacitor values)")
        block = FittedBlock(("line slope", "line intercept"), np.array([line.slope, line.intercept]), cov,
                            ("H", "s2"), dof, group="line")
        inadequate = tuple(bound.source for bound, (meas, _) in zip(measurement.captures, rings)
                           if not meas.model_check.adequate)
        unchecked = [meas for meas, _ in rings if meas.model_check.skipped is not None]
        check = CaptureChecks("each ring checked alone (see captures)", inadequate,
                              "no ring's check was possible (see captures)" if len(unchecked) == len(rings)
                              else None)
        fit = SweepSummary(model="1/w0^2 = L*(C_added + C), York line", coil_loss=coil_loss, slope=line.slope,
                           intercept=line.intercept, chi2=line.chi2, dof=line.dof, p_value=line.p_value,
                           birge_ratio=birge, captures=tuple(per_capture), model_check=check)
        plot = LinePlot(x, y, u_x, u_y, line.slope, line.intercept, "added capacitance (F)", "1/w0² (s²)")
        return Estimate((block,), fit, settings={"has_stray": "stray_capacitance" in measurement.parts},
                        warnings=tuple(warnings), plot=plot, adequate=check.adequate)

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        """L = slope·k_t², C = intercept/slope (less the stray given), srf = 1/(2π√(L·C))."""
        tb = x["timebase"]
        inductance = x["line slope"] * tb ** 2
        cap = x["line intercept"] / x["line slope"] - (x["stray_capacitance"] if settings["has_stray"] else 0.0)
        return {"L": inductance, "C": cap, "srf": 1.0 / (2 * math.pi * (inductance * cap) ** 0.5)}

    def review(self, estimate: Estimate, inputs: InputSet, propagation: Propagation) -> tuple[str, ...]:
        capacitance = propagation.quantities["C"]
        if estimate.settings["has_stray"] and capacitance.value <= 0:
            return ("the fitted capacitance is smaller than the stray_capacitance given: "
                    "C and srf are not meaningful",)
        if capacitance.expanded_uncertainty >= abs(capacitance.value):
            # srf = 1/(2π√(L·C)) of a C that may be nothing: its own U, from the linearised
            # spread, looks moderate, but its interval is not one
            return ("srf rests on C, which this sweep does not determine (its expanded uncertainty reaches its "
                    "value): read srf as unknown too; rings on tank capacitors nearer the coil's own capacitance "
                    "determine it",)
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
