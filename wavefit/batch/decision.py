"""Statements of conformity: a measured value with its expanded uncertainty against limits.

References
----------
.. [1] ILAC-G8:09/2019, "Guidelines on Decision Rules and Statements of
   Conformity", §4.2.1 (simple acceptance, w = 0) and §4.2.3 (non-binary
   statement with guard band: pass, conditional pass, conditional fail, fail;
   w = r·U).

A part whose waveform the fitted model does not describe (``AnalysisResult.adequate``
False) is never a clear ``pass``: its uncertainty then rests on how far the estimate moved
with the fit window, a type B judgement rather than a measured dispersion, so conformity is
stated at most as ``conditional pass`` (:func:`limit_by_model`).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Mapping

from ..results import QuantityResult
from .spec import Limit, Spec

PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL, ERROR = (
    "pass", "conditional pass", "conditional fail", "fail", "error")
#: Verdicts from best to worst; a part gets the worst verdict of its quantities.
VERDICTS: tuple[str, ...] = (PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL, ERROR)
_RANK = {v: i for i, v in enumerate(VERDICTS)}


@dataclass(frozen=True)
class QuantityDecision:
    """One quantity's verdict, the guard band used and, when not ``pass``, why."""

    name: str
    verdict: str
    guard_band: float
    reason: str = ""


def margin_to_limits(value: float, limit: Limit) -> float:
    """Signed distance from ``value`` to the nearest limit: positive inside, negative outside."""
    margins = []
    if limit.lower is not None:
        margins.append(value - limit.lower)
    if limit.upper is not None:
        margins.append(limit.upper - value)
    return min(margins)


def classify(margin: float, guard_band: float) -> str:
    """The ILAC-G8 statement for a signed margin and a guard band w >= 0.

    Inside by more than w: pass; inside (on the limit counts as inside) but
    within w: conditional pass; outside but within w: conditional fail;
    outside by more than w: fail. With w = 0 this is simple acceptance.
    """
    if margin > guard_band or (guard_band == 0 and margin >= 0):
        return PASS
    if margin >= 0:
        return CONDITIONAL_PASS
    if margin >= -guard_band:
        return CONDITIONAL_FAIL
    return FAIL


def decide_quantity(quantity: QuantityResult | None, limit: Limit, spec: Spec) -> QuantityDecision:
    """The verdict for one limited quantity under the spec's rule."""
    if quantity is None:
        return QuantityDecision(limit.name, ERROR, math.nan, f"{limit.name} is limited but was not reported")
    if limit.unit and quantity.unit != limit.unit:
        return QuantityDecision(limit.name, ERROR, math.nan,
                                f"limit for {limit.name} is in {limit.unit!r} but the result is in "
                                f"{quantity.unit or 'no unit'!r}")
    if not math.isfinite(quantity.value):
        return QuantityDecision(limit.name, ERROR, math.nan, f"{limit.name} is not a finite number")
    guard = 0.0
    if spec.rule == "guard-band":
        if not (math.isfinite(quantity.expanded_uncertainty) and quantity.expanded_uncertainty >= 0):
            return QuantityDecision(limit.name, ERROR, math.nan,
                                    f"{limit.name} has no finite expanded uncertainty for the guard band")
        guard = spec.guard_factor * quantity.expanded_uncertainty
    verdict = classify(margin_to_limits(quantity.value, limit), guard)
    reason = "" if verdict == PASS else f"{limit.name} {verdict} against {limit.text}"
    return QuantityDecision(limit.name, verdict, guard, reason)


def worst(verdicts: list[str]) -> str:
    """The worst of several verdicts (pass < conditional pass < conditional fail < fail < error)."""
    return max(verdicts, key=_RANK.__getitem__) if verdicts else PASS


def decide_part(quantities: Mapping[str, QuantityResult], spec: Spec) -> tuple[str, list[QuantityDecision]]:
    """The part verdict (worst over its limited quantities) and each quantity's decision."""
    decisions = [decide_quantity(quantities.get(name), limit, spec) for name, limit in spec.limits.items()]
    return worst([d.verdict for d in decisions]), decisions


#: The reason a part's verdict carries when its model check failed.
MODEL_REASON = "the fitted model does not describe the waveform (model check failed): conformity is not shown"


def limit_by_model(verdict: str, adequate: bool) -> tuple[str, str]:
    """The part verdict after the model check, and the reason to record ("" when adequate).

    An inadequate model turns ``pass`` into ``conditional pass``; ``conditional pass``,
    ``conditional fail``, ``fail`` and ``error`` stay as they are (a part outside its limits
    does not come inside because the model is poor, and an error has no result).
    """
    if adequate:
        return verdict, ""
    return (CONDITIONAL_PASS if verdict == PASS else verdict), MODEL_REASON
