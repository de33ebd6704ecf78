"""Propagation to curve outputs: one Jacobian row per point of the curve.

A curve output of a measurement function is an array of ``uncertainties`` numbers (as
``uncertainties.unumpy`` makes them); each element's derivatives with respect to the inputs
give one row of the sensitivity matrix C, so the curve's covariance is C V Cᵀ (GUM 5.2.2,
eq. 16, applied elementwise; JCGM 102:2011, 6.2.1.3, for a vector measurand). Each point's
degrees of freedom and coverage factor follow as for a scalar
(:mod:`wavefit.uncertainty`), and each input's budget line holds its sensitivity,
contribution and variance share as arrays over the curve.

References
----------
.. [1] JCGM 100:2008, Evaluation of measurement data - Guide to the expression of
   uncertainty in measurement, 5.2.2 and G.4.1.
.. [2] JCGM 102:2011, Evaluation of measurement data - Supplement 2 to the GUM:
   Extension to any number of output quantities, 6.2.1.3 (clause number from memory).
"""
from __future__ import annotations

from typing import Any, Mapping

import numpy as np
from uncertainties import ufloat

from .outputs import Curve
from .results import CurveBudgetLine, CurveResult
from .uncertainty import COVERAGE_PROBABILITY, InputSet, _welch_satterthwaite, coverage_factor


def propagate_curves(inputs: InputSet, outputs: Mapping[str, Any], declared: Mapping[str, Curve],
                     axes: Mapping[str, Any], variables: Mapping[str, Any],
                     probability: float = COVERAGE_PROBABILITY) -> dict[str, CurveResult]:
    """The :class:`CurveResult` of every declared curve in ``outputs``.

    Parameters
    ----------
    inputs
        The measurement function's inputs and their covariance.
    outputs
        What the measurement function returned when called with ``variables``.
    declared
        The method's curve declarations, by output name.
    axes
        The points of each axis, by axis name.
    variables
        The ``uncertainties`` variables the function was called with, by input name.
    probability
        Coverage probability of the expanded uncertainty.

    Returns
    -------
    dict of str to CurveResult
    """
    items = inputs.inputs
    cov_x = inputs.covariance()
    ordered = [variables[i.name] for i in items]
    curves = {}
    for name, decl in declared.items():
        points = np.asarray(outputs[name], dtype=object).ravel()
        axis = np.asarray(axes[decl.axis.name], dtype=float)
        if axis.shape != points.shape:
            raise ValueError(f"curve {name!r} has {points.size} points but its axis {decl.axis.name!r} "
                             f"has {axis.size}")
        jac = np.array([[float(getattr(p, "derivatives", {}).get(v, 0.0)) for v in ordered] for p in points])
        jac = jac.reshape(points.size, len(items))
        values = np.array([float(getattr(p, "nominal_value", p)) for p in points])
        cov_y = jac @ cov_x @ jac.T
        u = np.sqrt(np.clip(np.diag(cov_y), 0.0, None))
        dof = np.array([_welch_satterthwaite(jac[r], cov_x, items, u[r]) for r in range(points.size)])
        k = np.array([coverage_factor(nu, probability) for nu in dof])
        shared = jac @ cov_x  # row r: (V c_r)ᵀ
        lines = []
        for c, item in enumerate(items):
            sens = jac[:, c]
            if not np.any(sens):
                continue
            share = np.divide(sens * shared[:, c], u * u, out=np.zeros_like(u), where=u > 0)
            lines.append(CurveBudgetLine(item.name, item.value, item.unit, item.standard_uncertainty, sens,
                                         np.abs(sens) * item.standard_uncertainty, share, item.kind,
                                         float(item.dof)))
        curves[name] = CurveResult(name, decl.unit, decl.axis.name, decl.axis.unit, axis, values, u, k * u, k,
                                   dof, cov_y, tuple(lines), decl.axis.log)
    return curves


def unit_variables(inputs: InputSet) -> dict[str, Any]:
    """One ``uncertainties`` variable per input, at its estimate with unit standard deviation
    (only its derivatives are read), as :func:`wavefit.uncertainty.propagate` makes them."""
    return {i.name: ufloat(i.value, 1.0, tag=i.name) for i in inputs.inputs}
