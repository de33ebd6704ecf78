"""lc-ring: L, Q, loss resistance from the free ring of a tank with a known capacitor.

The coil under test in parallel with a known capacitor forms a tank; a step
through a feed resistor (or an interrupted current) makes it ring. The
recorded tank voltage is fitted with a damped sinusoid
(:mod:`wavefit.fit.damped_sine`), whose pole pair s = −alpha ± j·w_d gives the
measurement function (derivation and what it neglects in docs/method-lc-ring.md):

* w0 = √(w_d² + alpha²), f0 = w0/2π, fd = w_d/2π, Q_loaded = w0/(2·alpha);
* C = C_tank + C_stray; the known parallel load damps at g/2, g = 1/(R_load·C),
  so the coil's own damping is alpha_c = alpha − g/2 and Q = w0/(2·alpha_c);
* the tank's characteristic equation (series loss r, parallel conductance G) is
  s² + (r/L + G/C)·s + (1 + r·G)/(L·C) = 0, so 1/(L·C) = w0² − Δ with
  Δ = x·(g + 2·alpha_c − x), x = r/L the part of the coil's damping that is series
  loss. Δ is 0 for purely series or purely parallel loss and at most Δ_max
  otherwise; option ``coil_loss`` picks "series" (default: the coil as L with its ESR,
  common practice), "parallel", or "unknown" (Δ = Δ_max/2 with a rectangular
  distribution over [0, Δ_max]); a warning says when the choice moves L by more than
  its standard uncertainty;
* L = 1/((w0² − Δ)·C), R = w0·L/Q = 2·alpha_c·L (equivalent series loss at f0).
"""
from __future__ import annotations

import math
from dataclasses import replace
from typing import Any, Mapping

import numpy as np

from ..errors import AnalysisRefused
from ..fit.damped_sine import DampedSineFit
from ..measurement import Measurement
from ..outputs import Scalar
from ..results import TracePlot
from ..setup import Setup
from ..uncertainty import InputQuantity, InputSet, Propagation
from ..values import PartValue
from . import register
from ._model_check import added
from ._ring import (MODEL_DECAY, MODEL_FREQUENCY, check_time_options, coil_loss_option, loss_correction,
                    measure_ring)
from .base import Method, PartSpec
from .estimate import Estimate, FittedBlock

#: The budget input for option coil_loss = "unknown": the share of Δ_max, rectangular over the
#: whole range [0, 1] (JCGM 100:2008, 4.3.7), u = 0.5/√3.
#: Share of the measured damping above which the known parallel load is taken to explain it all:
#: the coil's own damping, the small difference of two nearly equal rates, then carries the
#: load's tolerance magnified twenty-fold or more, so its Q is refused, not reported.
LOAD_SHARE_REFUSED = 0.95
LOSS_SPLIT = InputQuantity("coil loss split", 0.5, 0.5 / math.sqrt(3.0), "", "B", distribution="rectangular")


#: The input capacitance of a 10:1 passive scope probe, about 10–15 pF (common practice; from
#: memory): the least capacitance across a probed tank besides its capacitor.
TYPICAL_PROBE_CAPACITANCE = 12e-12
#: A coil's own (winding) capacitance, a few pF for a small single-layer coil to tens of pF for
#: a multilayer winding (common practice; from memory): 10 pF stands for it where a setup's
#: stray_capacitance may hold the probe's input alone.
TYPICAL_COIL_CAPACITANCE = 10e-12
#: A stray_capacitance at most this is about a probe's input and fixture alone (1.5 times the
#: typical probe's): one that holds a coil's own capacitance too is mostly larger (a probe's
#: 11 pF and a coil's 12 pF: 23 pF), so lc-ring asks whether it does only at or below this.
PROBE_ONLY_STRAY = 1.5 * TYPICAL_PROBE_CAPACITANCE


@register
class LcRing(Method):
    """Ring-down of a tank with a known capacitor: f0, Q, L and loss resistance."""

    name = "lc-ring"
    summary = "free ring of the coil with a known parallel capacitor: L, Q, R at f0"
    roles = {"tank": True}
    parts = {
        "tank_capacitor": PartSpec("F", True, "the known capacitor in parallel with the coil"),
        "stray_capacitance": PartSpec("F", False, "probe and fixture capacitance across the tank"),
        "parallel_load": PartSpec("ohm", False, "resistance loading the tank: feed resistor parallel probe input"),
    }
    options = {"fit_start": None, "fit_end": None, "noise": "auto", "coil_loss": "series"}
    outputs = {"f0": Scalar("Hz"), "fd": Scalar("Hz"), "alpha": Scalar("1/s"), "tau_decay": Scalar("s"),
               "Q_loaded": Scalar(""), "Q": Scalar(""), "L": Scalar("H"), "R": Scalar("ohm")}
    positive = ("f0", "fd", "alpha", "Q_loaded", "Q", "L")
    resolvable = (*positive, "tau_decay", "R")
    determined = ("L", "f0")
    undetermined_hint = "check that the capture holds several periods of the ring, well above the noise"
    unphysical_hint = ("check that the capture holds a free ring of the tank (not a step or a square wave), "
                       "the [columns] tank entry and the parts (a parallel_load that explains all the damping?)")

    def check_setup(self, setup: Setup) -> None:
        super().check_setup(setup)
        check_time_options(self, setup)

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        bound = measurement.first
        meas = measure_ring(self, bound.capture, setup)
        coil_loss = coil_loss_option(self, setup)
        check_load_share(meas.ring, bound.parts)
        values, cov = meas.ring.fit.subset(("alpha", "w_d"))
        block = FittedBlock(("fit alpha", "fit w_d"), values, cov, ("1/s", "rad/s"), meas.ring.fit.dof)
        extra = (*meas.model_check.budget_inputs(), *((LOSS_SPLIT,) if coil_loss == "unknown" else ()))
        present = tuple(name for name in ("tank_capacitor", "stray_capacitance", "parallel_load")
                        if name in bound.parts)
        model = np.full_like(meas.data, np.nan)
        meas.ring.on_window(out=model[meas.ring.start:meas.ring.stop])
        plot = TracePlot(meas.time, (("tank", meas.unit, meas.data, model),))
        warnings = meas.warnings
        if "parallel_load" not in present:
            # a tank is always loaded (its feed resistor, the probe's input): without the load, its
            # damping is counted as the coil's (Q 30 read for a coil of Q 342 behind 45 kΩ)
            warnings = (*warnings, "no parallel_load given: Q and R include the damping by everything across the "
                        "tank (feed resistor, probe input), so Q is the loaded Q; give parallel_load for the "
                        "coil's own Q and R")
        return Estimate((block,), replace(meas.info, coil_loss=coil_loss), extra,
                        {"present": present, "coil_loss": coil_loss}, warnings, plot,
                        meas.model_check.adequate)

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        return ring_model(x, settings["present"], settings["coil_loss"])

    def review(self, estimate: Estimate, inputs: InputSet, propagation: Propagation) -> tuple[str, ...]:
        inductance = propagation.quantities["L"]
        out = loss_split_warning(inputs, estimate.settings["present"], estimate.settings["coil_loss"],
                                 inductance.standard_uncertainty)
        # L = 1/(w²·C): a capacitance left out of C makes L read high by its share of C
        tank = inputs.get("tank_capacitor").value
        if "stray_capacitance" not in estimate.settings["present"]:
            shift = TYPICAL_PROBE_CAPACITANCE / tank
            if shift * inductance.value > inductance.standard_uncertainty:
                out = (*out, f"no stray_capacitance given: the probe's input alone (about "
                       f"{TYPICAL_PROBE_CAPACITANCE * 1e12:.0f} pF) would make L read {100 * shift:.2g} % high, "
                       f"{shift * inductance.value / inductance.standard_uncertainty:.2g} standard uncertainties, "
                       "and the coil's own capacitance adds to it; give stray_capacitance (an lc-sweep measures "
                       "the coil's)")
        elif (stray := inputs.get("stray_capacitance").value) <= PROBE_ONLY_STRAY:
            shift = TYPICAL_COIL_CAPACITANCE / (tank + stray)
            if shift * inductance.value > inductance.standard_uncertainty:
                out = (*out, f"stray_capacitance is {stray * 1e12:.3g} pF, about a probe's input alone: if it leaves "
                       f"out the coil's own capacitance (a few to tens of pF), L reads high by its share of the "
                       f"tank's capacitance, {100 * shift:.2g} % for {TYPICAL_COIL_CAPACITANCE * 1e12:.0f} pF "
                       f"({shift * inductance.value / inductance.standard_uncertainty:.2g} standard uncertainties); "
                       "add the coil's, which an lc-sweep measures, to stray_capacitance")
        return out


def ring_model(v: Mapping[str, Any], present: tuple[str, ...], coil_loss: str) -> dict[str, Any]:
    """The measurement function of lc-ring (see the module docstring)."""
    tb = v["timebase"]
    alpha = (v["fit alpha"] + added(v, MODEL_DECAY)) / tb
    w_d = (v["fit w_d"] + added(v, MODEL_FREQUENCY)) / tb
    w0 = (w_d ** 2 + alpha ** 2) ** 0.5
    cap = v["tank_capacitor"] + (v["stray_capacitance"] if "stray_capacitance" in present else 0.0)
    g = 1.0 / (v["parallel_load"] * cap) if "parallel_load" in present else 0.0
    alpha_c = alpha - g / 2.0
    w_lc2 = w0 ** 2 - loss_correction(alpha_c, g, coil_loss, v.get("coil loss split"))
    inductance = 1.0 / (w_lc2 * cap)
    return {
        "f0": w0 / (2 * math.pi),
        "fd": w_d / (2 * math.pi),
        "alpha": alpha,
        "tau_decay": 1.0 / alpha,
        "Q_loaded": w0 / (2.0 * alpha),
        "Q": w0 / (2.0 * alpha_c),
        "L": inductance,
        "R": 2.0 * alpha_c * inductance,
    }


def loss_split_warning(inputs: InputSet, present: tuple[str, ...], coil_loss: str,
                       u_inductance: float) -> tuple[str, ...]:
    """Warn when another split of the coil's loss (series/parallel) would move L by more than
    its standard uncertainty: then the assumption matters and should be stated."""
    if coil_loss == "unknown":
        return ()
    v = {i.name: i.value for i in inputs.inputs}
    chosen = ring_model(v, present, coil_loss)["L"]
    extremes = [ring_model(dict(v, **{"coil loss split": s}), present, "unknown")["L"] for s in (0.0, 1.0)]
    shift = max(abs(x - chosen) for x in extremes)
    if shift <= u_inductance:
        return ()
    return (f"L assumes {coil_loss} coil loss; another split of the loss between series and parallel "
            f"(core) loss would move it by up to {shift / chosen:.2g} (relative), more than its standard "
            "uncertainty: set option coil_loss = \"unknown\" to include that in the budget",)


def check_load_share(ring: DampedSineFit, parts: Mapping[str, PartValue]) -> None:
    """Refuse Q when the known load explains (nearly) all of the damping."""
    if "parallel_load" not in parts:
        return
    cap = parts["tank_capacitor"].value + (parts["stray_capacitance"].value if "stray_capacitance" in parts else 0.0)
    load_alpha = 1.0 / (2.0 * parts["parallel_load"].value * cap)
    share = load_alpha / ring.alpha
    if share >= LOAD_SHARE_REFUSED:
        beyond = (" (more than all of it: the ring decays slower than the load alone allows, so the load value "
                  "or the tank's capacitance is wrong, or the ring is distorted, clipped or on few codes)"
                  if share > 1.0 else "")
        raise AnalysisRefused(
            f"the parallel_load ({parts['parallel_load'].text}) explains {100 * share:.0f} % of the measured "
            f"damping{beyond}, so the coil's own Q cannot be separated; check the load value or use a larger "
            "feed resistor")


