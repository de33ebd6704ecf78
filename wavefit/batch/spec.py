"""Spec files: the limits a lot is inspected against and the decision rule.

A spec is a TOML file (see ``docs/batch.md``)::

    [limits]                      # per quantity: tolerance, one-sided bound or range
    L = "47 uH ±5%"               # nominal ± tolerance (%, ppm or absolute "±2 uH")
    R = "<= 0.15 ohm"             # upper bound only
    Q = ">= 40"                   # lower bound only
    f0 = "1 MHz .. 2 MHz"         # both bounds
    [decision]
    rule = "guard-band"           # or "simple"
    guard_factor = 1              # w = guard_factor · U (guard-band rule only)

The rules are those of ILAC-G8:09/2019, "Guidelines on Decision Rules and
Statements of Conformity": ``simple`` is simple acceptance (§4.2.1, w = 0),
``guard-band`` the non-binary statement with guard band (§4.2.3, w = r·U).
"""
from __future__ import annotations

import math
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Mapping

from ..errors import SetupError
from ..report.safe_text import visible
from ..setup import read_toml
from ..values import parse_number_with_unit, parse_relative

RULES = ("simple", "guard-band")
TOP_LEVEL_KEYS = ("limits", "decision")
DECISION_KEYS = ("rule", "guard_factor")

_UPPER = re.compile(r"^(<=|≤|<)\s*(.+)$")
_LOWER = re.compile(r"^(>=|≥|>)\s*(.+)$")
_RANGE = re.compile(r"^(.+?)\s*\.\.\s*(.+)$")
_TOLERANCE = re.compile(r"^(.+?)\s*(±|\+/-|\+-)\s*(.+)$")


@dataclass(frozen=True)
class Limit:
    """The specification limits of one quantity, in SI units.

    ``lower`` or ``upper`` is ``None`` for a one-sided limit; ``unit`` is the
    unit the spec wrote (``""`` when it wrote none: the number is then SI as is);
    ``text`` keeps what the user wrote, for reports.
    """

    name: str
    lower: float | None
    upper: float | None
    unit: str
    text: str


@dataclass(frozen=True)
class Spec:
    """A parsed spec: limits per quantity name, decision rule, guard factor r."""

    limits: Mapping[str, Limit]
    rule: str
    guard_factor: float
    source: str = "<dict>"

    def check_quantities(self, available: tuple[str, ...], method: str, curves: tuple[str, ...] = (),
                         readings: tuple[str, ...] = (), units: Mapping[str, str] | None = None) -> None:
        """Raise a SetupError when a limit names a quantity the method does not report, or one of
        its ``curves`` (limits apply to scalar quantities only), or is written in another unit
        than ``units`` gives for it (before any capture is analysed). ``readings`` are
        quantities the captures carry themselves (the ohmmeter's ``DCR``), which any method may
        limit."""
        for name, limit in self.limits.items():
            expected = (units or {}).get(name)
            if limit.unit and expected is not None and limit.unit != expected:
                raise SetupError(f"{self.source}: limit for {name!r} is in {limit.unit!r}, but {name} is in "
                                 f"{expected!r} ({limit.text!r})")
            if name in readings:
                continue
            if name in curves:
                raise SetupError(f"{self.source}: limit for {name!r}, a curve of method {method!r}; limits apply to "
                                 f"its scalar quantities only: {', '.join(available) or 'none, so give no limits'}")
            if name not in available:
                raise SetupError(f"{self.source}: limit for {name!r}, but method {method!r} reports "
                                 f"only: {', '.join(available) or 'curves, so give no limits'}")


def load_spec(path: str | os.PathLike[str], *, need_limits: bool = True) -> Spec:
    """Read a spec from a TOML file."""
    path = Path(path)
    data = read_toml(path, "spec")
    return parse_spec(data, source=visible(path), need_limits=need_limits)


def parse_spec(data: Mapping[str, Any], *, source: str = "<dict>", need_limits: bool = True) -> Spec:
    """Check and convert the raw mapping of a spec file. ``need_limits`` False takes a spec
    without limits (for a method that reports only curves, which no limit applies to)."""
    _reject_unknown(data, TOP_LEVEL_KEYS, "spec key", source)
    limits_table = _table(data, "limits", source)
    if not limits_table and need_limits:
        raise SetupError(f"{source}: [limits] is empty; write e.g. L = \"47 uH ±5%\"")
    limits = {name: parse_limit(name, text, source) for name, text in limits_table.items()}
    decision = _table(data, "decision", source)
    _reject_unknown(decision, DECISION_KEYS, "[decision] key", source)
    rule = decision.get("rule", "simple")
    if rule not in RULES:
        raise SetupError(f"{source}: unknown decision rule {rule!r}; valid: {', '.join(RULES)}")
    if "guard_factor" in decision and rule != "guard-band":
        raise SetupError(f"{source}: guard_factor needs rule = \"guard-band\" (the simple rule has no guard band)")
    factor = decision.get("guard_factor", 1.0)
    if isinstance(factor, bool) or not isinstance(factor, (int, float)) or not (
            math.isfinite(factor) and factor >= 0):
        raise SetupError(f"{source}: guard_factor must be a finite number >= 0, got {factor!r}")
    return Spec(limits=limits, rule=rule, guard_factor=float(factor) if rule == "guard-band" else 0.0,
                source=source)


#: ``k=`` or ``u=`` after a limit's value: a part value's coverage factor or uncertainty.
_UNCERTAINTY_KEY = re.compile(r"(?<![A-Za-z])[ku]\s*=", re.IGNORECASE)


def parse_limit(name: str, text: Any, source: str = "<dict>") -> Limit:
    """Parse one limit: ``"47 uH ±5%"``, ``"<= 0.15 ohm"``, ``">= 40"``, ``"44 uH .. 50 uH"``."""
    where = f"{source}: limit {name!r}"
    if not isinstance(text, str):
        raise SetupError(f"{where}: write the limit as text, e.g. \"47 uH ±5%\", \"<= 0.15 ohm\" or \">= 40\"")
    body = text.strip()
    if _UNCERTAINTY_KEY.search(body):
        raise SetupError(f"{where}: {text!r} gives a coverage factor or an uncertainty, which a limit does not have "
                         "(it is a bound, not a measured value); write the tolerance alone, e.g. \"330 uH ±10%\"")
    if match := _UPPER.match(body):
        value, unit = _number(match.group(2), where)
        lower, upper = None, value
    elif match := _LOWER.match(body):
        value, unit = _number(match.group(2), where)
        lower, upper = value, None
    elif match := _RANGE.match(body):
        (lower, unit_lo), (upper, unit_hi) = _number(match.group(1), where), _number(match.group(2), where)
        if unit_lo != unit_hi:
            raise SetupError(f"{where}: {text!r} has unit {unit_lo or 'none'!r} on one end and "
                             f"{unit_hi or 'none'!r} on the other; write the unit on both ends")
        unit = unit_hi
    elif match := _TOLERANCE.match(body):
        nominal, unit = _number(match.group(1), where)
        half = _half_width(match.group(3), nominal, unit, where)
        if half > abs(nominal):
            raise SetupError(f"{where}: the tolerance of {text!r} is wider than its nominal, so its lower limit "
                             "would be below zero; write an upper bound alone (\"<= 363 uH\") or a range")
        lower, upper = nominal - half, nominal + half
    elif body.startswith(("±", "+/-", "+-")):
        raise SetupError(f"{where}: {text!r} has a tolerance but no nominal value; write e.g. \"47 uH ±2 uH\"")
    else:
        raise SetupError(f"{where}: cannot read {text!r}; write a tolerance \"47 uH ±5%\", a bound "
                         "\"<= 0.15 ohm\" / \">= 40\" or a range \"44 uH .. 50 uH\"")
    if lower is not None and upper is not None and not lower < upper:
        raise SetupError(f"{where}: {text!r} gives an empty interval (lower {lower:g} >= upper {upper:g})")
    return Limit(name=name, lower=lower, upper=upper, unit=unit, text=body)


def _number(text: str, where: str) -> tuple[float, str]:
    try:
        value, unit = parse_number_with_unit(text)
    except SetupError as exc:
        raise SetupError(f"{where}: {visible(exc)}") from None
    if not math.isfinite(value):
        raise SetupError(f"{where}: {text!r} is not a finite number")
    return value, unit


def _half_width(text: str, nominal: float, unit: str, where: str) -> float:
    text = text.strip()
    if text.endswith("%") or text.endswith("ppm"):
        try:
            half = abs(nominal) * parse_relative(text)
        except SetupError as exc:
            raise SetupError(f"{where}: {visible(exc)}") from None
    else:
        half, tol_unit = _number(text, where)
        if tol_unit and unit and tol_unit != unit:
            raise SetupError(f"{where}: tolerance unit {tol_unit!r} differs from nominal unit {unit!r}")
        if unit and not tol_unit and half != 0:
            raise SetupError(f"{where}: tolerance {text!r} has no unit; write it as the nominal, "
                             f"e.g. \"±2 u{unit}\", or as a percentage")
    if not (half > 0 and math.isfinite(half)):
        raise SetupError(f"{where}: the tolerance must be a positive finite figure, got {text!r}")
    return half


def _reject_unknown(data: Mapping[str, Any], valid: tuple[str, ...], what: str, source: str) -> None:
    unknown = [key for key in data if key not in valid]
    if unknown:
        raise SetupError(f"{source}: unknown {what}{'s' if len(unknown) > 1 else ''} "
                         f"{', '.join(repr(k) for k in unknown)}; valid: {', '.join(valid)}")


def _table(data: Mapping[str, Any], key: str, source: str) -> Mapping[str, Any]:
    value = data.get(key, {})
    if not isinstance(value, Mapping):
        raise SetupError(f"{source}: [{key}] must be a table of key = value lines")
    return value
