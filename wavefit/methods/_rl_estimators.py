"""The one place where rl-step chooses how tau and the state levels are estimated.

Four named estimators, each in its own module:

* ``JOINT_WITH_DRIVE`` (:mod:`._rl_per_edge`): with a drive channel, every edge window is one
  fit of sense and drive sharing tau; the windows are combined by generalised least squares.
  The drive node places each switching instant, so nothing else is needed.
* ``PER_EDGE`` (:mod:`._rl_per_edge`): without drive, the same combination of sense-only
  windows; the fallback of the two below.
* ``POOLED`` (:mod:`._rl_pooled`): without drive in correlated noise with two or more
  windows, all windows in one fit with one noise model (separate fits underrate correlated
  noise, measured coverage about 89 % on 12-edge records).
* ``WHOLE_RECORD`` (:mod:`._rl_whole_record`): without drive on white noise, when the skip
  after the edges is automatic and no winding capacitance is given (a spike after each edge
  that the relaxation model does not hold), one fit of every sample, kept only when windows
  that skip the edges agree; in correlated noise its switching instants lock onto noise
  features (measured coverage 50–70 %), so it is not used there.

See ``docs/method-rl-step.md`` for the measurements behind each choice.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable

from ._rl_per_edge import Combined, combine
from ._rl_pooled import pooled_windows
from ._rl_whole_record import whole_record

JOINT_WITH_DRIVE = "per-edge joint fits of sense and drive"
PER_EDGE = "per-edge windows"
POOLED = "windows fitted jointly with one noise model"
WHOLE_RECORD = "whole-record relaxation fit"


@dataclass(frozen=True)
class Choice:
    """The estimate of tau and the levels, the estimator that gave it, and notes for the fit summary."""

    combined: Combined
    estimator: str
    notes: tuple[str, ...]


def estimate_tau(t, sense, has_drive: bool, white: bool, automatic_skip: bool, winding_capacitance: bool,
                 edges, windows, fits, baseline, noise: str, fit_window: Callable[..., Any],
                 sense_rms: float | None = None) -> Choice:
    """tau and state levels by the estimator the record calls for (module docstring).

    Parameters
    ----------
    t, sense
        The time axis and the sense channel.
    has_drive
        Whether the drive node is recorded (the windows' fits then include it).
    white
        Whether the sense noise was found white (or declared so).
    automatic_skip, winding_capacitance
        Whether the skip after the edges is automatic, and whether the setup gives a winding
        capacitance (the whole-record estimator needs the first and rules out the second).
    edges, windows, fits, baseline
        The edges found, their windows and fits, and the pre-edge level fit (or None).
    noise
        The noise option, passed to the fits.
    fit_window
        Fits one window (the method's own), for the whole-record estimator's check.
    sense_rms
        The sense channel's :func:`~wavefit.signal.edges.noise_rms`, when the caller has it.

    Returns
    -------
    Choice
    """
    combined = combine(windows, fits, baseline, has_drive)
    if has_drive:
        return Choice(combined, JOINT_WITH_DRIVE, ())
    estimator, notes = PER_EDGE, []
    if not white and len(windows) > 1:
        pooled = pooled_windows(t, sense, windows, baseline, combined, noise)
        if pooled is not None:
            combined, estimator = pooled, POOLED
    if white and automatic_skip and not winding_capacitance:
        combined, accepted = whole_record(t, sense, edges, windows, fits, baseline, combined, noise, fit_window,
                                          sense_rms)
        if accepted:
            estimator = WHOLE_RECORD
        else:
            notes.append("the whole-record fit disagreed with windows that skip the edges (edges not "
                         "instantaneous?); windows with a margin after each edge are used")
    return Choice(combined, estimator, tuple(notes))
