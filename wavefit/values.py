"""Values with units and tolerances as people write them, and engineering notation.

Parsing and printing of SI numbers is done by ``quantiphy``; this module adds
the tolerance grammar of part values (``"10 ohm ±0.1%"``) and the rule that
turns a tolerance into a standard uncertainty.

Tolerance rule (documented in ``docs/setup-file.md``):

* ``±a`` (absolute, relative ``%``, or ``ppm``) with no coverage factor is the
  half-width of a rectangular distribution, ``u = a/√3``
  (JCGM 100:2008, 4.3.7: only the bounds are known).
* ``±a k=K`` is an expanded uncertainty with coverage factor ``K``, a normal
  distribution, ``u = a/K`` (JCGM 100:2008, 4.3.3).
* ``u=a`` states the standard uncertainty itself.
* no tolerance means the value is exact (``u = 0``).
"""
from __future__ import annotations

import math
import re
from dataclasses import dataclass

from quantiphy import Quantity

from .errors import SetupError

Quantity.set_prefs(map_sf=Quantity.map_sf_to_greek, prec=4, spacer=" ")

#: Accepted spellings of each SI unit a part or channel may carry.
UNIT_ALIASES: dict[str, str] = {
    "ohm": "ohm", "ohms": "ohm", "Ohm": "ohm", "Ohms": "ohm", "Ω": "ohm", "Ω": "ohm",
    "F": "F", "H": "H", "Hz": "Hz", "s": "s", "V": "V", "A": "A", "W": "W", "J": "J",
}

_SQRT3 = math.sqrt(3.0)


@dataclass(frozen=True)
class PartValue:
    """A known component or instrument figure with its standard uncertainty.

    ``distribution`` is ``"exact"``, ``"rectangular"`` or ``"normal"``;
    ``text`` keeps what the user wrote, for reports.
    """

    value: float
    unit: str
    standard_uncertainty: float
    distribution: str
    text: str

    @property
    def relative_uncertainty(self) -> float:
        return self.standard_uncertainty / abs(self.value) if self.value else math.inf


_TOL_SPLIT = re.compile(r"(±|\+/-|\+-|\bu\s*=)")
_K_FACTOR = re.compile(r"\(?\s*k\s*=\s*([0-9.]+)\s*\)?\s*$")


def parse_number_with_unit(text: str, expected_unit: str | None = None) -> tuple[float, str]:
    """Parse ``"4.7 nF"``, ``"9.99 kohm"``, ``"1e-8"`` into (SI value, unit)."""
    text = text.strip()
    if not text:
        raise SetupError("empty value; write a number with its unit, e.g. \"10 ohm\"")
    for alias, canon in sorted(UNIT_ALIASES.items(), key=lambda kv: -len(kv[0])):
        if text.endswith(alias) and alias != canon:
            text = text[: -len(alias)] + canon
            break
    try:
        q = Quantity(text)
    except Exception:
        raise SetupError(f"cannot read {text!r} as a number with a unit (e.g. \"4.7 nF\")") from None
    unit = UNIT_ALIASES.get(q.units, q.units)
    if expected_unit is not None and unit and unit != expected_unit:
        raise SetupError(f"{text!r} has unit {unit!r}, but {expected_unit!r} is expected here")
    if unit and unit not in UNIT_ALIASES.values():
        raise SetupError(f"unknown unit {q.units!r} in {text!r}; known units: "
                         + ", ".join(sorted(set(UNIT_ALIASES.values()))))
    return float(q), unit or (expected_unit or "")


def parse_relative(text: str) -> float:
    """Parse a relative figure ``"±25 ppm"``, ``"±1.5%"``, ``"0.02"`` to a fraction."""
    body = text.strip().lstrip("±").replace("+/-", "").replace("+-", "").strip()
    try:
        if body.endswith("ppm"):
            return float(body[:-3]) * 1e-6
        if body.endswith("%"):
            return float(body[:-1]) * 1e-2
        return float(body)
    except ValueError:
        raise SetupError(f"cannot read {text!r} as a relative figure (e.g. \"±1.5%\" or \"±25 ppm\")") from None


def parse_part(spec: str | float | int, expected_unit: str | None = None) -> PartValue:
    """Parse a part value ``VALUE [prefix]UNIT [±TOL [k=K]]`` or a plain SI number."""
    if isinstance(spec, bool):
        raise SetupError(f"{spec!r} is not a part value")
    if isinstance(spec, (int, float)):
        return PartValue(float(spec), expected_unit or "", 0.0, "exact", str(spec))
    if not isinstance(spec, str):
        raise SetupError(f"{spec!r} is not a part value; write e.g. \"10 ohm ±0.1%\"")
    text = spec.strip()
    parts = _TOL_SPLIT.split(text, maxsplit=1)
    value, unit = parse_number_with_unit(parts[0], expected_unit)
    if len(parts) == 1:
        return PartValue(value, unit, 0.0, "exact", text)
    marker, tol_text = parts[1], parts[2].strip()
    k_match = _K_FACTOR.search(tol_text)
    k = float(k_match.group(1)) if k_match else None
    if k_match:
        tol_text = tol_text[: k_match.start()].strip().rstrip(",;")
    if k is not None and k <= 0:
        raise SetupError(f"coverage factor must be positive in {text!r}")
    half_width = _tolerance_to_absolute(tol_text, value, unit, text)
    if marker.startswith("u"):
        return PartValue(value, unit, half_width, "normal", text)
    if k is None:
        return PartValue(value, unit, half_width / _SQRT3, "rectangular", text)
    return PartValue(value, unit, half_width / k, "normal", text)


def _tolerance_to_absolute(tol_text: str, value: float, unit: str, whole: str) -> float:
    if tol_text.endswith("%") or tol_text.endswith("ppm"):
        width = abs(value) * parse_relative(tol_text)
    else:
        width, tol_unit = parse_number_with_unit(tol_text)
        if tol_unit and unit and tol_unit != unit:
            raise SetupError(f"tolerance unit {tol_unit!r} differs from value unit {unit!r} in {whole!r}")
    if width < 0 or not math.isfinite(width):
        raise SetupError(f"tolerance must be a finite non-negative number in {whole!r}")
    return width


def eng(value: float, unit: str = "", digits: int = 4) -> str:
    """Engineering notation with an SI prefix: ``eng(4.703e-5, "H") == "47.03 µH"``."""
    if value is None or not math.isfinite(value):
        return f"{value} {unit}".strip()
    symbol = "Ω" if unit == "ohm" else unit
    return Quantity(value, symbol).render(prec=digits - 1)


def eng_pm(value: float, uncertainty: float, unit: str = "") -> str:
    """``value ± uncertainty`` with both in the same prefix, uncertainty to 2 digits."""
    if not (math.isfinite(value) and math.isfinite(uncertainty)) or uncertainty <= 0:
        return eng(value, unit)
    ref = max(abs(value), uncertainty)
    exp3 = int(math.floor(math.log10(ref) / 3.0)) * 3 if ref > 0 else 0
    exp3 = max(-15, min(12, exp3))
    scale = 10.0 ** exp3
    decimals = max(0, 1 - int(math.floor(math.log10(uncertainty / scale))))
    prefix = {-15: "f", -12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}[exp3]
    symbol = "Ω" if unit == "ohm" else unit
    return f"{value / scale:.{decimals}f} ± {uncertainty / scale:.{decimals}f} {prefix}{symbol}".rstrip()
