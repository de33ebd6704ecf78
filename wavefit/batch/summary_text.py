"""The lot summary as a text table (engineering notation at this edge only)."""
from __future__ import annotations

import math

from ..values import eng
from .decision import VERDICTS
from .spec import Limit, Spec
from .statistics import LotSummary


def render_summary(summary: LotSummary, spec: Spec, lot: str) -> str:
    """Counts per verdict, yield, and one line per limited quantity."""
    noun = "capture" if summary.total == 1 else "captures"
    lines = [f"lot {lot}: {summary.total} {noun}, decision rule {_rule(spec)}"]
    lines.append("  " + "   ".join(f"{verdict}: {summary.counts.get(verdict, 0)}" for verdict in VERDICTS))
    if summary.yield_ is None:
        lines.append("  yield: - (no capture could be analysed)")
    else:
        lines.append(f"  yield: {100 * summary.yield_:.1f} % pass"
                     f" ({100 * (summary.yield_with_conditional or 0):.1f} % with conditional passes)")
    header = ("quantity", "limits", "n", "mean", "std dev", "min", "max", "Cp", "Cpk")
    table = [header]
    for name, stats in summary.quantities.items():
        unit = spec.limits[name].unit
        table.append((name, _limits(spec.limits[name], unit), str(stats.n), _value(stats.mean, unit),
                      _value(stats.std, unit), _value(stats.minimum, unit), _value(stats.maximum, unit),
                      _index(stats.cp), _index(stats.cpk)))
    widths = [max(len(row[i]) for row in table) for i in range(len(header))]
    for row in table:
        lines.append("  " + "  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
    return "\n".join(lines)


def _rule(spec: Spec) -> str:
    if spec.rule == "guard-band":
        return f"guard-band (w = {spec.guard_factor:g}·U, ILAC-G8 §4.2.3)"
    return "simple acceptance (ILAC-G8 §4.2.1)"


def _limits(limit: Limit, unit: str) -> str:
    if limit.lower is not None and limit.upper is not None:
        return f"{eng(limit.lower, unit)} .. {eng(limit.upper, unit)}"
    if limit.upper is not None:
        return f"<= {eng(limit.upper, unit)}"
    return f">= {eng(limit.lower, unit)}"


def _value(value: float, unit: str) -> str:
    return eng(value, unit) if math.isfinite(value) else "-"


def _index(value: float | None) -> str:
    return "-" if value is None else f"{value:.2f}"
