"""Significance levels of the scale-factor rule (:mod:`wavefit.scale_factor`) in the methods.

The level differs by use, each for a measured or stated reason beside its constant. (The
enlargement of tau's variance for edges placed from correlated noise,
``Combined.with_tau_variance_scaled``, is not this rule: it is the information lost by
starting windows later, :func:`wavefit.methods._rl_windows.placement_factor`.)
"""
from __future__ import annotations


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
