"""Uncertainty budgets after the GUM (JCGM 100:2008).

A measurement function ``model(inputs) -> outputs`` is evaluated once with
the ``uncertainties`` package, which differentiates it exactly (automatic
differentiation); the sensitivity coefficients c_i = ∂y/∂x_i (GUM 5.1.3) are read
from it. The inputs' full covariance matrix V (type A fit parameters are
correlated with each other) then gives the output covariance C V Cᵀ, the law
of propagation of uncertainty with correlated inputs (GUM 5.2.2, eq. 16).

Degrees of freedom follow Welch–Satterthwaite (GUM G.4.1, eq. G.2b), with a
block of correlated inputs from one fit treated as one component, and the
coverage factor is the Student-t quantile for the coverage probability
(GUM G.3, G.6.4); 95.45 % gives k = 2 for infinite degrees of freedom.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any, Callable, Mapping, Sequence

import numpy as np
from scipy import stats
from uncertainties import ufloat

from .results import BudgetLine, QuantityResult

if TYPE_CHECKING:
    from .calibration.in_use import InputOrigin

#: Coverage probability of the expanded uncertainty; k = 2 at infinite dof (GUM G.6.4).
COVERAGE_PROBABILITY = 0.9545


@dataclass(frozen=True)
class InputQuantity:
    """One input estimate x_i with its standard uncertainty u(x_i)."""

    name: str
    value: float
    standard_uncertainty: float
    unit: str
    kind: str  # "A" (statistics of the record) or "B" (parts, instrument)
    dof: float = math.inf
    group: str | None = None
    distribution: str = "normal"  # "normal", "rectangular" or "exact"
    origin: InputOrigin | None = None  # where a calibration input came from, shown in the budget


class InputSet:
    """The inputs of a measurement function and their covariance matrix."""

    def __init__(self) -> None:
        self._inputs: list[InputQuantity] = []
        self._blocks: list[tuple[list[int], np.ndarray]] = []

    @property
    def inputs(self) -> tuple[InputQuantity, ...]:
        return tuple(self._inputs)

    def names(self) -> list[str]:
        return [i.name for i in self._inputs]

    def get(self, name: str) -> InputQuantity | None:
        """The input called ``name``, or None when there is none."""
        return next((i for i in self._inputs if i.name == name), None)

    def add(self, name: str, value: float, standard_uncertainty: float, unit: str = "",
            kind: str = "B", dof: float = math.inf, distribution: str = "normal",
            origin: InputOrigin | None = None) -> None:
        """Add an independent input; ``distribution`` matters only for Monte Carlo, ``origin``
        (a calibration's file and age) is carried to the budget lines."""
        self._check_new(name)
        self._inputs.append(InputQuantity(name, float(value), float(abs(standard_uncertainty)),
                                          unit, kind, dof, None, distribution, origin))

    def add_part(self, name: str, part: Any) -> None:
        """Add a :class:`wavefit.values.PartValue` as a type B input."""
        self.add(name, part.value, part.standard_uncertainty, part.unit, "B",
                 distribution=part.distribution)

    def add_relative(self, name: str, figure: Any) -> None:
        """Add an instrument figure (``RelativeFigure``) as a factor of value 1, type B."""
        self.add(name, 1.0, figure.standard_uncertainty, "", "B",
                 distribution="normal" if figure.k else "rectangular")

    def blocks(self) -> list[tuple[list[int], np.ndarray]]:
        """The correlated blocks: input indices and their covariance."""
        return [(list(idx), cov.copy()) for idx, cov in self._blocks]

    def add_correlated(self, names: Sequence[str], values: Sequence[float], covariance: np.ndarray,
                       units: Sequence[str], dof: float, group: str, kind: str = "A") -> None:
        """Add a block of inputs with a joint covariance (for example a fit's parameters)."""
        cov = np.asarray(covariance, dtype=float)
        if cov.shape != (len(names), len(names)):
            raise ValueError("covariance shape does not match the names")
        start = len(self._inputs)
        for k, (name, value, unit) in enumerate(zip(names, values, units)):
            self._check_new(name)
            self._inputs.append(InputQuantity(name, float(value), float(math.sqrt(max(cov[k, k], 0.0))),
                                              unit, kind, dof, group))
        self._blocks.append((list(range(start, start + len(names))), cov))

    def covariance(self) -> np.ndarray:
        """The full covariance matrix V of all inputs."""
        n = len(self._inputs)
        cov = np.diag([i.standard_uncertainty ** 2 for i in self._inputs]) if n else np.zeros((0, 0))
        for idx, block in self._blocks:
            cov[np.ix_(idx, idx)] = block
        return cov

    def _check_new(self, name: str) -> None:
        if any(i.name == name for i in self._inputs):
            raise ValueError(f"input {name!r} added twice")


@dataclass(frozen=True)
class Propagation:
    """What propagation gives: per scalar output its result and budget, and their correlations.

    ``inputs`` and ``model`` are what was propagated, kept so that the same measurement
    function can be evaluated again (Monte Carlo, :mod:`wavefit.montecarlo`); ``model`` may
    return curve outputs beside the scalars (:meth:`wavefit.methods.base.Method.analyze`).
    """

    quantities: dict[str, QuantityResult]
    budget: dict[str, list[BudgetLine]]
    correlation: dict[str, dict[str, float]]
    inputs: InputSet | None = field(default=None, compare=False, repr=False)
    model: Callable[[Mapping[str, Any]], Mapping[str, Any]] | None = field(default=None, compare=False, repr=False)


@dataclass(frozen=True)
class Linearised:
    """First-order propagation of a vector of outputs y = f(x) (GUM 5.1.3, 5.2.2, G.4.1).

    Row r of every array belongs to output r: ``values`` y_r, ``jacobian`` C (rows c_r of
    sensitivities ∂y_r/∂x_i), ``covariance`` C V Cᵀ, ``standard_uncertainty`` u(y_r),
    ``degrees_of_freedom`` (Welch–Satterthwaite), ``coverage_factor`` k_r and
    ``variance_share`` (entry (r, i): c_ri·(V c_r)_i / u²(y_r), the fraction of u²(y_r) that
    input i carries, correlation terms included).
    """

    values: np.ndarray
    jacobian: np.ndarray
    covariance: np.ndarray
    standard_uncertainty: np.ndarray
    degrees_of_freedom: np.ndarray
    coverage_factor: np.ndarray
    variance_share: np.ndarray


def unit_variables(inputs: InputSet) -> dict[str, Any]:
    """One ``uncertainties`` variable per input, at its estimate with unit standard deviation:
    a measurement function evaluated on them carries its sensitivities (only the derivatives
    are read, :func:`linearise`)."""
    return {i.name: ufloat(i.value, 1.0, tag=i.name) for i in inputs.inputs}


def linearise(points: Sequence[Any], variables: Mapping[str, Any], inputs: InputSet,
              probability: float = COVERAGE_PROBABILITY) -> Linearised:
    """The law of propagation for the outputs ``points``, evaluated on :func:`unit_variables`.

    Parameters
    ----------
    points
        The outputs, ``uncertainties`` numbers (or plain numbers, which depend on no input).
    variables
        The variables the measurement function was called with, by input name.
    inputs
        The inputs and their covariance V.
    probability
        Coverage probability of the coverage factors.

    Returns
    -------
    Linearised

    References
    ----------
    .. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
       uncertainty in measurement, 5.1.3, 5.2.2 (eq. 16), G.4.1 (eq. G.2b) and G.3.
    """
    items = inputs.inputs
    ordered = [variables[i.name] for i in items]
    jac = np.zeros((len(points), len(items)))
    values = np.zeros(len(points))
    for r, out in enumerate(points):
        values[r] = float(getattr(out, "nominal_value", out))
        derivs = getattr(out, "derivatives", {})
        for c, var in enumerate(ordered):
            jac[r, c] = float(derivs.get(var, 0.0))
    cov_x = inputs.covariance()
    cov_y = jac @ cov_x @ jac.T
    u_y = np.sqrt(np.clip(np.diag(cov_y), 0.0, None))
    dof = np.array([_welch_satterthwaite(jac[r], cov_x, items, u_y[r]) for r in range(len(points))])
    k = np.array([coverage_factor(nu, probability) for nu in dof])
    shared = jac @ cov_x  # row r: (V c_r)ᵀ
    denom = (u_y * u_y)[:, None]
    share = np.divide(jac * shared, denom, out=np.zeros_like(jac), where=denom > 0)
    return Linearised(values, jac, cov_y, u_y, dof, k, share)


def propagate(inputs: InputSet, model: Callable[[Mapping[str, Any]], Mapping[str, Any]],
              units: Mapping[str, str], probability: float = COVERAGE_PROBABILITY) -> Propagation:
    """Evaluate ``model`` at the input estimates and propagate their covariance to every output.

    ``model`` receives a mapping name -> number-like (an ``uncertainties``
    variable) and must use only arithmetic and ``uncertainties.umath``.
    """
    variables = unit_variables(inputs)
    return propagate_outputs(inputs, model(variables), variables, units, probability, model)


def propagate_outputs(inputs: InputSet, outputs: Mapping[str, Any], variables: Mapping[str, Any],
                      units: Mapping[str, str], probability: float = COVERAGE_PROBABILITY,
                      model: Callable[[Mapping[str, Any]], Mapping[str, Any]] | None = None) -> Propagation:
    """The :class:`Propagation` of the scalar ``outputs`` a measurement function returned when
    called with ``variables`` (:func:`unit_variables`); ``model`` is kept with it."""
    names = list(outputs)
    items = inputs.inputs
    lin = linearise([outputs[name] for name in names], variables, inputs, probability)
    quantities: dict[str, QuantityResult] = {}
    budget: dict[str, list[BudgetLine]] = {}
    u_y = lin.standard_uncertainty
    for r, name in enumerate(names):
        k = lin.coverage_factor[r]
        quantities[name] = QuantityResult(name, float(lin.values[r]), units.get(name, ""), float(u_y[r]),
                                          float(k * u_y[r]), float(k), float(lin.degrees_of_freedom[r]))
        budget[name] = [BudgetLine(item.name, item.value, item.unit, item.standard_uncertainty, float(c),
                                   float(abs(c) * item.standard_uncertainty), float(lin.variance_share[r, i]),
                                   item.kind, float(item.dof), item.origin)
                        for i, (item, c) in enumerate(zip(items, lin.jacobian[r])) if c != 0.0]
    corr: dict[str, dict[str, float]] = {}
    for a, na in enumerate(names):
        corr[na] = {}
        for b, nb in enumerate(names):
            denom = u_y[a] * u_y[b]
            corr[na][nb] = float(lin.covariance[a, b] / denom) if denom > 0 else (1.0 if a == b else 0.0)
    return Propagation(quantities, budget, corr, inputs, model)


def coverage_factor(dof: float, probability: float = COVERAGE_PROBABILITY) -> float:
    """Student-t coverage factor for ``dof`` degrees of freedom (GUM G.3.4)."""
    tail = 0.5 * (1.0 + probability)
    if not math.isfinite(dof) or dof > 1e7:
        return float(stats.norm.ppf(tail))
    return float(stats.t.ppf(tail, max(dof, 1.0)))


def _welch_satterthwaite(c: np.ndarray, cov: np.ndarray, items: Sequence[InputQuantity], u_c: float) -> float:
    """Effective degrees of freedom, GUM eq. (G.2b); a correlated group counts as one term."""
    if u_c <= 0:
        return math.inf
    groups: dict[str, list[int]] = {}
    for k, item in enumerate(items):
        groups.setdefault(item.group or f"#{k}", []).append(k)
    denom = 0.0
    for idx in groups.values():
        dof = items[idx[0]].dof
        if not math.isfinite(dof):
            continue
        var = float(c[idx] @ cov[np.ix_(idx, idx)] @ c[idx])
        denom += var * var / max(dof, 1.0)
    return u_c ** 4 / denom if denom > 0 else math.inf
