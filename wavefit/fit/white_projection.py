"""The white-noise least-squares fit of an exponential window, solved by variable projection.

For fixed tau every channel of a window is a straight line in exp(−t/tau), so the weighted
residual sum of squares is a function of tau alone, and its minimum is the least-squares
estimate of tau (G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10 (1973) 413–432). Where
:func:`wavefit.fit.exponential.fit_exponential_window` would end with a white noise model
and no code grid, it solves that same problem: :func:`white_window_tau` gives its tau and
tau's variance without building the fit, for checks that need many windows' tau and nothing
else. It says None wherever the fit would take another path, which the caller then runs.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from .exponential import ProjectedProblem, WindowChannel, curve_information
from .noise_model import fit_ar
from .quantisation import limiting_step

#: fit_exponential_window's AR order limit (:func:`wavefit.fit.engine.fit_least_squares`).
MAX_AR_ORDER = 30


@dataclass(frozen=True)
class WhiteTau:
    """tau of a window's white-noise least-squares fit, its variance as the fit states it, and
    each channel's fitted amplitude at the channel's first instant."""

    tau: float
    variance: float
    amplitudes: tuple[float, ...]


def white_window_tau(channels: Sequence[WindowChannel], tau0: float, noise: str = "auto") -> WhiteTau | None:
    """tau and its variance from the fit :func:`~wavefit.fit.exponential.fit_exponential_window`
    makes of ``channels`` with ``noise``, where that fit is white; None where it is not.

    ``tau0`` is a tau near the minimum (the full window's for a later part of it), from which
    the minimum is sought by Gauss–Newton steps
    (:meth:`~wavefit.fit.exponential.ProjectedProblem.minimum`), or from the fit's own start
    (:meth:`~wavefit.fit.exponential.ProjectedProblem.start`) when they do not reach it. The steps
    are the fit's own: each channel over its own variance (the fit's start), then the
    channels weighed by their scatter about that start, the minimum sought with those
    weights, each channel's scatter then taken about it with the fit's share of the
    parameters deducted (its white noise model), and tau's variance the inverse of the
    information summed over the channels, each weighed by its scatter (the linearised
    covariance, whose residual factor is then one). None when the noise option is neither
    ``"auto"`` nor ``"white"``, when channels share a noise group, when the steps do not
    converge (the fit's solver would then take over), when a channel has no scatter,
    when the residuals ask for an autoregressive model (``"auto"``: the same choice,
    :func:`wavefit.fit.noise_model.fit_ar`), when a channel's noise does not dither its code
    grid (:func:`wavefit.fit.quantisation.limiting_step`), or when the information is not
    positive.

    References
    ----------
    G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear least
    squares problems whose variables separate", SIAM J. Numer. Anal. 10 (1973) 413–432.
    G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §2.1.
    L. Kaufman, BIT 15 (1975) 49–57 (the Gauss–Newton steps of the projected problem).
    """
    if noise not in ("auto", "white") or len({ch.noise_group or ch.group for ch in channels}) < len(channels):
        return None
    problem = ProjectedProblem(channels)
    elapsed, centred = problem.elapsed, problem.centred
    total = sum(y.size for y in centred)
    n_par = 1 + 2 * len(channels)
    # first each channel over its own variance (the fit's start), then, with two or more
    # channels, weighed by their scatter about that minimum (the fit's weights)
    own = problem.own_variances()
    tau = problem.minimum(tau0, own)
    if tau is None:
        # beyond the steps' reach from tau0: from the start the fit itself takes
        tau = problem.minimum(problem.start(tau0, own), own)
    if tau is not None and len(channels) > 1:
        weights = problem.scatter_weights(tau, [ch.group for ch in channels])
        tau = None if weights is None else problem.minimum(tau, weights)
    if tau is None:
        return None
    # each channel's residuals and amplitude at its first instant at that tau (the steps' last
    # evaluation), and its scatter: the fit's white model, its sum of squares over its samples
    # less its share of the parameters
    fitted = problem.terms(tau)
    if fitted is None:
        return None
    residuals, amplitudes = [t.residual for t in fitted], [t.coefficient for t in fitted]
    scatters = [t.rss / max(y.size * (1.0 - n_par / total), 1.0) for t, y in zip(fitted, centred)]
    if not all(s > 0 for s in scatters):
        return None
    if noise == "auto" and any(fit_ar([r], MAX_AR_ORDER).order for r in residuals):
        return None
    if any(limiting_step(np.asarray(ch.values, dtype=float), float(np.sqrt(s))) is not None
           for ch, s in zip(channels, scatters)):
        return None
    information = sum(curve_information(u, a, tau) / s for u, a, s in zip(elapsed, amplitudes, scatters))
    if not (information > 0 and np.isfinite(information)):
        return None
    return WhiteTau(tau, 1.0 / information, tuple(amplitudes))
