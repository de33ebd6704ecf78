"""rl-step estimator "whole record": one relaxation fit of every sample, kept only when windows
that skip the edges agree with it.

Used without a drive channel on white noise (see :mod:`wavefit.methods._rl_estimators`).
"""
from __future__ import annotations

import numpy as np

from ..fit.relaxation import fit_relaxations
from ..signal.edges import placement_deviation
from ._rl_per_edge import Combined, combine
from ._rl_windows import Window


def whole_record(t, sense, edges, windows, fits, baseline, windowed: Combined, noise, fit_window,
                 sense_rms: float | None = None) -> tuple[Combined, bool]:
    """tau and state levels from one fit of every sample (``wavefit.fit.relaxation``).

    Used without a drive channel, where the switching instants must come from the sense
    trace itself. The check is a set of windows cut from the whole-record fit's
    switching instants with generous margins, Δ = max(4 samples, tau/10) after each
    and 3σ of the next instant before it, fitted separately: they do not rest on the
    kink at the edges. The whole-record result is kept if it agrees with them by the
    Hausman test (difference within 3 standard deviations of var(windows) −
    var(whole record)); otherwise those windows are returned. Returns (result,
    whole-record accepted). ``sense_rms`` is the sense channel's
    :func:`~wavefit.signal.edges.noise_rms`, when the caller has it already.
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
        whole = fit_relaxations(t, sense, t0s, levels, windowed.values[0], noise=noise, rms=sense_rms)
    except (ValueError, FloatingPointError, np.linalg.LinAlgError):
        return windowed, False
    var_f = whole.covariance[0, 0]
    if not (np.isfinite(var_f) and var_f > 0):
        return windowed, False
    if whole.parameters_at_bounds or \
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
            step = whole[f"final_{k + 1}"] - (whole[f"final_{k}"] if k else whole["final_head"])
            margin = max(2.0 * dt, 3.0 * placement_deviation(whole.noise_sigma["sense"], tau, step))
            stop = int(np.searchsorted(t, whole[f"t0_{k + 2}"] - margin))
        if stop - start >= 16:
            w = Window(e, t0, start, stop)
            checked_w.append(w)
            checked_f.append(fit_window(t, sense, None, w, noise, "capture"))
    if not checked_w:
        return windowed, False
    check = combine(checked_w, checked_f, baseline, False)
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
    return Combined(("tau_fit", "sense_high", "sense_low"), a @ vals, a @ cov @ a.T, ("s", "V", "V"),
                     float(whole.dof), windowed.by_direction, windowed.rise_fall, windowed.birge), True
