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

import math
from dataclasses import dataclass
from typing import Sequence

import numpy as np
from scipy import optimize

from .exponential import GRID_STEP, WindowChannel, curve_information, decay, projected_cost, projected_tau
from .noise_model import fit_ar
from .quantisation import limiting_step

#: Tolerance on log tau of the projected minimum: 1e-3 of the smallest relative standard error
#: of tau met in one window (about 1e-5, a two-channel window of 10⁶ samples at 50 dB), so the
#: statistics formed from it move by less than 1e-3 standard deviations.
TAU_TOLERANCE = 1e-8
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

    ``tau0`` is a tau near the minimum (the full window's for a later part of it): the
    minimum is sought within one step of :func:`~wavefit.fit.exponential.projected_tau`'s
    grid of it, and by that grid when it lies beyond. The steps are the fit's own: the
    channels weighed by their scatter about the projected
    start, the minimum sought with those weights, each channel's scatter then taken about it
    with the fit's share of the parameters deducted (its white noise model), and tau's
    variance the inverse of the information summed over the channels, each weighed by its
    scatter (the linearised covariance, whose residual factor is then one). None when the
    noise option is neither ``"auto"`` nor ``"white"``, when channels share a noise group,
    when the residuals ask for an autoregressive model (``"auto"``: the same choice,
    :func:`wavefit.fit.noise_model.fit_ar`), when a channel's noise does not dither its code
    grid (:func:`wavefit.fit.quantisation.limiting_step`), or when the information is not
    positive.

    References
    ----------
    G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and nonlinear least
    squares problems whose variables separate", SIAM J. Numer. Anal. 10 (1973) 413–432.
    G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §2.1.
    """
    if noise not in ("auto", "white") or len({ch.noise_group or ch.group for ch in channels}) < len(channels):
        return None
    elapsed = [np.asarray(ch.time, dtype=float) - float(ch.time[0]) for ch in channels]
    centred = [np.asarray(ch.values, dtype=float) - float(np.mean(ch.values)) for ch in channels]
    total = sum(y.size for y in centred)
    n_par = 1 + 2 * len(channels)

    def fitted(tau: float) -> tuple[list[np.ndarray], list[float], list[float]]:
        """Each channel's residuals, amplitude at its first instant, and scatter (the fit's
        white model: its sum of squares over its samples less its share of the parameters)."""
        residuals, amplitudes, scatters = [], [], []
        for u, y in zip(elapsed, centred):
            e = decay(u, tau)
            ec = e - float(e.mean())
            see = float(ec @ ec)
            amplitude = float(ec @ y) / see if see > 0 else 0.0
            r = y - amplitude * ec
            residuals.append(r)
            amplitudes.append(amplitude)
            scatters.append(float(r @ r) / max(y.size * (1.0 - n_par / total), 1.0))
        return residuals, amplitudes, scatters

    # first each channel over its own variance (the fit's start), then, with two or more
    # channels, weighed by their scatter about that minimum (the fit's weights)
    tolerance = TAU_TOLERANCE if len(channels) == 1 else 1e-6
    start_cost = projected_cost(elapsed, centred)
    tau = _minimum(start_cost, tau0, tolerance)
    if tau is None:
        # beyond one grid step: the grid's bracket, then a minimum inside one step of it (the
        # grid ends at five times tau0 either way, where its answer need not be a minimum)
        tau = _minimum(start_cost, projected_tau(channels, tau0, tolerance=tolerance), tolerance)
        if tau is None:
            return None
    if len(channels) > 1:
        # the weights move the minimum by a fraction of tau's deviation, well within the bracket;
        # a channel with no scatter at all (held at a converter limit throughout) has no weight
        weights = fitted(tau)[2]
        if not all(s > 0 for s in weights):
            return None
        tau = _minimum(projected_cost(elapsed, centred, weights), tau, TAU_TOLERANCE)
        if tau is None:
            return None
    residuals, amplitudes, scatters = fitted(tau)
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


#: A minimum found within this share of the bracket's half-width of its edge is taken as lying
#: beyond it.
EDGE_SHARE = 0.01


def _minimum(cost, guess: float, tolerance: float) -> float | None:
    """The tau that minimises ``cost`` (a function of log tau) within one step of
    projected_tau's grid either side of ``guess``, which holds the minimum when ``guess`` is a
    fit's tau of the same curve (a later window's tau differs by a few standard deviations);
    None when the minimum lies at the bracket's edge, or beyond."""
    lo, hi = math.log(guess) - GRID_STEP, math.log(guess) + GRID_STEP
    found = optimize.minimize_scalar(cost, bounds=(lo, hi), method="bounded", options={"xatol": tolerance})
    x = float(found.x)
    if min(x - lo, hi - x) < EDGE_SHARE * GRID_STEP:
        return None
    return math.exp(x)
