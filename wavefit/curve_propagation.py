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

from .outputs import Curve
from .results import CurveBudgetLine, CurveResult
from .uncertainty import COVERAGE_PROBABILITY, InputSet, linearise


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
        The ``uncertainties`` variables the function was called with, by input name
        (:func:`wavefit.uncertainty.unit_variables`).
    probability
        Coverage probability of the expanded uncertainty.

    Returns
    -------
    dict of str to CurveResult
    """
    items = inputs.inputs
    curves = {}
    for name, decl in declared.items():
        points = np.asarray(outputs[name], dtype=object).ravel()
        axis = np.asarray(axes[decl.axis.name], dtype=float)
        if axis.shape != points.shape:
            raise ValueError(f"curve {name!r} has {points.size} points but its axis {decl.axis.name!r} "
                             f"has {axis.size}")
        lin = linearise(list(points), variables, inputs, probability)
        u, k = lin.standard_uncertainty, lin.coverage_factor
        lines = []
        for c, item in enumerate(items):
            sens = lin.jacobian[:, c]
            if not np.any(sens):
                continue
            lines.append(CurveBudgetLine(item.name, item.value, item.unit, item.standard_uncertainty, sens,
                                         np.abs(sens) * item.standard_uncertainty, lin.variance_share[:, c],
                                         item.kind, float(item.dof), item.origin))
        curves[name] = CurveResult(name, decl.unit, decl.axis.name, decl.axis.unit, axis, lin.values, u, k * u, k,
                                   lin.degrees_of_freedom, lin.covariance, tuple(lines), decl.axis.log)
    return curves
