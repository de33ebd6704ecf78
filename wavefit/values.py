"""Values with units and tolerances as people write them, and engineering notation.

A part value is read by one strict grammar, ``VALUE [UNIT] [TOLERANCE] [k=K]``; text
that it does not read completely is a :class:`~wavefit.errors.SetupError` that shows
the accepted forms, never a guess. ``quantiphy`` is used only to print engineering
notation.

VALUE
    A number with a decimal point or a decimal comma (``50,0``, ``4,7``; a comma
    followed by exactly three digits, as in ``1,000``, may be a thousands separator and
    is refused, except after a lone zero: ``0,297``), an optional exponent (``1e-8``), then

    * an SI prefix and a unit (``4.7 nF``, ``9.99 kohm``, ``100 mΩ``, see
      :data:`UNIT_ALIASES` and :data:`PREFIX_EXPONENTS`),
    * a prefix alone (``10k``, ``4.7n``), which takes the unit expected where it is
      written, or
    * nothing: a plain number is SI in the expected unit.

    Or the letter code of IEC 60062, in which a letter stands where the decimal mark
    would be and gives both the multiplier and the kind of part (:data:`CODE_LETTERS`):
    ``4R7`` = 4.7 Ω, ``R47`` = 0.47 Ω, ``10R`` = 10 Ω, ``4K7`` = 4.7 kΩ, ``1M0`` = 1 MΩ,
    ``4n7`` = 4.7 nF, ``p47`` = 0.47 pF, ``2µ2`` = 2.2 µF. A code takes the unit of its
    letter's class; where another unit is expected, it is an error.
TOLERANCE
    ``±a`` with or without the sign (``±`` ``+/-`` ``+-``), where ``a`` is relative
    (``1%``, ``±0.1 %``, ``±25 ppm``) or absolute with a unit (``±0.05 ohm``,
    ``± 50 mΩ``). A number without a sign and without ``%``, ``ppm`` or a unit is not a
    tolerance (``"10 ohm 1"`` is refused). A signed number without a unit is taken in
    the value's unit only when the value has no prefix or multiplier (``"10 ohm ±0.1"``);
    after ``4.7 nF`` it could mean nF or F and is refused. ``u=a`` (``u = 0.1%``,
    ``u=0.3 nF``) states the standard uncertainty itself.
``k=K``
    ``k=2``, ``(k=2)`` or ``, k=2`` after a ``±a`` tolerance: an expanded uncertainty
    with coverage factor ``K``.

Tolerance rule (documented in ``docs/setup-file.md``):

* ``±a`` (absolute, relative ``%``, or ``ppm``) with no coverage factor is the
  half-width of a rectangular distribution, ``u = a/√3``
  (JCGM 100:2008, 4.3.7: only the bounds are known).
* ``±a k=K`` is an expanded uncertainty with coverage factor ``K``, a normal
  distribution, ``u = a/K`` (JCGM 100:2008, 4.3.3).
* ``u=a`` states the standard uncertainty itself.
* no tolerance means the value is exact (``u = 0``).

References
----------
.. [1] IEC 60062:2016+AMD1:2019, "Marking codes for resistors and capacitors", clause 4
   (letter and digit code for resistance and capacitance values). The standard itself
   was not consulted: its letters are taken from the summary in the Wikipedia article
   "RKM code" (resistance L R K M G T, capacitance p n µ m F; uppercase for
   resistance, lowercase for capacitance, R and F where no multiplier is needed).
.. [2] JCGM 100:2008, "Evaluation of measurement data — Guide to the expression of
   uncertainty in measurement", 4.3.3 (expanded uncertainty with a stated coverage
   factor), 4.3.7 (rectangular distribution from bounds), 2.3.6 (coverage factor).
"""
from __future__ import annotations

import datetime
import math
import re
from collections.abc import Mapping
from dataclasses import dataclass

from quantiphy import Quantity

from .errors import SetupError

Quantity.set_prefs(map_sf=Quantity.map_sf_to_greek, prec=4, spacer=" ")

#: Accepted spellings of each SI unit a part or channel may carry (Ω as U+03A9 and U+2126).
UNIT_ALIASES: dict[str, str] = {
    "ohm": "ohm", "ohms": "ohm", "Ohm": "ohm", "Ohms": "ohm", "\u03a9": "ohm", "\u2126": "ohm",
    "F": "F", "H": "H", "Hz": "Hz", "s": "s", "V": "V", "A": "A", "W": "W", "J": "J",
}

#: SI prefixes accepted before a unit or alone, as powers of ten. ``u`` stands for µ where
#: the sign cannot be typed (common practice); µ may be U+00B5 or U+03BC.
PREFIX_EXPONENTS: dict[str, int] = {
    "f": -15, "p": -12, "n": -9, "u": -6, "\u00b5": -6, "\u03bc": -6, "m": -3,
    "k": 3, "M": 6, "G": 9, "T": 12,
}

#: ``K`` for kilo, accepted before a unit only (``10 Kohm``): not SI but common practice,
#: and read so before this grammar. Alone it is the IEC 60062 code letter (``10K`` = 10 kΩ).
_KILO_BEFORE_UNIT = {"K": 3}

#: Letters of the IEC 60062 value code [1]: power of ten and the unit of the letter's class.
#: ``k`` for K and ``u`` for µ are common practice, not letters of the standard.
CODE_LETTERS: dict[str, tuple[int, str]] = {
    "L": (-3, "ohm"), "R": (0, "ohm"), "K": (3, "ohm"), "k": (3, "ohm"),
    "M": (6, "ohm"), "G": (9, "ohm"), "T": (12, "ohm"),
    "p": (-12, "F"), "n": (-9, "F"), "\u00b5": (-6, "F"), "\u03bc": (-6, "F"), "u": (-6, "F"),
    "m": (-3, "F"), "F": (0, "F"),
}

#: Code letters that end a value without digits after them (``10R``, ``47K``): the others
#: are SI prefixes or a unit there (``10k`` is a prefix alone, ``10F`` ten farads).
_CODE_ONLY_LETTERS = frozenset("LRK")

#: Smallest and largest non-zero magnitude accepted, in SI units: three decades beyond
#: the accepted prefixes f (1e-15) and T (1e12). No part, instrument figure or time of a
#: bench measurement of an inductor lies outside; a value there is a slipped exponent or
#: a misread prefix (quantiphy read ``10R`` as 10 ronna-ohm, 1e28 Ω).
SMALLEST_MAGNITUDE = 1e-18
LARGEST_MAGNITUDE = 1e15

#: A coverage factor below 1 would make the expanded uncertainty smaller than the
#: standard uncertainty (JCGM 100:2008, 2.3.6 and 3.3.7: k is typically 2 to 3).
SMALLEST_COVERAGE_FACTOR = 1.0

PART_EXAMPLES = '"10 ohm ±1%", "4R7 ±1% k=2", "4.7 nF ±5%"'
NUMBER_EXAMPLES = {None: '"4.7 nF", "30 ns", "4k7"', "s": '"30 ns", "1.5 us", "2e-6 s"',
                   "ohm": '"10 ohm", "4k7"', "F": '"4.7 nF", "4n7"', "H": '"47 uH"', "Hz": '"1 MHz"'}
RELATIVE_EXAMPLES = '"±1.5%", "±25 ppm"'

#: How a value left for the user to fill in begins (``wavefit suggest`` writes it where it
#: cannot know the value): a setup holding one is refused, naming it as such.
PLACEHOLDER = "EDIT: "

_SQRT3 = math.sqrt(3.0)

_DIGITS = r"(?:\d+(?:\.\d*|,\d+)?|\.\d+)(?:[eE][+-]?\d+)?"
_UNITS = "|".join(re.escape(u) for u in sorted(UNIT_ALIASES, key=len, reverse=True))
_PREFIX_CLASS = "".join(PREFIX_EXPONENTS)
_CODE = re.compile(rf"(?P<int>\d*)(?P<letter>[{''.join(CODE_LETTERS)}])(?P<frac>\d*)"
                   rf"(?:\s*(?P<unit>{_UNITS}))?(?!\w)")
_NUMBER = re.compile(rf"(?P<sign>[+-]?)(?P<digits>{_DIGITS})")
_PREFIXED_UNIT = re.compile(rf"\s*(?P<prefix>[{_PREFIX_CLASS}{''.join(_KILO_BEFORE_UNIT)}]?)"
                            rf"(?P<unit>{_UNITS})(?!\w)")
_PREFIX_ALONE = re.compile(rf"(?P<prefix>[{_PREFIX_CLASS}])(?![\w=])")  # attached: "1 u=1%" is not 1 µ
_RELATIVE_UNIT = re.compile(r"\s*(?P<scale>%|ppm(?!\w))")
_SPACE = re.compile(r"\s*")
_STANDARD_MARK = re.compile(r"u\s*=\s*")
_PLUS_MINUS = re.compile(r"(?:±|\+/-|\+-)\s*")
_COVERAGE = re.compile(rf"\s*[,;]?\s*(?:\(\s*k\s*=\s*(?P<paren>{_DIGITS})\s*\)|k\s*=\s*(?P<bare>{_DIGITS}))")
_RELATIVE_EXPONENT = {"%": -2, "ppm": -6}


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


class _Unreadable(Exception):
    """Why a text is not a value; the public parsers add the text and the accepted forms."""


@dataclass(frozen=True)
class _Value:
    """A value read from text: SI number, unit ('' when none was written or expected),
    and whether a prefix or code multiplier scaled the written digits."""

    si: float
    unit: str
    scaled: bool
    bare: bool  # neither unit, prefix nor code letter written


@dataclass(frozen=True)
class _Statement:
    """A tolerance or standard uncertainty as written after a value.

    ``relative`` figures are fractions; absolute ones are SI in ``unit`` ('' when the
    number had no unit). ``k`` is the coverage factor, None when not written.
    """

    magnitude: float
    relative: bool
    unit: str
    unitless: bool
    signed: bool
    standard: bool
    k: float | None


class _Cursor:
    """Reads a text from left to right with anchored regular expressions."""

    def __init__(self, text: str) -> None:
        self.text = text
        self.pos = 0

    def take(self, pattern: re.Pattern[str]) -> re.Match[str] | None:
        match = pattern.match(self.text, self.pos)
        if match:
            self.pos = match.end()
        return match

    def at_end(self) -> bool:
        return self.pos >= len(self.text)

    def rest(self) -> str:
        return self.text[self.pos:]


def parse_number_with_unit(text: str, expected_unit: str | None = None, *,
                           unit_required: bool = False) -> tuple[float, str]:
    """Read one value, ``"4.7 nF"``, ``"9.99 kohm"``, ``"4k7"``, ``"1e-8"``, as (SI value, unit).

    Parameters
    ----------
    text : str
        The whole text must be one VALUE of the module's grammar (no tolerance).
    expected_unit : str, optional
        The unit the value must have; a value written without a unit (plain number,
        prefix alone) takes it.
    unit_required : bool
        Refuse a plain number with neither unit nor prefix (where a bare number could be
        read in more than one unit, e.g. a time written as text).

    Returns
    -------
    tuple of (float, str)
        The value in SI units and its canonical unit ('' when none is written or expected).

    Raises
    ------
    SetupError
        One line naming the text, why it cannot be read and examples of accepted forms.

    References
    ----------
    IEC 60062:2016 for the letter code (see the module docstring).
    """
    try:
        cursor = _Cursor(_text_of(text).strip())
        value = _read_value(cursor, expected_unit)
        if not cursor.at_end():
            raise _Unreadable(f"{cursor.rest()!r} follows the value")
        if unit_required and value.bare:
            raise _Unreadable("it has no unit")
    except _Unreadable as exc:
        raise SetupError(f"cannot read {text!r} as a number with a unit: {exc}; write e.g. "
                         f"{NUMBER_EXAMPLES.get(expected_unit, NUMBER_EXAMPLES[None])}") from None
    return value.si, value.unit


def parse_relative(text: str) -> float:
    """Read a relative bound ``"±25 ppm"``, ``"±1.5%"``, ``"2 %"`` as a fraction.

    ``"0"`` (with or without ``±``) is zero; any other number needs ``%`` or ``ppm``,
    since a bare ``2`` could be meant as 2 % or as a fraction of 2.

    Raises
    ------
    SetupError
        One line naming the text and the accepted forms.
    """
    fraction, _ = _relative_statement(text, allow_marks=False)
    return fraction


def parse_relative_uncertainty(text: str) -> tuple[float, float | None]:
    """Read a relative instrument figure as (fraction, coverage factor).

    ``"±25 ppm"`` gives (25e-6, None): a bound, rectangular (JCGM 100:2008, 4.3.7);
    ``"±1% k=2"`` gives (0.01, 2.0): an expanded uncertainty (4.3.3); ``"u=10 ppm"`` or
    ``"u = 1%"`` gives (fraction, 1.0): the standard uncertainty itself.

    Raises
    ------
    SetupError
        One line naming the text and the accepted forms.

    References
    ----------
    JCGM 100:2008, 4.3.3 and 4.3.7.
    """
    return _relative_statement(text, allow_marks=True)


def parse_part(spec: str | float | int, expected_unit: str | None = None) -> PartValue:
    """Read a part value ``VALUE [UNIT] [TOLERANCE] [k=K]`` or a plain SI number.

    Parameters
    ----------
    spec : str or float or int
        The text of the module's grammar, or a number (SI, exact).
    expected_unit : str, optional
        The unit the part must be in; a value without a unit takes it, a unit or code
        of another kind is an error.

    Returns
    -------
    PartValue
        The value in SI units with its standard uncertainty: ``a/√3`` for a bound ``±a``
        (JCGM 100:2008, 4.3.7), ``a/K`` for ``±a k=K`` (4.3.3), ``a`` for ``u=a``.

    Raises
    ------
    SetupError
        One line: the text, why it is not read and examples of accepted forms.

    References
    ----------
    IEC 60062:2016 (letter code) and JCGM 100:2008, 4.3.3 and 4.3.7; see the module
    docstring.
    """
    if isinstance(spec, bool) or not isinstance(spec, (str, int, float)):
        # (a TOML date or time, an array, a table or a boolean: named in TOML's words, not Python's)
        shown = _toml_kind(spec)
        raise SetupError(f"{shown} is not a part value; write it as text in quotes, e.g. {PART_EXAMPLES}")
    if isinstance(spec, str) and spec.strip().startswith(PLACEHOLDER.strip()):
        # (it was refused as "does not start with a number or a letter code")
        raise SetupError(f"{spec!r} is a placeholder left to edit: write the value it asks for, e.g. {PART_EXAMPLES}")
    try:
        if isinstance(spec, str):
            return _part_from_text(spec.strip(), expected_unit)
        return PartValue(_checked(_float(spec), str(spec)), expected_unit or "", 0.0, "exact", str(spec))
    except _Unreadable as exc:
        raise SetupError(f"cannot read {spec!r}: {exc}; write e.g. {PART_EXAMPLES}") from None


def _toml_kind(value: object) -> str:
    """A TOML value that is no text or number, named as TOML names it: ``true (a boolean)``,
    ``1979-05-27 07:32:00 (a date and time)``, ``an array``, ``a table``."""
    if isinstance(value, bool):
        return f"{str(value).lower()} (a boolean)"
    if isinstance(value, datetime.datetime):
        return f"{value} (a date and time)"
    if isinstance(value, (datetime.date, datetime.time)):
        return f"{value} (a {'date' if isinstance(value, datetime.date) else 'time'})"
    return "an array" if isinstance(value, (list, tuple)) else "a table" if isinstance(value, Mapping) else repr(value)


def _part_from_text(text: str, expected_unit: str | None) -> PartValue:
    cursor = _Cursor(text)
    value = _read_value(cursor, expected_unit)
    if cursor.at_end():
        return PartValue(value.si, value.unit, 0.0, "exact", text)
    statement = _read_statement(cursor, after_value=True)
    unit = _statement_unit(statement, value)
    half_width = statement.magnitude * abs(value.si) if statement.relative else statement.magnitude
    if not statement.standard and half_width > abs(value.si):
        raise _Unreadable("a tolerance wider than the value bounds a part that could be negative; the widest "
                          "is ±100 % (a part known only to lie between zero and twice its value)")
    if statement.standard:
        return PartValue(value.si, unit, half_width, "normal", text)
    if statement.k is None:
        return PartValue(value.si, unit, half_width / _SQRT3, "rectangular", text)
    return PartValue(value.si, unit, half_width / statement.k, "normal", text)


def _statement_unit(statement: _Statement, value: _Value) -> str:
    """The part's unit after its tolerance: an absolute tolerance must agree with the value."""
    if statement.relative:
        return value.unit
    if statement.unitless:
        if not statement.signed:
            raise _Unreadable("a number after the value without ± and without %, ppm or a unit is not a "
                              "tolerance")
        if value.scaled and statement.magnitude != 0:
            raise _Unreadable("the tolerance has no unit and the value has a prefix, so it could be in "
                              "either; write its unit (\"±0.1 nF\") or a percentage")
        return value.unit
    if not (statement.signed or statement.standard):
        # "4.7 nF 2.2 nF" could be two values as well as a tolerance, and "4 700 pF" is digits
        # split by a space: read as 4.7 nF ± 2.2 nF and as 4 F ± 700 pF, both wrong
        raise _Unreadable("a second value after the value, without ±, is not a tolerance (it could be another "
                          "value, or digits split by a space: there are no thousands separators); write an "
                          "absolute tolerance with its sign, e.g. \"±3 pF\"")
    if value.unit and statement.unit != value.unit:
        raise _Unreadable(f"the tolerance is in {statement.unit!r} but the value in {value.unit!r}")
    return statement.unit  # the value had no unit, so none was expected either


def _relative_statement(text: str, *, allow_marks: bool) -> tuple[float, float | None]:
    try:
        statement = _read_statement(_Cursor(_text_of(text).strip()), after_value=False)
        if statement.unitless and statement.magnitude != 0:
            raise _Unreadable("a relative figure needs % or ppm (a bare number could be a fraction or a "
                              "percentage)")
        if not (statement.relative or statement.unitless):
            raise _Unreadable(f"it is in {statement.unit!r}; a relative figure is in % or ppm")
        if not allow_marks and (statement.standard or statement.k is not None):
            raise _Unreadable("u= and k= do not apply here")
    except _Unreadable as exc:
        raise SetupError(f"cannot read {text!r} as a relative figure: {exc}; write e.g. "
                         f"{RELATIVE_EXAMPLES}") from None
    return statement.magnitude, 1.0 if statement.standard else statement.k


# -- the grammar ---------------------------------------------------------------------------

def _read_value(cursor: _Cursor, expected_unit: str | None) -> _Value:
    """VALUE: an IEC 60062 letter code, or a number with prefix and unit."""
    if cursor.at_end():
        raise _Unreadable("nothing is written")
    start = cursor.pos
    code = cursor.take(_CODE)
    code = code if code and _is_code(code) else None
    if code and (not code.group("unit") or
                 UNIT_ALIASES[code.group("unit")] == CODE_LETTERS[code.group("letter")][1]):
        return _code_value(code, expected_unit)
    # a code followed by a unit of another kind is a number with a prefix ("1KA" = 1 kA),
    # or else an error ("4n7 H")
    cursor.pos = start
    number = cursor.take(_NUMBER)
    if not number:
        raise _Unreadable("it does not start with a number or a letter code such as 4R7")
    value = _number_value(cursor, number, expected_unit)
    if code and cursor.pos < code.end():
        _check_code_unit(code, expected_unit)
    return value


def _number_value(cursor: _Cursor, number: re.Match[str], expected_unit: str | None) -> _Value:
    """A number followed by a prefix and unit, a prefix alone, or nothing."""
    unit = cursor.take(_PREFIXED_UNIT)
    prefix = unit or cursor.take(_PREFIX_ALONE)
    exponent = _prefix_exponent(prefix)
    si = _scaled(number.group("sign") + _decimal(number.group("digits")), exponent, number.group())
    written_unit = UNIT_ALIASES[unit.group("unit")] if unit else ""
    if written_unit and expected_unit is not None and written_unit != expected_unit:
        raise _Unreadable(f"it has unit {written_unit!r}, but {expected_unit!r} is expected here")
    return _Value(si, written_unit or expected_unit or "", exponent != 0, not prefix)


def _prefix_exponent(match: re.Match[str] | None) -> int:
    """The power of ten of the prefix a match found ('' or no match: 0)."""
    prefix = match.group("prefix") if match else ""
    return PREFIX_EXPONENTS.get(prefix, _KILO_BEFORE_UNIT.get(prefix, 0))


def _is_code(match: re.Match[str]) -> bool:
    """A letter between digits, before digits, or one of L R K after digits is a code."""
    digits = match.group("int") + match.group("frac")
    return bool(digits) and (bool(match.group("frac")) or match.group("letter") in _CODE_ONLY_LETTERS)


def _code_value(match: re.Match[str], expected_unit: str | None) -> _Value:
    exponent, unit = CODE_LETTERS[match.group("letter")]
    _check_code_unit(match, expected_unit)
    return _Value(_scaled(_code_mantissa(match), exponent, match.group()), unit, exponent != 0, False)


def _code_mantissa(match: re.Match[str]) -> str:
    return f"{match.group('int') or '0'}.{match.group('frac') or '0'}"


def _check_code_unit(match: re.Match[str], expected_unit: str | None) -> None:
    """Refuse a code whose letter's class contradicts the unit written after it or expected."""
    letter = match.group("letter")
    exponent, unit = CODE_LETTERS[letter]
    written = UNIT_ALIASES[match.group("unit")] if match.group("unit") else unit
    wanted = written if written != unit else expected_unit
    if wanted is not None and wanted != unit:
        kind = "resistance" if unit == "ohm" else "capacitance"
        prefix = next((p for p, e in PREFIX_EXPONENTS.items() if e == exponent and p.isascii()), "")
        raise _Unreadable(f"{match.group('int')}{letter}{match.group('frac')} is an IEC 60062 {kind} code "
                          f"(letter {letter!r}, unit {unit!r}) and cannot be in {wanted!r} (write "
                          f"\"{_code_mantissa(match)} {prefix}{wanted}\" if that is meant)")


def _read_statement(cursor: _Cursor, *, after_value: bool) -> _Statement:
    """TOLERANCE [k=K] or u=a, up to the end of the text."""
    spaced = bool(cursor.take(_SPACE).group()) or not after_value
    standard = signed = False
    if spaced and cursor.take(_STANDARD_MARK):
        standard = True
    elif cursor.take(_PLUS_MINUS):
        signed = True
    elif not (spaced and _NUMBER.match(cursor.text, cursor.pos)):
        raise _Unreadable(f"{cursor.rest()!r} after the value is not a tolerance")
    rest = cursor.rest()
    number = cursor.take(_NUMBER)
    if not number or number.group("sign"):
        raise _Unreadable(f"a non-negative number is needed where {rest!r} is" if rest
                          else "the tolerance's number is missing")
    digits = _decimal(number.group("digits"))
    relative = cursor.take(_RELATIVE_UNIT)
    unit = None if relative else cursor.take(_PREFIXED_UNIT)
    exponent = _RELATIVE_EXPONENT[relative.group("scale")] if relative else _prefix_exponent(unit)
    magnitude = _scaled(digits, exponent, number.group())
    k = _read_coverage(cursor)
    if not cursor.at_end():
        raise _Unreadable(f"{cursor.rest()!r} is left over after the tolerance")
    if standard and k is not None:
        raise _Unreadable("u= states the standard uncertainty itself, so a coverage factor k does not apply")
    return _Statement(magnitude=magnitude, relative=bool(relative),
                      unit=UNIT_ALIASES[unit.group("unit")] if unit else "",
                      unitless=not (relative or unit), signed=signed or standard, standard=standard, k=k)


def _read_coverage(cursor: _Cursor) -> float | None:
    match = cursor.take(_COVERAGE)
    if not match:
        return None
    text = match.group("paren") or match.group("bare")
    k = _scaled(_decimal(text), 0, text)
    if k < SMALLEST_COVERAGE_FACTOR:
        raise _Unreadable(f"coverage factor k = {text} is below {SMALLEST_COVERAGE_FACTOR:g}")
    return k


def _decimal(digits: str) -> str:
    """The number with a decimal point; a comma is a decimal comma unless it may group thousands."""
    if "," not in digits:
        return digits
    mantissa = re.split("[eE]", digits)[0]
    whole, fraction = mantissa.split(",")
    # a whole part of zero alone groups no thousands: "0,297" is a decimal comma
    if len(fraction) == 3 and whole.lstrip("+-") not in ("0", ""):
        raise _Unreadable(f"in {digits!r} the comma may be a decimal comma or a thousands separator "
                          f"(write {whole}{fraction} or {whole}.{fraction})")
    return digits.replace(",", ".")


def _scaled(mantissa: str, exponent: int, written: str) -> float:
    """``mantissa × 10**exponent``, correctly rounded, finite and of a sensible magnitude."""
    significand, _, power = mantissa.lower().partition("e")
    return _checked(float(f"{significand}e{int(power or 0) + exponent}"), written,
                    nonzero_digits=any(c in "123456789" for c in significand))


def _checked(value: float, written: str, nonzero_digits: bool | None = None) -> float:
    if not math.isfinite(value):
        raise _Unreadable(f"{written!r} is not a finite number")
    magnitude = abs(value)
    if (magnitude == 0 and nonzero_digits) or (
            magnitude != 0 and not SMALLEST_MAGNITUDE <= magnitude <= LARGEST_MAGNITUDE):
        raise _Unreadable(f"{written!r} is {value:g} in SI units, outside {SMALLEST_MAGNITUDE:g} to "
                          f"{LARGEST_MAGNITUDE:g}; check the exponent and the prefix")
    return value


def _float(number: int | float) -> float:
    try:
        return float(number)
    except OverflowError:
        raise _Unreadable(f"{number!r} is not a finite number") from None


def _text_of(text: object) -> str:
    if not isinstance(text, str):
        raise _Unreadable(f"{text!r} is not text")
    return text


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
