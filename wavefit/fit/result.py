"""The frozen result of one least-squares fit."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass(frozen=True)
class CodeFit:
    """A fit carried to the maximum of the likelihood of the converter's codes
    (:func:`wavefit.fit.quantisation.fit_on_codes`): the code step of each noise group,
    Fisher scoring's iterations, the noise before the converter of each noise group in
    codes, the least-squares values it started from, and whether the noise passed the test
    of independence (the covariance is then the inverse expected information, otherwise
    the composite-likelihood sandwich of :mod:`wavefit.fit.code_sandwich`)."""

    code_step: dict[str, float]
    iterations: int
    noise_sigma_in_codes: dict[str, float]
    least_squares_values: dict[str, float]
    independent_noise: bool = True

    @property
    def noise_before_converter(self) -> dict[str, float]:
        """The noise before the converter of each noise group, in the record's unit."""
        return {g: codes * self.code_step[g] for g, codes in self.noise_sigma_in_codes.items()}

    def summary(self) -> dict[str, Any]:
        return {"estimator": "code likelihood", "code_step": dict(self.code_step), "iterations": self.iterations,
                "noise_sigma_in_codes": dict(self.noise_sigma_in_codes),
                "covariance": "expected information" if self.independent_noise else "composite-likelihood sandwich",
                "least_squares_values": dict(self.least_squares_values)}


@dataclass(frozen=True)
class QuantisationWidening:
    """The estimated effect of undithered quantisation added to a least-squares fit's covariance
    (:func:`wavefit.fit.quantisation.include_quantisation`): the parameter shift it causes and
    the smallest residual rms of the fit's blocks, in codes."""

    shift: dict[str, float]
    residual_rms_in_codes: float


@dataclass(frozen=True)
class FitResult:
    """Parameters, covariance, residuals and diagnostics of a fit.

    ``covariance`` already accounts for the noise model that was used
    (``noise_model`` says which: white, or autoregressive of some order per
    noise group); ``dof`` is the residual degrees of freedom that the type A
    uncertainty carries; ``n_effective`` is the number of independent samples
    the record is worth given the noise correlation.
    """

    model: str
    names: tuple[str, ...]
    values: np.ndarray
    covariance: np.ndarray
    residuals: np.ndarray
    noise_sigma: dict[str, float]
    noise_model: dict[str, Any]
    n_samples: int
    n_effective: float
    dof: float
    diagnostics: dict[str, Any] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    #: the instant the exponential of a window is referred to (its first), and that of each group
    t_ref: float | None = None
    t_ref_by_group: dict[str, float] = field(default_factory=dict)
    #: the fit parameters that ended at one of their bounds
    parameters_at_bounds: tuple[str, ...] = ()
    #: per noise group, the lags over which the sandwich covariance found the noise correlated
    noise_correlation_extent_samples: dict[str, int] = field(default_factory=dict)
    #: how a resolution-limited record was handled: widened covariance, or a fit on the codes
    quantisation_widening: QuantisationWidening | None = None
    code_fit: CodeFit | None = None
    #: the noise model of each group as fitted (:class:`~wavefit.fit.noise_model.ARNoise`), whose
    #: ``whiten`` makes the residuals independent; for refits that keep it (profile likelihood)
    whitening: dict[str, Any] = field(default_factory=dict, repr=False, compare=False)

    def __getitem__(self, name: str) -> float:
        return float(self.values[self.names.index(name)])

    def stderr(self, name: str) -> float:
        k = self.names.index(name)
        return float(math.sqrt(max(self.covariance[k, k], 0.0)))

    def subset(self, names: tuple[str, ...]) -> tuple[np.ndarray, np.ndarray]:
        """Values and covariance of the named parameters, in that order."""
        idx = [self.names.index(n) for n in names]
        return self.values[idx].copy(), self.covariance[np.ix_(idx, idx)].copy()

    def summary(self) -> dict[str, Any]:
        """A JSON-ready summary (no per-sample arrays)."""
        return {
            "model": self.model,
            "parameters": {n: {"value": float(v), "standard_error": self.stderr(n)}
                           for n, v in zip(self.names, self.values)},
            "n_samples": self.n_samples,
            "n_effective": float(self.n_effective),
            "dof": float(self.dof),
            "noise_sigma": dict(self.noise_sigma),
            "noise_model": dict(self.noise_model),
            "diagnostics": self._reported_diagnostics(),
        }

    def _reported_diagnostics(self) -> dict[str, Any]:
        out = dict(self.diagnostics)
        if self.noise_correlation_extent_samples:
            out["noise_correlation_extent_samples"] = dict(self.noise_correlation_extent_samples)
        if self.quantisation_widening is not None:
            out["quantisation_shift"] = dict(self.quantisation_widening.shift)
            out["residual_rms_in_codes"] = self.quantisation_widening.residual_rms_in_codes
        if self.code_fit is not None:
            out["quantisation"] = self.code_fit.summary()
        if self.t_ref is not None:
            out["t_ref"] = self.t_ref
        if self.t_ref_by_group:
            out["t_ref_by_group"] = dict(self.t_ref_by_group)
        return out
