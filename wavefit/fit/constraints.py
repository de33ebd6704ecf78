"""From :class:`lmfit.Parameters` to the free parameters a solver moves, and back.

A fit is stated over all parameters of an :class:`lmfit.Parameters` (the model's
functions take all their values), but only the free ones (varied, without a constraint
expression) reach the solver. A fixed parameter keeps its value; a parameter with an
expression follows the free ones through it. The Jacobian over the free parameters is
then, by the chain rule,

    J_free = J · M,   M = ∂(all values)/∂(free values),

with the identity on the free rows, zeros on the fixed ones and the derivatives of the
expressions on the others. Expressions are strings that lmfit evaluates (any function its
interpreter knows), so their derivatives are taken by central differences on the
expressions alone (cheap: no data is involved); the data's part of the Jacobian stays
analytic. The covariance of all parameters is M·C·Mᵀ from that of the free ones C, the
linear propagation of GUM (JCGM 100:2008, §5.2) that lmfit also applies to expressions.

The solver is given the free parameters alone (:meth:`ParameterMap.free_parameters`), as
:class:`SolveParameters` that lmfit's minimiser uses without a copy.

References
----------
M. Newville et al., LMFIT: Non-Linear Least-Square Minimization and Curve-Fitting for
Python, https://lmfit.github.io/lmfit-py/ (parameters, bounds and constraint expressions).
JCGM 100:2008 (GUM), §5.2, propagation of correlated input quantities.
"""
from __future__ import annotations

import dataclasses
from typing import Callable

import lmfit
import numpy as np

from .jacobian import Jacobian, as_jacobian

#: Relative step of the central differences of an expression: the cube root of the machine
#: epsilon balances truncation and rounding error (W. H. Press et al., *Numerical Recipes*,
#: 3rd ed., Cambridge 2007, §5.7), leaving about 1e-10 relative error in a derivative.
DIFFERENCE_STEP = float(np.finfo(float).eps ** (1.0 / 3.0))


class ParameterMap:
    """The free parameters of an :class:`lmfit.Parameters` and the map to all of them."""

    def __init__(self, params: lmfit.Parameters, copy: bool = True):
        # the free values are set on these parameters as the fit moves: a copy, unless the
        # caller made them for this fit alone (a copy costs milliseconds, a small fit tens)
        self._params: lmfit.Parameters | None = params.copy() if copy else params
        self._vectors: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None
        self.names = tuple(self.params)
        kinds = [(p.expr is not None, bool(p.vary) and p.expr is None) for p in self.params.values()]
        self.free = np.array([k for k, (_, f) in enumerate(kinds) if f], dtype=int)
        self.dependent = np.array([k for k, (e, _) in enumerate(kinds) if e], dtype=int)
        self.free_names = tuple(self.names[k] for k in self.free)
        #: whether every parameter is free: the map is then the identity and is skipped
        self.trivial = self.free.size == len(self.names)
        # the solver's own parameters: the map's, when they are all free and made for this fit
        self._solve_params = self.params if self.trivial and isinstance(self.params, SolveParameters) else None

    @classmethod
    def all_free(cls, start: np.ndarray, names: tuple[str, ...], lower: np.ndarray,
                 upper: np.ndarray) -> "ParameterMap":
        """The identity map of parameters that are all free, stated as vectors (start values and
        bounds, checked by the caller): their :class:`SolveParameters` are made when a solve
        first asks for them (:attr:`params`), not for a fit that starts at its solution
        (making them takes a fifth of a millisecond, a tenth of such a fit)."""
        out = cls.__new__(cls)
        out._params = None
        out._vectors = (np.array(start, dtype=float), np.array(lower, dtype=float), np.array(upper, dtype=float))
        out.names = out.free_names = tuple(names)
        out.free = np.arange(len(out.names))
        out.dependent = np.zeros(0, dtype=int)
        out.trivial = True
        out._solve_params = None
        return out

    @property
    def params(self) -> lmfit.Parameters:
        """All the parameters, as :class:`lmfit.Parameters`."""
        if self._params is None:
            assert self._vectors is not None
            start, lower, upper = self._vectors
            self._params = SolveParameters()
            for name, v, a, b in zip(self.names, start, lower, upper):
                self._params.add(name, value=float(v), min=float(a), max=float(b))
            self._solve_params = self._params
        return self._params

    def start(self) -> np.ndarray:
        """Start values of the free parameters."""
        if self._vectors is not None:
            return self._vectors[0].copy()
        return np.array([self.params[n].value for n in self.free_names], dtype=float)

    def bounds(self) -> tuple[np.ndarray, np.ndarray]:
        """Lower and upper bounds of the free parameters."""
        if self._vectors is not None:
            return self._vectors[1].copy(), self._vectors[2].copy()
        return (np.array([self.params[n].min for n in self.free_names], dtype=float),
                np.array([self.params[n].max for n in self.free_names], dtype=float))

    def with_free(self, x: np.ndarray) -> lmfit.Parameters:
        """The parameters with the free ones set to ``x`` and the expressions updated."""
        for name, v in zip(self.free_names, x):
            self.params[name].value = float(v)
        self.params.update_constraints()
        return self.params

    def free_parameters(self, x: np.ndarray) -> "SolveParameters":
        """The free parameters alone, set to ``x``, as the solver states them: one
        :class:`SolveParameters` kept for all the solves of this fit."""
        if self._solve_params is None:
            params = self.params  # made now, for a map of vectors, as the solver's own
            if self._solve_params is None:
                self._solve_params = SolveParameters.of(params, self.free_names)
        for par, v in zip(self._solve_params.values(), x):
            par.value = float(v)
        return self._solve_params

    def full(self, x: np.ndarray) -> np.ndarray:
        """Values of all parameters when the free ones are ``x``."""
        if self.trivial:
            return x
        params = self.with_free(x)
        return np.array([params[n].value for n in self.names], dtype=float)

    def derivative(self, x: np.ndarray) -> np.ndarray:
        """M = ∂(all values)/∂(free values) at ``x`` (module doc), all × free."""
        m = np.zeros((len(self.names), self.free.size))
        m[self.free, np.arange(self.free.size)] = 1.0
        if self.dependent.size:
            x = np.asarray(x, dtype=float)
            for j in range(x.size):
                h = DIFFERENCE_STEP * (abs(x[j]) if x[j] != 0 else 1.0)
                up, down = x.copy(), x.copy()
                up[j] += h
                down[j] -= h
                m[self.dependent, j] = (self.full(up)[self.dependent] - self.full(down)[self.dependent]) / (2 * h)
            self.full(x)
        return m

    def residual_function(self, fun: Callable[[np.ndarray], np.ndarray]) -> Callable[[np.ndarray], np.ndarray]:
        """``fun`` of all values as a function of the free ones."""
        if self.trivial:
            return fun
        return lambda x: fun(self.full(x))

    def jacobian_function(self, jac: Callable) -> Callable:
        """``jac`` (one column per parameter) as the Jacobian in the free parameters."""
        if self.trivial:
            return jac
        return lambda x: as_jacobian(jac(self.full(x))).mapped(self.derivative(x))

    def expanded(self, fit):
        """A fit over the free parameters as one over all of them (module doc)."""
        if self.trivial:
            return fit
        m = self.derivative(fit.values)
        return dataclasses.replace(fit, names=self.names, values=self.full(fit.values),
                                   covariance=m @ fit.covariance @ m.T)


class SolveParameters(lmfit.Parameters):
    """Free parameters made for the solves of one fit alone (:meth:`of`).

    :class:`lmfit.Minimizer` works on a deep copy of the :class:`lmfit.Parameters` it is
    given, so that the caller's stay as they were. These belong to the fit's solver, so their
    copy is themselves: the copy (a new expression interpreter, every parameter checked anew)
    took about a millisecond per solve, several per cent of an analysis made of small fits
    (``benchmarks/lmfit_engine_time.py``)."""

    @classmethod
    def of(cls, params: lmfit.Parameters, names: tuple[str, ...]) -> "SolveParameters":
        """The parameters ``names`` of ``params`` (value and bounds), free, in that order."""
        out = cls()
        out.add_many(*(lmfit.Parameter(n, value=params[n].value, min=params[n].min, max=params[n].max)
                       for n in names))
        return out

    def __deepcopy__(self, memo) -> "SolveParameters":
        return self

    def create_uvars(self, covar=None) -> None:
        """None: the solver's parameters carry no uncertainties. The fit's covariance is the
        engine's, from the whitened problem (:mod:`wavefit.fit.engine`); lmfit's
        ``least_squares`` would otherwise turn its own, unused, into correlated values after
        every solve (a quarter of a millisecond each)."""
        return None
