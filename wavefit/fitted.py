"""Parameters estimated together by one fit, with their joint covariance.

A method's estimation stage hands its fits to the shared analysis as :class:`FittedBlock`s
(:class:`wavefit.methods.estimate.Estimate`): rl-step the time constant, levels and
drive/sense ratio of its relaxation fit, lc-ring the decay rate and angular frequency of the
damped sinusoid, lc-sweep the slope and intercept of its line. Each block enters the
measurement function as a correlated group of type A inputs
(:meth:`wavefit.uncertainty.InputSet.add_correlated`), and the result keeps the blocks in
``result.fitted``, so that it can give its fitted parameters with standard errors and
correlations (``result.params``, JSON ``fitted``).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

import numpy as np


@dataclass(frozen=True, init=False)
class FittedBlock:
    """Parameters estimated together, with their joint covariance (one correlated group).

    ``values`` and ``covariance`` (SI, in the order of ``names``) are kept as tuples, so the
    block is frozen and comparable; ``degrees_of_freedom`` is that of the covariance (infinite
    when it is known, not estimated); ``group`` names the block in the Welch–Satterthwaite sum,
    where a block counts as one component (GUM G.4.1); ``kind`` is its evaluation type.
    """

    names: tuple[str, ...]
    values: tuple[float, ...]
    covariance: tuple[tuple[float, ...], ...]
    units: tuple[str, ...]
    degrees_of_freedom: float
    group: str
    kind: str

    def __init__(self, names: Sequence[str], values: Sequence[float], covariance: Any, units: Sequence[str],
                 degrees_of_freedom: float, group: str = "fit", kind: str = "A") -> None:
        n = len(names)
        matrix = np.asarray(covariance, dtype=float).reshape(n, n)
        fields = {"names": tuple(names), "values": tuple(float(v) for v in np.asarray(values, dtype=float)),
                  "covariance": tuple(tuple(float(c) for c in row) for row in matrix),
                  "units": tuple(units), "degrees_of_freedom": float(degrees_of_freedom), "group": group,
                  "kind": kind}
        for name, value in fields.items():
            object.__setattr__(self, name, value)

    def to_dict(self) -> dict[str, Any]:
        """The block as plain lists and numbers (``fitted`` in ``docs/json-output.md``; the
        result's ``to_dict`` writes an infinite number as null)."""
        return {"group": self.group, "type": self.kind, "names": list(self.names), "units": list(self.units),
                "values": list(self.values), "covariance": [list(row) for row in self.covariance],
                "degrees_of_freedom": self.degrees_of_freedom}

    def covariance_matrix(self) -> np.ndarray:
        return np.array(self.covariance, dtype=float).reshape(len(self.names), len(self.names))

    def standard_errors(self) -> np.ndarray:
        return np.sqrt(np.clip(np.diag(self.covariance_matrix()), 0.0, None))

    def correlation_matrix(self) -> np.ndarray:
        """Correlation coefficients; a parameter with zero standard error is uncorrelated."""
        se = self.standard_errors()
        scale = np.where(se > 0, se, 1.0)
        corr = self.covariance_matrix() / np.outer(scale, scale)
        corr[se == 0, :] = 0.0
        corr[:, se == 0] = 0.0
        np.fill_diagonal(corr, 1.0)
        return corr
