"""The terminal report: quantities in engineering notation, budget, fit, warnings."""
from __future__ import annotations

import math

from ..fit_summary import ChecksModel, shown_details
from ..results import AnalysisResult
from ..values import eng, eng_pm
from .curve_text import curve_lines
from .monte_carlo_text import monte_carlo_lines

SAFETY_NOTE = ("Safety: pulse and ring tests store energy (L·I²/2, C·V²/2) and interrupting "
               "inductor current makes large voltage spikes; see README 'Safety'.")


def render(result: AnalysisResult, budget: bool = True) -> str:
    """Human-readable report of one analysis."""
    src = result.source if isinstance(result.source, str) else ", ".join(result.source)
    lines = [f"wavefit {result.method}: {src}", *_model_check_lines(result), ""]
    width = max((len(n) for n in result.quantities), default=4)
    if result.quantities:
        lines.append(f"  {'quantity':<{width}}  {'value ± U':<28}  k     u_rel")
    for name, q in result.quantities.items():
        rel = q.standard_uncertainty / abs(q.value) if q.value else math.inf
        lines.append(f"  {name:<{width}}  {eng_pm(q.value, q.expanded_uncertainty, q.unit):<28}  "
                     f"{q.coverage_factor:4.2f}  {rel:8.2e}")
    for curve in result.curves.values():
        lines += ["", *curve_lines(curve, budget)]
    lines.append("  (U is the expanded uncertainty, coverage probability about 95 %, k from "
                 "effective degrees of freedom)")
    lines += monte_carlo_lines(result)
    if budget and result.budget:
        lines += ["", "Uncertainty budget (contribution = |c|·u, share of u_c²):"]
        for name, entries in result.budget.items():
            if not entries:
                continue
            q = result.quantities.get(name)
            unit = q.unit if q else ""
            lines.append(f"  {name}:")
            for e in sorted(entries, key=lambda e: -abs(e.variance_share)):
                lines.append(f"    {e.source:<28} {e.kind}  u = {eng(e.standard_uncertainty, e.unit, 3):<12} "
                             f"contrib = {eng(e.contribution, unit, 3):<12} share = {_percent(e.variance_share)} %"
                             + (f"  ({e.origin})" if e.origin is not None else ""))
    fit_lines = [f"  {key}: {value:.6g}" if isinstance(value, float) else f"  {key}: {value}"
                 for key, value in shown_details(result.fit)]
    details = result.fit.to_dict()
    fit_lines += [f"  note: {note}" for key in ("notes", "capture_notes") for note in details.get(key) or ()]
    if fit_lines:
        lines += ["", "Fit:"] + fit_lines
    if result.warnings:
        lines += ["", "Warnings:"] + [f"  ! {w}" for w in result.warnings]
    lines += ["", SAFETY_NOTE]
    return "\n".join(lines)


def _model_check_lines(result: AnalysisResult) -> list[str]:
    """The model check's verdict, read from ``result.adequate`` and ``fit.model_check``;
    an inadequate model is said in capitals before the numbers."""
    check = result.fit.model_check if isinstance(result.fit, ChecksModel) else None
    if check is None and result.adequate:
        return []  # a method without a model check says nothing about it
    if result.adequate:
        if check.skipped is not None:
            return [f"Model check: not possible ({check.skipped})"]
        return ["Model check: adequate (the estimates do not move beyond the noise when the fit window changes)"]
    lines = ["MODEL NOT ADEQUATE: the estimates move with the fit window beyond what the noise explains, so the "
             "fitted model does not describe the waveform; the uncertainties below include that spread "
             "as a type B input, so the result is no more precise than the model"]
    if check is None:
        return lines
    for v in check.inputs:
        lines.append(f"  {v.parameter}: z = {v.z:.1f} (threshold {check.threshold_z:g}), "
                     f"spread ±{v.half_width:.4g} about {v.reported:.6g} -> input {v.input_name!r}")
    for source in check.inadequate_captures:
        lines.append(f"  ring {source}: its model check failed (see its warnings)")
    return lines


def _percent(share: float) -> str:
    """A variance share in per cent to two decimals, a share that rounds to zero as 0.00 (an exact
    input's share, 0 times a negative sensitivity, printed as -0.00)."""
    percent = 100.0 * share
    return f"{0.0 if round(percent, 2) == 0 else percent:6.2f}"
