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
from dataclasses import dataclass
from typing import Any

import numpy as np
from scipy import stats

from ..errors import AnalysisRefused, SetupError
from ..fit.engine import Block, fit_least_squares
from ..fit.exponential import WindowChannel, fit_exponential_window, window_model
from ..fit.relaxation import fit_relaxations
from ..fit.result import FitResult
from ..io.capture import Capture
from ..results import AnalysisResult, TracePlot
from ..setup import Setup
from ..signal.clipping import longest_run_at_extremes, model_exceeds_record
from ..signal.edges import Edge, find_edges, jump_instant
from ..uncertainty import InputSet, propagate
from . import register
from .base import Method, PartSpec

#: Source resistance assumed only to size the skip after a winding-capacitance spike
#: when the setup does not give it (the usual generator output resistance; common practice).
TYPICAL_SOURCE_RESISTANCE = 50.0


@dataclass(frozen=True)
class _Window:
    """Samples start:stop fitted for one edge (state entered by ``direction``)."""

    edge: Edge
    t0: float
    start: int
    stop: int


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
        skip = setup.options.get("skip", "auto")
        if skip != "auto" and not (isinstance(skip, (int, float)) and not isinstance(skip, bool) and skip >= 0):
            raise SetupError(f"{setup.source}: option skip must be \"auto\" or a time in seconds >= 0")

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
        warnings: list[str] = list(capture.warnings)
        notes: list[str] = []

        edges = find_edges(t, sense)
        if not edges:
            raise AnalysisRefused(f"{capture.source}: no transition found in the sense channel (its two "
                                  "state levels are not separated from the noise); check the trigger and the "
                                  "column mapping")
        windows, edge_times = self._windows(t, sense, drive, edges, setup, dt)
        noise = str(self.option(setup, "noise"))
        fits = [self._fit_window(t, sense, drive, w, noise, capture.source) for w in windows]
        baseline = self._fit_baseline(t, sense, drive, windows[0], noise)
        if self.option(setup, "skip") == "auto":
            windows, fits, late = _settle_starts(t, sense, drive, windows, fits, baseline, noise,
                                                 capture.source, self._fit_window)
            if late:
                notes.append(f"{late} edge window(s) start later: their first samples did not follow the "
                             "exponential (finite generator edge or winding-capacitance ringing)")
            baseline = self._fit_baseline(t, sense, drive, windows[0], noise)
        if baseline is None and len(windows) < 2:
            raise AnalysisRefused(f"{capture.source}: the record starts at the edge, so there is no settled "
                                  "pre-edge level to pin the offset; record some time before the step")

        combined = _combine(windows, fits, baseline, drive is not None)
        estimator = "per-edge windows"
        if drive is None and self.option(setup, "skip") == "auto" and "winding_capacitance" not in setup.parts:
            combined, accepted = _whole_record(t, sense, edges, windows, fits, baseline, combined, noise,
                                               self._fit_window)
            if accepted:
                estimator = "whole-record relaxation fit"
            else:
                notes.append("the whole-record fit disagreed with windows that skip the edges (edges not "
                             "instantaneous?); windows with a margin after each edge are used")
        notes.append(f"tau and levels from the {estimator}")
        tau_fit = combined.values[0]
        warnings += self._diagnostics(t, sense, drive, windows, fits, tau_fit, dt, edge_times, setup, combined)

        inputs = InputSet()
        inputs.add_correlated(combined.names, combined.values, combined.covariance,
                              combined.units, combined.dof, group="fit", kind="A")
        self._type_b(inputs, setup, drive is not None)
        if drive is not None and "source_resistance" in setup.parts:
            notes.append("source_resistance is not used: the drive channel measures the generator")
        if drive is None:
            notes.append("R is the dut_resistance part as given (no drive channel to measure it)")
        prop = propagate(inputs, _measurement_function(drive is not None, setup),
                         {"L": "H", "R": "ohm", "tau": "s", "R_loop": "ohm", "I_final": "A", "E": "J"})

        fit_info = self._fit_info(windows, fits, combined, baseline, dt, notes)
        return AnalysisResult(
            method=self.name, source=capture.source, quantities=prop.quantities, budget=prop.budget,
            fit=fit_info, warnings=tuple(dict.fromkeys(warnings)), correlation=prop.correlation,
            plot_data=_plot(t, sense, drive, windows, fits),
        )

    # -- windows and fits -------------------------------------------------------------------

    def _windows(self, t, sense, drive, edges, setup, dt):
        skip_opt = self.option(setup, "skip")
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
            skip = float(skip_opt)
        windows = []
        for k, e in enumerate(edges):
            start = int(np.searchsorted(t, t0s[k] + skip))
            stop = int(np.searchsorted(t, t0s[k + 1] - 2.0 * dt - edge_time)) if k + 1 < len(edges) else t.size
            if stop - start >= 8 and (t[min(stop, t.size) - 1] - t0s[k]) >= 2.0 * e.tau:
                windows.append(_Window(e, t0s[k], start, stop))
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
    def _fit_baseline(t, sense, drive, first: _Window, noise) -> FitResult | None:
        """Settled level before the first edge: a constant per channel (pins the offset)."""
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
        return fit_least_squares(fun, jac, [float(np.mean(v)) for v in ys], [f"final_{g}" for g in groups],
                                 blocks, model="pre-edge level", noise=noise)

    # -- diagnostics ------------------------------------------------------------------------

    @staticmethod
    def _diagnostics(t, sense, drive, windows, fits, tau, dt, edge_time, setup, combined) -> list[str]:
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
                out.append(f"edge at {w.t0:.6g} s: {msg}")
            for group, y in (("sense", sense), ("drive", drive)):
                if y is None:
                    continue
                seg = slice(w.start, w.stop)
                if (_flat_at_extreme(y, fit.noise_sigma[group])
                        or model_exceeds_record(y[seg], window_model(fit, group, t[seg]), fit.noise_sigma[group])):
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
                     "window_start": f.diagnostics["t_ref"], "samples": f.n_samples,
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
            "skip_after_edge_s": float(fits[0].diagnostics["t_ref"] - windows[0].t0),
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


@dataclass(frozen=True)
class _Combined:
    names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    units: tuple[str, ...]
    dof: float
    by_direction: dict
    rise_fall: float | None
    birge: tuple[float, float] | None


def _settle_starts(t, sense, drive, windows, fits, baseline, noise, source, fit_window):
    """Start each window as early as the data allow, without admitting samples that do not
    follow the exponential, and end it before the next switching instant.

    Without a drive channel the switching instant t0 is re-estimated as the instant where
    the fitted exponential leaves the curve of the state before (the previous window's
    fit, or the pre-edge baseline), and windows are cut again from these instants; each
    window then ends three standard deviations of the next instant, σ·tau/|step|, before
    it (the samples there only repeat the settled level). The information on tau of an
    exponential window falls as exp(−2·s/tau) with the time s left out at its start (the
    record from s on is the same model with a smaller amplitude), so each early sample
    matters. Then the window is refitted with its start moved later by
    Δ = max(4 samples, tau/10); if tau changes by more than 3 standard deviations of the
    difference, var(τ_late) − var(τ_early) (the Hausman test of nested estimators:
    J. A. Hausman, Econometrica 46 (1978) 1251–1271), the early samples are biased and the
    later start is kept, up to three times.
    """
    dt = float(t[1] - t[0])
    windows, fits = list(windows), list(fits)
    if drive is None:
        t0s = [w.t0 for w in windows]
        for k, (w, f) in enumerate(zip(windows, fits)):
            found = _switch_instant(t, w, f, windows[k - 1] if k else None, fits[k - 1] if k else None, baseline)
            if found is not None:
                t0s[k] = found
        for k, (w, f) in enumerate(zip(windows, fits)):
            start = int(np.searchsorted(t, t0s[k] + (t[w.start] - w.t0)))
            stop = w.stop
            if k + 1 < len(windows) and windows[k + 1].start - w.stop <= 10 + (windows[k + 1].start - w.stop) // 2:
                step = abs(f["coef_sense"]) * math.exp(-(t[w.start] - w.t0) / f["tau"]) or 1e-300
                sigma_t0 = f.noise_sigma["sense"] * f["tau"] / step
                stop = int(np.searchsorted(t, t0s[k + 1] - max(2.0 * dt, 3.0 * sigma_t0)))
            if (start, stop) != (w.start, w.stop) and stop - start >= 8:
                windows[k] = _Window(w.edge, t0s[k], start, stop)
                fits[k] = fit_window(t, sense, drive, windows[k], noise, source)
    out_w, out_f, late = [], [], 0
    for w, f in zip(windows, fits):
        step = max(4, int(math.ceil(0.1 * f["tau"] / dt)))
        moved = False
        for _ in range(3):
            start = w.start + step
            if w.stop - start < max(16, 4 * step):
                break
            w2 = _Window(w.edge, w.t0, start, w.stop)
            f2 = fit_window(t, sense, drive, w2, noise, source)
            var_d = f2.stderr("tau") ** 2 - f.stderr("tau") ** 2
            if var_d > 0 and (f2["tau"] - f["tau"]) ** 2 / var_d > 9.0:
                w, f, moved = w2, f2, True
            else:
                break
        late += moved
        out_w.append(w)
        out_f.append(f)
    return out_w, out_f, late


def _whole_record(t, sense, edges, windows, fits, baseline, windowed: _Combined, noise, fit_window
                  ) -> tuple[_Combined, bool]:
    """tau and state levels from one fit of every sample (``wavefit.fit.relaxation``).

    Used without a drive channel, where the switching instants must come from the sense
    trace itself. The check is a set of windows cut from the whole-record fit's
    switching instants with generous margins, Δ = max(4 samples, tau/10) after each
    and 3σ of the next instant before it, fitted separately: they do not rest on the
    kink at the edges. The whole-record result is kept if it agrees with them by the
    Hausman test (difference within 3 standard deviations of var(windows) −
    var(whole record)); otherwise those windows are returned. Returns (result,
    whole-record accepted).
    """
    by_t0 = {id(w.edge): w for w in windows}
    t0s = [by_t0[id(e)].t0 if id(e) in by_t0 else e.t0 for e in edges]
    fit_of = {id(w.edge): f for w, f in zip(windows, fits)}
    levels = [baseline["final_sense"] if baseline is not None else
              float(np.median(sense[: max(int(np.searchsorted(t, t0s[0])), 1)]))]
    hi, lo = windowed.values[windowed.names.index("sense_high")], windowed.values[windowed.names.index("sense_low")]
    for e in edges:
        f = fit_of.get(id(e))
        levels.append(f["final_sense"] if f is not None else (hi if e.direction > 0 else lo))
    try:
        whole = fit_relaxations(t, sense, t0s, levels, windowed.values[0], noise=noise)
    except (ValueError, FloatingPointError, np.linalg.LinAlgError):
        return windowed, False
    var_f = whole.covariance[0, 0]
    if not (np.isfinite(var_f) and var_f > 0):
        return windowed, False
    if any("ended at its bound" in w for w in whole.warnings) or \
            (whole["tau"] - windowed.values[0]) ** 2 > 9.0 * windowed.covariance[0, 0]:
        # a gross disagreement with the independent per-edge windows: another minimum of the
        # whole-record fit (switching instants moved together with tau)
        return windowed, False
    dt = float(t[1] - t[0])
    tau = whole["tau"]
    skip = max(4.0 * dt, 0.1 * tau)
    checked_w, checked_f = [], []
    for k, e in enumerate(edges):
        if id(e) not in by_t0:
            continue
        t0 = whole[f"t0_{k + 1}"]
        start = int(np.searchsorted(t, t0 + skip))
        stop = t.size
        if k + 1 < len(edges):
            step = abs(whole[f"final_{k + 1}"] - (whole[f"final_{k}"] if k else whole["final_head"])) or 1e-300
            margin = max(2.0 * dt, 3.0 * whole.noise_sigma["sense"] * tau / step)
            stop = int(np.searchsorted(t, whole[f"t0_{k + 2}"] - margin))
        if stop - start >= 16:
            w = _Window(e, t0, start, stop)
            checked_w.append(w)
            checked_f.append(fit_window(t, sense, None, w, noise, "capture"))
    if not checked_w:
        return windowed, False
    check = _combine(checked_w, checked_f, baseline, False)
    var_w = check.covariance[0, 0]
    d = check.values[0] - tau
    if var_w > var_f and d * d / (var_w - var_f) > 9.0:
        return check, False
    # state levels: the mean of the complete states' levels (the head's only where a state has no window)
    names = ("tau", "final_head") + tuple(f"final_{k + 1}" for k in range(len(edges)))
    vals, cov = whole.subset(names)
    rows = {"high": [], "low": []}
    for k, e in enumerate(edges):
        if id(e) in by_t0:
            rows["high" if e.direction > 0 else "low"].append(2 + k)
    head_state = "low" if edges[0].direction > 0 else "high"
    if not rows[head_state]:
        rows[head_state].append(1)
    if not rows["high"] or not rows["low"]:
        return check, False
    a = np.zeros((3, len(names)))
    a[0, 0] = 1.0
    for r, state in ((1, "high"), (2, "low")):
        a[r, rows[state]] = 1.0 / len(rows[state])
    return _Combined(("tau_fit", "sense_high", "sense_low"), a @ vals, a @ cov @ a.T, ("s", "V", "V"),
                     float(whole.dof), windowed.by_direction, windowed.rise_fall, windowed.birge), True


def _switch_instant(t, w, f, prev_w, prev_f, baseline) -> float | None:
    """Where this window's fitted curve meets the curve of the state before (sense channel)."""
    from scipy.optimize import brentq

    dt = float(t[1] - t[0])
    if prev_f is not None and prev_w.stop >= w.start - int(math.ceil(5 * f["tau"] / dt)):
        def before(x):
            return float(window_model(prev_f, "sense", np.array([x]))[0])
    elif prev_f is None and baseline is not None:
        level = baseline["final_sense"]

        def before(x):
            return level
    else:
        return None

    def gap(x):
        return float(window_model(f, "sense", np.array([x]))[0]) - before(x)

    lo, hi = w.t0 - max(5 * dt, 0.3 * f["tau"]), float(t[w.start])
    try:
        if gap(lo) * gap(hi) > 0:
            return None
        return float(brentq(gap, lo, hi, xtol=1e-6 * dt))
    except (ValueError, RuntimeError):
        return None


def _combine(windows, fits, baseline, has_drive) -> _Combined:
    """Generalised least-squares combination of per-window estimates (independent windows).

    Parameter vector: tau, [q = C_d/C_s], S_high, S_low, [D_high, D_low]; each window
    observes tau, q and the final levels of the state its edge enters; the pre-edge
    baseline observes the levels of the state before the first edge.
    """
    names = ["tau_fit"] + (["q_drive_sense"] if has_drive else []) + ["sense_high", "sense_low"]
    if has_drive:
        names += ["drive_high", "drive_low"]
    idx = {n: i for i, n in enumerate(names)}
    p = len(names)
    info = np.zeros((p, p))
    score = np.zeros(p)
    obs = []
    for w, f in zip(windows, fits):
        state = "high" if w.edge.direction > 0 else "low"
        vals, cov = f.subset(("tau", "final_sense", "coef_sense") + (("final_drive", "coef_drive") if has_drive else ()))
        if has_drive:
            tau, sf, cs, df, cd = vals
            g = np.array([[1, 0, 0, 0, 0], [0, 0, -cd / cs ** 2, 0, 1 / cs], [0, 1, 0, 0, 0], [0, 0, 0, 1, 0]])
            y = np.array([tau, cd / cs, sf, df])
            cols = [idx["tau_fit"], idx["q_drive_sense"], idx[f"sense_{state}"], idx[f"drive_{state}"]]
        else:
            tau, sf, cs = vals
            g = np.array([[1, 0, 0], [0, 1, 0]])
            y = np.array([tau, sf])
            cols = [idx["tau_fit"], idx[f"sense_{state}"]]
        obs.append((y, g @ cov @ g.T, cols, w.edge.direction))
    if baseline is not None:
        state = "low" if windows[0].edge.direction > 0 else "high"
        groups = ("final_sense", "final_drive") if has_drive else ("final_sense",)
        vals, cov = baseline.subset(groups)
        cols = [idx[f"sense_{state}"]] + ([idx[f"drive_{state}"]] if has_drive else [])
        obs.append((vals, cov, cols, 0))
    for y, c, cols, _ in obs:
        ci = np.linalg.inv(c)
        info[np.ix_(cols, cols)] += ci
        score[cols] += ci @ y
    d = np.sqrt(np.diag(info))
    if np.any(d == 0) or np.linalg.matrix_rank(info / np.outer(d, d)) < p:
        raise AnalysisRefused("the record does not hold both states settled long enough to measure the "
                              "current step; record a pre-edge baseline or a full period")
    cov = np.linalg.inv(info)
    theta = cov @ score
    chi2 = sum(float((y - theta[cols]) @ np.linalg.inv(c) @ (y - theta[cols])) for y, c, cols, _ in obs)
    nu = sum(y.size for y, *_ in obs) - p
    birge = None
    if nu > 0:
        ratio = math.sqrt(chi2 / nu)
        p_value = float(stats.chi2.sf(chi2, nu))
        birge = (ratio, p_value)
        if p_value < 1e-3 and ratio > 1:
            cov = cov * ratio ** 2
    by_dir = {}
    for key, sign in (("rising", 1), ("falling", -1)):
        sel = [(f["tau"], f.stderr("tau") ** 2) for w, f in zip(windows, fits) if w.edge.direction == sign]
        if sel:
            wts = np.array([1 / v for _, v in sel])
            by_dir[key] = (float(np.sum(wts * np.array([m for m, _ in sel])) / wts.sum()), float(1 / math.sqrt(wts.sum())))
    rise_fall = None
    if "rising" in by_dir and "falling" in by_dir:
        (a, ua), (b, ub) = by_dir["rising"], by_dir["falling"]
        rise_fall = (a - b) / math.hypot(ua, ub)
    dof = float(sum(max(f.dof, 1.0) for f in fits))
    units = tuple({"tau_fit": "s", "q_drive_sense": ""}.get(n, "V") for n in names)
    return _Combined(tuple(names), theta, cov, units, dof, by_dir, rise_fall, birge)


def _measurement_function(has_drive: bool, setup: Setup):
    """The measurement model y = f(x) evaluated with ``uncertainties`` numbers."""
    has = setup.parts.__contains__

    def model(x):
        r_s = x["sense_resistor"]
        if has("probe_resistance"):
            r_s = r_s * x["probe_resistance"] / (r_s + x["probe_resistance"])
        tau = x["tau_fit"] / x["timebase"]
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


def _flat_at_extreme(y: np.ndarray, sigma: float, min_run: int = 20) -> bool:
    """A run of ``min_run`` identical samples at the record's extreme although the noise spans
    more than one converter step: the trace sat at the converter's limit (common practice)."""
    codes = np.unique(y)
    if codes.size < 2:
        return False
    lsb = float(np.min(np.diff(codes)))
    return sigma > lsb and max(longest_run_at_extremes(y)) >= min_run


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
