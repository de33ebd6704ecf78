"""Edge windows of the rl-step method: where each window starts and ends, how precisely its
start is placed, and the late-start refit of the model check.

The estimators built on the windows are in their own modules, chosen in
:mod:`wavefit.methods._rl_estimators`.

Used by :mod:`wavefit.methods.rl_step`; see ``docs/method-rl-step.md``.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisRefused
from ..fit.exponential import ProjectedProblem, WindowChannel, curve_information, decay, window_model
from ..fit.white_projection import white_window_tau
from ..signal.clipping import clipped_where_fitted, leading_held
from ..signal.edge_lattice import periodic_instants
from ..signal.edges import Edge, placement_deviation
from ._rl_transient import Transient, edge_transient

@dataclass(frozen=True)
class Window:
    """Samples start:stop fitted for one edge (state entered by ``direction``)."""

    edge: Edge
    t0: float
    start: int
    stop: int
    #: standard deviation of t0 (s) when it was placed from the sense trace itself
    t0_deviation: float = math.nan


#: Least start margin (samples) after an instant placed from correlated noise (see start_margin)
MARGIN_SAMPLES = 5.0


def start_margin(deviation: float, dt: float) -> float:
    """Time (s) from an instant placed from the sense trace in correlated noise to its window's start.

    max(u_s, min(5 samples, 15·u_s)) for the instant's standard deviation u_s: one deviation
    at low SNR, where a later start only costs information and adds the small-sample bias of
    a nonlinear fit whose amplitude shrinks; at least five samples from about u_s = 1/3
    sample, because the noise that placed the instant stays correlated with the first samples
    after it for several samples; and falling to nothing as u_s does (an exactly placed edge
    needs no margin). The constants are measured, not derived (docs/estimator-quality.md,
    "Where the window starts": one step at 20–30 dB in four correlated noises, bias of tau
    +0.11…+0.16 → −0.03…+0.11 standard errors with efficiency up to 1.6 times higher, against
    the three deviations used before).
    """
    return max(deviation, min(MARGIN_SAMPLES * dt, 15.0 * deviation))


#: Times a window's start is moved past samples held at a converter limit (the stretch seen
#: after each refit can end later where the signal lingers at the limit).
HELD_STARTS = 3


def after_held_starts(t, sense, drive, windows, fits, facts, noise, source, fit_window):
    """Each window whose channel is clipped where it is fitted
    (:func:`wavefit.signal.clipping.clipped_where_fitted`) at its start, where a step's
    overshoot leaves a screen set for the settled levels, starts after the held stretch
    (:func:`~wavefit.signal.clipping.leading_held`) and after the samples where the fitted
    curve is still near the limit (:meth:`~wavefit.signal.clipping.Extremes.near_limit`:
    noise carries them onto it now and then), and is fitted again, up to
    :data:`HELD_STARTS` times: the samples on screen follow the exponential, the held ones
    do not. A window still clipped after that, or left too short, is left out: the others'
    samples are on screen (a record that ends just after a clipped edge was refused whole).

    Returns the windows, their fits, the channels found clipped (their roles: a window that
    such a channel spends whole at its limit cannot be told from a still trace, and is
    refused by the final check), how many windows start later and how many are left out.

    Raises
    ------
    AnalysisRefused
        When every window is clipped."""
    channels = {group: y for group, y in (("sense", sense), ("drive", drive)) if y is not None}
    out_w, out_f, clipped, moved, dropped = [], [], set(), 0, 0
    for w, f in zip(windows, fits):
        here: set[str] = set()
        start = w.start
        for attempt in range(HELD_STARTS + 1):
            seg = slice(w.start, w.stop)
            curves = {group: window_model(f, group, t[seg]) for group in channels}
            now = {group for group, y in channels.items()
                   if clipped_where_fitted(facts[group], y[seg], curves[group], f.noise_sigma[group])}
            here |= now
            skip = max((max(leading_held(channels[g][seg], facts[g].limits), facts[g].near_limit(channels[g][seg],
                                                                                                  curves[g]))
                        for g in here), default=0)
            if skip == 0 or attempt == HELD_STARTS or w.stop - (w.start + skip) < MIN_WINDOW_SAMPLES:
                break
            w = dataclasses.replace(w, start=w.start + skip)
            f = fit_window(t, sense, drive, w, noise, source)
        clipped |= here
        if now:  # the loop ends on the window it last judged: still clipped there
            dropped += 1
            continue
        moved += w.start != start
        out_w.append(w)
        out_f.append(f)
    # a channel held at a limit through a whole window, where its noise in the other windows
    # spans more than a code, cannot have sat still there: it was off screen (a settled level
    # beyond the screen)
    for group, y in channels.items():
        whole = [facts[group].held_throughout(y[w.start:w.stop]) for w in out_w]
        others = [f.noise_sigma[group] for f, held in zip(out_f, whole) if not held]
        code = facts[group].code or facts[group].smallest_gap or 0.0
        if any(whole) and others and code and float(np.median(others)) > code:
            clipped.add(group)
            dropped += sum(whole)
            out_w = [w for w, held in zip(out_w, whole) if not held]
            out_f = [f for f, held in zip(out_f, whole) if not held]
    if not out_w:
        group = sorted(clipped)[0]
        raise AnalysisRefused(f"{source}: the {group} trace is clipped where it is fitted in every edge window (held "
                              "at the converter's limit while the signal moves), so tau and the levels cannot be "
                              f"trusted; set the {group} channel's volts per division and offset so that the whole "
                              "step stays on screen")
    return out_w, out_f, clipped, moved, dropped


def off_screen_baseline(sense, drive, stop: int, first: "Window", first_fit, facts, cut_start: int,
                        dt: float, clipped: set[str]) -> set[str]:
    """The channels whose pre-edge baseline (the first ``stop`` samples) was off screen: held at
    a converter limit throughout, and the first window, which leaves that level, either
    started on samples held at that same limit (:func:`after_held_starts` moved its start on
    from ``cut_start``, where it was cut) or has its fitted curve (``first_fit``) start at the
    switching instant beyond that limit by more than :data:`OFF_SCREEN_CODES` codes and more
    than the curve moves in :data:`OFF_SCREEN_SAMPLES` samples there (``dt`` the sample
    interval): the instant is known to about a sample, and an exponential extrapolated back
    before its start runs on past the level it left. The constant fitted to such a baseline is
    the screen's edge (a baseline above the screen's top read as the high level set the sense
    step 5–50 % short, and L, R and I_final wrong beyond their uncertainty, in a trial's
    clipped captures). A quiet level that merely is the record's extreme value (a settled state
    read on one code) is left at once by the trace and by the curve, and is kept. Without a
    drive channel the first window's instant comes from the clipped trace itself, so neither
    test can tell there: a sense level held at a limit of a trace found ``clipped`` in its
    windows is taken as off screen (only I_final and E rest on it)."""
    out = set()
    for group, y in (("sense", sense), ("drive", drive)):
        if y is None or stop <= 0 or not facts[group].held_throughout(y[:stop]):
            continue
        low, high = facts[group].limits
        held = float(y[0])
        code = facts[group].code or facts[group].smallest_gap or 0.0
        curve = window_model(first_fit, group, np.array([first.t0, first.t0 + OFF_SCREEN_SAMPLES * dt]))
        beyond = float(curve[0]) - high if held == high else low - float(curve[0])
        reach = max(OFF_SCREEN_CODES * code, abs(float(curve[1] - curve[0])))
        left_held = first.start > cut_start and float(y[cut_start]) == held
        placed_by_clipped_trace = drive is None and group in clipped
        if left_held or (code > 0 and beyond > reach) or placed_by_clipped_trace:
            out.add(group)
    return out


#: A pre-edge level counts as off screen when the first window's curve starts beyond the limit
#: the baseline is held at by more than this many codes (a level on screen reads within half a
#: code of its own) ...
OFF_SCREEN_CODES = 2
#: ... and by more than the curve moves in this many samples at the switching instant (the
#: instant's error: clean one-step records overshot by up to 2.4 codes, a curve moving 4.6 codes
#: a sample; the trial's clipped levels lay 10–200 codes beyond).
OFF_SCREEN_SAMPLES = 2


#: Fewest samples a window is fitted on (as the windows are cut, rl_step's _windows).
MIN_WINDOW_SAMPLES = 8


def settle_starts(t, sense, drive, windows, fits, baseline, noise, source, fit_window, correlated: bool = False):
    """Start each window as early as the data allow, without admitting samples that do not
    follow the exponential, and end it before the next switching instant.

    Without a drive channel the switching instant t0 is re-estimated as the instant where
    the fitted exponential leaves the curve of the state before (the previous window's
    fit, or the pre-edge baseline), and windows are cut again from these instants; each
    window then ends three standard deviations of the next instant, σ·tau/|step|, before
    it (the samples there only repeat the settled level). In ``correlated`` noise each
    window also starts :func:`start_margin` after its instant: an instant placed early by
    noise would otherwise admit samples from before the edge, and the noise that placed it
    lifts the first samples onto the exponential, which biased tau upward and made it
    scatter beyond its stated uncertainty; and with four or more edges the instants are
    first fitted to the drive's period (:func:`wavefit.signal.edge_lattice.periodic_instants`)
    when they fit it. The information on tau of an
    exponential window falls as exp(−2·s/tau) with the time s left out at its start (the
    record from s on is the same model with a smaller amplitude), so each early sample
    matters. Then the window is refitted with its start moved later by
    Δ = max(4 samples, tau/10); if tau changes by more than 3 standard deviations of the
    difference, var(τ_late) − var(τ_early) (the Hausman test of nested estimators:
    J. A. Hausman, Econometrica 46 (1978) 1251–1271), the early samples are biased and the
    later start is kept, up to three times. Before that, with a drive channel, every window
    starts after a transient that follows each edge on either channel
    (:func:`~wavefit.methods._rl_transient.edge_transient`: a probe's ringing moves the drive's
    amplitude, and so L, while tau hardly moves).

    Returns the windows, their fits, how many windows start later by the test, the fitted
    period (None when the lattice was not used), and the transient found
    (:class:`~wavefit.methods._rl_transient.Transient`) with the count of windows started after
    it.
    """
    dt = float(t[1] - t[0])
    windows, fits = list(windows), list(fits)
    period = None
    if drive is None:
        t0s, deviations = [], []
        for k, (w, f) in enumerate(zip(windows, fits)):
            found = _switch_instant(t, w, f, windows[k - 1] if k else None, fits[k - 1] if k else None, baseline)
            t0s.append(w.t0 if found is None else found)
            # the step at the switching instant, the fitted coefficient extrapolated back to it
            step = f["coef_sense"] * math.exp(-(t[w.start] - w.t0) / f["tau"])
            deviations.append(placement_deviation(f.noise_sigma["sense"], f["tau"], step))
        if correlated:
            lattice = periodic_instants(np.array(t0s), np.array(deviations),
                                        np.array([w.edge.direction for w in windows]))
            if lattice is not None:
                t0s, deviations, period = list(lattice.instants), list(lattice.deviations), lattice.period
        for k, w in enumerate(windows):
            margin = start_margin(deviations[k], dt) if correlated else 0.0
            start = int(np.searchsorted(t, t0s[k] + (t[w.start] - w.t0) + margin))
            stop = w.stop
            if k + 1 < len(windows) and windows[k + 1].start - w.stop <= max(10, int(0.5 * fits[k]["tau"] / dt)):
                # the next window follows the next edge (no edge was left out in between): end three
                # deviations of the next instant before it
                stop = int(np.searchsorted(t, t0s[k + 1] - max(2.0 * dt, 3.0 * deviations[k + 1])))
            if (start, stop) != (w.start, w.stop) and stop - start >= MIN_WINDOW_SAMPLES:
                windows[k] = Window(w.edge, t0s[k], start, stop, deviations[k])
                fits[k] = fit_window(t, sense, drive, windows[k], noise, source)
            else:
                windows[k] = dataclasses.replace(w, t0_deviation=deviations[k])
    transient = Transient() if drive is None else edge_transient(windows, fits, ("sense", "drive"), dt)
    moved_after_transient = 0
    if transient.samples:
        for k, w in enumerate(windows):
            if w.stop - (w.start + transient.samples) >= MIN_WINDOW_SAMPLES:
                windows[k] = dataclasses.replace(w, start=w.start + transient.samples)
                fits[k] = fit_window(t, sense, drive, windows[k], noise, source)
                moved_after_transient += 1
    out_w, out_f, late = [], [], 0
    for w, f in zip(windows, fits):
        step = max(4, int(math.ceil(0.1 * f["tau"] / dt)))
        moved = False
        for _ in range(3):
            start = w.start + step
            if w.stop - start < max(16, 4 * step):
                break
            w2 = dataclasses.replace(w, start=start)  # keeps the instant and its deviation
            foreseen = projected_shift(t, sense, drive, w, f, start)
            if foreseen is not None and foreseen < SCREEN_Z:
                break  # a refit would not move the start (SCREEN_Z)
            f2 = fit_window(t, sense, drive, w2, noise, source)
            var_d = f2.stderr("tau") ** 2 - f.stderr("tau") ** 2
            if var_d > 0 and (f2["tau"] - f["tau"]) ** 2 / var_d > 9.0:
                w, f, moved = w2, f2, True
            else:
                break
        late += moved
        out_w.append(w)
        out_f.append(f)
    return out_w, out_f, late, period, (transient, moved_after_transient)


#: The later start of :func:`settle_starts` is refitted only when tau projected onto it moves
#: by at least this many standard deviations of the difference; the test keeps the later
#: start beyond 3. The projection (:func:`projected_shift`) uses the full window's white
#: noise model, the refit its own: they differed by at most 0.28 (99 % within 0.07) over
#: 1,600 later starts of records with and without a ring, and by up to 0.6 where the refit
#: of a short window turned to an AR model (1–2 % of 160-sample windows), so a margin of 1.5
#: deviations leaves the decisions as they were (tests/test_settle_screen.py).
SCREEN_Z = 1.5


def projected_shift(t, sense, drive, w, f, start: int) -> float | None:
    """How far tau moves, in standard deviations of the difference, when window ``w`` (fit
    ``f``) starts at ``start`` instead, foreseen without refitting; None where it cannot be.

    tau of the later window is found by variable projection (for each tau the levels and
    amplitudes are linear: G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10 (1973)
    413–432; Gauss–Newton steps from the full window's tau,
    :meth:`~wavefit.fit.exponential.ProjectedProblem.minimum`), each channel weighed by the
    full fit's noise model; its shift counts within a reach set by the difference's
    deviation as the sense channel's information foresees it (:func:`_tau_information`).
    The difference's variance is var(τ_late) − var(τ_full), the first from the linearised
    information of the later window with each channel weighed by its own scatter about the
    later curve, as the refit weighs it: the Hausman test's
    statistic (J. A. Hausman, Econometrica 46 (1978) 1251–1271). Only windows whose full fit
    is white and on no code grid are foreseen: an AR model or a code likelihood estimated on
    the full window changes the later one's variance by more than :data:`SCREEN_Z` allows
    for. The reach is two deviations (as the sense channel foresees them) beyond the screen;
    a tau found at its edge or beyond returns infinity, as does a later window whose variance
    is foreseen no larger (the test then refits and decides), and steps that do not converge
    return None.
    """
    if not _is_white(f):
        return None
    tau, var_full = f["tau"], f.stderr("tau") ** 2
    ratio = _tau_information(t, w, f, w.start) / _tau_information(t, w, f, start)
    deviation = math.sqrt(var_full * (ratio - 1.0)) if ratio > 1.0 else 0.0
    if not (deviation > 0 and math.isfinite(deviation)) or not deviation < 0.25 * tau:
        return None
    later = [y[start:w.stop] for y in (sense, drive) if y is not None]
    variances = [f.whitening[group].sigma_e ** 2 for group, y in (("sense", sense), ("drive", drive)) if y is not None]
    problem = ProjectedProblem([WindowChannel(f"c{k}", t[start:w.stop], y) for k, y in enumerate(later)])
    found = problem.minimum(tau, variances)
    if found is None:
        return None  # the steps do not converge: the refit decides
    reach = (SCREEN_Z + 2.0) * deviation
    shift = abs(found - tau)
    if not shift < 0.95 * reach:
        return math.inf  # beyond the screen's reach, by any deviation
    # tau's variance as the refit states it, each channel weighed by its own scatter about
    # the later curve (a misfit at the start inflates the full window's noise)
    x = found
    u = t[start:w.stop] - t[start]
    e = decay(u, x)
    e -= e.mean()
    see = float(e @ e)
    information = 0.0
    for y in later:
        yc = y - float(np.mean(y))
        amplitude = float(e @ yc) / see
        scatter = (float(yc @ yc) - amplitude ** 2 * see) / (u.size - 2)
        if not scatter > 0:
            return None  # no noise to weigh by: the refit decides
        information += curve_information(u, amplitude, x) / scatter
    var_d = 1.0 / information - var_full
    return shift / math.sqrt(var_d) if var_d > 0 else math.inf


#: Each window's start moves this many tau later for the model check (:func:`late_start`):
#: a faster mode of a coil that is not one time constant has then decayed by e (a mode of
#: tau/5 by e⁵), while e⁻² of the information on tau is left.
LATE_SHIFT_TAU = 1.0
#: The later window ends this many tau after its start, and at least LATE_SPAN_SAMPLES after
#: it: the samples beyond only repeat the settled level (e⁻⁵ of the amplitude is left), and
#: the shorter window keeps the check's refits to about a fifth of an analysis' time
#: (measured on sample_data/choke_step.csv).
LATE_SPAN_TAU = 5.0
#: In correlated noise (an AR noise model in the full window) the later fit estimates its
#: noise model and covariance sandwich from its own samples: with 200 (5 tau of 40 samples)
#: in band-limited noise of 10 samples' correlation it understated its variance (mean z²
#: 1.64 instead of 1 on 60 single-edge two-channel records at 30 dB, one false alarm); with
#: 400, 1.09 (measured). White noise needs no floor.
LATE_SPAN_SAMPLES = 400
#: The later window starts at least this many samples later (a tau of a few samples would
#: otherwise barely move it), and is only refitted when it holds at least LATE_MIN_SAMPLES
#: and LATE_MIN_TAU tau: fewer cannot separate tau from the settled level (the same 2 tau
#: that an edge window needs).
LATE_MIN_SHIFT = 4
LATE_MIN_SAMPLES = 16
LATE_MIN_TAU = 2.0
#: An edge whose later window would determine tau to worse than this relative standard
#: error (foreseen from the full window's, through the ratio of their information) is left
#: out: the check compares linearised variances, which a nonlinear fit's estimate follows
#: only when it is well determined. On single edges at 20 dB in correlated noise the later
#: windows' tau had relative standard errors near 0.5 and its z scattered far beyond a
#: normal one (4 of 80 records above 4). The forecast, not the later fit's own standard
#: error, decides, since selecting on that picks the fits that understate it (measured).
LATE_RELATIVE_ERROR = 0.3


@dataclass(frozen=True)
class LateStart:
    """tau from the edge windows as fitted (``full``) and from the same windows started
    :data:`LATE_SHIFT_TAU` later (``late``), both as means of the per-edge estimates with
    the full windows' inverse variances as weights; ``z`` is their difference over its
    standard deviation; ``edges`` the number of windows long enough to be refitted."""

    full: float
    late: float
    z: float
    edges: int


def late_start(t, sense, drive, windows, fits, noise, source, fit_window) -> LateStart | None:
    """Refit every edge window from one tau after its start and compare tau (Hausman test).

    A relaxation that is one exponential gives the same tau from any part of its window;
    one that is not (eddy currents in a core or an armature add faster or slower modes)
    gives a tau that moves when the early samples, where a faster mode weighs most, are left
    out, or the tail, where a slower one does. The later window, from one tau after the
    start to :data:`LATE_SPAN_TAU` (in correlated noise at least :data:`LATE_SPAN_SAMPLES`)
    after that, is nested in the full one, so the difference of the two estimates has the
    variance var(τ_late) − var(τ_full) when the model holds (J. A. Hausman, Econometrica 46
    (1978) 1251–1271). var(τ_full) is taken as var(τ_late)·I_late/I_full, with I the linearised
    information on tau of the later fit's curve over the two sample ranges
    (:func:`_tau_information`), not as the full fit's own variance: a model that misses the
    waveform inflates the full window's noise model (the AR model absorbs the misfit), which
    made var(τ_late) − var(τ_full) negative on records with a second time constant. The
    edges are independent, so the weighted per-edge differences add. An edge is left out
    when its later window is shorter than :data:`LATE_MIN_TAU` tau or :data:`LATE_MIN_SAMPLES`
    samples, would determine tau to worse
    than :data:`LATE_RELATIVE_ERROR`, or its refit fails; returns None when no edge is left
    or the windows carry no information on tau.
    """
    dt = float(t[1] - t[0])
    weights, full, late, var_d = [], [], [], []
    for w, f in zip(windows, fits):
        tau = f["tau"]
        start = w.start + max(LATE_MIN_SHIFT, int(math.ceil(LATE_SHIFT_TAU * tau / dt)))
        floor = LATE_SPAN_SAMPLES if any(m.get("order", 0) for m in f.noise_model.values()) else 0
        stop = min(w.stop, start + max(floor, int(math.ceil(LATE_SPAN_TAU * tau / dt))))
        if stop - start < max(LATE_MIN_SAMPLES, int(math.ceil(LATE_MIN_TAU * tau / dt))):
            continue
        later = dataclasses.replace(w, start=start, stop=stop)
        # the later window's standard error of tau, foreseen from the full window's
        if f.stderr("tau") ** 2 * _tau_information(t, w, f, w.start) / _tau_information(t, later, f, start) \
                > (LATE_RELATIVE_ERROR * tau) ** 2:
            continue
        found = _later_fit(t, sense, drive, later, f, noise, source, fit_window)
        if found is None:
            continue
        tau_late, var_late, amplitude = found
        # the information of the later fit's curve over the later window and over the full one
        ratio = curve_information(t[start:stop] - t[start], amplitude, tau_late) / curve_information(
            t[w.start:w.stop] - t[w.start], amplitude * math.exp((t[start] - t[w.start]) / tau_late), tau_late)
        weights.append(1.0 / f.stderr("tau") ** 2)
        full.append(f["tau"])
        late.append(tau_late)
        var_d.append(var_late * (1.0 - ratio))
    if not weights:
        return None
    wts = np.array(weights) / np.sum(weights)
    d_var = float(np.sum(wts ** 2 * np.array(var_d)))
    if not d_var > 0:
        return None
    tau_full, tau_late = float(wts @ np.array(full)), float(wts @ np.array(late))
    return LateStart(tau_full, tau_late, abs(tau_late - tau_full) / math.sqrt(d_var), len(weights))


def _later_fit(t, sense, drive, later: Window, f, noise, source, fit_window) -> tuple[float, float, float] | None:
    """tau, its variance and the sense channel's amplitude at the start of window ``later``,
    as its refit states them; None where the refit fails.

    Where the full window's fit ``f`` is white, the later window's white fit is solved by
    variable projection (:func:`wavefit.fit.white_projection.white_window_tau`: the same
    minimum and variance, without building the fit); where that fit would not be white, or
    ``f`` is not, the window is refitted."""
    if _is_white(f):
        chans = [WindowChannel(group, t[later.start:later.stop], y[later.start:later.stop])
                 for group, y in (("sense", sense), ("drive", drive)) if y is not None]
        found = white_window_tau(chans, f["tau"], noise)
        if found is not None:
            return found.tau, found.variance, found.amplitudes[0]
    try:
        fit = fit_window(t, sense, drive, later, noise, source)
    except AnalysisRefused:
        return None
    # the refit's exponential is referred to its first instant, the later window's start
    return fit["tau"], fit.stderr("tau") ** 2, fit["coef_sense"] * math.exp(-(t[later.start] - fit.t_ref) / fit["tau"])


def _is_white(f) -> bool:
    """Whether a window's fit ended with a white noise model on every channel and on no code
    grid (its least squares is then what variable projection solves)."""
    return (f.code_fit is None and f.quantisation_widening is None and bool(f.whitening)
            and not any(m.order for m in f.whitening.values()))


def placement_jitter(windows, fits, dt: float) -> np.ndarray:
    """Standard deviation, in samples, of each window's switching instant as the sense trace
    placed it (:func:`settle_starts`), else σ·tau/|step| (the noise over the slope of the edge)."""
    return np.array([(w.t0_deviation if math.isfinite(w.t0_deviation)
                      else placement_deviation(f.noise_sigma["sense"], f["tau"], f["coef_sense"])) / dt
                     for w, f in zip(windows, fits)])


def placement_factor(t, windows, fits, jitters) -> float:
    """How much the variance of tau grows when each window starts later by the uncertainty of
    its own start, ``jitters`` (samples, :func:`placement_jitter`; median over windows, at least 1).

    Without a drive channel a window's start is placed from the same trace, and in
    correlated noise the noise of its first samples is correlated with the noise that
    placed it; the estimate's scatter then exceeds its linearised variance. Treating the
    start as an input quantity with standard uncertainty u_s (samples) and sensitivity
    ∂tau/∂s (JCGM 100:2008, 5.1.3) gives c²·u_s² ≈ var(tau from s + u_s) − var(tau from s),
    so the variance becomes that of the later-starting window. The ratio of the two
    variances is that of the linearised information of the fitted curve over the two sample
    ranges (for a window of many tau it is exp(2·u_s·Δt/tau) in any stationary noise: the
    later window holds the same curve with a smaller amplitude), so nothing is refitted.
    """
    ratios = []
    for w, f, jitter in zip(windows, fits, jitters):
        shift = max(int(math.ceil(jitter)), 1)
        if w.stop - (w.start + shift) < 16:
            ratios.append(1.0)
            continue
        ratio = max(_tau_information(t, w, f, w.start) / _tau_information(t, w, f, w.start + shift), 1.0)
        # a start uncertain by less than a sample: the added variance of a start moved by
        # u_s grows about linearly with u_s (the increments of tau(s) are like a random walk's)
        ratios.append(ratio if jitter >= 1.0 else 1.0 + jitter * (ratio - 1.0))
    return float(np.median(ratios)) if ratios else 1.0


def _tau_information(t, w, f, start: int) -> float:
    """1/var(tau), up to the noise variance, of the window's fitted curve sampled from
    ``start`` to the window's end, with its final level and amplitude free."""
    _, coef, tau = f.subset(("final_sense", "coef_sense", "tau"))[0]
    return curve_information(t[start:w.stop] - t[start], coef * math.exp(-(t[start] - f.t_ref) / tau), tau)


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
