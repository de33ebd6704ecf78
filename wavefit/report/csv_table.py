"""One analysis as a CSV table: one row per scalar output and one per point of each curve.

The columns are the same for every method, so a spreadsheet or ``pandas.read_csv`` reads any
result: ``source`` (the capture, or the captures joined by "; "), ``output``, ``axis`` and
``axis_unit`` (empty for a scalar), ``axis_value``, ``value``, ``unit``,
``standard_uncertainty``, ``expanded_uncertainty``, ``coverage_factor``,
``degrees_of_freedom`` (empty when infinite). Numbers are written
with ``repr`` (they read back to the same float); text cells are made safe for
spreadsheets (:func:`~wavefit.report.safe_text.spreadsheet_cell`).

References
----------
.. [1] RFC 4180, "Common Format and MIME Type for Comma-Separated Values (CSV) Files".
"""
from __future__ import annotations

import csv
import io
import math
from typing import Any, Sequence

from ..results import AnalysisResult
from .safe_text import spreadsheet_cell

COLUMNS = ("source", "output", "axis", "axis_unit", "axis_value", "value", "unit", "standard_uncertainty",
           "expanded_uncertainty", "coverage_factor", "degrees_of_freedom")


def result_rows(result: AnalysisResult) -> list[dict[str, Any]]:
    """The table's rows as dicts (numbers as floats, ``None`` for an empty cell)."""
    source = result.source if isinstance(result.source, str) else "; ".join(result.source)
    rows = []
    for name, q in result.quantities.items():
        rows.append(dict(zip(COLUMNS, (source, name, None, None, None, q.value, q.unit, q.standard_uncertainty,
                                       q.expanded_uncertainty, q.coverage_factor, q.degrees_of_freedom))))
    for name, c in result.curves.items():
        for k in range(len(c)):
            rows.append(dict(zip(COLUMNS, (source, name, c.axis_name, c.axis_unit, float(c.axis_values[k]),
                                           float(c.values[k]), c.unit, float(c.standard_uncertainty[k]),
                                           float(c.expanded_uncertainty[k]), float(c.coverage_factor[k]),
                                           float(c.degrees_of_freedom[k])))))
    return rows


def render_csv(results: Sequence[AnalysisResult]) -> str:
    """The rows of all ``results`` as CSV text under one header line."""
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\n")
    writer.writerow(COLUMNS)
    for result in results:
        for row in result_rows(result):
            writer.writerow([_cell(row[c]) for c in COLUMNS])
    return buffer.getvalue()


def _cell(value: Any) -> str:
    if value is None:
        return ""
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else ""
    return spreadsheet_cell(str(value))
