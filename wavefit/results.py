"""Frozen result objects; ``to_dict()`` of an :class:`AnalysisResult` is the CLI's JSON."""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import TYPE_CHECKING, Any

import numpy as np

from .fit_summary import FitSummary, as_summary

if TYPE_CHECKING:
    import lmfit
    import pandas as pd
    from matplotlib.axes import Axes
    from matplotlib.figure import Figure

    from .calibration.in_use import InputOrigin
    from .fitted import FittedBlock
    from .montecarlo import MonteCarloReport
    from .uncertainty import Propagation


def _json_number(x: float) -> float | None:
    """JSON has no inf/NaN: infinite degrees of freedom are written as null."""
    return float(x) if math.isfinite(x) else None


@dataclass(frozen=True)
class QuantityResult:
    """A measured quantity in SI units with standard and expanded uncertainty."""

    name: str
    value: float
    unit: str
    standard_uncertainty: float
    expanded_uncertainty: float
    coverage_factor: float
    degrees_of_freedom: float = math.inf

    def to_dict(self) -> dict[str, Any]:
        return {
            "value": _json_number(self.value),
            "unit": self.unit,
            "standard_uncertainty": _json_number(self.standard_uncertainty),
            "expanded_uncertainty": _json_number(self.expanded_uncertainty),
            "coverage_factor": _json_number(self.coverage_factor),
            "degrees_of_freedom": _json_number(self.degrees_of_freedom),
        }


@dataclass(frozen=True)
class BudgetLine:
    """One input's part in one output's uncertainty (GUM 8, Table-style budget).

    ``contribution`` is ``|c_i|·u(x_i)`` in the output's unit; ``variance_share`` is
    c_i·(V c)_i / u_c², the fraction of u_c² that the input carries, correlation
    terms included, so the shares of one output add up to 1.
    """

    source: str
    value: float
    unit: str
    standard_uncertainty: float
    sensitivity: float
    contribution: float
    variance_share: float
    kind: str
    degrees_of_freedom: float
    #: Where the input came from when a calibration gave it (an ``InputOrigin``: file, made, age).
    origin: InputOrigin | None = None

    def to_dict(self) -> dict[str, Any]:
        out = {
            "source": self.source,
            "value": _json_number(self.value),
            "unit": self.unit,
            "standard_uncertainty": _json_number(self.standard_uncertainty),
            "sensitivity": _numbers(self.sensitivity),
            "contribution": _numbers(self.contribution),
            "variance_share": _numbers(self.variance_share),
            "type": self.kind,
            "degrees_of_freedom": _json_number(self.degrees_of_freedom),
        }
        if self.origin is not None:  # inputs without a calibration keep the JSON they always had
            out["origin"] = _jsonable(self.origin.to_dict())
        return out


def _numbers(x: Any) -> Any:
    """A number, or an array of them (a curve's budget), for JSON."""
    return _jsonable(x) if np.ndim(x) else _json_number(x)


@dataclass(frozen=True)
class AnalysisResult:
    """Everything one analysis gives: quantities, their budgets, the fit, warnings.

    ``adequate`` is False when the fit's estimates moved significantly with the fit window
    (the waveform model misses the waveform; ``fit.model_check`` has the details and the
    budget an input for the spread): batch decisions and reports read it.
    """

    method: str
    source: str | list[str]
    quantities: dict[str, QuantityResult]
    budget: dict[str, list[BudgetLine]]
    fit: FitSummary
    warnings: tuple[str, ...] = ()
    correlation: dict[str, dict[str, float]] = field(default_factory=dict)
    plot_data: Any = field(default=None, compare=False, repr=False)
    adequate: bool = True
    curves: dict[str, "CurveResult"] = field(default_factory=dict)
    #: The fits' parameters as the measurement function took them.
    fitted: tuple[FittedBlock, ...] = ()
    #: Where the result came from: tool version, setup, captures and their sha256 (``wavefit.analyze``).
    provenance: dict[str, Any] | None = field(default=None, compare=False)
    #: The Monte Carlo propagation (JCGM 101) when it was asked for.
    monte_carlo: MonteCarloReport | None = None
    #: The propagation the result was built from (its inputs and measurement function, for a
    #: Monte Carlo run by ``wavefit.analyze``); neither written out nor compared.
    propagation: Propagation | None = field(default=None, compare=False, repr=False)

    def __post_init__(self) -> None:
        # a plain mapping (a result built by hand, a method defined outside the package) is kept
        # as a PlainSummary
        object.__setattr__(self, "fit", as_summary(self.fit))

    def to_dict(self) -> dict[str, Any]:
        out = {
            "method": self.method,
            "source": self.source,
            "adequate": self.adequate,
            "quantities": {k: q.to_dict() for k, q in self.quantities.items()},
            "budget": {k: [line.to_dict() for line in lines] for k, lines in self.budget.items()},
            "fit": _jsonable(self.fit.to_dict()),
            "warnings": list(self.warnings),
            "correlation": self.correlation,
        }
        if self.curves:  # methods with scalar outputs only keep the JSON they always had
            out["curves"] = {k: c.to_dict() for k, c in self.curves.items()}
        if self.fitted:
            out["fitted"] = [_jsonable(block.to_dict()) for block in self.fitted]
        if self.monte_carlo is not None:
            out["monte_carlo"] = self.monte_carlo.to_dict(self.quantities, self.curves)
        if self.provenance is not None:
            out["provenance"] = _jsonable(self.provenance)
        return out

    def __getstate__(self) -> dict[str, Any]:
        """Pickle without ``propagation``: its measurement function is a closure over the
        method's estimate and cannot be pickled (the unpickled result has ``None`` there)."""
        return {**self.__dict__, "propagation": None}

    def value(self, name: str) -> float:
        """Shorthand for ``result.quantities[name].value``."""
        return self.quantities[name].value

    def uvalues(self) -> dict[str, Any]:
        """The quantities as correlated ``uncertainties`` numbers (see :mod:`wavefit.result_views`)."""
        from .result_views import correlated_quantities

        return correlated_quantities(self)

    def covariance(self) -> pd.DataFrame:
        """The quantities' covariance matrix as a DataFrame labelled by name."""
        from .result_views import covariance_frame

        return covariance_frame(self)

    def to_frame(self) -> pd.DataFrame:
        """One row per quantity: value, unit, u, U, k, dof."""
        from .result_views import quantity_frame

        return quantity_frame(self)

    @property
    def params(self) -> lmfit.Parameters:
        """The fitted parameters as ``lmfit.Parameters`` with ``stderr`` and ``correl``."""
        from .result_views import fit_parameters

        return fit_parameters(self)

    def fit_report(self) -> str:
        """The fitted parameters, their correlations and the fit's details as text."""
        from .result_views import fit_report

        return fit_report(self)

    def plot(self, ax: Axes | None = None) -> Figure:
        """The result's picture as a matplotlib Figure (into ``ax`` when given)."""
        from .result_views import figure

        return figure(self, ax)

    def __repr__(self) -> str:
        from .result_views import short_repr

        return short_repr(self)

    def __str__(self) -> str:
        from .report.text import render

        return render(self)


@dataclass(frozen=True)
class CurveBudgetLine(BudgetLine):
    """One input's part in a curve's uncertainty, point by point (arrays over the axis).

    As :class:`BudgetLine`, with ``sensitivity``, ``contribution`` and ``variance_share``
    one value per point of the curve.
    """


@dataclass(frozen=True)
class CurveResult:
    """A measured curve: one value per point of its axis, with uncertainties and budget as arrays.

    ``axis_values`` are the points of the axis ``axis_name`` (unit ``axis_unit``) as the
    method set them (conditions of the measurement, taken as exact); ``values``,
    ``standard_uncertainty``, ``expanded_uncertainty``, ``coverage_factor`` and
    ``degrees_of_freedom`` have one entry per point; ``axis_log`` says that plots space the
    axis logarithmically. ``covariance`` is the full n × n
    covariance of the values (JCGM 102:2011, 7.6: a vector measurand keeps its covariance
    matrix), so a quantity derived from several points keeps their correlation.
    """

    name: str
    unit: str
    axis_name: str
    axis_unit: str
    axis_values: Any
    values: Any
    standard_uncertainty: Any
    expanded_uncertainty: Any
    coverage_factor: Any
    degrees_of_freedom: Any
    covariance: Any
    budget: tuple[CurveBudgetLine, ...] = ()
    axis_log: bool = False

    def __len__(self) -> int:
        return len(self.values)

    def to_dict(self) -> dict[str, Any]:
        return {
            "unit": self.unit,
            "axis": {"name": self.axis_name, "unit": self.axis_unit, "log": self.axis_log,
                     "values": _jsonable(self.axis_values)},
            "values": _jsonable(self.values),
            "standard_uncertainty": _jsonable(self.standard_uncertainty),
            "expanded_uncertainty": _jsonable(self.expanded_uncertainty),
            "coverage_factor": _jsonable(self.coverage_factor),
            "degrees_of_freedom": _jsonable(self.degrees_of_freedom),
            "covariance": _jsonable(self.covariance),
            "budget": [line.to_dict() for line in self.budget],
        }


def _jsonable(obj: Any) -> Any:
    """Convert numpy scalars/arrays and non-finite floats for JSON."""
    if isinstance(obj, dict):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, np.ndarray):
        return [_jsonable(v) for v in obj.tolist()]
    if isinstance(obj, (np.floating, float)):
        return _json_number(float(obj))
    if isinstance(obj, np.integer):
        return int(obj)
    if isinstance(obj, np.bool_):
        return bool(obj)
    return obj


@dataclass(frozen=True)
class TracePlot:
    """Data for a waveform plot: recorded samples, the fitted model (NaN outside the fit
    windows) and the residuals, one entry per channel."""

    time: Any
    channels: tuple[tuple[str, str, Any, Any], ...]  # (label, unit, data, model)


@dataclass(frozen=True)
class LinePlot:
    """Data for a straight-line fit plot: points with error bars and the fitted line."""

    x: Any
    y: Any
    x_err: Any
    y_err: Any
    slope: float
    intercept: float
    x_label: str
    y_label: str
