"""The text report's Monte Carlo section: each quantity's, and each curve point's, linear and Monte
Carlo intervals side by side."""
from __future__ import annotations

import math

from ..montecarlo import MonteCarloResult
from ..results import AnalysisResult, CurveResult
from ..values import eng


def monte_carlo_lines(result: AnalysisResult) -> list[str]:
    """Lines comparing y ± U with the Monte Carlo interval (JCGM 101:2008, 7.7), for every
    quantity and every point of every curve, or none when no Monte Carlo run was asked for."""
    report = result.monte_carlo
    if report is None:
        return []
    width = max([len("quantity"), *(len(n) for n in report.quantities)])
    lines = ["", f"Monte Carlo (JCGM 101, {report.draws} draws, seed {report.seed}): coverage intervals at "
                 f"{100 * report.probability:.2f} %"]
    if report.quantities:
        lines.append(f"  {'quantity':<{width}}  {'linear y ± U':<30}  {'Monte Carlo (symmetric)':<30}  u_MC/u")
    for name, mc in report.quantities.items():
        q = result.quantities.get(name)
        if q is None:
            continue
        digits = _digits(q.value, q.expanded_uncertainty)
        linear = _interval(q.value - q.expanded_uncertainty, q.value + q.expanded_uncertainty, q.unit, digits)
        interval = _interval(*mc.interval, q.unit, digits)
        ratio = f"{mc.standard_uncertainty / q.standard_uncertainty:.3f}" if q.standard_uncertainty > 0 else "-"
        lines.append(f"  {name:<{width}}  {linear:<30}  {interval:<30}  {ratio}")
    for name, points in report.curves.items():
        curve = result.curves.get(name)
        if curve is not None:
            lines += _curve_lines(curve, points)
    return lines


def _curve_lines(curve: CurveResult, points: tuple[MonteCarloResult, ...]) -> list[str]:
    """One row per point of the curve: its axis value, y ± U and the Monte Carlo interval."""
    axis_head = f"{curve.axis_name} ({curve.axis_unit})" if curve.axis_unit else curve.axis_name
    lines = [f"  {curve.name} against {axis_head}:",
             f"    {curve.axis_name:<14}  {'linear y ± U':<30}  {'Monte Carlo (symmetric)':<30}  u_MC/u"]
    for x, value, u, big_u, mc in zip(curve.axis_values, curve.values, curve.standard_uncertainty,
                                      curve.expanded_uncertainty, points):
        value, u, big_u = float(value), float(u), float(big_u)
        digits = _digits(value, big_u)
        linear = _interval(value - big_u, value + big_u, curve.unit, digits)
        interval = _interval(*mc.interval, curve.unit, digits)
        ratio = f"{mc.standard_uncertainty / u:.3f}" if u > 0 else "-"
        lines.append(f"    {eng(float(x), curve.axis_unit):<14}  {linear:<30}  {interval:<30}  {ratio}")
    return lines


def _digits(value: float, expanded: float) -> int:
    """Significant digits that resolve the interval's ends to about a tenth of U (at least 3)."""
    if not (expanded > 0 and math.isfinite(expanded) and math.isfinite(value)):
        return 4
    span = max(abs(value) + expanded, expanded)
    return max(3, int(math.ceil(math.log10(span / expanded))) + 2)


def _interval(low: float, high: float, unit: str, digits: int) -> str:
    return f"[{eng(low, unit, digits)}, {eng(high, unit, digits)}]"
