"""Exponential step responses: y(t) = final + coefficient·exp(−(t − t_ref)/tau).

Within one state of a square-wave or step drive, every node of a first-order
circuit relaxes exponentially toward its final level with the loop's time
constant, whatever happened before the window started (the solution of a
linear first-order ODE with constant input). So each window is fitted with its
own final level and coefficient per channel and one ``tau`` shared by all
channels of the window; ``t_ref`` is the window's first instant, and nothing
depends on where exactly the drive switched.

Starting values come from variable projection: for fixed ``tau`` the model is
linear in (final, coefficient), so the residual sum of squares is minimised
over ``tau`` alone (G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10 (1973)
413–432). The final fit is :func:`wavefit.fit.engine.fit_least_squares`, with
its autoregressive noise model for band-limited scope noise.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import NamedTuple, Sequence

import numpy as np
from scipy import optimize

from .engine import NEGLIGIBLE_CHANGE, Block, fit_least_squares
from .jacobian import Jacobian, Piece
from .quantisation import include_quantisation
from .result import FitResult


@dataclass(frozen=True)
class WindowChannel:
    """One channel's samples in a fit window: times (s), values, and its parameter label.

    ``noise_group`` names the noise model the samples share (default: ``group``), so
    several windows of one channel can be fitted jointly with one noise model.
    """

    group: str
    time: np.ndarray
    values: np.ndarray
    noise_group: str | None = None


def exponential_step(t: np.ndarray, final: float, coef: float, tau: float, t_ref: float = 0.0) -> np.ndarray:
    """final + coef·exp(−(t − t_ref)/tau), the model of one channel in one window."""
    return final + coef * np.exp(-(np.asarray(t, dtype=float) - t_ref) / tau)


def decay(u: np.ndarray, tau: float, out: np.ndarray | None = None) -> np.ndarray:
    """exp(−u/tau) in one array (``out`` when given), without the temporaries of the expression:
    u/(−tau) is −u/tau exactly (a quotient's rounding does not depend on the signs)."""
    e = np.divide(u, -tau, out=out)
    return np.exp(e, out=e)


def linear_part(e: np.ndarray, y: np.ndarray) -> tuple[float, float]:
    """Least-squares (final, coefficient) of y = final + coefficient·e for a fixed basis ``e``:
    the simple regression of y on e, from the centred samples (no factorisation); the
    coefficient is 0 when ``e`` does not vary."""
    e_mean, y_mean = float(np.mean(e)), float(np.mean(y))
    centred = e - e_mean
    spread = float(centred @ centred)
    coef = float(centred @ (y - y_mean)) / spread if spread > 0 else 0.0
    return y_mean - coef * e_mean, coef


def projected_tau(channels: Sequence[WindowChannel], tau0: float, scales: Sequence[float] | None = None,
                  tolerance: float = 1e-6) -> float:
    """Variable-projection estimate of tau: minimise the summed, scatter-normalised RSS over tau.

    Parameters
    ----------
    channels
        The window's channels; each exponential is referred to its channel's first instant.
    tau0
        Rough time constant (for example from 10 %/90 % reference-level instants).
    scales
        Each channel's noise variance, by which its residual sum of squares is divided
        (default: the channel's own variance about its mean).
    tolerance
        Absolute tolerance on log tau (the relative one on tau) of the bounded search, which
        is taken where Gauss–Newton steps (:meth:`ProjectedProblem.minimum`) from the grid's
        best point do not converge within its neighbours (they converge to rounding).

    References
    ----------
    G. H. Golub and V. Pereyra, "The differentiation of pseudo-inverses and
    nonlinear least squares problems whose variables separate", SIAM J. Numer.
    Anal. 10 (1973) 413–432.
    L. Kaufman, BIT 15 (1975) 49–57 (the Gauss–Newton steps).
    """
    problem = ProjectedProblem(channels)
    return problem.start(tau0, problem.own_variances() if scales is None else list(scales), tolerance)


#: The starting grid of :func:`projected_tau` spans tau0·GRID_LOW to tau0/GRID_LOW (a rough
#: tau0 from reference-level instants is within that).
GRID_LOW = 0.2
#: Points of that grid (evenly spaced in log tau) and the step between them.
GRID_POINTS = 25
GRID_STEP = 2.0 * math.log(1.0 / GRID_LOW) / (GRID_POINTS - 1)
#: The grid is evaluated on about this many samples per channel (every stride-th of a longer
#: window): it only picks the bracket in which the minimum is then sought on every sample.
GRID_SAMPLES = 2048


def projected_cost(times: Sequence[np.ndarray], values: Sequence[np.ndarray],
                   scales: Sequence[float] | None = None):
    """The residual sum of squares of each channel on (1, exp(−t/tau)), each over its ``scales``
    (default: the channel's own variance), summed, as a function of log tau: the
    variable-projection cost of :func:`projected_tau`."""
    elapsed = [t - float(t[0]) for t in times]
    same = first_equal(elapsed)
    centred = [y - float(np.mean(y)) for y in values]
    sums = [float(y @ y) for y in centred]
    if scales is None:
        scales = [s / y.size or 1.0 for s, y in zip(sums, centred)]
    # the basis of each set of instants, rewritten at every evaluation (no array allocated there)
    buffers = [np.empty_like(t) if same[c] == c else None for c, t in enumerate(elapsed)]

    def cost(log_tau: float) -> float:
        total = 0.0
        basis: list[np.ndarray] = []
        for c, (t, y, syy, scale) in enumerate(zip(elapsed, centred, sums, scales)):
            if same[c] == c:
                e = decay(t, math.exp(log_tau), out=buffers[c])
                e -= e.mean()
            else:
                e = basis[same[c]]  # the channels of one window share their instants
            basis.append(e)
            see = float(e @ e)
            rss = syy - float(e @ y) ** 2 / see if see > 0 else syy
            total += max(rss, 0.0) / scale
        return total

    return cost


class ChannelTerms(NamedTuple):
    """One channel's part of :class:`ProjectedProblem` at one tau: its residual sum of squares,
    its unweighted terms of the projected problem's Jᵀr and JᵀJ in log tau, the fitted
    coefficient of exp(−u/tau) and the residuals (about the channel's mean and that curve)."""

    rss: float
    gradient: float
    curvature: float
    coefficient: float
    residual: np.ndarray


class ProjectedProblem:
    """The least squares of a window's channels over tau alone, each channel's level and
    coefficient profiled out (for fixed tau, the simple regression on exp(−u/tau), u the time
    from the channel's first instant), each channel's residual sum of squares over its weight.

    :meth:`minimum` takes Gauss–Newton steps in log tau: each is the Gauss–Newton step of the
    residuals projected onto the complement of (1, exp(−u/tau)), with Kaufman's Jacobian of
    the projection (the derivative of the basis times the channel's coefficient, projected
    likewise), which is the full problem's Gauss–Newton step in tau. The terms of the last
    tau evaluated are kept, so a minimum found with one set of weights is the next search's
    start at no cost.

    References
    ----------
    L. Kaufman, "A variable projection method for solving separable nonlinear least squares
    problems", BIT 15 (1975) 49–57.
    G. H. Golub and V. Pereyra, SIAM J. Numer. Anal. 10 (1973) 413–432.
    """

    def __init__(self, channels: Sequence[WindowChannel]):
        self.times = [np.asarray(ch.time, dtype=float) for ch in channels]
        self.values = [np.asarray(ch.values, dtype=float) for ch in channels]
        self.elapsed = [t - float(t[0]) for t in self.times]
        self.centred = [y - float(np.mean(y)) for y in self.values]
        self.same = first_equal(self.elapsed)
        self._kept: tuple[float, list[ChannelTerms] | None] | None = None

    def own_variances(self) -> list[float]:
        """Each channel's variance about its mean (:func:`projected_cost`'s default weights)."""
        return [float(y @ y) / y.size or 1.0 for y in self.centred]

    def start(self, tau0: float, weights: Sequence[float], tolerance: float = 1e-6) -> float:
        """The minimum over tau0·GRID_LOW … tau0/GRID_LOW (:func:`projected_tau`): a grid in log
        tau brackets it, Gauss–Newton steps from the grid's best point reach it, and a bounded
        search within the bracket (to ``tolerance`` in log tau) where they do not converge
        there."""
        # for fixed tau each channel is a straight line in e = exp(−t/tau): its residual sum of
        # squares is that of simple regression on the centred samples, Syy − Sey²/See, with no
        # factorisation per evaluation
        # the grid only brackets the minimum: on a long window every stride-th sample does that as
        # well, as long as the shortest tau of the grid still spans several of its intervals
        times = self.times
        dt = float(times[0][1] - times[0][0]) if times[0].size > 1 else 0.0
        shortest = min(t.size for t in times)
        stride = max(1, min(shortest // GRID_SAMPLES, int(GRID_LOW * tau0 / (4.0 * dt)) if dt > 0 else 1))
        coarse = projected_cost([t[::stride] for t in times], [y[::stride] for y in self.values], weights)
        grid = np.log(tau0) + np.linspace(math.log(GRID_LOW), math.log(1.0 / GRID_LOW), GRID_POINTS)
        costs = [coarse(g) for g in grid]
        k = int(np.argmin(costs))
        if 0 < k < grid.size - 1:
            # Gauss–Newton steps (a few evaluations where the bounded search takes ten or more)
            found = self.minimum(math.exp(grid[k]), weights)
            if found is not None and grid[k - 1] < math.log(found) < grid[k + 1]:
                return found
        lo, hi = grid[max(k - 1, 0)], grid[min(k + 1, grid.size - 1)]
        # the cost on every sample, made only here, where the steps did not converge
        cost = coarse if stride == 1 else projected_cost(times, self.values, weights)
        res = optimize.minimize_scalar(cost, bounds=(lo, hi), method="bounded", options={"xatol": tolerance})
        return float(math.exp(res.x))

    def terms(self, tau: float) -> list[ChannelTerms] | None:
        """Each channel's :class:`ChannelTerms` at ``tau``; None where a basis does not vary."""
        if self._kept is not None and self._kept[0] == tau:
            return self._kept[1]
        bases: list[tuple[np.ndarray, np.ndarray, float]] = []
        out: list[ChannelTerms] | None = []
        for c, (u, y) in enumerate(zip(self.elapsed, self.centred)):
            if self.same[c] == c:
                e = decay(u, tau)
                slope = e * u  # the basis's derivative by log tau, times tau
                e -= e.mean()
                slope -= slope.mean()
                see = float(e @ e)
                if not see > 0:
                    out = None
                    break
                slope -= (float(slope @ e) / see) * e  # its part outside the basis
                bases.append((e, slope, see))
            else:
                bases.append(bases[self.same[c]])  # the channels of one window share their instants
            e, slope, see = bases[c]
            coefficient = float(e @ y) / see
            # the sum of squares of the residuals themselves: as y·y − c·(e·y) it cancels to
            # noise of its own once they are 1e-7 of the signal, and it sets the channels'
            # weights (a fault campaign found them 6–10 times off at noise 1e-9 of the step)
            residual = y - coefficient * e
            # the residual is orthogonal to the basis, so its product with the projected
            # derivative is its product with the derivative itself
            out.append(ChannelTerms(float(residual @ residual), coefficient * float(slope @ y) / tau,
                                    coefficient ** 2 * float(slope @ slope) / tau ** 2, coefficient, residual))
        self._kept = (tau, out)
        return out

    def minimum(self, tau_start: float, weights: Sequence[float]) -> float | None:
        """The tau that minimises the weighted sum of squares, by Gauss–Newton steps from
        ``tau_start``; None where they do not converge.

        The steps stop when one would lower the sum by less than
        :data:`~wavefit.fit.engine.NEGLIGIBLE_CHANGE` of it (the solver's own stop); a step
        longer than :data:`GRID_STEP` (the spacing of the grid a start is found on: the
        minimum is then flat or far), a step that raises the sum, or more than
        :data:`SOLUTION_ITERATIONS` steps end them with None."""
        try:
            return self._descend(tau_start, weights)
        except (OverflowError, ZeroDivisionError):
            return None  # values near the float range's end: the solver's (vectorised) work

    def _descend(self, tau_start: float, weights: Sequence[float]) -> float | None:
        """:meth:`minimum`'s steps."""
        tau = tau_start
        terms = self.terms(tau)
        for _ in range(SOLUTION_ITERATIONS):
            if terms is None:
                return None
            cost = sum(t.rss / w for t, w in zip(terms, weights))
            gradient = sum(t.gradient / w for t, w in zip(terms, weights))
            curvature = sum(t.curvature / w for t, w in zip(terms, weights))
            if not (curvature > 0 and math.isfinite(gradient)):
                return None
            step = gradient / curvature
            if step * gradient <= NEGLIGIBLE_CHANGE * cost:
                return tau  # the step would lower the sum by less than its rounding
            if abs(step) > GRID_STEP:
                return None
            tau *= math.exp(step)
            terms = self.terms(tau)
            if terms is not None and sum(t.rss / w for t, w in zip(terms, weights)) > cost * (1.0 + SOLUTION_RISE):
                return None
        return None

    def scatter_weights(self, tau: float, groups: Sequence[str]) -> list[float] | None:
        """Each channel's weight as :func:`wavefit.fit.engine.fit_least_squares` weighs its noise
        group by the residuals at ``tau``: the group's sum of squares over its samples less its
        share of the parameters (1 + 2 per channel); None where a group has no scatter."""
        terms = self.terms(tau)
        if terms is None:
            return None
        n_par = 1 + 2 * len(self.centred)
        total = sum(y.size for y in self.centred)
        scatter = {}
        for g in set(groups):
            members = [c for c in range(len(groups)) if groups[c] == g]
            size = sum(self.centred[c].size for c in members)
            scatter[g] = sum(terms[c].rss for c in members) / max(size - n_par * size / total, 1.0)
        if not all(s > 0 for s in scatter.values()):
            return None
        return [scatter[g] for g in groups]

    def weighted_solution(self, tau_start: float, groups: Sequence[str]) -> float | None:
        """tau of the least squares that :func:`fit_exponential_window`'s first solve reaches
        from the projected start ``tau_start``, by :meth:`minimum`; None where its steps do
        not converge (the solver then takes that solve). That solve weighs each noise group
        (``groups``, one per channel) by its scatter about the start (:meth:`scatter_weights`)
        when there are two or more, else all alike."""
        weights = self.scatter_weights(tau_start, groups) if len(set(groups)) > 1 else [1.0] * len(groups)
        return None if weights is None else self.minimum(tau_start, weights)


#: Gauss–Newton steps :meth:`ProjectedProblem.minimum` may take: from a start within 1e-6 of
#: the minimum (projected_tau's tolerance) the steps shrink by orders of magnitude each.
SOLUTION_ITERATIONS = 8
#: A step may raise the sum of squares by this share before it counts as a rise (a step that
#: overshoots the minimum): each channel's sum is the difference of its samples' sum of squares
#: and the part the curve explains, which at a signal 10³ times its noise over 10⁷ samples
#: rounds to about 1e-10 of itself.
SOLUTION_RISE = 1e-8


def curve_information(u: np.ndarray, amplitude: float, tau: float) -> float:
    """1/var(tau), up to the noise variance, of final + amplitude·exp(−u/tau) sampled at the
    elapsed times ``u``, with its final level and amplitude free (the linearised information:
    G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §2.1)."""
    # the part of tau's column (amplitude·u·e/tau²) that the level and the amplitude's columns
    # (1 and e) do not explain: its residual sum of squares in simple regression on e, each
    # centred (the Schur complement 1/(JᵀJ)⁻¹ of tau's entry)
    e = decay(u, tau)
    slope = e * u
    e -= e.mean()
    slope -= slope.mean()
    spread = float(e @ e)
    unexplained = float(slope @ slope) - (float(e @ slope) ** 2 / spread if spread > 0 else 0.0)
    return (amplitude / tau ** 2) ** 2 * unexplained


def fit_exponential_window(channels: Sequence[WindowChannel], tau0: float, *, noise: str = "auto",
                           model: str = "exponential step") -> FitResult:
    """Fit y_c(t) = final_c + coef_c·exp(−(t − t_ref)/tau) to all channels with one shared tau.

    Parameters
    ----------
    channels
        One :class:`WindowChannel` per recorded channel (distinct ``group`` names);
        the fitted parameters are ``tau``, ``final_<group>`` and ``coef_<group>``.
    tau0
        Rough time constant in seconds, used to start the search.
    noise
        Noise model of :func:`wavefit.fit.engine.fit_least_squares`.

    Returns
    -------
    FitResult
        With ``t_ref`` and ``t_ref_by_group`` set; ``residuals`` are the channels' in order.

    References
    ----------
    G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §2.1
    (linearised covariance) and ch. 6 (autocorrelated errors).
    """
    # each channel's exponential is referred to its own first instant (the same instant for the
    # channels of one window; different ones when several windows are fitted jointly)
    t_refs = {ch.group: float(ch.time[0]) for ch in channels}
    t_ref = min(t_refs.values())
    problem = ProjectedProblem(channels)
    tau_start = problem.start(tau0, problem.own_variances())  # projected_tau's
    # the first solve's solution by variable projection, where it converges (else the solver's)
    solved = (problem.weighted_solution(tau_start, [ch.noise_group or ch.group for ch in channels])
              if noise in ("auto", "white") else None)
    # Work in units of tau_start so the parameters are of order one.
    scaled = [(np.asarray(ch.time, dtype=float) - t_refs[ch.group]) / tau_start for ch in channels]
    x0 = [1.0 if solved is None else solved / tau_start]
    for ch, u in zip(channels, scaled):
        x0 += list(linear_part(np.exp(-u / x0[0]), ch.values))
    sizes = [ch.values.size for ch in channels]
    offsets = np.concatenate(([0], np.cumsum(sizes)))
    y = np.concatenate([ch.values for ch in channels])
    n_par = 1 + 2 * len(channels)

    same = first_equal(scaled)

    last: dict[float, list[np.ndarray]] = {}  # the decays at the tau last asked for

    def decays(x: np.ndarray) -> list[np.ndarray]:
        """exp(−u/tau) of each channel, computed once for channels sampled at the same instants,
        and once for the residuals and the Jacobian that the solver asks for at one point (the
        arrays are read, never written)."""
        tau = float(x[0])
        if tau not in last:
            out: list[np.ndarray] = []
            for c, u in enumerate(scaled):
                out.append(decay(u, x[0]) if same[c] == c else out[same[c]])
            last.clear()
            last[tau] = out
        return last[tau]

    def model_values(x: np.ndarray) -> np.ndarray:
        return np.concatenate([x[1 + 2 * c] + x[2 + 2 * c] * e for c, e in enumerate(decays(x))])

    def fun(x: np.ndarray) -> np.ndarray:
        return y - model_values(x)

    def jac(x: np.ndarray) -> Jacobian:
        # each channel's rows depend on tau and its own final level and coefficient only
        pieces = []
        found: list[list[np.ndarray]] = []  # the channels' decays, computed at the first rows asked for

        for c, u in enumerate(scaled):
            def basis(a: int, b: int, c: int = c, u: np.ndarray = u) -> np.ndarray:
                if not found:
                    found.append(decays(x))
                rows = slice(a - offsets[c], b - offsets[c])
                uu, e = u[rows], found[0][c][rows]
                return np.column_stack((-x[2 + 2 * c] * e * uu / x[0] ** 2, np.full_like(e, -1.0), -e))

            select = np.zeros((3, n_par))
            select[[0, 1, 2], [0, 1 + 2 * c, 2 + 2 * c]] = 1.0
            pieces.append(Piece(int(offsets[c]), int(offsets[c + 1]), basis, select))
        return Jacobian(y.size, pieces)

    names = ["tau"]
    for ch in channels:
        names += [f"final_{ch.group}", f"coef_{ch.group}"]
    blocks = [Block(int(offsets[c]), int(offsets[c + 1]), ch.noise_group or ch.group)
              for c, ch in enumerate(channels)]
    lower = np.full(n_par, -np.inf)
    lower[0] = 1e-6
    fit = fit_least_squares(fun, jac, x0, names, blocks, model=model, noise=noise,
                            bounds=(lower, np.full(n_par, np.inf)), fitted_start=True,
                            solved_start=solved is not None)
    fit = include_quantisation(fit, y, model_values, lambda x: jac(x).negated(), blocks)
    covariance = fit.covariance
    scale = np.ones(n_par)
    scale[0] = tau_start
    return dataclasses.replace(fit, values=fit.values * scale, covariance=covariance * np.outer(scale, scale),
                               t_ref=t_ref, t_ref_by_group=t_refs)


def first_equal(arrays: Sequence[np.ndarray]) -> list[int]:
    """For each array, the index of the first one equal to it (its own index if none before)."""
    out: list[int] = []
    for c, a in enumerate(arrays):
        out.append(next((k for k in range(c) if out[k] == k and np.array_equal(arrays[k], a)), c))
    return out


def window_model(fit: FitResult, group: str, t: np.ndarray) -> np.ndarray:
    """The fitted curve of one channel at times ``t``."""
    t_ref = fit.t_ref_by_group.get(group, fit.t_ref)
    return exponential_step(t, fit[f"final_{group}"], fit[f"coef_{group}"], fit["tau"], t_ref)


def fit_saturating(x: np.ndarray, y: np.ndarray, start: Sequence[float]) -> FitResult:
    """Fit y = b1·(1 − exp(−b2·x)) in white noise; parameters ``b1`` and ``b2``.

    This is the step response from zero with the reference instant at x = 0, the form of
    the NIST StRD problems Misra1a and BoxBOD; the covariance is s²·(JᵀJ)⁻¹,
    s² = RSS/(n − p), as NIST defines its certified standard deviations.

    References
    ----------
    NIST Statistical Reference Datasets, nonlinear regression,
    https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)

    def fun(b: np.ndarray) -> np.ndarray:
        with np.errstate(over="ignore"):  # far-off trial steps of the solver
            return y - b[0] * (1.0 - np.exp(-b[1] * x))

    def jac(b: np.ndarray) -> np.ndarray:
        with np.errstate(over="ignore"):
            e = np.exp(-b[1] * x)
        return np.column_stack((-(1.0 - e), -b[0] * x * e))

    return fit_least_squares(fun, jac, start, ("b1", "b2"), [Block(0, x.size)],
                             model="saturating exponential", noise="white")
