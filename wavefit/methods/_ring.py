"""The ring stage shared by lc-ring and lc-sweep: fit one capture's free ring with a damped
sinusoid and check the fit's assumptions (cycles above the noise, sampling, clipping, a
frequency that drifts with amplitude, a second oscillation in the residuals, the model check
of the early against the late part of the ring).

The measurement functions built on it are in :mod:`wavefit.methods.lc_ring` and
:mod:`wavefit.methods.lc_sweep`; the coil-loss correction Δ they share
(:func:`loss_correction`) is derived in ``docs/method-lc-ring.md``.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Mapping

import numpy as np
from scipy import ndimage

from ..errors import AnalysisRefused, NothingToMeasure, SetupError
from ..fit.damped_sine import DampedSineFit, fit_damped_sine, fit_ring, ring_window
from ..io.capture import Capture
from ..setup import Setup
from ..signal.clipping import CLIPPED_RUN, longest_run_at_extremes, model_exceeds_record, piles_up_at_limit
from ..signal.codes import record_levels
from ._model_check import MODEL_Z, ModelCheck, Variation
from ._ring_baseline import baseline_trend
from .base import Method
from ..fit_summary import FitSummary, merged_entries, optional_entry

COIL_LOSS = ("unknown", "series", "parallel")
#: |f0 early − f0 late| above this many combined standard uncertainties is flagged: the
#: model check's threshold, since the same two partial fits serve both.
DRIFT_Z = MODEL_Z
#: Budget inputs for the movement of w_d and of alpha between the early and the late part
#: of the ring, added when the model check fires (see ring_model_check).
MODEL_FREQUENCY, MODEL_DECAY = "model", "model_decay"

#: Fewest samples a ring fit is tried on: a damped sinusoid has five parameters and the noise
#: model needs samples beyond them (common practice).
MIN_SAMPLES = 32
#: Ring amplitude below this many noise rms is refused: the fit's start values and its linear
#: covariance are not trusted there (common practice for sinusoid fits).
MIN_AMPLITUDE_TO_NOISE = 5.0
#: Cycles above the noise (amplitude over 2 noise rms): fewer than MIN_CYCLES is refused (no
#: period is resolved), fewer than FEW_CYCLES is warned (frequency and damping then correlate
#: strongly and the linear interval is poor).
MIN_CYCLES, FEW_CYCLES = 1.0, 3.0
#: Samples per period: fewer than FEW_SAMPLES_PER_PERIOD is warned (the fit's Jacobian is coarse),
#: fewer than ALIAS_SAMPLES_PER_PERIOD (above half the Nyquist frequency) is refused: a ring there
#: may be an alias of a faster one, which the capture cannot tell (an lc-ring at 2.7 samples per
#: period gave L = 918 ± 11 µH for 330 µH behind a warning).
FEW_SAMPLES_PER_PERIOD, ALIAS_SAMPLES_PER_PERIOD = 10.0, 4.0


@dataclass(frozen=True, kw_only=True)
class DriftCheck:
    """f0 of the ring's early part against its late part, each fitted alone; every field but
    ``skipped`` is ``None`` when the parts could not be fitted.

    Attributes
    ----------
    f0_early, u_early
        f0 of the early part and its standard uncertainty, Hz.
    f0_late, u_late
        The same for the late part, Hz.
    z
        |f0_early − f0_late| over the standard uncertainty of the difference.
    skipped
        Why the parts could not be fitted, or ``None``.
    """

    f0_early: float | None = optional_entry()
    u_early: float | None = optional_entry()
    f0_late: float | None = optional_entry()
    u_late: float | None = optional_entry()
    z: float | None = optional_entry()
    skipped: str | None = optional_entry()


@dataclass(frozen=True)
class ResidualPeak:
    """A spectral line left in the ring fit's residuals.

    Attributes
    ----------
    frequency
        Its frequency, Hz.
    relative_energy
        Its energy over that of the fitted oscillation.
    """

    frequency: float
    relative_energy: float


@dataclass(frozen=True, kw_only=True)
class RingSummary(FitSummary):
    """What the ring stage says about one ring's fit (JSON ``fit`` of an lc-ring result).

    Attributes
    ----------
    model
        The waveform model fitted, in words.
    window_start_s, window_end_s
        Times of the fit window's first and last sample, s.
    cycles
        Periods of the ring in the fit window.
    cycles_above_noise
        Periods whose amplitude stands above twice the noise rms.
    samples_per_period
        Samples per period of the damped oscillation.
    amplitude_to_noise
        The ring's initial amplitude over the noise rms.
    drift_check
        f0 of the early part of the ring against the late part.
    model_check
        w_d and alpha of the early part against the late part (:mod:`wavefit.methods._model_check`).
    residual_peak
        A spectral line left in the residuals, or ``None`` (written as null).
    fit_details
        The ring fit's own summary (:meth:`wavefit.fit.result.FitResult.summary`: parameters,
        samples, degrees of freedom, noise model, diagnostics), written at this level.
    coil_loss
        lc-ring's option coil_loss (how the coil's loss is split); absent from lc-sweep's rings.
    """

    model: str
    window_start_s: float
    window_end_s: float
    cycles: float
    cycles_above_noise: float
    samples_per_period: float
    amplitude_to_noise: float
    drift_check: DriftCheck
    model_check: ModelCheck
    residual_peak: ResidualPeak | None
    fit_details: Mapping[str, Any] = merged_entries()
    coil_loss: str | None = optional_entry()


@dataclass(frozen=True)
class RingMeasurement:
    """One fitted ring with its diagnostics (``info``), ready for a measurement function."""

    ring: DampedSineFit
    time: np.ndarray
    data: np.ndarray
    unit: str
    info: RingSummary
    warnings: tuple[str, ...]

    @property
    def model_check(self) -> ModelCheck:
        """The ring's model check (early against late part)."""
        return self.info.model_check


def check_time_options(method: Method, setup: Setup) -> None:
    """Refuse a fit_start or fit_end that is not a time, or a fit_end not after fit_start,
    before any capture is read."""
    start, end = (method.time_option(setup, key, negative=True) for key in ("fit_start", "fit_end"))
    if start is not None and end is not None and not end > start:
        raise SetupError(f"{setup.source}: option fit_end ({end:.6g} s) must come after fit_start ({start:.6g} s)")


def coil_loss_option(method: Method, setup: Setup) -> str:
    value = str(method.option(setup, "coil_loss"))
    if value not in COIL_LOSS:
        raise SetupError(f"{setup.source}: option coil_loss = {value!r}; valid: {', '.join(COIL_LOSS)}")
    return value


def measure_ring(method: Method, capture: Capture, setup: Setup) -> RingMeasurement:
    """Fit the ring in ``capture`` and check the fit's assumptions."""
    channel = method.channel(capture, setup, "tank")
    t = np.asarray(capture.time, dtype=float)
    y = np.asarray(channel.values, dtype=float)
    if not np.all(np.isfinite(y)):
        raise AnalysisRefused(f"{capture.source}: the tank channel holds non-numeric or missing samples; "
                              "remove them or export the capture again")
    if y.size < MIN_SAMPLES:
        raise AnalysisRefused(f"{capture.source}: {y.size} samples is too few for a ring fit; record at least "
                              f"{MIN_SAMPLES}")
    noise = str(method.option(setup, "noise"))
    if noise not in ("auto", "white"):
        raise SetupError(f"{setup.source}: option noise = {noise!r}; valid: auto, white")
    start = _time_option(method, setup, "fit_start", t)
    stop = _time_option(method, setup, "fit_end", t)
    try:
        window = ring_window(y)  # (where the ring is: for each fit below and the fit_start check)
        ring = fit_ring(t, y, start=start, stop=stop, noise=noise, window=window)
        clipped = _clipped(ring, y, channel.levels.step)
        after = _after_clipping(ring, y) if clipped and start is None else None
        if after is not None:
            ring = fit_ring(t, y, start=after, stop=ring.stop, noise=noise, window=window)
            clipped = _clipped(ring, y, channel.levels.step)
    except (ValueError, FloatingPointError, np.linalg.LinAlgError) as exc:
        held = max(longest_run_at_extremes(y))
        # a run held at an extreme that is not the record's resting level (its median: a quiet
        # baseline on one code, or a dead channel, is the extreme of a ring that stays above it)
        resting = float(np.median(y))
        at_rest = resting in (float(np.min(y)), float(np.max(y)))
        clipped_hint = (f"; the record is held at its extreme value for {held} samples in a row: the ring is "
                        "probably clipped (set the vertical scale so the whole ring fits on screen)"
                        if held >= CLIPPED_RUN and not at_rest else "")
        raise NothingToMeasure(f"{capture.source}: no damped oscillation could be fitted ({exc}); "
                              f"check the [columns] tank entry and that the record holds the ring{clipped_hint}",
                              str(capture.source)) from None
    warnings = [f"fit: {w}" for w in ring.fit.warnings]
    if start is not None:
        warnings += [w for w in (_before_onset(t, window.onset, start),) if w]
    clipping = ("" if after is None else
                f"the ring is clipped at the converter's limit until {t[after - 1]:.6g} s: the fit starts after it, "
                "leaving out the larger early cycles (set the vertical scale so the whole ring fits on screen)")
    if clipping:
        warnings.append(clipping)
    try:
        info = _checks(ring, t, y, clipped, capture.source, warnings, noise,
                       window_given=start is not None or stop is not None)
    except AnalysisRefused as exc:
        if not clipping:
            raise
        raise AnalysisRefused(f"{exc}; {clipping}") from None
    trend = baseline_trend(ring, y, noise)
    if trend is not None:
        warnings.append(trend.warning(channel.unit or "(unit of the record)"))
    return RingMeasurement(ring, t, y, channel.unit, info, tuple(warnings))


#: A fit_start this many samples or more before the ring's onset is warned. The onset is the
#: first sample off the pre-trigger baseline by more than 4 noise deviations or 2 % of the
#: peak (:func:`wavefit.fit.damped_sine.ring_window`), at most a sample late; a window from
#: before it fits a ring to samples of the baseline (two samples early moved Q by 2 standard
#: uncertainties, 10 µs early by 1.8, with the model check passing: a fault campaign's rings).
EARLY_START_SAMPLES = 2


def _before_onset(t: np.ndarray, onset: int, start: int) -> str | None:
    """A warning when a given fit_start (sample ``start``) lies before the ring's ``onset``
    (:attr:`~wavefit.fit.damped_sine.RingWindow.onset`)."""
    if onset - start < EARLY_START_SAMPLES:
        return None
    return (f"fit_start ({t[start]:.6g} s) is {onset - start} samples before the ring's onset ({t[onset]:.6g} s, "
            "where the record leaves its baseline): the samples before it are no part of the ring and bias the "
            "decay, Q and R; set fit_start at or after the onset, or leave it out")


def _clipped(ring: DampedSineFit, y: np.ndarray, code: float | None) -> bool:
    """Whether the ring's fitted window is clipped: a run at its extreme where the fitted ring
    goes beyond it, or noise piled up at the extreme (:mod:`wavefit.signal.clipping`); ``code``
    is the record's converter step (the window's own where the record as a whole looked
    continuous, a strong early ring on a fine grid, but the window may sit on a grid)."""
    seg_y = y[ring.start:ring.stop]
    sigma = ring.fit.noise_sigma["tank"]
    window_code = code if code is not None else record_levels(seg_y).step
    return ((max(longest_run_at_extremes(seg_y)) >= CLIPPED_RUN and model_exceeds_record(seg_y, ring.on_window(), sigma))
            or piles_up_at_limit(seg_y, sigma, window_code))


def _after_clipping(ring: DampedSineFit, y: np.ndarray) -> int | None:
    """Where a clipped ring's window should start (the sample after the last one at a clipped
    extreme: a ring decays, so its clipped peaks come first), or None when no extreme holds a
    pile of samples, or when too little of the window would be left (:data:`MIN_SAMPLES`)."""
    seg_y = y[ring.start:ring.stop]
    held = np.zeros(seg_y.size, dtype=bool)
    for extreme in (seg_y.max(), seg_y.min()):
        at = seg_y == extreme
        if np.count_nonzero(at) >= CLIPPED_RUN:  # a pile of samples at one value: the limit
            held |= at
    if not held.any():
        return None
    after = ring.start + int(np.flatnonzero(held)[-1]) + 1
    return after if ring.stop - after >= MIN_SAMPLES else None


def loss_correction(alpha_c: Any, g: Any, coil_loss: str, split: Any = None) -> Any:
    """Δ = w0² − 1/(L·C) for the coil-loss assumption (see the module docstring)."""
    if coil_loss == "parallel":
        return 0.0
    if coil_loss == "series":
        return 2.0 * alpha_c * g
    nominal_g = float(getattr(g, "nominal_value", g))
    nominal_a = float(getattr(alpha_c, "nominal_value", alpha_c))
    d_max = (g + 2.0 * alpha_c) ** 2 / 4.0 if nominal_g <= 2.0 * nominal_a else 2.0 * alpha_c * g
    return split * d_max


def _checks(ring: DampedSineFit, t: np.ndarray, y: np.ndarray, clipped: bool, source: str,
            warnings: list[str], noise: str, window_given: bool = False) -> RingSummary:
    """The fit's diagnostics with its model check (appending to ``warnings``); ``clipped`` is
    :func:`_clipped` of the ring, found once by the caller; ``window_given`` whether fit_start
    or fit_end set the window (a ring too weak for its noise may be a window that missed it:
    one set in the pre-trigger baseline, or an automatic one on a ring a few times the noise,
    which fit_start then measured)."""
    dt = ring.sample_interval
    sigma = ring.fit.noise_sigma["tank"]
    amp = ring.amplitude
    spp = 2 * math.pi / (ring.w_d * dt)
    window = ("check fit_start and fit_end: the window they set may hold little of the ring" if window_given
              else "or the automatic window missed the ring: set fit_start (and fit_end) around it")
    if not amp > MIN_AMPLITUDE_TO_NOISE * sigma:
        raise NothingToMeasure(f"{source}: the ring's amplitude in the fitted window is {amp / sigma:.1f} times the "
                              f"noise rms; no trustworthy fit below {MIN_AMPLITUDE_TO_NOISE:g} (raise the excitation "
                              f"or average captures; {window})", source)
    n_visible = math.log(amp / (2.0 * sigma)) / (ring.alpha * dt) if ring.alpha > 0 else math.inf
    visible = min(n_visible, ring.stop - ring.start) / spp
    if visible < MIN_CYCLES:
        raise NothingToMeasure(f"{source}: only {visible:.1f} cycles stand above the noise; a ring fit needs "
                              f"at least {FEW_CYCLES:g} (use a smaller feed-resistor load or less damping; {window})",
                              source)
    if visible < FEW_CYCLES:
        warnings.append(f"too few cycles: {visible:.1f} stand above the noise ({FEW_CYCLES:g} or more are needed "
                        "for a reliable frequency and damping)")
    if spp < FEW_SAMPLES_PER_PERIOD:
        warnings.append(f"{spp:.1f} samples per period, fewer than {FEW_SAMPLES_PER_PERIOD:g}: "
                        "sample faster")
    if spp < ALIAS_SAMPLES_PER_PERIOD:
        raise AnalysisRefused(f"{source}: {spp:.1f} samples per period put the ring at {100 * 2 / spp:.0f} % of "
                              "the Nyquist frequency, where a faster ring sampled too slowly looks the same (an "
                              "alias): f0 and L cannot be told from it; sample at least "
                              f"{FEW_SAMPLES_PER_PERIOD:g} times per period")
    seg_y = y[ring.start:ring.stop]
    if clipped:
        warnings.append("the trace is clipped at the converter's limit: change the vertical scale so the "
                        "whole ring fits on screen")
    halves = _halves(ring, y, noise)
    drift = _drift_check(halves)
    if drift.z is not None and drift.z > DRIFT_Z:
        warnings.append(
            f"frequency changes with amplitude: f0 = {drift.f0_early:.7g} Hz early and "
            f"{drift.f0_late:.7g} Hz late in the ring ({drift.z:.1f} standard uncertainties apart): "
            "core nonlinearity? repeat with a smaller excitation")
    check = ring_model_check(ring, halves)
    if not check.adequate:
        warnings.append(check.warning("damped-sinusoid model", "damping or frequency that changes with "
                                      "amplitude: core loss or saturation?"))
    span = fast_length(min(seg_y.size, RESIDUAL_SPECTRUM_SAMPLES))
    oscillation = ring.on_window(span)
    oscillation -= ring.fit["offset"]
    energy = float(oscillation @ oscillation)
    del oscillation
    spur = _residual_peak(ring.fit.residuals[:span], energy, dt)
    if spur is not None:
        warnings.append(residual_line_warning(spur, ring.fit["w_d"] / (2 * math.pi), 1.0 / (span * dt)))
    return RingSummary(model=ring.fit.model, window_start_s=float(t[ring.start]),
                       window_end_s=float(t[ring.stop - 1]), cycles=float(ring.cycles),
                       cycles_above_noise=float(visible), samples_per_period=float(spp),
                       amplitude_to_noise=float(amp / sigma), drift_check=drift, model_check=check,
                       residual_peak=spur, fit_details=ring.fit.summary())


def _halves(ring: DampedSineFit, y: np.ndarray, noise: str) -> tuple[DampedSineFit, DampedSineFit] | str:
    """The early and the late part of the ring fitted separately (each from the whole fit's
    parameters carried to its first sample), or why they could not be."""
    n = ring.stop - ring.start
    dt = ring.sample_interval
    x = ring.fit.values.copy()
    x[3:] *= dt
    spp = 2 * math.pi / x[4]
    split = int(min(n / 2, 1.5 / x[3])) if x[3] > 0 else n // 2
    if split < max(2 * spp, 20) or n - split < max(2 * spp, 20):
        return "fewer than 2 cycles or 20 samples in the early or late part"
    e = math.exp(-x[3] * split)
    c, s = math.cos(x[4] * split), math.sin(x[4] * split)
    late0 = np.array([x[0], e * (x[1] * c + x[2] * s), e * (x[2] * c - x[1] * s), x[3], x[4]])
    parts = []
    for lo, hi, x0 in ((0, split, x), (split, n, late0)):
        seg = y[ring.start + lo:ring.start + hi]
        try:
            parts.append(fit_damped_sine(np.arange(lo, hi) * dt, seg, x0, dt, noise=noise, close=True))
        except (ValueError, FloatingPointError, np.linalg.LinAlgError):
            return "a partial fit failed"
    return parts[0], parts[1]


def _drift_check(halves: tuple[DampedSineFit, DampedSineFit] | str) -> DriftCheck:
    """Compare f0 of the early and the late part of the ring."""
    if isinstance(halves, str):
        return DriftCheck(skipped=halves)
    parts = []
    for sub in halves:
        g = np.array([sub.alpha, sub.w_d]) / sub.w0
        _, cov = sub.fit.subset(("alpha", "w_d"))
        parts.append((sub.w0 / (2 * math.pi), math.sqrt(max(float(g @ cov @ g), 0.0)) / (2 * math.pi)))
    (f_e, u_e), (f_l, u_l) = parts
    u = math.hypot(u_e, u_l)
    return DriftCheck(f0_early=f_e, u_early=u_e, f0_late=f_l, u_late=u_l,
                      z=abs(f_e - f_l) / u if u > 0 else math.inf)


def ring_model_check(ring: DampedSineFit, halves: tuple[DampedSineFit, DampedSineFit] | str) -> ModelCheck:
    """Model check of a ring: w_d and alpha of its early and late part (disjoint windows, so
    the variance of a difference is the sum of theirs); a significant difference enters the
    budget as input ``model`` on w_d or ``model_decay`` on alpha (see
    :mod:`wavefit.methods._model_check`)."""
    varied = "the ring's early part against its late part, each fitted alone"
    if isinstance(halves, str):
        return ModelCheck(varied, skipped=halves)
    early, late = halves
    variations = []
    for name, label, unit in (("w_d", MODEL_FREQUENCY, "rad/s"), ("alpha", MODEL_DECAY, "1/s")):
        u = math.hypot(early.fit.stderr(name), late.fit.stderr(name))
        z = abs(early.fit[name] - late.fit[name]) / u if u > 0 else math.inf
        variations.append(Variation(name, label, unit, ring.fit[name],
                                    {"early": early.fit[name], "late": late.fit[name]}, z))
    return ModelCheck(varied, tuple(variations))


#: The residuals' spectrum is taken over at most this many samples from the ring's start (2 M),
#: which resolve any line that matters, cut to the longest length whose prime factors are 2, 3
#: and 5 (:func:`fast_length`): a transform of a length with a large prime factor takes ten to
#: thirty times longer (Bluestein's algorithm: 234 ms against 9 ms at 10⁶ samples). The
#: samples left off are the end of the window (at most 4 % of a window of 10⁴ samples or more,
#: 10 % of one of 64 to 10⁴; shorter ones are not searched), where an automatic window's ring
#: has decayed to the noise. (Newer SciPy gives this length as ``scipy.fft.prev_fast_len(n,
#: real=True)``; the oldest SciPy the project supports does not.)
RESIDUAL_SPECTRUM_SAMPLES = 1 << 21
#: A residual line within this many spectral bins of the ring's own frequency is the ring's
#: misfit, not a second oscillation (a line's peak sits within a bin or two of its frequency
#: once the window leaks it; a ring on few converter codes left one at its own frequency).
OWN_LINE_BINS = 3


def fast_length(n: int) -> int:
    """The largest length of at most ``n`` (≥ 1) whose only prime factors are 2, 3 and 5: the
    lengths the real FFT handles fastest (scipy.fft.next_fast_len's "regular" numbers, from
    below)."""
    best = 1
    five = 1
    while five <= n:
        odd = five
        while odd <= n:
            best = max(best, odd << ((n // odd).bit_length() - 1))
            odd *= 3
        five *= 5
    return best


def residual_line_warning(spur: ResidualPeak, ring_frequency: float, bin_width: float) -> str:
    """The warning for a line left in the residuals: the ring's own misfit when it lies within
    ``OWN_LINE_BINS`` spectral bins of the ring's frequency, else a second oscillation."""
    if abs(spur.frequency - ring_frequency) <= OWN_LINE_BINS * bin_width:
        return (f"the residuals hold the ring's own frequency ({spur.relative_energy:.1e} of its energy): the "
                "damped sinusoid does not follow the ring exactly (a ring on few converter codes, or damping "
                "or frequency that changes with amplitude)")
    return (f"a second oscillation at {spur.frequency:.4g} Hz ({spur.relative_energy:.1e} of the ring's energy) "
            "remains in the residuals: second mode, beat or pickup")


def _residual_peak(r: np.ndarray, ring_energy: float, dt: float) -> ResidualPeak | None:
    """A spectral line in the residuals well above the local noise floor and above −30 dB of
    the ring's energy (``ring_energy``, the sum of squares of the fitted oscillation about its
    offset over the same samples; common practice for spotting a spurious tone), or None.

    Lines closer than 8 bins to DC (fewer than 8 cycles in the window) are not searched:
    there correlated noise rises steeply towards low frequency, the running median lags
    behind it, and what remains is drift rather than an oscillation."""
    n = r.size
    if n < 64:
        return None
    spec = np.abs(np.fft.rfft(r - r.mean()))
    spec *= spec
    floor = ndimage.median_filter(spec, size=31, mode="nearest") / math.log(2.0)
    lowest = 8
    ratio = spec[lowest:] / np.maximum(floor[lowest:], 1e-300)
    k = lowest + int(np.argmax(ratio))
    if ratio[k - lowest] < math.log(spec.size) + 20.0:
        return None
    band = slice(max(k - 2, 0), k + 3)
    energy = float(np.sum(np.clip(spec[band] - floor[band], 0, None))) * 2.0 / n
    relative = energy / max(ring_energy, 1e-300)
    if relative < 1e-3:
        return None
    return ResidualPeak(k / (n * dt), relative)


def _time_option(method: Method, setup: Setup, key: str, t: np.ndarray) -> int | None:
    """The sample where the time option ``key`` (an instant; before the trigger allowed) falls."""
    seconds = method.time_option(setup, key, negative=True)
    if seconds is None:
        return None
    if not t[0] <= seconds <= t[-1]:
        raise SetupError(f"{setup.source}: option {key} = {method.option(setup, key)!r} lies outside the "
                         f"record ({t[0]:.6g} s to {t[-1]:.6g} s)")
    return int(np.searchsorted(t, seconds))
