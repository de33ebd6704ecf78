"""The lot summary as a text table (engineering notation at this edge only).

Names that come from the user or from files (the lot, the results file) are shown
through :func:`~wavefit.report.safe_text.visible`.
"""
from __future__ import annotations

import math
from collections import Counter
from typing import Any, Mapping

from ..report.safe_text import visible
from ..values import eng
from .decision import ERROR, VERDICTS
from .spec import Limit, Spec
from .statistics import LotSummary

#: Lots named in the history line before "and N more".
_LOTS_SHOWN = 3


def render_summary(summary: LotSummary, spec: Spec, lot: str) -> str:
    """Counts per verdict, yield, and one line per limited quantity."""
    noun = "capture" if summary.total == 1 else "captures"
    lines = [f"lot {visible(lot)}: {summary.total} {noun}, decision rule {_rule(spec)}"]
    lines.append("  " + "   ".join(f"{verdict}: {summary.counts.get(verdict, 0)}" for verdict in VERDICTS))
    if summary.yield_ is None:
        lines.append("  yield: - (no captures)")
    else:
        errors = summary.counts.get(ERROR, 0)
        basis = (f"of all {summary.total}, the {errors} error {'row' if errors == 1 else 'rows'} counted as not "
                 "passed") if errors else f"of all {summary.total}"
        lines.append(f"  yield: {100 * summary.yield_:.1f} % pass"
                     f" ({100 * (summary.yield_with_conditional or 0):.1f} % with conditional passes), {basis}")
    if not spec.limits:
        lines.append("  no limits (the method reports only curves): a pass says only that the part was measured")
        return "\n".join(lines)
    if spec.rule != "guard-band" and summary.near_limits:
        analysed = summary.total - summary.counts.get(ERROR, 0)
        lines.append(f"  {summary.near_limits} of {analysed} verdicts lie within U of a limit: simple acceptance "
                     "judges each of these on a value the measurement does not pin down (a wrong verdict up to "
                     "half the time at the limit itself); the guard-band rule with w = U would report them as "
                     "conditional")
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
    for name, stats in summary.quantities.items():
        if stats.excluded:
            lines.append(f"  {name}: {stats.excluded} values left out of the statistics (not finite, or not "
                         "positive where a part's must be)")
    return "\n".join(lines)


def render_history(history: Mapping[str, Any]) -> str:
    """One line: rows added to the history database, caught up, and not added because already recorded."""
    line = (f"  history {visible(history['database'])}: {history['added']} rows added"
            f", {history['caught_up']} caught up from the results file")
    recorded = history["already_recorded"]
    if recorded:
        lots = Counter(r["recorded_in_lot"] for r in recorded).most_common()
        named = ", ".join(f"'{visible(lot)}' ({count})" for lot, count in lots[:_LOTS_SHOWN])
        more = f" and {len(lots) - _LOTS_SHOWN} more lots" if len(lots) > _LOTS_SHOWN else ""
        line += (f", {len(recorded)} not added again: the same capture, setup and spec are recorded "
                 f"under lot {named}{more}")
    if history["converted_repeats"]:
        line += (f"; converted to one row per capture, setup and spec ({history['converted_repeats']} "
                 "repeated rows moved to table results_repeated)")
    return line


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
    return "undefined" if value is None else f"{value:.2f}"
