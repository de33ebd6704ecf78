"""Weighted nonlinear least squares with a fitted noise model, returning a FitResult.

Stage 1 is ordinary least squares, with one weight per noise group (channel) taken
from its residual scatter. Stage 2, when
``noise="auto"``, fits an AR model per noise group to the residuals and refits
the whitened problem (feasible GLS, see :mod:`wavefit.fit.noise_model`); a refit, and a
first solve whose caller says its start is close, starts with Gauss–Newton steps
(:mod:`wavefit.fit.gauss_newton`), the solver taking over where they do not settle. The
covariance is s²·(JᵀJ)⁻¹ of the whitened, weighted problem, the usual
linearised estimate (e.g. Seber & Wild 1989, §2.1), which is also how the
NIST StRD certified standard deviations are defined.

A Jacobian may be an array or a :class:`~wavefit.fit.jacobian.Jacobian` of pieces.
A problem too large to hold densely (:func:`~wavefit.fit.jacobian.is_small`) is given
to the solver as the triangular factor of its whitened rows
(:mod:`wavefit.fit.compressed`): the same steps, with memory that grows with the record
only through its residual vectors, whatever the number of parameters.

The minimisation runs through :class:`lmfit.Minimizer` (``least_squares``, the trust
region reflective method of scipy, with the analytic Jacobian and scipy's own bounds), on
the whitened residual that this module builds: the problem is stated as
:class:`lmfit.Parameters`, so fixed parameters and constraint expressions come with it
(:func:`fit_parameters`); :func:`fit_least_squares` states plain vectors as parameters.

The residuals are checked for structure with the Ljung–Box portmanteau
statistic (G. M. Ljung and G. E. P. Box, Biometrika 65 (1978) 297–303).
"""
from __future__ import annotations

import math
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Any, Callable, Iterator, Sequence

import lmfit
import numpy as np

from ..errors import AnalysisRefused
from .compressed import TriangularProblem, triangle
from .constraints import ParameterMap
from .gauss_newton import descend
from .jacobian import Jacobian, as_jacobian, is_small
from .noise_model import ARNoise, fit_ar, white
from .portmanteau import ljung_box, structured
from .result import FitResult
from .sandwich import sandwich_covariance

Vector = np.ndarray

#: Noise level used for a group whose residuals are exactly zero (a settled level that reads
#: one converter code): small, yet large enough that whitened products of a million samples
#: stay finite (1e-300 overflowed them).
ZERO_SCATTER = 1e-100

#: Residual evaluations one solve may take (scipy's ``max_nfev``): a well-posed fit of the
#: waveforms here converges in a few tens; more means it wanders and is stopped.
MAX_EVALUATIONS = 200
#: Stopping tolerances of the solver (``ftol``, ``xtol``, ``gtol``): as tight as rounding
#: allows, so that results do not depend on where a looser stop happened to fall.
TOLERANCE = 1e-15
#: A trial step whose linear change of the residuals, ‖J·Δx‖², is below this fraction of the
#: sum of squares at the best point is taken as lowering nothing (:func:`minimise`): near the
#: solution the trust region shrinks to a quarter per rejected step down to TOLERANCE, and
#: such steps only try the sum's rounding (they changed the sum of squares of rl-step windows
#: by at most 1.1e-15 relative, and were a third of all residual evaluations, measured on
#: 10⁵-sample records). Judged against the sum of squares, not the parameters' values, the
#: bound is one on the step in standard errors: ‖J·Δx‖² ≈ (Δx/σ)²·S/(n − p), so a step
#: skipped is below 1e-7·√n standard errors (3e-4 at 10⁷ samples) however precisely a
#: parameter is known; a result moves by at most that.
NEGLIGIBLE_CHANGE = 1e-14


@dataclass(frozen=True)
class Block:
    """Rows ``start:stop`` of the residual vector form one contiguous, uniformly sampled run
    of the noise group ``group`` (one channel; several windows of it share a noise model)."""

    start: int
    stop: int
    group: str = "signal"


def fit_least_squares(fun: Callable[[Vector], Vector], jac: Callable[[Vector], "np.ndarray | Jacobian"],
                      x0: Sequence[float], names: Sequence[str], blocks: Sequence[Block], *,
                      model: str, bounds: tuple = (-np.inf, np.inf), noise: str = "auto",
                      x_scale: Sequence[float] | str = "jac", max_ar_order: int = 30,
                      sigma: dict[str, float] | None = None, fitted_start: bool = False,
                      solved_start: bool = False, close_start: bool = False,
                      start_factor: np.ndarray | None = None) -> FitResult:
    """Fit ``fun`` (residual = data − model, for all blocks concatenated) over the vector ``x``.

    The start ``x0``, the ``names`` and the ``bounds`` become free
    :class:`lmfit.Parameters` (:meth:`~wavefit.fit.constraints.ParameterMap.all_free`, made
    when a solve asks for them), fitted as by :func:`fit_parameters`.
    ``fitted_start`` says that ``x0`` already fits every group about as well as the solution
    will (a variable-projection estimate): the groups' scatter, which weighs them against each
    other, is then taken from its residuals, saving the solve with unit weights that would
    otherwise provide them. ``solved_start`` says that ``x0`` is the first solve's solution
    already, and the solve is skipped: a converged least squares of the same residuals with
    unit weights (such as :func:`wavefit.fit.damped_sine.refine`'s on the same window), or,
    with ``fitted_start`` and several groups, with each group weighed by its scatter about
    the fitted start from which the caller solved it
    (:meth:`wavefit.fit.exponential.ProjectedProblem.weighted_solution`). ``close_start``
    says that ``x0`` is within a few standard errors of the solution (another fit's parameters
    carried to part of its window): the first solve then tries Gauss–Newton steps
    (:mod:`wavefit.fit.gauss_newton`) before the trust-region solver. ``start_factor``, with
    ``solved_start`` and one noise group, is the triangular factor of [J | f] at ``x0`` with
    unit weights (the solve's that reached it), which the covariance then reuses.
    """
    x0, lower, upper = checked_start(x0, names, bounds)
    mapping = ParameterMap.all_free(x0, tuple(names), lower, upper)
    return fit_free(fun, jac, mapping, blocks, model=model, noise=noise, x_scale=x_scale,
                    max_ar_order=max_ar_order, sigma=sigma, fitted_start=fitted_start,
                    solved_start=solved_start, close_start=close_start, start_factor=start_factor)


def fit_parameters(fun: Callable[[Vector], Vector], jac: Callable[[Vector], "np.ndarray | Jacobian"],
                   params: lmfit.Parameters, blocks: Sequence[Block], *, model: str, noise: str = "auto",
                   x_scale: Sequence[float] | str = "jac", max_ar_order: int = 30,
                   sigma: dict[str, float] | None = None) -> FitResult:
    """Fit ``fun`` (residual = data − model, for all blocks concatenated) over ``params``.

    Parameters
    ----------
    fun, jac
        The residual vector and its Jacobian (an array or a
        :class:`~wavefit.fit.jacobian.Jacobian`, one column per parameter) as functions of the
        values of *all* parameters of ``params``, in its order.
    params
        Start values, bounds, fixed parameters (``vary=False``) and constraint expressions
        (``expr``). Only the free parameters reach the solver; the Jacobian is reduced to
        them by the chain rule, the derivatives of the expressions taken by central
        differences (:mod:`wavefit.fit.constraints`), the data's own part staying analytic.
    noise
        ``"auto"`` (AR noise model chosen from the residuals), ``"white"`` (independent
        samples, scatter estimated), or ``"known"`` (white with the per-group standard
        deviations given in ``sigma``).
    x_scale
        Characteristic scale of each free parameter for the solver, or ``"jac"``.

    Returns
    -------
    FitResult
        Over all parameters of ``params``: a fixed one has zero variance, an expression
        the variance its linearisation carries from the free ones.

    Raises
    ------
    AnalysisRefused
        A fit that runs out of memory, in one line that gives its size.
    """
    mapping = ParameterMap(params)
    return mapping.expanded(fit_free(fun, jac, mapping, blocks, model=model, noise=noise, x_scale=x_scale,
                                     max_ar_order=max_ar_order, sigma=sigma))


def fit_free(fun: Callable[[Vector], Vector], jac: Callable[[Vector], "np.ndarray | Jacobian"],
             mapping: ParameterMap, blocks: Sequence[Block], *, model: str, noise: str = "auto",
             x_scale: Sequence[float] | str = "jac", max_ar_order: int = 30,
             sigma: dict[str, float] | None = None, fitted_start: bool = False,
             solved_start: bool = False, close_start: bool = False,
             start_factor: np.ndarray | None = None) -> FitResult:
    """:func:`fit_parameters` with the result over the free parameters of ``mapping`` only
    (for a caller that corrects it further before :meth:`ParameterMap.expanded`);
    ``fitted_start``, ``solved_start``, ``close_start`` and ``start_factor`` as for
    :func:`fit_least_squares`."""
    if noise not in ("auto", "white", "known"):
        raise ValueError("noise must be 'auto', 'white' or 'known'")
    blocks = list(blocks)
    m = sum(b.stop - b.start for b in blocks)
    p = mapping.free.size
    if m <= p:
        raise ValueError("fewer samples than parameters")
    with refused_when_out_of_memory(model, m, p):
        return _fit(mapping.residual_function(fun), mapping.jacobian_function(jac), mapping.start(), mapping,
                    blocks, model, noise, x_scale, max_ar_order, sigma, fitted_start, solved_start,
                    close_start, start_factor)


def checked_start(x0: Sequence[float], names: Sequence[str],
                  bounds: tuple = (-np.inf, np.inf)) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """The start ``x0`` and the lower and upper bounds (``bounds`` a pair of scalars or of arrays,
    as scipy's ``least_squares`` takes them) as vectors, once the ``names`` are checked to
    differ and the start to lie within the bounds (lmfit would move it onto a bound; scipy
    refuses it)."""
    x0 = np.asarray(x0, dtype=float)
    if len(set(names)) != len(names):
        raise ValueError("fit parameter names must differ from each other")
    lo, hi = (np.broadcast_to(np.asarray(b, dtype=float), x0.shape) for b in bounds)
    outside = (x0 < lo) | (x0 > hi)
    if np.any(outside):
        raise ValueError(f"the start of {names[int(np.argmax(outside))]} lies outside its bounds")
    return x0, lo, hi


@contextmanager
def refused_when_out_of_memory(model: str, samples: int, parameters: int) -> Iterator[None]:
    """Turn a MemoryError inside a fit into a one-line refusal that names the fit's size."""
    try:
        yield
    except MemoryError:
        raise AnalysisRefused(f"not enough memory for the {model} fit of {samples:,} samples and {parameters} "
                              "parameters; analyse a shorter or decimated record") from None


def _fit(fun, jac, x, mapping: ParameterMap, blocks, model, noise, x_scale, max_ar_order, sigma,
         fitted_start: bool = False, solved_start: bool = False, close_start: bool = False,
         start_factor: np.ndarray | None = None) -> FitResult:
    """The fit over the free parameters of ``mapping`` (``fun``, ``jac`` and ``x`` theirs)."""
    groups = sorted({b.group for b in blocks})
    m = sum(b.stop - b.start for b in blocks)
    p = x.size
    models: dict[str, ARNoise]
    # several groups are weighed by their scatter: from the start's residuals when it is fitted
    # already, else from a first solve with unit weights
    weighed_at_start = fitted_start and noise != "known" and len(groups) > 1
    if noise == "known":
        models = {g: white(float(sigma[g])) for g in groups}  # type: ignore[index]
    elif weighed_at_start and not solved_start:
        models = _scatter_models(fun(x), blocks, groups, p, m)
    else:
        models = {g: white(1.0) for g in groups}
    small = is_small(m, p)
    solved = (start_factor if solved_start else None, models)  # the last solve's factor at x, and its models
    if not (solved_start and noise != "known"):
        x, factor = _solve(fun, jac, x, mapping, blocks, models, x_scale, small, close_start)
        solved = (factor, models)
    r = fun(x)  # the residuals at the current x, evaluated once for every use there
    # each solve below starts from the solution of the one before, whose weights or whitening
    # differ: within a few standard errors of its own, so Gauss–Newton steps are tried first
    if noise != "known":
        models = _scatter_models(r, blocks, groups, p, m)
        if len(groups) > 1 and not weighed_at_start:
            x, factor = _solve(fun, jac, x, mapping, blocks, models, x_scale, small, close=True)
            solved = (factor, models)
            r = fun(x)
            models = _scatter_models(r, blocks, groups, p, m)
    if noise == "auto":
        models = _ar_models(r, blocks, groups, max_ar_order)
        if any(mod.order for mod in models.values()):
            x, factor = _solve(fun, jac, x, mapping, blocks, models, x_scale, small, close=True)
            solved = (factor, models)
            r = fun(x)
            models = _ar_models(r, blocks, groups, max_ar_order)

    e = whiten(r, blocks, models)
    ar_params = sum(mod.order for mod in models.values())
    dof = float(e.size - p - ar_params)
    s2 = float(e @ e) / dof if noise != "known" else 1.0
    # the Jacobian at the solution, where the solve's factor does not serve (always so with an
    # AR model, whose sandwich below needs it)
    whitened = _kept_factor(*solved, models)
    jacobian = None if whitened is not None else as_jacobian(jac(x))
    if jacobian is not None:
        whitened = (whiten(jacobian.toarray(), blocks, models) if small
                    else triangle(jacobian, None, blocks, models)[:p, :p])
    bread = _inverse_normal_matrix(whitened, m)
    if not np.all(np.isfinite(bread)):
        raise ValueError("the data do not determine every fit parameter (singular normal matrix)")
    cov = s2 * bread
    extents: dict[str, int] = {}
    if noise == "auto" and ar_params:
        # the AR model may whiten only approximately: use the sandwich G Σ Gᵀ (see fit/sandwich.py)
        robust = sandwich_covariance(r, blocks, models, jacobian, bread, max_lag=min(m // 10, 1000))
        if robust is not None:  # None: too little data for a positive-definite noise covariance
            cov, extents = robust
            for g, lags in extents.items():
                n_g = sum(b.stop - b.start for b in blocks if b.group == g)
                dof = min(dof, n_g / (2.0 * lags + 1.0))
    n_eff = sum(sum(b.stop - b.start for b in blocks if b.group == g) / models[g].long_run_ratio()
                for g in groups)
    diagnostics, warns, at_bounds = _diagnose(e, x, mapping.bounds(), mapping.free_names, coloured=bool(ar_params))
    return FitResult(
        model=model,
        names=mapping.free_names,
        values=x,
        covariance=cov,
        residuals=r,
        noise_sigma={g: float(models[g].sigma * math.sqrt(s2)) for g in groups},
        noise_model={g: models[g].describe() for g in groups},
        n_samples=m,
        n_effective=float(n_eff),
        dof=dof,
        diagnostics=diagnostics,
        warnings=tuple(warns),
        parameters_at_bounds=at_bounds,
        noise_correlation_extent_samples=extents,
        whitening=dict(models),
    )


def _kept_factor(factor: np.ndarray | None, solve_models: dict[str, ARNoise],
                 models: dict[str, ARNoise]) -> np.ndarray | None:
    """The triangular factor of the whitened Jacobian at the solution, from the last solve's
    factor of [J | f] there (``factor``, whitened by ``solve_models``), when the final noise
    model differs from the solve's by a scale alone (one noise group, white in both): the
    covariance then needs no factor of its own. None otherwise."""
    if factor is None or len(models) != 1:
        return None
    (group, final), = models.items()
    used = solve_models[group]
    if final.order or used.order:
        return None
    p = factor.shape[0] - 1
    return factor[:p, :p] * (used.sigma_e / final.sigma_e)


def _solve(fun, jac, x, mapping: ParameterMap, blocks, models, x_scale, small: bool,
           close: bool = False) -> tuple[Vector, np.ndarray | None]:
    """The solution from ``x``, and the triangular factor of the whitened [J | f] there when
    the solve ended on one (else None). ``close``: ``x`` is within a few standard errors of the
    solution, and Gauss–Newton steps (:func:`~wavefit.fit.gauss_newton.descend`) are tried
    before the trust-region solver, which takes the same start where they do not settle."""
    problem = None if small else TriangularProblem(fun, jac, blocks, models)
    if close:
        if problem is not None:
            factor = problem.factor
        else:
            def factor(v):
                rows = np.column_stack([whiten(as_jacobian(jac(v)).toarray(), blocks, models),
                                        whiten(fun(v), blocks, models)])
                return np.linalg.qr(rows, mode="r")
        lower, upper = (np.broadcast_to(np.asarray(b, dtype=float), x.shape) for b in mapping.bounds())
        found = descend(factor, x, lower, upper, NEGLIGIBLE_CHANGE)
        # a solution on a bound is the solver's to find: it stops strictly inside, where the
        # steps would end on the bound itself and be reported as pressed against it
        if found is not None and not np.any(_on_bounds(found[0], lower, upper)):
            return found
    if problem is None:
        def residuals(v):
            return whiten(fun(v), blocks, models)

        def jacobian(v):
            return whiten(as_jacobian(jac(v)).toarray(), blocks, models)
    else:
        residuals, jacobian = problem.residuals, problem.jacobian
    x = minimise(mapping.free_parameters(x), mapping.free_names, residuals, jacobian, x_scale)
    if not np.all(np.isfinite(x)):
        raise FloatingPointError("least squares diverged")
    return x, (None if problem is None else problem.kept(x))


def minimise(params: lmfit.Parameters, names: Sequence[str], residuals: Callable[[Vector], Vector],
             jacobian: Callable[[Vector], np.ndarray], x_scale: Sequence[float] | str) -> Vector:
    """The free parameters ``names`` of ``params`` that minimise ‖residuals‖², through
    :meth:`lmfit.Minimizer.least_squares` (scipy's trust region reflective method, bounds
    handled by scipy itself, no transform of lmfit's) with the analytic ``jacobian``.

    ``residuals`` and ``jacobian`` take the vector of the free parameters' values, so the
    engine states the free parameters alone
    (:meth:`~wavefit.fit.constraints.ParameterMap.free_parameters`): fixed values and
    expressions are applied inside the residual, and lmfit neither copies nor re-evaluates
    them at each step."""
    def values(p: lmfit.Parameters) -> Vector:
        return np.fromiter((p[n].value for n in names), dtype=float, count=len(names))

    best: dict[bytes, Vector] = {}
    lowest = [math.inf]
    slope: dict[bytes, np.ndarray] = {}  # the Jacobian at the best point, once asked for there
    settled = [False]

    def remembered(p: lmfit.Parameters) -> Vector:
        """The residuals, the lowest sum of squares so far kept: lmfit evaluates them once more
        at the solution, the point of lowest sum that scipy accepted (a trust-region step is
        accepted only when it lowers the sum), which saves one whitened evaluation per solve.
        A trial step from it that would change the sum by less than :data:`NEGLIGIBLE_CHANGE`
        of itself is not evaluated, and the solve ends there: scipy would reject it and every
        step after it (each is shorter, ‖J·Δx‖ shrinking with the trust region, and none is
        accepted), and stop at that same point."""
        x = values(p)
        key = x.tobytes()
        if key in best:
            return best[key].copy()
        for seen, r_best in best.items():
            if seen in slope:
                change = slope[seen] @ (x - np.frombuffer(seen))
                if float(change @ change) <= NEGLIGIBLE_CHANGE * lowest[0]:
                    settled[0] = True
                    return r_best.copy()
        r = np.asarray(residuals(x), dtype=float)
        with np.errstate(over="ignore"):  # far-off trial steps
            total = float(r @ r)
        if total < lowest[0]:
            lowest[0] = total
            best.clear()
            best[key] = r.copy()
        return r

    def remembered_slope(p: lmfit.Parameters) -> np.ndarray:
        """The Jacobian, kept when it is the best point's (scipy asks for it at each point it
        accepts)."""
        x = values(p)
        j = jacobian(x)
        key = x.tobytes()
        if key in best:
            slope.clear()
            slope[key] = np.asarray(j, dtype=float).copy()
        return j

    def stop_when_settled(*_args: Any, **_kws: Any) -> bool:
        """lmfit's per-evaluation callback: True ends the solve (at the best point)."""
        return settled[0]

    # lmfit stops a fit past its own count of residual calls and hands scipy twice that count;
    # scipy's limit is set directly so that it alone decides, as it did before lmfit
    minimizer = lmfit.Minimizer(remembered, params, nan_policy="propagate", iter_cb=stop_when_settled,
                                max_nfev=MAX_EVALUATIONS * (len(names) + 2), calc_covar=False)
    minimizer.kws["max_nfev"] = MAX_EVALUATIONS
    out = minimizer.least_squares(jac=remembered_slope, method="trf", x_scale=x_scale,
                                  ftol=TOLERANCE, xtol=TOLERANCE, gtol=TOLERANCE)
    if settled[0]:
        return np.frombuffer(next(iter(best))).copy()
    return np.asarray(out.x, dtype=float)


def whiten(a: np.ndarray, blocks: Sequence[Block], models: dict[str, ARNoise]) -> np.ndarray:
    parts = []
    for b in blocks:
        mod = models[b.group]
        seg = a[b.start:b.stop]
        parts.append(mod.whiten(seg))
    return parts[0] if len(parts) == 1 else np.concatenate(parts, axis=0)  # one block: its own array


def _scatter_models(r, blocks, groups, p, m) -> dict[str, ARNoise]:
    out = {}
    for g in groups:
        segs = [r[b.start:b.stop] for b in blocks if b.group == g]
        seg = segs[0] if len(segs) == 1 else np.concatenate(segs)  # one block: no copy of it
        share = seg.size / m
        dof = max(seg.size - p * share, 1.0)
        s = math.sqrt(float(seg @ seg) / dof)
        out[g] = white(s if s > 0 else ZERO_SCATTER)
    return out


def _ar_models(r, blocks, groups, max_order) -> dict[str, ARNoise]:
    out = {}
    for g in groups:
        segs = [r[b.start:b.stop] for b in blocks if b.group == g]
        mod = fit_ar(segs, max_order)
        if mod.sigma <= 0:
            mod = white(ZERO_SCATTER)
        out[g] = mod
    return out


def _inverse_normal_matrix(r: np.ndarray, rows: int) -> np.ndarray:
    """(JᵀJ)⁻¹ from J itself or from its triangular factor R (J = QR, ``rows`` the rows of J),
    through the SVD with unit-norm columns (those of R are J's), so that columns of very
    different scale (channels whose noise differs by orders of magnitude) do not look
    rank-deficient."""
    norms = np.sqrt(np.sum(r * r, axis=0))
    norms = np.where(norms > 0, norms, 1.0)
    _, s, vt = np.linalg.svd(r / norms, full_matrices=False)
    tol = np.finfo(float).eps * max(rows, r.shape[1]) * s[0]
    inv_s2 = np.where(s > tol, 1.0 / np.maximum(s, tol) ** 2, np.inf)
    return ((vt.T * inv_s2) @ vt) / np.outer(norms, norms)


#: A parameter closer to a bound than this share of the span between its bounds (of its value,
#: at least 1, when one side is open) ended at that bound: the trust-region solver stays
#: strictly inside its bounds, and a parameter it holds this close is pressed against one.
AT_BOUND = 1e-9


def _on_bounds(x: Vector, lower: np.ndarray, upper: np.ndarray) -> np.ndarray:
    """Whether each parameter of ``x`` ended at one of its bounds (:data:`AT_BOUND`)."""
    span = np.where(np.isfinite(upper - lower), upper - lower, np.maximum(np.abs(x), 1.0))
    with np.errstate(invalid="ignore"):
        return (np.isfinite(lower) & (x - lower <= AT_BOUND * span)) | (np.isfinite(upper) & (upper - x <= AT_BOUND * span))


def _diagnose(e: np.ndarray, x: Vector, bounds, names,
              coloured: bool = False) -> tuple[dict, list[str], tuple[str, ...]]:
    """Reported figures, warnings, and the parameters that ended at a bound."""
    warns: list[str] = []
    at_bounds: list[str] = []
    p_value, rho = ljung_box(e)
    if structured(p_value, rho):
        if coloured:
            # the residuals are those of the fitted AR noise model: either the model misses part
            # of the waveform or the noise is correlated in a way the AR model does not capture
            warns.append("residuals are not noise-like after whitening (Ljung-Box p = %.1e, largest "
                         "autocorrelation %.2f): the model misses part of the waveform, or the noise's "
                         "correlation is not captured and the interval may be too narrow"
                         % (p_value, float(np.max(np.abs(rho)))))
        else:
            warns.append("residuals are not noise-like (Ljung-Box p = %.1e, largest autocorrelation %.2f): "
                         "the model misses part of the waveform" % (p_value, float(np.max(np.abs(rho)))))
    lo, hi = (np.broadcast_to(np.asarray(b, dtype=float), x.shape) for b in bounds)
    for name, v, on in zip(names, x, _on_bounds(x, lo, hi)):
        if on:
            warns.append(f"fit parameter {name} ended at its bound ({v:.6g}); the fit cannot be trusted")
            at_bounds.append(name)
    return ({"ljung_box_p": p_value, "residual_autocorrelation_lag1": float(rho[0]) if rho.size else 0.0}, warns,
            tuple(at_bounds))
