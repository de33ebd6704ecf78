"""Example method defined outside the package: a resistor's value from the RC step of a known capacitor.

It shows that a method is one module: importing it registers ``example-rc-step`` and
``example-rc-impedance``, and the analysis, reports, JSON, CSV and plots handle them with no
other change. Circuit: a step through the resistor R under test charges the known capacitor C;
the capacitor's voltage relaxes with tau = R·C (first-order RC circuit), so R = tau/C.

``example-rc-impedance`` reports a curve from the same fit: the magnitude of the series RC
network's impedance, |Z(f)| = √(R² + 1/(2π·f·C)²), at the frequencies of option
``frequencies``; it is one output declared as a :class:`~wavefit.outputs.Curve`.
"""
from __future__ import annotations

import math
from typing import Any, Mapping

import numpy as np

from wavefit.errors import AnalysisRefused
from wavefit.fit.exponential import WindowChannel, fit_exponential_window, window_model
from wavefit.measurement import Measurement
from wavefit.methods import register
from wavefit.methods.base import Method, PartSpec
from wavefit.methods.estimate import Estimate, FittedBlock
from wavefit.outputs import Axis, Curve, Scalar
from wavefit.results import TracePlot
from wavefit.setup import Setup
from wavefit.signal.edges import find_edges


@register
class ExampleRcStep(Method):
    """R from the charging of a known capacitor through it (one rising step)."""

    name = "example-rc-step"
    summary = "resistance from the RC step of a known capacitor (example)"
    roles = {"capacitor": True}
    parts = {"capacitor": PartSpec("F", True, "the known capacitor charged through the resistor")}
    outputs = {"R": Scalar("ohm"), "tau": Scalar("s")}
    positive = ("R", "tau")
    unphysical_hint = "check [columns] and that the capture holds one RC step"

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        capture = measurement.first.capture
        t = np.asarray(capture.time, dtype=float)
        y = np.asarray(self.channel(capture, setup, "capacitor").values, dtype=float)
        edges = find_edges(t, y)
        if not edges:
            raise AnalysisRefused(f"{capture.source}: no step found in the capacitor voltage")
        edge = edges[0]
        window = slice(int(np.searchsorted(t, edge.t0 + 2 * (t[1] - t[0]))), t.size)
        fit = fit_exponential_window([WindowChannel("capacitor", t[window], y[window])], edge.tau)
        values, cov = fit.subset(("tau",))
        curve = np.full(t.size, np.nan)
        curve[window] = window_model(fit, "capacitor", t[window])
        return Estimate((FittedBlock(("tau_fit",), values, cov, ("s",), fit.dof),),
                        fit={"model": fit.model, "samples": fit.n_samples}, warnings=tuple(fit.warnings),
                        plot=TracePlot(t, (("capacitor", "V", y, curve),)))

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        tau = x["tau_fit"] / x["timebase"]
        return {"R": tau / x["capacitor"], "tau": tau}


@register
class ExampleRcImpedance(ExampleRcStep):
    """|Z(f)| of the series RC network, a curve over the frequencies of option ``frequencies``."""

    name = "example-rc-impedance"
    summary = "impedance magnitude of the series RC network against frequency (example)"
    options = {"frequencies": [1e3, 1e4, 1e5]}
    outputs = {"Z": Curve("ohm", axis=Axis("f", "Hz", log=True))}

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        step = super().estimate(measurement, setup)
        frequencies = np.asarray(self.option(setup, "frequencies"), dtype=float)
        return Estimate(step.blocks, step.fit, warnings=step.warnings, plot=step.plot,
                        settings={"f": frequencies}, axes={"f": frequencies})

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        resistance = super().model(x, settings)["R"]
        reactance = 1.0 / (2 * math.pi * settings["f"] * x["capacitor"])
        return {"Z": (resistance ** 2 + reactance ** 2) ** 0.5}  # arithmetic only: Monte Carlo can run it
