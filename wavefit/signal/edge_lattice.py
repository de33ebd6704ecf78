"""Switching instants of a periodic drive: one period and one phase per edge direction.

A generator's square wave switches at t = a_rising + m·P and t = a_falling + m·P
(IEEE 181-2011 defines the pulse period and the duty factor of such a train;
here its instants are fitted). Each instant placed separately from a noisy
trace is uncertain by its own noise; fitted together by weighted least squares
(model t0_k = a_direction + P·m_k, weights 1/σ_k²) every instant rests on all the
edges of the record, so its uncertainty falls about as 1/√(edges per direction)
and the noise of any one edge moves its own instant only by its small weight in
the fit. The stated deviations of instants placed from correlated noise run low (by
about 1.5 in the estimator study), so the predicted deviations are enlarged by the
Birge ratio √(χ²/ν) of the residuals when it exceeds one (R. T. Birge, Phys. Rev. 40
(1932) 207–227; the Particle Data Group's scale factor). The lattice is used only when
each instant lies within a tenth of a period of it and the Birge ratio is at most 3;
otherwise the drive is not periodic, or an edge was misplaced, and the separate
instants stand.
"""
from __future__ import annotations

from typing import NamedTuple

import numpy as np

from ..scale_factor import birge_ratio, scale_factor

#: Instants that scatter about the lattice more than this many times their stated deviations
#: (Birge ratio) are taken as not periodic.
MAX_BIRGE = 3.0
#: Level of the scale-factor rule (:mod:`wavefit.scale_factor`) for the lattice: 1, any excess
#: scatter widens the deviations, since those of instants placed from correlated noise run low
#: (about 1.5 times in the estimator study).
LATTICE_SCATTER_P = 1.0


class Lattice(NamedTuple):
    instants: np.ndarray      # s, predicted by the lattice
    deviations: np.ndarray    # s, their standard deviations
    period: float             # s


def periodic_instants(t0s: np.ndarray, deviations: np.ndarray, directions: np.ndarray) -> Lattice | None:
    """Instants and their standard deviations predicted by the fitted lattice, or None.

    ``t0s`` (s) in time order with standard deviations ``deviations`` (s) and edge
    ``directions`` (±1). Needs at least two instants of one direction (for the period)
    and one more instant than fitted parameters (for the consistency test).
    """
    kinds = [d for d in (1, -1) if np.any(directions == d)]
    if len(t0s) < len(kinds) + 2 or not np.all(deviations > 0):
        return None
    # the guard above leaves at least two instants of one direction, so there is a gap
    gaps = np.concatenate([np.diff(t0s[directions == d]) for d in kinds])
    # the shortest gap is about one period; a missing edge makes a gap of several
    counts = np.round(gaps / np.min(gaps))
    period = float(gaps.sum() / counts.sum())
    x = np.zeros((t0s.size, len(kinds) + 1))
    for c, d in enumerate(kinds):
        sel = directions == d
        x[sel, c] = 1.0
        x[sel, -1] = np.round((t0s[sel] - t0s[sel][0]) / period)
    w = 1.0 / deviations
    coef, *_ = np.linalg.lstsq(x * w[:, None], t0s * w, rcond=None)
    fitted = x @ coef
    if np.any(np.abs(t0s - fitted) > 0.1 * abs(coef[-1])):
        return None
    birge, p_value = birge_ratio(float(np.sum(((t0s - fitted) * w) ** 2)), t0s.size - x.shape[1])
    if birge > MAX_BIRGE:
        return None
    cov = np.linalg.inv((x * w[:, None] ** 2).T @ x) * scale_factor(birge, p_value, LATTICE_SCATTER_P) ** 2
    return Lattice(fitted, np.sqrt(np.einsum("ij,jk,ik->i", x, cov, x)), float(coef[-1]))
