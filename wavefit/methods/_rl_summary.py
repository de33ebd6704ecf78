"""rl-step's fit summary: the fitted edges, the estimator chosen and its type A figures.

Written under ``fit`` in the result (:class:`~wavefit.fit_summary.FitSummary`); the
estimators are described in :mod:`wavefit.methods._rl_estimators` and ``docs/method-rl-step.md``.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Mapping

from ._model_check import ModelCheck
from ..fit_summary import FitSummary, optional_entry


@dataclass(frozen=True)
class EdgeFit:
    """The fit of one edge window.

    Attributes
    ----------
    direction
        "rising" or "falling" (of the sense current).
    t0
        The switching instant the window follows, s.
    window_start
        The time of the window's first sample (the fit's reference instant), s.
    samples
        Samples in the window (per channel).
    tau
        The window's own time constant, s.
    tau_standard_error
        Its standard error, s.
    noise_model
        The noise model fitted per channel (:attr:`wavefit.fit.result.FitResult.noise_model`).
    ljung_box_p
        p-value of the Ljung–Box test of the whitened residuals, or ``None`` when not made.
    """

    direction: str
    t0: float
    window_start: float
    samples: int
    tau: float
    tau_standard_error: float
    noise_model: Mapping[str, Any]
    ljung_box_p: float | None


@dataclass(frozen=True, kw_only=True)
class StepFitSummary(FitSummary):
    """What rl-step says about its fit (JSON ``fit`` of an rl-step result).

    Attributes
    ----------
    model
        The waveform model fitted, in words.
    edges_fitted
        Number of edge windows fitted.
    tau_fit
        tau as fitted, before the timebase correction, s.
    tau_fit_standard_error
        Its standard error (type A), s.
    tau_per_edge_spread
        Sample standard deviation of the edges' own tau (0 for one edge), s.
    skip_after_edge_s
        Time from the first edge's switching instant to its window's first sample, s.
    sample_interval_s
        The capture's sample interval, s.
    type_a_dof
        Degrees of freedom of the fitted block.
    type_a_estimator
        How the windows' type A covariance is found, in words.
    baseline_samples
        Samples of the settled level before the first edge (0 when there is none).
    edges
        Each window's fit, in time order.
    notes
        Remarks on choices the fit made, in order.
    tau_rising, tau_rising_standard_error
        Weighted mean of the rising edges' tau and its standard error, s; absent without a
        rising edge.
    tau_falling, tau_falling_standard_error
        The same for the falling edges, s.
    birge_ratio
        Birge ratio of the edges' combination; absent when it has no degrees of freedom.
    drive_period_s
        The drive's period to which the switching instants were fitted
        (:func:`wavefit.signal.edge_lattice.periodic_instants`), s; absent when the instants
        were not fitted to a period.
    placement_variance_factor
        The factor by which tau's variance was enlarged because the edges were placed from the
        sense trace in correlated noise; absent when it was not enlarged.
    estimator
        The estimator of tau and the levels (:mod:`wavefit.methods._rl_estimators`).
    model_check
        tau from later windows against the reported one (:mod:`wavefit.methods._model_check`).
    """

    model: str
    edges_fitted: int
    tau_fit: float
    tau_fit_standard_error: float
    tau_per_edge_spread: float
    skip_after_edge_s: float
    sample_interval_s: float
    type_a_dof: float
    type_a_estimator: str
    baseline_samples: int
    edges: tuple[EdgeFit, ...]
    notes: tuple[str, ...]
    tau_rising: float | None = optional_entry()
    tau_rising_standard_error: float | None = optional_entry()
    tau_falling: float | None = optional_entry()
    tau_falling_standard_error: float | None = optional_entry()
    birge_ratio: float | None = optional_entry()
    drive_period_s: float | None = optional_entry()
    placement_variance_factor: float | None = optional_entry()
    estimator: str
    model_check: ModelCheck
