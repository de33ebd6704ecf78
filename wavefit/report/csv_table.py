"""One analysis as a CSV table: one row per scalar output and one per point of each curve.

The columns are the same for every method, so a spreadsheet or ``pandas.read_csv`` reads any
result: ``source`` (the capture, or the captures joined by "; "), ``output``, ``axis`` and
``axis_unit`` (empty for a scalar), ``axis_value``, ``value``, ``unit``,
``standard_uncertainty``, ``expanded_uncertainty``, ``coverage_factor``,
``degrees_of_freedom`` (empty when infinite). A run with Monte Carlo (JCGM 101:2008) adds
:data:`MONTE_CARLO_COLUMNS` after them for every row, a curve's point by point: the draws'
mean and standard deviation and the ends of the probabilistically symmetric coverage interval
(7.7.1); they are empty for a result without a run. Numbers are written
with ``repr`` (they read back to the same float); text cells are made safe for
spreadsheets (:func:`~wavefit.report.safe_text.spreadsheet_cell`).

References
----------
.. [1] RFC 4180, "Common Format and MIME Type for Comma-Separated Values (CSV) Files".
.. [2] JCGM 101:2008, Evaluation of measurement data - Supplement 1 to the GUM - Propagation
   of distributions using a Monte Carlo method, 7.6, 7.7.
"""
from __future__ import annotations

import csv
import io
import math
from typing import Any, Sequence

from ..montecarlo import MonteCarloResult
from ..results import AnalysisResult
from .safe_text import spreadsheet_cell

COLUMNS = ("source", "output", "axis", "axis_unit", "axis_value", "value", "unit", "standard_uncertainty",
           "expanded_uncertainty", "coverage_factor", "degrees_of_freedom")
#: The columns a Monte Carlo run adds.
MONTE_CARLO_COLUMNS = ("monte_carlo_mean", "monte_carlo_standard_uncertainty", "monte_carlo_interval_low",
                       "monte_carlo_interval_high")


def result_rows(result: AnalysisResult) -> list[dict[str, Any]]:
    """The table's rows as dicts (numbers as floats, ``None`` for an empty cell); with
    :data:`MONTE_CARLO_COLUMNS` when the result has a Monte Carlo run."""
    source = result.source if isinstance(result.source, str) else "; ".join(result.source)
    report = result.monte_carlo
    rows = []
    for name, q in result.quantities.items():
        row = dict(zip(COLUMNS, (source, name, None, None, None, q.value, q.unit, q.standard_uncertainty,
                                 q.expanded_uncertainty, q.coverage_factor, q.degrees_of_freedom)))
        if report is not None and name in report.quantities:
            row.update(_monte_carlo_cells(report.quantities[name]))
        rows.append(row)
    for name, c in result.curves.items():
        points = report.curves.get(name) if report is not None else None
        for k in range(len(c)):
            row = dict(zip(COLUMNS, (source, name, c.axis_name, c.axis_unit, float(c.axis_values[k]),
                                     float(c.values[k]), c.unit, float(c.standard_uncertainty[k]),
                                     float(c.expanded_uncertainty[k]), float(c.coverage_factor[k]),
                                     float(c.degrees_of_freedom[k]))))
            if points is not None:
                row.update(_monte_carlo_cells(points[k]))
            rows.append(row)
    return rows


def render_csv(results: Sequence[AnalysisResult]) -> str:
    """The rows of all ``results`` as CSV text under one header line (with
    :data:`MONTE_CARLO_COLUMNS` when any result has a Monte Carlo run)."""
    columns = COLUMNS + (MONTE_CARLO_COLUMNS if any(r.monte_carlo is not None for r in results) else ())
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(columns)
    for result in results:
        for row in result_rows(result):
            writer.writerow([_cell(row.get(c)) for c in columns])
    return buffer.getvalue()


def _monte_carlo_cells(summary: MonteCarloResult) -> dict[str, float]:
    return dict(zip(MONTE_CARLO_COLUMNS, (summary.value, summary.standard_uncertainty, *summary.interval)))


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return spreadsheet_cell(str(value))
