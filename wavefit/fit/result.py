"""The frozen result of one least-squares fit."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import numpy as np


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
            "diagnostics": dict(self.diagnostics),
        }
