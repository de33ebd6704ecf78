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

from typing import Sequence

import numpy as np

from ..signal.edges import noise_rms, placement_deviation
from .engine import Block, fit_least_squares
from .quantisation import include_quantisation
from .result import FitResult


def relaxation_model(t: np.ndarray, theta: np.ndarray, n_states: int,
                     jacobian: bool = False) -> tuple[np.ndarray, np.ndarray | None]:
    """Model values (and the Jacobian ∂y/∂θ) for θ = [tau, F_0, C_0, F_1, t0_1, …, F_K, t0_K]."""
    tau, f0, c0 = theta[0], theta[1], theta[2]
    p = theta.size
    y = np.empty(t.size)
    jac = np.zeros((t.size, p)) if jacobian else None
    t0s = theta[4::2]
    bounds = np.searchsorted(t, t0s)
    head = slice(0, bounds[0] if n_states else t.size)
    e = np.exp(-(t[head] - t[0]) / tau)
    y[head] = f0 + c0 * e
    if jacobian:
        jac[head, 0] = c0 * e * (t[head] - t[0]) / tau ** 2
        jac[head, 1] = 1.0
        jac[head, 2] = e
    # value at the first switching instant and its gradient
    e1 = np.exp(-(t0s[0] - t[0]) / tau) if n_states else 0.0
    v = f0 + c0 * e1
    dv = np.zeros(p)
    if n_states:
        dv[0] = c0 * e1 * (t0s[0] - t[0]) / tau ** 2
        dv[1], dv[2], dv[4] = 1.0, e1, -c0 * e1 / tau
    for k in range(n_states):
        fk, tk = theta[3 + 2 * k], theta[4 + 2 * k]
        stop = bounds[k + 1] if k + 1 < n_states else t.size
        seg = slice(bounds[k], stop)
        u = t[seg] - tk
        ek = np.exp(-u / tau)
        y[seg] = fk + (v - fk) * ek
        if jacobian:
            jac[seg] = ek[:, None] * dv[None, :]
            jac[seg, 3 + 2 * k] += 1.0 - ek
            jac[seg, 0] += (v - fk) * ek * u / tau ** 2
            jac[seg, 4 + 2 * k] += (v - fk) * ek / tau
        if k + 1 < n_states:
            dt_next = t0s[k + 1] - tk
            en = np.exp(-dt_next / tau)
            dv_new = en * dv
            dv_new[3 + 2 * k] += 1.0 - en
            dv_new[0] += (v - fk) * en * dt_next / tau ** 2
            dv_new[4 + 2 * k] += (v - fk) * en / tau
            dv_new[4 + 2 * (k + 1)] += -(v - fk) * en / tau
            v = fk + (v - fk) * en
            dv = dv_new
    return y, jac


def fit_relaxations(t: np.ndarray, y: np.ndarray, t0_guess: Sequence[float], level_guess: Sequence[float],
                    tau0: float, *, noise: str = "auto") -> FitResult:
    """Fit the whole-record relaxation model; ``level_guess`` = [F_0, F_1, …, F_K]."""
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
        return y - relaxation_model(ts, x, k)[0]

    def jac(x):
        return -relaxation_model(ts, x, k, jacobian=True)[1]

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
    sigma = noise_rms(y)
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
    fit = include_quantisation(fit, y, lambda x: y - fun(x), lambda x: -jac(x), blocks)
    factor = np.ones(x0.size)
    factor[0] = scale
    factor[4::2] = scale
    values = fit.values * factor
    values[4::2] += t[0]
    return FitResult(
        model=fit.model, names=fit.names, values=values, covariance=fit.covariance * np.outer(factor, factor),
        residuals=fit.residuals, noise_sigma=fit.noise_sigma, noise_model=fit.noise_model,
        n_samples=fit.n_samples, n_effective=fit.n_effective, dof=fit.dof, diagnostics=fit.diagnostics,
        warnings=fit.warnings,
    )
