"""A whole record of first-order relaxations: every sample of a square-wave response.

Between switching instants t0_1 < t0_2 < … a first-order loop relaxes toward
the level F_k of its state with one time constant tau, and the signal is
continuous at each switching instant (the inductor current cannot jump)::

    head      y = F_0 + C_0·exp(−(t − t_start)/tau)                 t < t0_1
    state k   y = F_k + (v_k − F_k)·exp(−(t − t0_k)/tau)            t0_k ≤ t < t0_{k+1}
              v_k = the value of the previous piece at t0_k

Fitting tau, every F_k, every t0_k and the head (F_0, C_0) to all samples at once
is the maximum-likelihood estimate for an instantaneous generator edge: no
sample is left out at an edge (the information on tau of an exponential falls
as exp(−2s/tau) with the time s left out at its start) and no window is cut
from the same data it is fitted to, which would bias tau at low SNR. The
switching instants are parameters, so the kink at each edge is located by the
fit itself. A generator edge of finite duration or a ringing spike makes the
model wrong near the edges; the method compares this fit with windowed fits
that skip the edges and falls back to those when they disagree.
"""
from __future__ import annotations

import dataclasses
from typing import Sequence

import numpy as np

from ..signal.edges import noise_rms, placement_deviation
from .engine import Block, fit_least_squares
from .exponential import decay
from .jacobian import Jacobian, Piece
from .quantisation import include_quantisation
from .result import FitResult


def relaxation_model(t: np.ndarray, theta: np.ndarray, n_states: int) -> np.ndarray:
    """Model values for θ = [tau, F_0, C_0, F_1, t0_1, …, F_K, t0_K] (module doc)."""
    tau, f0, c0 = theta[0], theta[1], theta[2]
    y = np.empty(t.size)
    bounds, starts = _states(t, theta, n_states)
    _relax(t[:bounds[0]], t[0], tau, f0, c0, y[:bounds[0]])
    for k, (v, _) in enumerate(starts):
        fk, tk = theta[3 + 2 * k], theta[4 + 2 * k]
        seg = slice(bounds[k], bounds[k + 1])
        _relax(t[seg], tk, tau, fk, v - fk, y[seg])
    return y


def _relax(t: np.ndarray, t_ref: float, tau: float, final: float, coef: float, out: np.ndarray) -> None:
    """final + coef·exp(−(t − t_ref)/tau) into ``out``, the same numbers as the expression
    (:func:`~wavefit.fit.exponential.decay`), without a temporary array."""
    np.subtract(t, t_ref, out=out)
    decay(out, tau, out=out)
    out *= coef
    out += final


def relaxation_jacobian(t: np.ndarray, theta: np.ndarray, n_states: int) -> Jacobian:
    """∂y/∂θ of :func:`relaxation_model`, one piece per state.

    In state k, y = F_k + (v_k − F_k)·e_k with e_k = exp(−(t − t0_k)/tau), so its rows are
    1 − e_k on F_k, e_k·∂v_k/∂θ, and (v_k − F_k)·e_k·(t − t0_k)/tau² on tau and
    (v_k − F_k)·e_k/tau on t0_k: four functions of time times a 4 × p matrix. The head's
    rows are 1 on F_0, e on C_0 and C_0·e·(t − t_start)/tau² on tau. ∂v_k/∂θ, the
    continuity's memory of every earlier state, comes from a recursion over the switching
    instants."""
    tau, c0 = theta[0], theta[2]
    p = theta.size
    bounds, starts = _states(t, theta, n_states)

    def head(a: int, b: int) -> np.ndarray:
        u = t[a:b] - t[0]
        e = decay(u, tau)
        return np.column_stack((np.ones_like(e), e, c0 * e * u / tau ** 2))

    coef = np.zeros((3, p))
    coef[0, 1], coef[1, 2], coef[2, 0] = 1.0, 1.0, 1.0
    pieces = [Piece(0, int(bounds[0]), head, coef)]
    for k, (v, dv) in enumerate(starts):
        fk, tk = theta[3 + 2 * k], theta[4 + 2 * k]

        def state(a: int, b: int, fk: float = fk, tk: float = tk, v: float = v) -> np.ndarray:
            u = t[a:b] - tk
            e = decay(u, tau)
            return np.column_stack((1.0 - e, e, (v - fk) * e * u / tau ** 2, (v - fk) * e / tau))

        coef = np.zeros((4, p))
        coef[0, 3 + 2 * k] = 1.0
        coef[1] = dv
        coef[2, 0] = 1.0
        coef[3, 4 + 2 * k] = 1.0
        pieces.append(Piece(int(bounds[k]), int(bounds[k + 1]), state, coef))
    return Jacobian(t.size, pieces)


def _states(t: np.ndarray, theta: np.ndarray, n_states: int) -> tuple[np.ndarray, list[tuple[float, np.ndarray]]]:
    """First sample of each state (the record's length appended), and each state's starting
    value v_k with its gradient ∂v_k/∂θ (the value of the piece before at t0_k)."""
    tau, f0, c0 = theta[0], theta[1], theta[2]
    p = theta.size
    t0s = theta[4::2]
    bounds = np.append(np.searchsorted(t, t0s), t.size) if n_states else np.array([t.size])
    starts = []
    if n_states:
        e1 = np.exp(-(t0s[0] - t[0]) / tau)
        v = f0 + c0 * e1
        dv = np.zeros(p)
        dv[0] = c0 * e1 * (t0s[0] - t[0]) / tau ** 2
        dv[1], dv[2], dv[4] = 1.0, e1, -c0 * e1 / tau
    for k in range(n_states):
        starts.append((v, dv))
        if k + 1 < n_states:
            fk, tk = theta[3 + 2 * k], theta[4 + 2 * k]
            dt_next = t0s[k + 1] - tk
            en = np.exp(-dt_next / tau)
            dv_new = en * dv
            dv_new[3 + 2 * k] += 1.0 - en
            dv_new[0] += (v - fk) * en * dt_next / tau ** 2
            dv_new[4 + 2 * k] += (v - fk) * en / tau
            dv_new[4 + 2 * (k + 1)] += -(v - fk) * en / tau
            v = fk + (v - fk) * en
            dv = dv_new
    return bounds, starts


def fit_relaxations(t: np.ndarray, y: np.ndarray, t0_guess: Sequence[float], level_guess: Sequence[float],
                    tau0: float, *, noise: str = "auto", rms: float | None = None) -> FitResult:
    """Fit the whole-record relaxation model; ``level_guess`` = [F_0, F_1, …, F_K]; ``rms`` is
    the record's :func:`~wavefit.signal.edges.noise_rms` when the caller has it already."""
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    k = len(t0_guess)
    scale = tau0
    ts = (t - t[0]) / scale  # work in units of tau0 from the record start
    x0 = [1.0, level_guess[0], 0.0]
    for f, t0 in zip(level_guess[1:], t0_guess):
        x0 += [f, (t0 - t[0]) / scale]
    x0 = np.asarray(x0, dtype=float)

    def fun(x):
        r = relaxation_model(ts, x, k)
        return np.subtract(y, r, out=r)

    def jac(x):
        return relaxation_jacobian(ts, x, k).negated()

    names = ["tau", "final_head", "coef_head"]
    for i in range(k):
        names += [f"final_{i + 1}", f"t0_{i + 1}"]
    lower = np.full(x0.size, -np.inf)
    upper = np.full(x0.size, np.inf)
    lower[0] = 1e-3
    # keep every switching instant near its guess and between its neighbours' guesses; near
    # means within 0.3 tau0, 4 samples, or 6 standard deviations of the instant the noise
    # allows, σ·tau/|step| (at low SNR the guess itself is that uncertain)
    dt = ts[1] - ts[0]
    sigma = noise_rms(y) if rms is None else rms
    for i in range(k):
        step = abs(level_guess[i + 1] - level_guess[i]) or np.inf
        reach = max(0.3, 4.0 * dt, 6.0 * placement_deviation(sigma, 1.0, step))  # time in units of tau0
        lo = (x0[4 + 2 * (i - 1)] if i else ts[0]) + dt
        hi = (x0[4 + 2 * (i + 1)] if i + 1 < k else ts[-1]) - dt
        guess = x0[4 + 2 * i]
        lower[4 + 2 * i] = max(0.5 * (lo + guess), guess - reach)
        upper[4 + 2 * i] = min(0.5 * (hi + guess), guess + reach)
    blocks = [Block(0, t.size, "sense")]
    fit = fit_least_squares(fun, jac, x0, names, blocks, model="square-wave relaxation",
                            noise=noise, bounds=(lower, upper))
    fit = include_quantisation(fit, y, lambda x: relaxation_model(ts, x, k), lambda x: relaxation_jacobian(ts, x, k),
                               blocks)
    factor = np.ones(x0.size)
    factor[0] = scale
    factor[4::2] = scale
    values = fit.values * factor
    values[4::2] += t[0]
    return dataclasses.replace(fit, values=values, covariance=fit.covariance * np.outer(factor, factor))
