"""From a first capture of an unknown coil to a proposed setup and settings for the next one.

The method follows from the record's shape: a step response (channels that switch between
two states, the sense settling exponentially) is measured by ``rl-step``, a ringing decay
by ``lc-ring``. The next capture's period and sample interval follow two rules of common practice
(:data:`~wavefit.suggest.rules.HALF_PERIOD_TAUS`, :data:`~wavefit.suggest.rules.SAMPLES_PER_TAU`),
its vertical settings the span the record is expected to show (:mod:`wavefit.suggest.scales`).
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ..blas_threads import one_blas_thread
from ..errors import AnalysisRefused
from ..io import Capture
from ..signal.clipping import CLIPPED_RUN, longest_run_at_extremes
from ..values import PLACEHOLDER, PartValue, eng
from .ring_record import RingRecord, find_ring_record
from .rules import (HALF_PERIOD_TAUS, K_HIGH, K_LOW, K_TARGET, RECORD_PERIODS, RING_RECORD_DECAYS,
                    RING_SAMPLES_PER_PERIOD, SAMPLES_PER_TAU, TAU_MARGIN, UNCOMPARED_RATIO)
from .scales import ScaleAdvice, scale_advice
from .series import nearest_e12, round_down_125, round_up_125
from .step_record import StepRecord, search_step

@dataclass(frozen=True)
class Suggestion:
    """What ``wavefit suggest`` proposes. ``estimates`` and ``next_capture`` map names to SI
    values; ``setup`` is the setup as a dict (the TOML's structure)."""

    method: str
    columns: dict[str, str]
    estimates: dict[str, float | None]
    next_capture: dict[str, float | None]
    scales: tuple[ScaleAdvice, ...]
    setup: dict[str, Any]
    reasoning: tuple[str, ...] = field(default_factory=tuple)

    def to_dict(self) -> dict[str, Any]:
        """The suggestion as JSON-ready data; a figure that is not finite is None (null)."""
        return {"method": self.method, "columns": dict(self.columns), "estimates": _finite(self.estimates),
                "next_capture": _finite(self.next_capture),
                "scales": [_finite(dataclasses.asdict(s)) for s in self.scales],
                "setup": self.setup, "reasoning": list(self.reasoning)}


def _finite(values: dict[str, Any]) -> dict[str, Any]:
    return {k: None if isinstance(v, float) and not math.isfinite(v) else v for k, v in values.items()}


@one_blas_thread()
def suggest(capture: Capture, sense_resistor: PartValue | None = None, bits: int = 8) -> Suggestion:
    """Propose a method, roles, and the next capture's settings for a first capture.

    Parameters
    ----------
    capture
        The first capture, as read by :func:`wavefit.io.read_capture`.
    sense_resistor
        The sense resistor of this capture, when known: the proposed one is then a value,
        not a multiple of it.
    bits
        The converter's resolution, for the codes the proposed scales give.

    Raises
    ------
    AnalysisRefused
        When the record shows neither a step nor a ring.

    References
    ----------
    IEEE Std 181-2011 (state levels, reference-level instants); Y. Hua and T. K. Sarkar,
    IEEE Trans. ASSP 38(5), 814–824, 1990 (the ring's poles); JCGM 100:2008, 5.1.3
    (sensitivity of the DCR to the step ratio).
    """
    # the step test first: it is cheap, and a ring fails it (a damped sine is not one
    # exponential per half cycle), while the ring's fit costs seconds on a long record
    step, why = search_step(capture)
    if step is not None:
        return _step_suggestion(capture, step, sense_resistor, bits)
    ring = find_ring_record(capture)
    if ring is not None:
        return _ring_suggestion(capture, ring, bits)
    held = _held_at_an_extreme(capture)
    if why is not None:
        raise AnalysisRefused(f"{capture.source}: {why}, then capture again{held}")
    coarse = _coarse_channels(capture)
    raise AnalysisRefused(f"{capture.source}: the record shows neither a step nor a ring (or too much noise "
                          f"to tell){coarse}; check the probes, the trigger and the generator, then capture "
                          f"again{held}")


#: A channel whose record spans fewer converter codes than this is too coarse to tell a step
#: from another shape: a first-order step's misfit allowance (STEP_MAX_RESIDUAL, 2 % of the
#: span) is then below its own quantisation and noise (a helper's first capture at 0.5 V/div:
#: a sense step of 17 codes, refused as neither step nor ring).
COARSE_SPAN_CODES = 32
#: Codes a channel's swing is advised to span instead (about a third of an 8-bit screen).
ADVISED_SPAN_CODES = 80


def _coarse_channels(capture: Capture) -> str:
    """A clause naming each moving channel whose record spans fewer than COARSE_SPAN_CODES codes
    of its converter ('' when none does), with the finer volts per division factor to set."""
    coarse = []
    for channel in capture.channels:
        y = np.asarray(channel.values, dtype=float)
        code = channel.levels.step
        if not code or y.size == 0 or not np.all(np.isfinite(y)):
            continue
        span = float(np.ptp(y)) / code
        if 1 < span < COARSE_SPAN_CODES:
            coarse.append(f"{channel.header!r} spans only {span:.0f} codes of {eng(code, 'V')}")
    if not coarse:
        return ""
    return (f"; {', '.join(coarse)}: too coarse to tell the waveform's shape: set a finer volts per division "
            f"(the swing over {ADVISED_SPAN_CODES} codes or more, the whole waveform still on screen)")


def _held_at_an_extreme(capture: Capture) -> str:
    """A clause naming each channel held at its highest or lowest value for
    :data:`~wavefit.signal.clipping.CLIPPED_RUN` samples or more in a row ('' when none is):
    clipping, when that value is the screen's edge (a quiet settled level on one converter code
    looks the same, hence the "if"; a clipped sense was refused as "neither a step nor a ring", a
    clipped ring as "steps, but does not settle", with the clipping unsaid)."""
    held = []
    for channel in capture.channels:
        y = np.asarray(channel.values, dtype=float)
        if y.size == 0 or not np.all(np.isfinite(y)) or np.ptp(y) == 0:
            continue
        lowest, highest = longest_run_at_extremes(y)
        run, side = max((lowest, "lowest"), (highest, "highest"))
        if run >= CLIPPED_RUN:
            held.append(f"{channel.header!r} sits at its {side} value for {run} samples in a row")
    if not held:
        return ""
    return (f"; {', '.join(held)}: if that is the edge of the screen the trace is clipped (set the volts per "
            "division and offset so that the whole waveform fits on screen)")


def _time_column(capture: Capture) -> dict[str, str]:
    return {} if capture.time_column is None else {"time": capture.time_column}


def _step_suggestion(capture: Capture, step: StepRecord, rs: PartValue | None, bits: int) -> Suggestion:
    dt = capture.sample_interval
    tau = step.tau
    why = [f"method rl-step: {step.sense.channel.header!r} switches between two levels and settles "
           f"exponentially (tau = {eng(tau, 's')} from the record)"]
    columns = _time_column(capture) | {"sense": step.sense.channel.header}
    estimates: dict[str, float | None] = {"tau": tau, "period": step.period,
                                          "samples_per_tau": tau / dt, "sense_step": step.sense_fit.settled_step}
    factor = 1.0                            # the next sense resistor as a multiple of this one
    loop = None                             # R_loop / R_sense now
    if step.drive is not None:
        assert step.drive_fit is not None
        columns["drive"] = step.drive.channel.header
        why.append(f"drive {step.drive.channel.header!r} swings over {eng(step.drive.swing, 'V')}, sense "
                   f"{step.sense.channel.header!r} over {eng(step.sense.swing, 'V')}: the wider is the drive (it "
                   "jumps by the generator's whole step at each switching instant)")
        k = step.drive_fit.settled_step / step.sense_fit.settled_step
        settled = (f"settled drive step / settled sense step = {eng(step.drive_fit.settled_step, 'V')} / "
                   f"{eng(step.sense_fit.settled_step, 'V')} = {k:.3g}")
        source = step_source(step)
        estimates |= {"k": k, "source_over_sense": source, "dut_over_sense": k - 1,
                      "drive_step": step.drive_fit.settled_step}
        if abs(k - 1) <= UNCOMPARED_RATIO:
            loop = source + k if source > 0 else None
            why.append(f"k = {settled} lies within {100 * UNCOMPARED_RATIO:g} % of 1, the most two channels not "
                       "compared with each other may differ by: the coil's DCR is below what they can show here, "
                       "so the sense resistor is kept; compare the channels (wavefit calibrate channels) or "
                       "take the DCR from an ohmmeter")
        elif k > 1 and source > 0:
            loop = source + k
            if not K_LOW <= k <= K_HIGH:
                factor = (k - 1) / (K_TARGET - 1)
                why.append(f"k = {settled} lies outside {K_LOW:g}..{K_HIGH:g}: "
                           f"a sense resistor about {factor:.3g} times this one gives k near {K_TARGET:g}")
            else:
                why.append(f"k = {settled} lies inside {K_LOW:g}..{K_HIGH:g}: "
                           "keep the sense resistor")
        else:
            why.append(f"k = {k:.3g} and R_source/R_sense = {source:.3g} are not those of an RL loop: "
                       "the sense resistor is kept; check the roles")
    else:
        why.append(f"one channel steps ({step.sense.channel.header!r}): it is the sense; without a drive "
                   "channel the setup needs the generator's resistance and the DCR from an ohmmeter")
    parts, applied = _sense_part(rs, factor, loop, estimates, why)
    if step.drive is None:
        parts |= {"source_resistance": PLACEHOLDER + "the generator's output resistance and tolerance",
                  "dut_resistance": PLACEHOLDER + "the coil's DCR from an ohmmeter, with its uncertainty"}
    tau_next = tau if loop is None else tau * loop / (loop - 1 + applied)
    period = round_up_125(2 * HALF_PERIOD_TAUS * TAU_MARGIN * tau_next)
    interval = round_down_125(tau_next / (TAU_MARGIN * SAMPLES_PER_TAU))
    record = RECORD_PERIODS * period
    next_capture = {"sense_resistor_factor": applied, "tau": tau_next, "period": period,
                    "sample_interval": interval, "record_length": record,
                    "samples": float(math.ceil(record / interval))}
    if step.period is not None:
        why.append(f"the present period {eng(step.period, 's')} gives half periods of "
                   f"{0.5 * step.period / tau:.3g} tau; the rule asks at least {HALF_PERIOD_TAUS:g}")
    why.append(f"the present record holds {tau / dt:.3g} samples per tau; the rule asks at least "
               f"{SAMPLES_PER_TAU:g}")
    why.append(f"next capture: tau about {eng(tau_next, 's')} (planned for ±{100 * (TAU_MARGIN - 1):.0f} %); "
               f"period {eng(period, 's')} (half period {0.5 * period / tau_next:.3g} tau), "
               f"sample interval {eng(interval, 's')} or finer ({tau_next / interval:.3g} samples per tau, or more), "
               f"record {eng(record, 's')} or longer ({RECORD_PERIODS:g} periods, {next_capture['samples']:.0f} "
               "samples at that interval; a finer interval over the same time only lowers the uncertainty: keep the "
               "scope's longest record length)")
    scales = _step_scales(step, applied, loop, bits)
    why += [_scale_line(s) for s in scales]
    setup = {"method": "rl-step", "columns": columns, "parts": parts}
    return Suggestion("rl-step", columns, estimates, next_capture, scales, setup, tuple(why))


def _sense_part(rs: PartValue | None, factor: float, loop: float | None, estimates: dict,
                why: list[str]) -> tuple[dict[str, str], float]:
    """The ``sense_resistor`` entry and its factor on the present resistor; the estimates in
    ohms and henries are added when this capture's resistor is known. The proposed value is
    the nearest E12 value (IEC 60063); its tolerance is written as the same relative
    standard uncertainty as the present one's."""
    if rs is None:
        why.append("the present sense resistor is not given (--sense-resistor): values in ohms and L are "
                   "not known; fill in the sense resistor")
        text = "the sense resistor of this capture, value and tolerance" if factor == 1 else \
            f"a sense resistor about {factor:.3g} times the present one, value and tolerance"
        return {"sense_resistor": PLACEHOLDER + text}, factor
    if loop is not None:
        estimates |= {"R_loop": loop * rs.value, "L": estimates["tau"] * loop * rs.value,
                      "R_source": estimates["source_over_sense"] * rs.value}
        shown = abs(estimates["k"] - 1) > UNCOMPARED_RATIO
        if shown:
            estimates["DCR"] = estimates["dut_over_sense"] * rs.value
        dcr = (f"DCR about {eng(estimates['DCR'], 'Ω')}" if shown else
               f"DCR below about {eng(UNCOMPARED_RATIO * rs.value, 'Ω')} (not told from the channels' gains)")
        why.append(f"with R_sense = {eng(rs.value, 'Ω')}: L about {eng(estimates['L'], 'H')}, {dcr}, generator about "
                   f"{eng(estimates['R_source'], 'Ω')} (first estimates, probe loading neglected)")
    if factor == 1:
        return {"sense_resistor": rs.text}, factor
    value = nearest_e12(factor * rs.value)
    estimates["proposed_sense_resistor"] = value
    why.append(f"proposed sense resistor {eng(value, 'Ω')} (E12): fit it for the next capture and write it, with "
               "its own tolerance, in [parts]; a setup that named it beside a capture made with the present "
               "resistor read L that many times off, with nothing to show it")
    # the entry stays to be edited: which resistor the next capture is made with is the user's
    # to say (written as the proposal, the setup was used on the first capture, 10 Ω, and read
    # L 6.5 times too small, exit 0)
    return {"sense_resistor": f"{PLACEHOLDER}the sense resistor of the next capture, value and tolerance "
                              f"(about {value:g} ohm proposed; {rs.text} if kept)"}, value / rs.value


def _step_scales(step: StepRecord, factor: float, loop: float | None, bits: int) -> tuple[ScaleAdvice, ...]:
    """Expected spans of the next record. The sense settles between its two levels, scaled by
    the new resistor and the new loop current. The drive jumps by the generator's step ΔE
    (= drive step · R_loop/(R + R_sense)) at each switch and settles to its new level, so it
    spans from its high level less ΔE to its low level plus ΔE, and at least what the
    present record shows."""
    current = 1.0 if loop is None else loop / (loop - 1 + factor)
    sense = step.sense_fit
    scales = [scale_advice("sense", step.sense.channel, sense.low * factor * current,
                           sense.high * factor * current, bits)]
    if step.drive is not None and step.drive_fit is not None:
        drive = step.drive_fit
        if loop is not None:
            k = loop - step_source(step)
            generator = drive.settled_step * loop / k
            settled = generator * (k - 1 + factor) / (loop - 1 + factor)
        else:
            generator, settled = abs(drive.settled_step), drive.settled_step
        low, high = drive.low, drive.low + settled
        # the jumps the present record shows bound the next one's too: the estimate of the
        # generator's step from the channels' ratio fails where the coil's drop is within the
        # channels' gain difference (a coil of milliohms: 800 mV proposed for a ±1.8 V swing)
        seen = np.asarray(step.drive.channel.values, dtype=float)
        scales.append(scale_advice("drive", step.drive.channel, min(high - generator, low, float(np.nanmin(seen))),
                                   max(low + generator, high, float(np.nanmax(seen))), bits))
    return tuple(scales)


def step_source(step: StepRecord) -> float:
    """R_source / R_sense of the present capture: −C_drive/C_sense, the ratio of the two
    channels' exponentials (drive − D_f = −R_source·(i − i_f), docs/method-rl-step.md), the
    median over the windows whose sense exponential is at least a tenth of the sense step;
    NaN when none is."""
    assert step.drive_fit is not None
    ratios = -step.drive_fit.coefficients / step.sense_fit.coefficients
    big = np.abs(step.sense_fit.coefficients) > 0.1 * abs(step.sense_fit.settled_step)
    return float(np.median(ratios[big])) if big.any() else math.nan


def _ring_suggestion(capture: Capture, ring: RingRecord, bits: int) -> Suggestion:
    header = ring.channel.header
    columns = _time_column(capture) | {"tank": header}
    period = 1.0 / ring.f0
    decay_time = 1.0 / ring.alpha
    interval = round_down_125(period / RING_SAMPLES_PER_PERIOD)
    record = round_up_125(RING_RECORD_DECAYS * decay_time)
    why = [f"method lc-ring: {header!r} rings and decays (a damped sinusoid leaves "
           f"{100 * ring.residual_fraction:.2g} % of its amplitude as residual; envelope falls "
           f"{ring.decay_factor:.3g} times in the fit window)",
           f"f0 = {eng(ring.f0, 'Hz')}, decay time 1/alpha = {eng(decay_time, 's')}, Q as recorded "
           f"{ring.quality_factor:.3g}",
           f"the present record holds {period / capture.sample_interval:.3g} samples per period; "
           f"next capture: sample interval {eng(interval, 's')} or finer ({period / interval:.3g} samples per period, "
           f"at least {RING_SAMPLES_PER_PERIOD:g}), record {eng(record, 's')} or longer after the excitation "
           f"(at least {RING_RECORD_DECAYS:.2g} decay times: the envelope falls to 1 %)"]
    y = np.asarray(ring.channel.values, dtype=float)
    offset = float(ring.ring.fit["offset"])
    reach = max(ring.ring.amplitude, float(np.max(np.abs(y - offset))))
    scales = (scale_advice("tank", ring.channel, offset - reach, offset + reach, bits),)
    why += [_scale_line(s) for s in scales]
    estimates = {"f0": ring.f0, "alpha": ring.alpha, "Q": ring.quality_factor,
                 "samples_per_period": period / capture.sample_interval}
    next_capture = {"sample_interval": interval, "record_length": record,
                    "samples": float(math.ceil(record / interval))}
    setup = {"method": "lc-ring", "columns": columns,
             "parts": {"tank_capacitor": PLACEHOLDER + "the known capacitor across the coil, value and tolerance",
                       "stray_capacitance": PLACEHOLDER + "probe, fixture and the coil's own capacitance (an lc-sweep "
                                                            "measures the coil's), value and tolerance",
                       "parallel_load": PLACEHOLDER + "feed resistor parallel probe input resistance, value and tolerance"}}
    return Suggestion("lc-ring", columns, estimates, next_capture, scales, setup, tuple(why))


def _scale_line(s: ScaleAdvice) -> str:
    now = "not on a code grid" if s.code_step is None else \
        f"code step {eng(s.code_step, 'V')}, span {s.codes_used:.0f} codes"
    clip = "; CLIPPED now: the range must grow" if s.clipped else ""
    if s.keep_present:
        return (f"{s.role} {s.column!r}: now {now}; keep the present vertical setting: it shows the expected span "
                f"in about {s.codes_present:.0f} codes, more than the {eng(s.per_division, 'V')}/div that holds it "
                f"with headroom would ({s.codes_next:.0f})")
    return (f"{s.role} {s.column!r}: now {now}{clip}; set {eng(s.per_division, 'V')}/div "
            f"(full scale {eng(s.full_scale, 'V')}) centred at {eng(s.centre, 'V')}: "
            f"the expected span fills about {s.codes_next:.0f} codes")
