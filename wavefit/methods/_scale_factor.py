"""The scale-factor rule for repeated estimates that scatter more than their uncertainties say.

One rule everywhere in the methods: estimates of one quantity with stated covariances give
χ² on ν degrees of freedom and the Birge ratio S = √(χ²/ν) (R. T. Birge, Phys. Rev. 40 (1932)
207–227). When S > 1 and the scatter is significant — the χ² probability below the level of
the use — the combined covariance is multiplied by S², the Particle Data Group's averaging
rule (Review of Particle Physics, "Introduction", unconstrained averaging; from memory).
The significance level differs by use, each for a measured or stated reason beside its
constant. (The enlargement of tau's variance for edges placed from correlated noise,
``Combined.with_tau_variance_scaled``, is not this rule: it is the information lost by
starting windows later, :func:`wavefit.methods._rl_windows.placement_factor`.)
"""
from __future__ import annotations

import math

from scipy import stats

#: rl-step, per-edge windows combined: the separate fits understate their uncertainties a
#: little in correlated noise, so a moderate excess scatter is expected of a right result;
#: only a scatter with probability below 10⁻³ is taken as an error the fits miss (and warned).
EDGE_SCATTER_P = 1e-3
#: rl-step, windows fitted jointly with one noise model: the joint fit's covariance is right
#: when the AR model holds, so the usual 5 % level applies; applied whenever S > 1 it
#: over-covered (docs/method-rl-step.md, measured coverage 82 % → 93 % on 6-edge records).
POOLED_SCATTER_P = 0.05
#: lc-sweep, the points 1/w0² against capacitance off their line: 1 %, the level at which the
#: method also warns that the points do not lie on a line (a wrong capacitor value or a bad ring).
LINE_SCATTER_P = 0.01
#: rl-step, rising against falling edges: a test statistic, not a reported uncertainty, so the
#: scatter within each direction always widens it when S > 1 (level 1: conservative, fewer
#: false alarms of a level-dependent part).
RISE_FALL_SCATTER_P = 1.0


def birge_ratio(chi2: float, dof: int) -> tuple[float, float]:
    """S = √(χ²/ν) and the probability of a χ² at least as large on ν degrees of freedom."""
    return math.sqrt(chi2 / dof), float(stats.chi2.sf(chi2, dof))


def scale_factor(ratio: float, p_value: float, level: float) -> float:
    """The factor S by which standard uncertainties are enlarged: the Birge ratio ``ratio`` when it
    exceeds 1 and its ``p_value`` is below ``level``, else 1."""
    return ratio if ratio > 1.0 and p_value < level else 1.0
