"""The terminal report of curve outputs: one table per curve, read from its declaration.

Each row is one point of the curve's axis with its value ± U, coverage factor and relative
standard uncertainty; the budget names, for each input, its largest share of u_c² over the
curve and where on the axis that share is reached.
"""
from __future__ import annotations

import math

import numpy as np

from ..results import CurveResult
from ..values import eng, eng_pm

#: A terminal table shows at most about this many points of a curve (evenly spaced, the
#: last one always); JSON and CSV carry every point.
MAX_TABLE_ROWS = 21


def curve_lines(curve: CurveResult, budget: bool = True) -> list[str]:
    """The report lines of one curve (a title, a table, and its budget when ``budget``)."""
    axis_head = f"{curve.axis_name} ({curve.axis_unit})" if curve.axis_unit else curve.axis_name
    lines = [f"  {curve.name} against {axis_head}:",
             f"    {curve.axis_name:<14}  {'value ± U':<28}  k     u_rel"]
    count = len(curve.values)
    stride = max(1, math.ceil((count - 1) / (MAX_TABLE_ROWS - 1))) if count > MAX_TABLE_ROWS else 1
    shown = sorted(set(range(0, count, stride)) | {count - 1}) if count else []
    if stride > 1:
        lines[0] = f"{lines[0][:-1]} (every {stride}th of {count} points; --json and --csv give all):"
    for j in shown:
        x, v, u, big_u, k = (curve.axis_values[j], curve.values[j], curve.standard_uncertainty[j],
                             curve.expanded_uncertainty[j], curve.coverage_factor[j])
        rel = u / abs(v) if v else math.inf
        lines.append(f"    {eng(float(x), curve.axis_unit):<14}  {eng_pm(float(v), float(big_u), curve.unit):<28}  "
                     f"{float(k):4.2f}  {rel:8.2e}")
    if budget and curve.budget:
        lines.append("    budget (largest share of u_c² over the curve, and where):")
        for line in sorted(curve.budget, key=lambda b: -float(np.max(np.abs(b.variance_share)))):
            at = int(np.argmax(np.abs(line.variance_share)))
            lines.append(f"      {line.source:<26} {line.kind}  u = {eng(line.standard_uncertainty, line.unit, 3):<12} "
                         f"share up to {100 * float(line.variance_share[at]):6.2f} % at "
                         f"{curve.axis_name} = {eng(float(curve.axis_values[at]), curve.axis_unit)}")
    return lines
