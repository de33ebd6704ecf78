"""The text report's Monte Carlo section: each quantity's linear and Monte Carlo intervals side by side."""
from __future__ import annotations

import math

from ..results import AnalysisResult
from ..values import eng


def monte_carlo_lines(result: AnalysisResult) -> list[str]:
    """Lines comparing y ± U with the Monte Carlo interval (JCGM 101:2008, 7.7), or none
    when no Monte Carlo run was asked for."""
    report = result.monte_carlo
    if report is None:
        return []
    width = max(len("quantity"), *(len(n) for n in report.quantities))
    lines = ["", f"Monte Carlo (JCGM 101, {report.draws} draws, seed {report.seed}): coverage intervals at "
                 f"{100 * report.probability:.2f} %",
             f"  {'quantity':<{width}}  {'linear y ± U':<30}  {'Monte Carlo (symmetric)':<30}  u_MC/u"]
    for name, mc in report.quantities.items():
        q = result.quantities.get(name)
        if q is None:
            continue
        digits = _digits(q.value, q.expanded_uncertainty)
        linear = _interval(q.value - q.expanded_uncertainty, q.value + q.expanded_uncertainty, q.unit, digits)
        interval = _interval(*mc.interval, q.unit, digits)
        ratio = f"{mc.standard_uncertainty / q.standard_uncertainty:.3f}" if q.standard_uncertainty > 0 else "-"
        lines.append(f"  {name:<{width}}  {linear:<30}  {interval:<30}  {ratio}")
    return lines


def _digits(value: float, expanded: float) -> int:
    """Significant digits that resolve the interval's ends to about a tenth of U (at least 3)."""
    if not (expanded > 0 and math.isfinite(expanded) and math.isfinite(value)):
        return 4
    span = max(abs(value) + expanded, expanded)
    return max(3, int(math.ceil(math.log10(span / expanded))) + 2)


def _interval(low: float, high: float, unit: str, digits: int) -> str:
    return f"[{eng(low, unit, digits)}, {eng(high, unit, digits)}]"
