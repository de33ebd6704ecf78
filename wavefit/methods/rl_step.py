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
from typing import Any, Mapping, Sequence

import numpy as np

from ..calibration.in_use import RATIO_INPUT, SKEW_INPUT
from ..errors import AnalysisRefused, NothingToMeasure, SetupError
from ..fit.engine import Block, fit_least_squares
from ..fit.exponential import WindowChannel, fit_exponential_window, window_model
from ..fit.noise_model import fit_ar
from ..fit.quantisation import RECORD_WARNINGS, RECORD_WIDE, include_quantisation, noise_before_converter
from ..fit.result import FitResult
from ..measurement import Measurement
from ..outputs import Scalar
from ..results import TracePlot
from ..setup import Setup
from ..uncertainty import InputSet, Propagation
from ..values import eng
from ..signal.clipping import clipped_where_fitted, extremes
from ..signal.edges import find_edges, jump_instant, noise_rms
from ..signal.levels import state_levels
from . import register
from ._model_check import ModelCheck, Variation, added
from ._rl_estimators import estimate_tau
from ._rl_per_edge import StatesNotMeasured
from ._rl_transient import LONGEST_SHARE_OF_TAU
from ._rl_windows import (LATE_SHIFT_TAU, LATE_SPAN_SAMPLES, LATE_SPAN_TAU, MIN_WINDOW_SAMPLES, LateStart, Window,
                          after_held_starts, late_start, off_screen_baseline, placement_factor, placement_jitter,
                          settle_starts, start_margin)
from ..scale_factor import scale_factor
from ._scale_factor import EDGE_SCATTER_P
from ._rl_wiring import check_wiring
from .base import Method, PartSpec
from ._rl_summary import EdgeFit, StepFitSummary
from .estimate import Estimate, FittedBlock

#: Budget input that carries tau's movement with the fit window when the model check fires.
MODEL_INPUT = "model"
#: Source resistance assumed only to size the skip after a winding-capacitance spike
#: when the setup does not give it (the usual generator output resistance; common practice).
TYPICAL_SOURCE_RESISTANCE = 50.0
#: Fewer samples per tau than this is warned: the exponential's curvature is then resolved by
#: few samples and the edge's placement matters (common practice: 10 samples per time constant).
MIN_SAMPLES_PER_TAU = 10.0
#: A window shorter than this many tau after its edge leaves the final level extrapolated
#: (e^−5 < 1 %: the record then holds the settled state; common practice).
SETTLED_TAU = 5.0
#: Least record after an edge, in the edge's first-pass tau, for the edge to be fitted.
LEAST_TAU_AFTER_EDGE = 2.0
#: Least record after the longest-followed edge, in the fitted tau. The first-pass tau, from
#: levels a trace that never settles does not reach, is short on such records; short of this
#: the final level is not seen and tau trades off against it. Measured on square waves of
#: 8-bit sense-only records (σ = 2 mV on a 164 mV step, 8 draws each): with one tau per half
#: period, 5 results of 8 (145 ± 23 µH for 220 µH, z = −3.2), with 1.25 tau two of seven
#: beyond U; from 1.5 tau none of 32.
LEAST_FITTED_TAU_AFTER_EDGE = 1.25
#: The generator's edge time above this fraction of tau makes the step visibly not ideal.
EDGE_TIME_FRACTION = 0.1
#: An edge time of at most this many sample intervals is the sampling's, not the generator's:
#: a step between two samples reads as one interval (at 1.2 samples per tau the warning blamed
#: a 5 ns generator edge for a 300 ns sample interval).
UNRESOLVED_EDGE_SAMPLES = 2.0
#: The probe capacitance's pole (R_sense·C_probe) above this fraction of tau makes the
#: first-order correction of the measurement function doubtful (its neglected term is the square).
PROBE_POLE_FRACTION = 0.05
#: Rising against falling tau beyond this many standard uncertainties is warned (about 0.3 %
#: false alarms for a normal difference: a level-dependent part, not noise).
RISE_FALL_Z = 3.0
#: Edges placed from the sense trace worse than this many samples are warned (the window start
#: margin then costs a visible share of tau's precision; see start_margin).
JITTER_WARN_SAMPLES = 2.0
#: ... and only where that margin costs tau this share of its information or more,
#: 1 − exp(−2·margin/tau): a record with tau of 2,000 samples and a step 500 times its noise
#: placed its edges to 2.7 samples, lost 0.5 %, and was warned of "a low signal-to-noise ratio"
#: (so was a new user's 10⁶-sample record); the share is about twice the noise over the step.
JITTER_WARN_LOSS = 0.05


#: Without a drive channel the first windows end this many (estimated) tau before the next
#: edge's reference-level instant where tau spans FIRST_PASS_MARGIN_FROM samples or more. The
#: 10 % and 90 % instants are the last and first noisy crossings of their levels, late and
#: early by a share of the samples within the noise of the level: on white records at 300:1
#: the switching instant came out 0.005–0.013 tau late (0.8 samples at 80 samples per tau, 4
#: at 800, 88 at 7,900, 310 at 24,000; largest 410), so from about a thousand samples per
#: tau each window took in tens to hundreds of samples of the next edge, and the misfit read
#: as correlated noise (measured). Below, the few samples are within the noise, and the
#: windows are left as they were. A window's last samples are the settled level, which tells
#: little of tau; the final windows are cut again from the fitted instants
#: (:func:`~wavefit.methods._rl_windows.settle_starts`).
FIRST_PASS_END_MARGIN = 0.05
FIRST_PASS_MARGIN_FROM = 1000


#: Delay between two channels of one scope with their probes when they are not deskewed: up
#: to about a nanosecond (probe and cable delays differ by that much, 20 cm of cable is 1 ns;
#: common practice, from memory). L changes by R_source·delay (docs/method-rl-step.md), at most
#: delay/tau of L; where that exceeds SKEW_WARNING for this delay and no channel comparison
#: puts the delay in the budget, a warning says so (a 4.7 µH coil with tau = 78 ns: 1.1 % per
#: ns; the sample choke, tau = 3.7 µs: 0.03 %).
UNDESKEWED_DELAY = 1e-9
SKEW_WARNING = 0.005

#: A dut_resistance given beside a drive channel that differs from the measured R by more than
#: this many combined standard uncertainties is warned (4: a chance disagreement about 1 in 10⁴
#: for normal errors; a mistyped or misread ohmmeter value, or a drive probe on the wrong node).
DCR_DISAGREEMENT_Z = 4.0

#: A scope channel's input is 50 ohm when terminated (a measured 49.9 ohm is one), 1 Mohm
#: otherwise (common practice); a probe_resistance below this is none, but a prefix slip
#: ("1 mohm", milliohm, typed for 1 Mohm), which made the probe short the sense resistor: L read
#: 10⁴ times too small.
LEAST_PROBE_RESISTANCE = 10.0


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
    channel_ratio_roles = ("sense", "drive")
    outputs = {"L": Scalar("H"), "R": Scalar("ohm"), "tau": Scalar("s"), "R_loop": Scalar("ohm"),
               "I_final": Scalar("A"), "E": Scalar("J"), "R_source": Scalar("ohm")}
    positive = ("L", "tau", "R_loop")
    not_negative = ("R", "R_source")
    determined = ("L", "tau")
    undetermined_hint = ("is the record long enough for this coil? Each edge needs several tau after it "
                         "(lengthen the period and the record), and a step well above the noise")
    unphysical_hint = ("check [columns] (drive and sense swapped? an inverted probe? a probe's 1x/10x setting "
                       "wrong?), the parts and the [instrument] gains, and that the capture holds steps of an RL "
                       "loop (not a ring), each step over many converter codes and without a spike at each edge "
                       "(a winding capacitance charging through a large sense resistance)")

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
        probe = setup.parts.get("probe_resistance")
        if probe is not None and probe.value < LEAST_PROBE_RESISTANCE:
            raise SetupError(f"{setup.source}: part 'probe_resistance' = {probe.text!r} is {probe.value:.3g} ohm, far "
                             "below any scope input (50 ohm terminated, 1 Mohm otherwise); 'mohm' is milliohm: write "
                             "'Mohm' for megaohm")

    def unit_hint(self, role: str, setup: Setup) -> str:
        if role == "sense":
            return ("rl-step takes the current as the voltage over sense_resistor; a current probe's channel "
                    "in A is not read as a current: record the sense resistor's voltage")
        return super().unit_hint(role, setup)

    def estimate(self, measurement: Measurement, setup: Setup) -> Estimate:
        capture = measurement.first.capture
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

        # each channel's extreme values and code step, for a step seen at all, the pre-edge
        # level and the clipping checks
        facts = {group: extremes(y, self.channel(capture, setup, group).levels)
                 for group, y in (("sense", sense), ("drive", drive)) if y is not None}
        sense_levels = state_levels(sense)
        _refuse_noise_on_a_few_codes(sense_levels, facts["sense"].code, capture.source)
        sense_rms = noise_rms(sense)  # for the edges and the whole-record fit's reach
        edges = find_edges(t, sense, sense_levels, rms=sense_rms)
        if not edges:
            raise NothingToMeasure(f"{capture.source}: no transition found in the sense channel (its two "
                                  "state levels are not separated from the noise); check the trigger and the "
                                  "column mapping", str(capture.source))
        check_wiring(t, sense, drive, edges, capture.source, sense_levels)
        windows, edge_times = self._windows(t, sense, drive, edges, setup, dt)
        noise = str(self.option(setup, "noise"))
        fits = [self._fit_window(t, sense, drive, w, noise, capture.source) for w in windows]
        cut = {id(w.edge): w.start for w in windows}  # each window's start as cut, before held samples
        windows, fits, clipped, off_screen, left_out = after_held_starts(t, sense, drive, windows, fits, facts, noise,
                                                                          capture.source, self._fit_window)
        if off_screen:
            notes.append(f"{off_screen} edge window(s) start after samples held at a converter limit (the trace "
                         "was off screen there, as a step's overshoot often is)")
        if left_out:
            warnings.append(f"{left_out} edge window(s) left out: clipped at a converter limit where they would be "
                            "fitted (set the volts per division and offset so that the whole step stays on screen)")
        baseline = self._fit_baseline(t, sense, drive, windows[0], noise, fits, facts)
        stop = _baseline_stop(t, windows[0])
        held = off_screen_baseline(sense, drive, stop, windows[0], fits[0], facts, cut[id(windows[0].edge)], dt,
                                   clipped)
        if held:
            clipped |= held
            baseline = _without_off_screen(baseline, windows, held, drive is not None, capture.source)
            if baseline is not None:
                warnings.append(OFF_SCREEN_LEVEL)
        # is the sense noise white? One decision from all windows' residuals together: separate
        # per-window BIC choices would call white noise coloured in one of a dozen windows often.
        # Windows fitted on their codes passed a test of independent noise already, and their
        # residuals hold the quantisation error, which is correlated even when the noise is not
        white = noise == "white" or (drive is None and (_on_codes(fits)
                                                         or fit_ar([f.residuals for f in fits]).order == 0))
        period = placement = None
        if self.option(setup, "skip") == "auto":
            first, first_fits = windows[0], fits
            windows, fits, late, period, (transient, moved) = settle_starts(
                t, sense, drive, windows, fits, baseline, noise, capture.source, self._fit_window, correlated=not white)
            if moved:
                notes.append(f"{moved} of {len(windows)} edge windows start {transient.samples} samples "
                             f"({transient.samples * dt:.3g} s) later: the {transient.channel} channel's first samples "
                             "after each edge stand above its noise (a probe's ringing, a long ground lead, generator "
                             "overshoot?)")
            if transient.too_long:
                notes.append(f"the residuals stand above the noise for {transient.too_long} samples after each edge, "
                             f"longer than {LONGEST_SHARE_OF_TAU:g} tau: a misfit of the model rather than a transient of "
                             "the edge; the windows are kept and the model check weighs it")
            if period is not None:
                notes.append(f"switching instants fitted to the drive's period ({period:.6g} s) over "
                             f"{len(windows)} edges: each is placed from all of them")
            if late:
                notes.append(f"{late} edge window(s) start later: their first samples did not follow the "
                             "exponential (finite generator edge or winding-capacitance ringing)")
            if windows[0].t0 != first.t0 or any(f is not g for f, g in zip(fits, first_fits)):
                # the level ends before the first instant and takes its noise from the fits
                baseline = self._fit_baseline(t, sense, drive, windows[0], noise, fits, facts)
                if held:
                    baseline = _without_off_screen(baseline, windows, held, drive is not None, capture.source)
        if baseline is None and len(windows) < 2:
            raise AnalysisRefused(f"{capture.source}: the record starts at the edge, so there is no settled "
                                  "pre-edge level to pin the offset; record some time before the step")

        try:
            choice = estimate_tau(t, sense, drive is not None, white, self.option(setup, "skip") == "auto",
                                  "winding_capacitance" in setup.parts, edges, windows, fits, baseline, noise,
                                  self._fit_window, sense_rms)
        except StatesNotMeasured:
            if not left_out:
                raise
            # the windows left out as clipped are the cause (a sense screen topping out below the
            # high level was refused as "record a pre-edge baseline or a full period")
            raise AnalysisRefused(
                f"{capture.source}: {left_out} edge window(s) were left out, clipped at a converter limit where they "
                "would be fitted, and the windows left do not measure the step between the two states; set the volts "
                "per division and offset so that the whole step stays on screen") from None
        combined, estimator = choice.combined, choice.estimator
        notes += choice.notes
        notes.append(f"tau and levels from the {estimator}")
        if _on_codes(fits):
            notes.append("each fit carried to the maximum of the likelihood of the converter's codes "
                         "(resolution-limited record with independent noise)")
        elif all(f.code_fit is not None for f in fits):
            notes.append("each fit carried to the maximum of the likelihood of the converter's codes "
                         "(resolution-limited record with correlated noise: covariance from the "
                         "composite-likelihood sandwich)")
        tau_fit = combined.values[0]
        warnings += self._diagnostics(t, sense, drive, windows, fits, tau_fit, dt, edge_times, setup, combined,
                                      facts, capture.source, clipped)
        reach = max(t[w.stop - 1] - w.t0 for w in windows)
        if reach < LEAST_FITTED_TAU_AFTER_EDGE * tau_fit:
            raise AnalysisRefused(f"{capture.source}: no edge is followed by {LEAST_FITTED_TAU_AFTER_EDGE:g} tau of "
                                  "record "
                                  f"(tau fitted {tau_fit:.3g} s, the longest window {reach:.3g} s): the final level "
                                  "is not seen, so tau cannot be told from it; lengthen the period and the record "
                                  f"({SETTLED_TAU:g} tau or more after each edge)")
        if drive is None and not white:
            # each window's start is placed from the same correlated noise as its first samples:
            # its uncertainty enters tau's
            jitters = placement_jitter(windows, fits, dt)
            jitter = float(np.median(jitters))
            factor = placement_factor(t, windows, fits, jitters)
            if factor > 1.0:
                placement = factor
                combined = combined.with_tau_variance_scaled(factor)
                notes.append(f"edges placed from the sense trace to about {jitter:.1f} samples in correlated "
                             f"noise: tau's variance enlarged {factor:.2f}-fold, to that of windows starting "
                             "that much later")
            margin = start_margin(jitter * dt, dt) / dt
            if jitter > JITTER_WARN_SAMPLES and 1.0 - math.exp(-2.0 * margin * dt / tau_fit) >= JITTER_WARN_LOSS:
                warnings.append(f"correlated noise and a low signal-to-noise ratio: the edges are located only "
                                f"to about {jitter:.1f} samples from the sense trace, so each window starts "
                                f"{margin:.0f} samples after its edge and tau is less precise; record the "
                                "drive node too for a tighter result")

        check = _model_check(late_start(t, sense, drive, windows, fits, noise, capture.source, self._fit_window),
                             combined.values[0])
        if not check.adequate:
            warnings.append(check.warning("single-exponential model", "a coil that is not one time constant: "
                                          "eddy currents in its core or in an armature?"))

        if drive is not None and "source_resistance" in setup.parts:
            notes.append("source_resistance is not used: the drive channel measures the generator")
        if drive is not None and "dut_resistance" in setup.parts:
            notes.append("dut_resistance is not used: the drive channel measures R (compare the two)")
        if drive is None:
            notes.append("R is the dut_resistance part as given (no drive channel to measure it)")
        fit_info = _fit_summary(windows, fits, combined, baseline, dt, notes, estimator, check,
                                drive_period=period, placement_factor=placement)
        block = FittedBlock(tuple(combined.names), combined.values, combined.covariance, tuple(combined.units),
                            combined.dof)
        return Estimate((block,), fit_info, check.budget_inputs(),
                        {"has_drive": drive is not None, "parts": frozenset(measurement.parts)},
                        tuple(warnings), _plot(t, sense, drive, windows, fits), check.adequate)

    def model(self, x: Mapping[str, Any], settings: Mapping[str, Any]) -> dict[str, Any]:
        """The measurement function (module docstring), with ``uncertainties`` numbers or floats."""
        return measurement_function(x, settings["has_drive"], settings["parts"])

    def review(self, estimate: Estimate, inputs: InputSet, propagation: Propagation) -> tuple[str, ...]:
        """A dut_resistance given beside a drive channel is not used; a warning when it disagrees
        with the R the channels measure beyond DCR_DISAGREEMENT_Z combined standard uncertainties."""
        given = inputs.get("dut_resistance")
        if not estimate.settings["has_drive"] or given is None:
            return ()
        measured = propagation.quantities["R"]
        u = math.hypot(measured.standard_uncertainty, given.standard_uncertainty)
        if not abs(measured.value - given.value) > DCR_DISAGREEMENT_Z * u:
            return ()
        return (f"the R the channels measure, {eng(measured.value, 'ohm')} (U {eng(measured.expanded_uncertainty, 'ohm')}), "
                f"disagrees with the dut_resistance given ({given.value:.4g} ohm, not used) by more than "
                f"{DCR_DISAGREEMENT_Z:g} combined standard uncertainties: check the ohmmeter reading, the wiring and "
                "the drive probe's node",)

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
            # the window ends before the next switching instant: the next edge's, or where the trace
            # leaves the state in a transition that is no edge (the record ends in it, or it turns
            # back), placed from its near reference-level instant as an edge's t0 is from its t10
            ends = [(t0s[k + 1], edges[k + 1].tau)] if k + 1 < len(edges) else []
            if math.isfinite(e.left_at):
                ends.append((e.left_at - e.tau * math.log(10.0 / 9.0), e.tau))
            stop = t.size
            for t_next, tau_next in ends:
                end = 2.0 * dt + edge_time
                if drive is None and tau_next >= FIRST_PASS_MARGIN_FROM * dt:
                    # the next instant is then the reference-level estimate, late on long records
                    # (FIRST_PASS_END_MARGIN): end the window before it can reach the next edge
                    end += FIRST_PASS_END_MARGIN * tau_next
                stop = min(stop, int(np.searchsorted(t, t_next - end)))
            if stop - start >= MIN_WINDOW_SAMPLES and (t[min(stop, t.size) - 1] - t0s[k]) >= LEAST_TAU_AFTER_EDGE * e.tau:
                windows.append(Window(e, t0s[k], start, stop))
        if not windows:
            raise AnalysisRefused(f"no complete edge: each transition is followed by less than {LEAST_TAU_AFTER_EDGE:g} "
                                  "tau of record; "
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
        and ``facts`` the channels' :func:`extremes`, whose code step it uses. None where fewer
        than 16 samples precede the edge."""
        stop = _baseline_stop(t, first)
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
    def _diagnostics(t, sense, drive, windows, fits, tau, dt, edge_time, setup, combined, facts,
                     source: str, clipped: set[str]) -> list[str]:
        out = []
        if tau < MIN_SAMPLES_PER_TAU * dt:
            out.append(f"only {tau / dt:.1f} samples per tau (fewer than {MIN_SAMPLES_PER_TAU:g}): sample faster or "
                       "use a larger inductance / smaller loop resistance")
        short = [w for w in windows if t[w.stop - 1] - w.t0 < SETTLED_TAU * tau]
        if short == [windows[-1]] and windows[-1].stop == t.size and len(windows) > 1:
            out.append(f"the last edge is followed by less than {SETTLED_TAU:g} tau of record before the record ends: "
                       f"its final level is extrapolated (the other edges settle; end the record {SETTLED_TAU:g} tau "
                       "or more after an edge)")
        elif short:
            # where no edge settles nothing shows the shape is an exponential (a 2 kHz sine read
            # as L = 6.2 mH with this warning alone, a review found)
            unchecked = ("; as none settles, nothing checks that the waveform is an RL step's exponential (a sine "
                         "or a ring rising and falling between the edges reads as one)" if len(short) == len(windows)
                         else "")
            out.append(f"{len(short)} of {len(windows)} edges are followed by less than {SETTLED_TAU:g} tau of "
                       f"record; the final level is extrapolated (lengthen the period or the record){unchecked}")
        if edge_time > EDGE_TIME_FRACTION * tau and edge_time > UNRESOLVED_EDGE_SAMPLES * dt:
            out.append(f"tau ({tau:.3g} s) is comparable to the generator's edge time ({edge_time:.3g} s); "
                       "use a faster generator or a larger inductance")
        if drive is not None and setup.calibration.channels is None and UNDESKEWED_DELAY / tau > SKEW_WARNING:
            out.append(f"a delay between the drive and sense channels moves L by up to {100 * 1e-9 / tau:.2g} % per "
                       f"ns here (L changes by R_source·delay; tau = {tau:.3g} s), and the budget holds no such "
                       "delay: deskew the probes on the scope, or compare the channels ([calibration] channels) to "
                       "put the delay and its uncertainty in the budget")
        cp = setup.parts.get("probe_capacitance")
        if cp is not None and setup.parts["sense_resistor"].value * cp.value > PROBE_POLE_FRACTION * tau:
            out.append("the probe capacitance with the sense resistor makes a pole comparable to tau; "
                       "the first-order correction used may not suffice")
        out += _record_wide(fits)
        for w, fit in zip(windows, fits):
            out += [f"edge at {w.t0:.6g} s: {msg}" for msg in fit.warnings if msg not in RECORD_WARNINGS]
            for group, y in (("sense", sense), ("drive", drive)):
                if y is None:
                    continue
                seg = slice(w.start, w.stop)
                sigma = fit.noise_sigma[group]
                if (clipped_where_fitted(facts[group], y[seg], window_model(fit, group, t[seg]), sigma)
                        or (group in clipped and facts[group].held_throughout(y[seg]))):
                    # the samples the fit rests on are cut off: its levels and tau are biased, by
                    # far more than their uncertainty (a drive on a quarter of its swing's screen
                    # read L 70 % low with U 15 %)
                    raise AnalysisRefused(
                        f"{source}: the {group} trace is clipped where it is fitted (edge at {w.t0:.6g} s: held "
                        "at the converter's limit while the signal moves), so tau and the levels cannot be "
                        f"trusted; set the {group} channel's volts per division and offset so that the whole "
                        "step stays on screen")
                if facts[group].flat(sigma) or facts[group].piles_up(sigma):
                    out.append(f"the {group} trace is clipped (flat at the converter's limit): reduce the "
                               "vertical sensitivity")
        if combined.rise_fall is not None:
            z = combined.rise_fall
            if abs(z) > RISE_FALL_Z:
                out.append(f"rising and falling edges disagree on tau by {abs(z):.1f} standard uncertainties: "
                           "core nonlinearity, a diode or a level-dependent part in the loop")
        if combined.birge is not None and scale_factor(*combined.birge, EDGE_SCATTER_P) > 1.0:
            out.append(f"the per-edge estimates scatter more than their uncertainties (Birge ratio "
                       f"{combined.birge[0]:.2f}); the type A uncertainty is enlarged by that ratio")
        return out


# -- measurement function -----------------------------------------------------------------


def measurement_function(x: Mapping[str, Any], has_drive: bool, parts: frozenset[str]) -> dict[str, Any]:
    """The measurement model y = f(x) of rl-step (module docstring); ``parts`` are the names of
    the parts the setup gives."""
    has = parts.__contains__
    r_s = x["sense_resistor"]
    if has("probe_resistance"):
        r_s = r_s * x["probe_resistance"] / (r_s + x["probe_resistance"])
    tau = (x["tau_fit"] + added(x, MODEL_INPUT)) / x["timebase"]
    step = (x["sense_high"] - x["sense_low"]) / x["vertical_gain_sense"]
    current = step / r_s if getattr(step, "nominal_value", step) > 0 else -step / r_s
    # sense impedance at the loop pole s1 = −1/tau (probe capacitance across the resistor)
    z_s = r_s / (1 - r_s * x["probe_capacitance"] / tau) if has("probe_capacitance") else r_s
    if has_drive:
        # a channel comparison gives the ratio of the gains itself (wavefit.calibration.in_use)
        ratio = x[RATIO_INPUT] if RATIO_INPUT in x else x["vertical_gain_sense"] / x["vertical_gain_drive"]
        k_dc = (x["drive_high"] - x["drive_low"]) / (x["sense_high"] - x["sense_low"]) * ratio
        r_dut = (k_dc - 1) * r_s
        q = x["q_drive_sense"]
        if SKEW_INPUT in x:
            # the sense record late by skew multiplies its fitted coefficient by exp(skew/tau);
            # tau and the levels do not move (an exponential shifted in time is the same
            # exponential with another coefficient)
            q = q * math.e ** (x[SKEW_INPUT] / tau)
        r_src = -q * ratio * z_s
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
            "I_final": current, "E": inductance * current ** 2 / 2, "R_source": r_src}


def _record_wide(fits: Sequence[FitResult]) -> list[str]:
    """The windows' warnings about the record's converter said once: the one they share, or,
    where windows were treated in different ways, one that counts each (from how each fit was
    made: by the likelihood of its codes, with independent or correlated noise, by least squares
    with an estimate of quantisation's effect where the codes told little, or plainly; two such
    warnings read as contradicting each other)."""
    said = list(dict.fromkeys(msg for fit in fits for msg in fit.warnings if msg in RECORD_WARNINGS))
    if len(said) < 2:
        return said
    ways = {"by the likelihood of their codes (independent noise)":
            sum(1 for f in fits if f.code_fit is not None and f.code_fit.independent_noise),
            "by the likelihood of their codes (correlated noise: uncertainty from the scores' scatter)":
            sum(1 for f in fits if f.code_fit is not None and not f.code_fit.independent_noise),
            "by least squares with an estimate of quantisation's effect in their type A uncertainty":
            sum(1 for f in fits if f.code_fit is None and f.quantisation_widening is not None),
            "by plain least squares": sum(1 for f in fits if f.code_fit is None and f.quantisation_widening is None)}
    counted = ", ".join(f"{count} {way}" for way, count in ways.items() if count)
    return [f"{RECORD_WIDE} (its noise is below half a converter code): its {len(fits)} edge windows were fitted: "
            f"{counted}; more vertical sensitivity would help"]


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


#: A sense channel whose two state levels (IEEE Std 181's histogram method) are no more than
#: this many converter codes apart shows no step: noise below a code sits on two or three
#: neighbouring codes, the two most frequent of which are then taken as the levels, and the
#: noise's every crossing as an edge (an open coil was refused as "no complete edge ...
#: lengthen the record", an unconnected probe as a failed fit of an edge found in noise).
NO_STEP_CODES = 2


def _refuse_noise_on_a_few_codes(levels, code: float | None, source: str) -> None:
    """Refuse a sense channel whose levels lie within :data:`NO_STEP_CODES` codes ``code``."""
    if code and abs(levels.amplitude) <= NO_STEP_CODES * code * (1.0 + 1e-9):
        codes = abs(levels.amplitude) / code
        raise AnalysisRefused(f"{source}: the sense channel does not step: its two most common values are "
                              f"{codes:.0f} converter code{'s' if round(codes) != 1 else ''} apart, noise on a few "
                              "codes; is the coil open, the sense probe unconnected, or its volts per division far "
                              "too coarse for the step?")


def _baseline_stop(t: np.ndarray, first: Window) -> int:
    """The pre-edge baseline's end: the samples up to two intervals before the first window's
    switching instant."""
    return int(np.searchsorted(t, first.t0 - 2.0 * float(t[1] - t[0])))


#: The warning of a sense-only capture whose level before the first edge was off screen and is
#: seen nowhere else (:func:`_without_off_screen`).
OFF_SCREEN_LEVEL = ("the sense trace is held at the converter's limit before the first edge, is clipped elsewhere, "
                    "and no window gives that level: it was probably off screen, and then I_final and E are too "
                    "small and not to be used; tau and L do not rest on it. Set the sense channel's volts per "
                    "division and offset so that the whole step stays on screen")


def _without_off_screen(baseline, windows, held: set[str], has_drive: bool, source: str):
    """The pre-edge baseline where its channels ``held`` were off screen
    (:func:`~wavefit.methods._rl_windows.off_screen_baseline`): None where a window gives the
    level of that state (it is measured there); refused with a drive channel where none does
    (the windows entering it were left out as clipped), since the step between the levels,
    which k, R and L rest on, is then unmeasured; kept without a drive channel, where only
    I_final and E rest on it (the caller warns: :data:`OFF_SCREEN_LEVEL`)."""
    before = 1 if windows[0].edge.direction < 0 else -1  # the direction of an edge into that state
    if any(w.edge.direction == before for w in windows):
        return None
    if has_drive:
        group = sorted(held)[0]
        raise AnalysisRefused(f"{source}: the {group} trace is held at the converter's limit before the first edge and "
                              "in every window that would give that level (off screen), so the step between the two "
                              f"levels cannot be measured; set the {group} channel's volts per division and offset so "
                              "that the whole step stays on screen")
    return baseline


def _fit_summary(windows, fits, combined, baseline, dt, notes, estimator: str, check: ModelCheck, *,
                 drive_period: float | None, placement_factor: float | None) -> StepFitSummary:
    """The fit summary of the windows' ``fits`` and their combination ``combined``; the drive's
    fitted period and the factor on tau's variance for edges placed from the sense trace when
    the fit had them."""
    edges = tuple(EdgeFit("rising" if w.edge.direction > 0 else "falling", w.t0, f.t_ref, f.n_samples,
                          f["tau"], f.stderr("tau"), f.noise_model, f.diagnostics.get("ljung_box_p"))
                  for w, f in zip(windows, fits))
    taus = np.array([f["tau"] for f in fits])
    rising = combined.by_direction.get("rising") or (None, None)
    falling = combined.by_direction.get("falling") or (None, None)
    return StepFitSummary(
        model="final + coefficient·exp(−(t − t_ref)/tau) per edge window, tau shared by the channels",
        edges_fitted=len(fits),
        tau_fit=combined.values[0],
        tau_fit_standard_error=math.sqrt(combined.covariance[0, 0]),
        tau_per_edge_spread=float(np.std(taus, ddof=1)) if taus.size > 1 else 0.0,
        skip_after_edge_s=float(fits[0].t_ref - windows[0].t0),
        sample_interval_s=dt,
        type_a_dof=combined.dof,
        type_a_estimator="per-window feasible GLS with AR noise model (Cochrane-Orcutt), "
                         "combined across edges by inverse-covariance weighting",
        baseline_samples=baseline.n_samples if baseline is not None else 0,
        edges=edges,
        notes=tuple(notes),
        tau_rising=rising[0], tau_rising_standard_error=rising[1],
        tau_falling=falling[0], tau_falling_standard_error=falling[1],
        birge_ratio=combined.birge[0] if combined.birge is not None else None,
        drive_period_s=drive_period,
        placement_variance_factor=placement_factor,
        estimator=estimator,
        model_check=check)


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
    """Whether every fit was carried to the maximum of the code likelihood with noise that
    passed its test of independence."""
    return all(f.code_fit is not None and f.code_fit.independent_noise for f in fits)
