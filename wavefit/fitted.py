"""The fitted parameters of an analysis with their covariance, as the measurement function took them.

A method enters what its fit estimated as a correlated block of type A inputs
(:meth:`wavefit.uncertainty.InputSet.add_correlated`): rl-step the time constant,
levels and drive/sense ratio of its relaxation fit, lc-ring the decay rate and
angular frequency of the damped sinusoid, lc-sweep the slope and intercept of its
line. :class:`FittedBlock` keeps one such block, so that a result can give its
fitted parameters with standard errors and correlations (``result.params``)
without the method doing anything more.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .uncertainty import InputSet


@dataclass(frozen=True)
class FittedBlock:
    """One fit's parameters: names as in the budget, SI values and units, covariance, dof.

    ``covariance`` is a tuple of rows (the block is frozen and comparable);
    ``degrees_of_freedom`` is the fit's (infinite when the fit gives none) and
    ``group`` the name the method gave the block ("fit", "line").
    """

    names: tuple[str, ...]
    values: tuple[float, ...]
    units: tuple[str, ...]
    covariance: tuple[tuple[float, ...], ...]
    degrees_of_freedom: float
    group: str

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


def fitted_blocks(inputs: InputSet) -> tuple[FittedBlock, ...]:
    """Every correlated block of ``inputs`` as a :class:`FittedBlock`, in the order added."""
    items = inputs.inputs
    blocks = []
    for idx, cov in inputs.blocks():
        if not idx:
            continue
        members = [items[k] for k in idx]
        blocks.append(FittedBlock(
            names=tuple(m.name for m in members),
            values=tuple(m.value for m in members),
            units=tuple(m.unit for m in members),
            covariance=tuple(tuple(float(c) for c in row) for row in np.asarray(cov, dtype=float)),
            degrees_of_freedom=float(members[0].dof),
            group=members[0].group or "",
        ))
    return tuple(blocks)
