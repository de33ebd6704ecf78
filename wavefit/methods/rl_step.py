"""rl-step: inductance and series resistance from the exponential current of an RL step.

Circuit: generator (EMF, output resistance R_source) -> node ``drive`` -> inductor
(L, series resistance R) -> node ``sense`` -> sense resistor -> ground. The
sense channel records the current; the optional drive channel makes the result
independent of the generator. See ``docs/method-rl-step.md`` for the derivation,
what is neglected, and the uncertainty budget.

Measurement function (per state of the drive, every node relaxes with the loop
time constant tau toward its final level):

* sense = S_f + C_s·e(t), drive = D_f + C_d·e(t), e(t) = exp(−(t − t_ref)/tau);
* DC: (R + R_s')/R_s' = ΔD_f/ΔS_f between the two states (offsets cancel), with
  R_s' the sense resistor in parallel with the probe's input resistance;
* transient: drive − drive_final = −R_source·(i − i_final), so R_source = −Z_s·C_d/C_s,
  Z_s the sense impedance at the loop's pole (R_s' with the probe capacitance);
* without drive, R_source and R come from the parts;
* L from the pole of the loop: R_source + Z_s + Z_dut(s) = 0 at s = −1/tau, with
  Z_dut = (sL + R) ∥ winding capacitance; L = tau·(R_source + R + R_s') without strays.
"""
from __future__ import annotations

import math
from typing import Any

import numpy as np

from ..errors import AnalysisRefused, SetupError
from ..fit.engine import Block, fit_least_squares
from ..fit.exponential import WindowChannel, fit_exponential_window, window_model
from ..fit.noise_model import fit_ar
from ..fit.quantisation import RECORD_WIDE, include_quantisation, noise_before_converter
from ..fit.result import FitResult
from ..io.capture import Capture
from ..results import AnalysisResult, TracePlot
from ..setup import Setup
from ..signal.clipping import extremes, model_exceeds_record
from ..signal.edges import find_edges, jump_instant
from ..uncertainty import InputSet, propagate
from . import register
from ._model_check import ModelCheck, Variation, added
from ._rl_windows import (LATE_SHIFT_TAU, LATE_SPAN_SAMPLES, LATE_SPAN_TAU, LateStart, Window, combine, late_start,
                          placement_factor, placement_jitter, pooled_windows, settle_starts, start_margin,
                          whole_record)
from ._rl_wiring import check_wiring
from .base import Method, PartSpec

#: Budget input that carries tau's movement with the fit window when the model check fires.
MODEL_INPUT = "model"
#: Source resistance assumed only to size the skip after a winding-capacitance spike
#: when the setup does not give it (the usual generator output resistance; common practice).
TYPICAL_SOURCE_RESISTANCE = 50.0


@register
class RLStep(Method):
    """Step response of an inductor in series with a sense resistor."""

    name = "rl-step"
    summary = "L and DCR from the exponential current of a square-wave or step drive"
    roles = {"sense": True, "drive": False}
    parts = {
        "sense_resistor": PartSpec("ohm", True, "resistor from node sense to ground"),
        "source_resistance": PartSpec("ohm", False, "generator output resistance (needed without drive)"),
        "dut_resistance": PartSpec("ohm", False, "DCR measured separately (needed without drive)"),
        "probe_resistance": PartSpec("ohm", False, "scope input resistance across the sense resistor"),
        "probe_capacitance": PartSpec("F", False, "scope input capacitance across the sense resistor"),
        "winding_capacitance": PartSpec("F", False, "self-capacitance across the inductor"),
    }
    options = {"skip": "auto", "noise": "auto"}
    quantities = ("L", "R", "tau", "R_loop", "I_final", "E")
    positive = ("L", "tau", "R_loop")
    unphysical_hint = ("check [columns] (drive and sense swapped? an inverted probe?), the parts, and that "
                       "the capture holds steps of an RL loop, not a ring")

    def check_setup(self, setup: Setup) -> None:
        super().check_setup(setup)
        if "drive" not in setup.columns:
            for part in ("source_resistance", "dut_resistance"):
                if part not in setup.parts:
                    raise SetupError(f"{setup.source}: without a 'drive' column, rl-step needs part {part!r} "
                                     f"({self.parts[part].help}); or record the drive node and map it in [columns]")
        noise = setup.options.get("noise", "auto")
        if noise not in ("auto", "white"):
            raise SetupError(f"{setup.source}: option noise must be \"auto\" or \"white\", got {noise!r}")
        self.time_option(setup, "skip", keywords=("auto",))  # "auto", or a time >= 0 ("30 ns")

    def analyze(self, captures: list[Capture], setup: Setup) -> AnalysisResult:
        capture = captures[0]
        t = np.asarray(capture.time, dtype=float)
        sense = np.asarray(self.channel(capture, setup, "sense").values, dtype=float)
        drive = (np.asarray(self.channel(capture, setup, "drive").values, dtype=float)
                 if "drive" in setup.columns else None)
        for label, y in (("sense", sense), ("drive", drive)):
            if y is not None and not np.all(np.isfinite(y)):
                raise AnalysisRefused(f"{capture.source}: the {label} channel has missing samples; "
                                      "rl-step needs a gap-free record")
        dt = float(capture.sample_interval)
        warnings: list[str] = []  # the capture's own warnings are added by the front door
        notes: list[str] = []

        edges = find_edges(t, sense)
        if not edges:
            raise AnalysisRefused(f"{capture.source}: no transition found in the sense channel (its two "
                                  "state levels are not separated from the noise); check the trigger and the "
                                  "column mapping")
        check_wiring(t, sense, drive, edges, capture.source)
        windows, edge_times = self._windows(t, sense, drive, edges, setup, dt)
        noise = str(self.option(setup, "noise"))
        fits = [self._fit_window(t, sense, drive, w, noise, capture.source) for w in windows]
        # each channel's extreme values and code step, for the pre-edge level and the clipping checks
        facts = {group: extremes(y) for group, y in (("sense", sense), ("drive", drive)) if y is not None}
        baseline = self._fit_baseline(t, sense, drive, windows[0], noise, fits, facts)
        # is the sense noise white? One decision from all windows' residuals together: separate
        # per-window BIC choices would call white noise coloured in one of a dozen windows often.
        # Windows fitted on their codes passed a test of independent noise already, and their
        # residuals hold the quantisation error, which is correlated even when the noise is not
        white = noise == "white" or (drive is None and (_on_codes(fits)
                                                         or fit_ar([f.residuals for f in fits]).order == 0))
        if self.option(setup, "skip") == "auto":
            windows, fits, late, period = settle_starts(t, sense, drive, windows, fits, baseline, noise,
                                                 capture.source, self._fit_window,
                                                 correlated=not white)
            if period is not None:
                notes.append(f"switching instants fitted to the drive's period ({period:.6g} s) over "
                             f"{len(windows)} edges: each is placed from all of them")
            if late:
                notes.append(f"{late} edge window(s) start later: their first samples did not follow the "
                             "exponential (finite generator edge or winding-capacitance ringing)")
            baseline = self._fit_baseline(t, sense, drive, windows[0], noise, fits, facts)
        if baseline is None and len(windows) < 2:
            raise AnalysisRefused(f"{capture.source}: the record starts at the edge, so there is no settled "
                                  "pre-edge level to pin the offset; record some time before the step")

        combined = combine(windows, fits, baseline, drive is not None)
        estimator = "per-edge windows"
        if drive is None and not white and len(windows) > 1:
            pooled = pooled_windows(t, sense, windows, baseline, combined, noise)
            if pooled is not None:
                combined, estimator = pooled, "windows fitted jointly with one noise model"
        if (drive is None and white and self.option(setup, "skip") == "auto"
                and "winding_capacitance" not in setup.parts):
            # in correlated noise the whole-record fit's switching instants lock onto noise
            # features (measured: coverage well below nominal), so it is used on white noise only
            combined, accepted = whole_record(t, sense, edges, windows, fits, baseline, combined, noise,
                                               self._fit_window)
            if accepted:
                estimator = "whole-record relaxation fit"
            else:
                notes.append("the whole-record fit disagreed with windows that skip the edges (edges not "
                             "instantaneous?); windows with a margin after each edge are used")
        notes.append(f"tau and levels from the {estimator}")
        if _on_codes(fits):
            notes.append("each fit carried to the maximum of the likelihood of the converter's codes "
                         "(resolution-limited record with independent noise)")
        tau_fit = combined.values[0]
        warnings += self._diagnostics(t, sense, drive, windows, fits, tau_fit, dt, edge_times, setup, combined,
                                      facts)
        if drive is None and not white:
            # each window's start is placed from the same correlated noise as its first samples:
            # its uncertainty enters tau's
            jitters = placement_jitter(windows, fits, dt)
            jitter = float(np.median(jitters))
            factor = placement_factor(t, windows, fits, jitters)
            if factor > 1.0:
                combined = combined.with_tau_variance_scaled(factor)
                notes.append(f"edges placed from the sense trace to about {jitter:.1f} samples in correlated "
                             f"noise: tau's variance enlarged {factor:.2f}-fold, to that of windows starting "
                             "that much later")
            if jitter > 2.0:
                margin = start_margin(jitter * dt, dt) / dt
                warnings.append(f"correlated noise and a low signal-to-noise ratio: the edges are located only "
                                f"to about {jitter:.1f} samples from the sense trace, so each window starts "
                                f"{margin:.0f} samples after its edge and tau is less precise; record the "
                                "drive node too for a tighter result")

        check = _model_check(late_start(t, sense, drive, windows, fits, noise, capture.source, self._fit_window),
                             combined.values[0])
        if not check.adequate:
            warnings.append(check.warning("single-exponential model", "a coil that is not one time constant: "
                                          "eddy currents in its core or in an armature?"))

        inputs = InputSet()
        inputs.add_correlated(combined.names, combined.values, combined.covariance,
                              combined.units, combined.dof, group="fit", kind="A")
        check.add_inputs(inputs)
        self._type_b(inputs, setup, drive is not None)
        if drive is not None and "source_resistance" in setup.parts:
            notes.append("source_resistance is not used: the drive channel measures the generator")
        if drive is None:
            notes.append("R is the dut_resistance part as given (no drive channel to measure it)")
        prop = propagate(inputs, _measurement_function(drive is not None, setup),
                         {"L": "H", "R": "ohm", "tau": "s", "R_loop": "ohm", "I_final": "A", "E": "J"})

        fit_info = self._fit_info(windows, fits, combined, baseline, dt, notes)
        fit_info["model_check"] = check.summary()
        return AnalysisResult(
            method=self.name, source=capture.source, quantities=prop.quantities, budget=prop.budget,
            fit=fit_info, warnings=tuple(dict.fromkeys(warnings)), correlation=prop.correlation,
            plot_data=_plot(t, sense, drive, windows, fits), adequate=check.adequate,
        )

    # -- windows and fits -------------------------------------------------------------------

    def _windows(self, t, sense, drive, edges, setup, dt):
        skip_opt = self.time_option(setup, "skip", keywords=("auto",))
        t0s, durations = [], []
        for k, e in enumerate(edges):
            t0 = e.t0
            if drive is not None:
                lo = edges[k - 1].t50 if k else t[0]
                jump = jump_instant(t, drive, max(lo, e.t10 - 3 * e.tau - 3 * dt), e.t50)
                if jump is not None:
                    t0 = jump[0]
                    durations.append(jump[1])
            t0s.append(t0)
        edge_time = max(durations) if durations else 0.0
        if skip_opt == "auto":
            # the least that is surely past the switching instant; _settle_starts then tests
            # whether the first samples still follow the exponential
            skip = 0.5 * dt + edge_time
            cw = setup.parts.get("winding_capacitance")
            if cw is not None:
                rs = setup.parts.get("source_resistance")
                r_ext = (rs.value if rs else TYPICAL_SOURCE_RESISTANCE) + setup.parts["sense_resistor"].value
                skip = max(skip, 2.0 * edge_time + 7.0 * r_ext * cw.value)
        else:
            skip = float(skip_opt)  # seconds
        windows = []
        for k, e in enumerate(edges):
            start = int(np.searchsorted(t, t0s[k] + skip))
            stop = int(np.searchsorted(t, t0s[k + 1] - 2.0 * dt - edge_time)) if k + 1 < len(edges) else t.size
            if stop - start >= 8 and (t[min(stop, t.size) - 1] - t0s[k]) >= 2.0 * e.tau:
                windows.append(Window(e, t0s[k], start, stop))
        if not windows:
            raise AnalysisRefused("no complete edge: each transition is followed by less than 2 tau of record; "
                                  "lengthen the record or the period")
        return windows, edge_time

    @staticmethod
    def _fit_window(t, sense, drive, w, noise, source) -> FitResult:
        chans = [WindowChannel("sense", t[w.start:w.stop], sense[w.start:w.stop])]
        if drive is not None:
            chans.append(WindowChannel("drive", t[w.start:w.stop], drive[w.start:w.stop]))
        try:
            return fit_exponential_window(chans, max(w.edge.tau, 2 * (t[1] - t[0])), noise=noise,
                                          model="rl-step edge")
        except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
            raise AnalysisRefused(f"{source}: the exponential fit of the edge at {w.t0:.6g} s failed ({exc})") from None

    @staticmethod
    def _fit_baseline(t, sense, drive, first: Window, noise, fits, facts) -> FitResult | None:
        """Settled level before the first edge: a constant per channel (pins the offset). ``fits``
        are the windows' fits, whose noise before the converter a resolution-limited level uses,
        and ``facts`` the channels' :func:`extremes`, whose code step it uses."""
        dt = float(t[1] - t[0])
        stop = int(np.searchsorted(t, first.t0 - 2.0 * dt))
        if stop < 16:
            return None
        ys = [sense[:stop]] + ([drive[:stop]] if drive is not None else [])
        groups = ["sense", "drive"][:len(ys)]
        y = np.concatenate(ys)
        n = stop

        def fun(x):
            return y - np.repeat(x, n)

        def jac(x):
            j = np.zeros((y.size, len(ys)))
            for c in range(len(ys)):
                j[c * n:(c + 1) * n, c] = -1.0
            return j

        blocks = [Block(c * n, (c + 1) * n, g) for c, g in enumerate(groups)]
        fit = fit_least_squares(fun, jac, [float(np.mean(v)) for v in ys], [f"final_{g}" for g in groups],
                                blocks, model="pre-edge level", noise=noise)
        # a settled level may read one or two codes only: its grid is the whole channel's, and
        # its noise before the converter the one the windows' fits found
        steps = {g: facts[g].code for g in groups}
        return include_quantisation(fit, y, lambda x: np.repeat(x, n), lambda x: -jac(x), blocks, steps,
                                    noise_before_converter(fits))

    # -- diagnostics ------------------------------------------------------------------------

    @staticmethod
    def _diagnostics(t, sense, drive, windows, fits, tau, dt, edge_time, setup, combined, facts) -> list[str]:
        out = []
        if tau < 10 * dt:
            out.append(f"only {tau / dt:.1f} samples per tau (fewer than 10): sample faster or use a "
                       "larger inductance / smaller loop resistance")
        short = [w for w in windows if t[w.stop - 1] - w.t0 < 5 * tau]
        if short:
            out.append(f"{len(short)} of {len(windows)} edges are followed by less than 5 tau of record; the "
                       "final level is extrapolated (lengthen the period or the record)")
        if edge_time > 0.1 * tau:
            out.append(f"tau ({tau:.3g} s) is comparable to the generator's edge time ({edge_time:.3g} s); "
                       "use a faster generator or a larger inductance")
        cp = setup.parts.get("probe_capacitance")
        if cp is not None and setup.parts["sense_resistor"].value * cp.value > 0.05 * tau:
            out.append("the probe capacitance with the sense resistor makes a pole comparable to tau; "
                       "the first-order correction used may not suffice")
        for w, fit in zip(windows, fits):
            for msg in fit.warnings:
                # a record-wide condition is said once, not once per edge
                out.append(msg if msg.startswith(RECORD_WIDE) else f"edge at {w.t0:.6g} s: {msg}")
            for group, y in (("sense", sense), ("drive", drive)):
                if y is None:
                    continue
                seg = slice(w.start, w.stop)
                sigma = fit.noise_sigma[group]
                if (facts[group].flat(sigma) or facts[group].piles_up(sigma)
                        or model_exceeds_record(y[seg], window_model(fit, group, t[seg]), sigma)):
                    out.append(f"the {group} trace is clipped (flat at the converter's limit while the fitted "
                               "curve goes beyond it): reduce the vertical sensitivity")
        if combined.rise_fall is not None:
            z = combined.rise_fall
            if abs(z) > 3.0:
                out.append(f"rising and falling edges disagree on tau by {abs(z):.1f} standard uncertainties: "
                           "core nonlinearity, a diode or a level-dependent part in the loop")
        if combined.birge is not None and combined.birge[1] < 1e-3:
            out.append(f"the per-edge estimates scatter more than their uncertainties (Birge ratio "
                       f"{combined.birge[0]:.2f}); the type A uncertainty is enlarged by that ratio")
        return out

    # -- budget -----------------------------------------------------------------------------

    @staticmethod
    def _type_b(inputs: InputSet, setup: Setup, has_drive: bool) -> None:
        for name in ("sense_resistor", "probe_resistance", "probe_capacitance", "winding_capacitance"):
            if name in setup.parts:
                inputs.add_part(name, setup.parts[name])
        if not has_drive:
            inputs.add_part("source_resistance", setup.parts["source_resistance"])
            inputs.add_part("dut_resistance", setup.parts["dut_resistance"])
        inputs.add("timebase", 1.0, setup.timebase.standard_uncertainty, "", "B")
        inputs.add("vertical_gain_sense", 1.0, setup.gain_for("sense").standard_uncertainty, "", "B")
        if has_drive:
            inputs.add("vertical_gain_drive", 1.0, setup.gain_for("drive").standard_uncertainty, "", "B")

    @staticmethod
    def _fit_info(windows, fits, combined, baseline, dt, notes) -> dict[str, Any]:
        per_edge = []
        for w, f in zip(windows, fits):
            entry = {"direction": "rising" if w.edge.direction > 0 else "falling", "t0": w.t0,
                     "window_start": f.t_ref, "samples": f.n_samples,
                     "tau": f["tau"], "tau_standard_error": f.stderr("tau"),
                     "noise_model": f.noise_model, "ljung_box_p": f.diagnostics.get("ljung_box_p")}
            per_edge.append(entry)
        taus = np.array([f["tau"] for f in fits])
        info: dict[str, Any] = {
            "model": "final + coefficient·exp(−(t − t_ref)/tau) per edge window, tau shared by the channels",
            "edges_fitted": len(fits),
            "tau_fit": combined.values[0],
            "tau_fit_standard_error": math.sqrt(combined.covariance[0, 0]),
            "tau_per_edge_spread": float(np.std(taus, ddof=1)) if taus.size > 1 else 0.0,
            "skip_after_edge_s": float(fits[0].t_ref - windows[0].t0),
            "sample_interval_s": dt,
            "type_a_dof": combined.dof,
            "type_a_estimator": "per-window feasible GLS with AR noise model (Cochrane-Orcutt), "
                                "combined across edges by inverse-covariance weighting",
            "baseline_samples": baseline.n_samples if baseline is not None else 0,
            "edges": per_edge,
            "notes": notes,
        }
        for key in ("rising", "falling"):
            if combined.by_direction.get(key):
                info[f"tau_{key}"], info[f"tau_{key}_standard_error"] = combined.by_direction[key]
        if combined.birge is not None:
            info["birge_ratio"] = combined.birge[0]
        return info


# -- combination across edges ---------------------------------------------------------------


def _measurement_function(has_drive: bool, setup: Setup):
    """The measurement model y = f(x) evaluated with ``uncertainties`` numbers."""
    has = setup.parts.__contains__

    def model(x):
        r_s = x["sense_resistor"]
        if has("probe_resistance"):
            r_s = r_s * x["probe_resistance"] / (r_s + x["probe_resistance"])
        tau = (x["tau_fit"] + added(x, MODEL_INPUT)) / x["timebase"]
        step = (x["sense_high"] - x["sense_low"]) / x["vertical_gain_sense"]
        current = step / r_s if getattr(step, "nominal_value", step) > 0 else -step / r_s
        # sense impedance at the loop pole s1 = −1/tau (probe capacitance across the resistor)
        z_s = r_s / (1 - r_s * x["probe_capacitance"] / tau) if has("probe_capacitance") else r_s
        if has_drive:
            ratio = x["vertical_gain_sense"] / x["vertical_gain_drive"]
            k_dc = (x["drive_high"] - x["drive_low"]) / (x["sense_high"] - x["sense_low"]) * ratio
            r_dut = (k_dc - 1) * r_s
            r_src = -x["q_drive_sense"] * ratio * z_s
        else:
            r_dut = x["dut_resistance"]
            r_src = x["source_resistance"]
        w = r_src + z_s
        if has("winding_capacitance"):
            s1 = -1 / tau
            xz = -w / (1 + w * s1 * x["winding_capacitance"])
            inductance = tau * (r_dut - xz)
        else:
            inductance = tau * (r_dut + w)
        return {"L": inductance, "R": r_dut, "tau": tau, "R_loop": r_src + r_dut + r_s,
                "I_final": current, "E": inductance * current ** 2 / 2}

    return model


def _model_check(late: LateStart | None, tau_reported: float) -> ModelCheck:
    """The model check of the fitted tau against windows that start one tau later
    (:func:`wavefit.methods._rl_windows.late_start`)."""
    varied = (f"each edge window started {LATE_SHIFT_TAU:g} tau later and ended {LATE_SPAN_TAU:g} tau (in "
              f"correlated noise at least {LATE_SPAN_SAMPLES} samples) after that")
    if late is None:
        return ModelCheck(varied, skipped="no edge window is long enough, or its signal strong enough, to be "
                                          "refitted from one tau later")
    return ModelCheck(varied, (Variation("tau", MODEL_INPUT, "s", tau_reported, {"late_windows": late.late},
                                         late.z, {"full_windows": late.full}),))


def _plot(t, sense, drive, windows, fits) -> TracePlot:
    chans = []
    for group, y, unit in (("sense", sense, "V"), ("drive", drive, "V")):
        if y is None:
            continue
        curve = np.full(t.size, np.nan)
        for w, f in zip(windows, fits):
            curve[w.start:w.stop] = window_model(f, group, t[w.start:w.stop])
        chans.append((group, unit, y, curve))
    return TracePlot(time=t, channels=tuple(chans))


def _on_codes(fits) -> bool:
    """Whether every fit was carried to the maximum of the code likelihood."""
    return all(f.code_fit is not None for f in fits)
