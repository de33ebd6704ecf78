"""The scale-factor rule for repeated estimates that scatter more than their uncertainties say.

One rule wherever estimates with stated covariances are combined: they give χ² on ν degrees of
freedom and the Birge ratio S = √(χ²/ν) (R. T. Birge, Phys. Rev. 40 (1932) 207–227). When
S > 1 and the scatter is significant — the χ² probability below the level of the use — the
combined covariance is multiplied by S², the Particle Data Group's averaging rule (Review of
Particle Physics, "Introduction", unconstrained averaging; from memory). Each use names its
level beside its constant: ``wavefit.methods._scale_factor`` for the methods,
``wavefit.signal.edge_lattice`` for a periodic drive's switching instants.
"""
from __future__ import annotations

import math

from scipy import stats


def birge_ratio(chi2: float, dof: int) -> tuple[float, float]:
    """S = √(χ²/ν) and the probability of a χ² at least as large on ν degrees of freedom."""
    return math.sqrt(chi2 / dof), float(stats.chi2.sf(chi2, dof))


def scale_factor(ratio: float, p_value: float, level: float) -> float:
    """The factor S by which standard uncertainties are enlarged: the Birge ratio ``ratio`` when it
    exceeds 1 and its ``p_value`` is below ``level``, else 1."""
    return ratio if ratio > 1.0 and p_value < level else 1.0
