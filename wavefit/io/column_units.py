"""Units written in column headers (``Time (s)``, ``CH1 [mV]``, ``I / mA``) and their scale to SI.

A unit is an optional SI prefix (``µ``, ``μ`` and ``u`` all mean micro) and a
base unit from a short table. Anything else in brackets is kept verbatim with
scale 1 and reported, so ``V/div`` or ``probe x10`` never silently rescale data.
"""
from __future__ import annotations

import re
from dataclasses import dataclass

PREFIXES: dict[str, float] = {
    "T": 1e12, "G": 1e9, "M": 1e6, "k": 1e3,
    "m": 1e-3, "u": 1e-6, "\u00b5": 1e-6, "\u03bc": 1e-6,
    "n": 1e-9, "p": 1e-12, "f": 1e-15,
}

_ALIASES: dict[str, tuple[str, ...]] = {
    "s": ("s", "S", "sec", "secs", "second", "seconds"),
    "V": ("V", "v", "volt", "volts", "Volt", "Volts"),
    "A": ("A", "amp", "amps", "Amp", "Amps", "ampere", "amperes"),
    "ohm": ("ohm", "ohms", "Ohm", "Ohms", "\u03a9", "\u2126"),
    "Hz": ("Hz", "hz", "HZ", "Sa/s", "S/s", "sa/s", "sps", "Sps", "SPS", "Sa/sec",
           "samples/s", "Samples/s", "sample/s", "samples/sec", "pts/s", "points/s"),
    "W": ("W", "watt", "watts"),
    "F": ("F",),
    "H": ("H",),
    "degC": ("\u00b0C", "degC", "\u2103"),
    "dB": ("dB",),
    "dBm": ("dBm",),
    "%": ("%",),
}
BASE_UNITS: dict[str, str] = {alias: base for base, names in _ALIASES.items() for alias in names}
# Spelled-out names ("Volt", "SECONDS") are matched regardless of case; symbols are not ("mV" vs "MV").
_WORDS = {alias.lower(): base for alias, base in BASE_UNITS.items() if len(alias) >= 3 and alias.isalpha()}

_TIME_NAMES = frozenset({
    "t", "time", "times", "time axis", "timestamp", "time stamp", "elapsed time",
    "relative time", "sec", "secs", "second", "seconds", "zeit", "temps", "tiempo", "tempo",
})

_BRACKETED = re.compile(r"^(?P<name>.*?)(?P<gap>\s*)[(\[{](?P<unit>[^()\[\]{}]*)[)\]}]\s*$")
_SLASHED = re.compile(r"^(?P<name>[^/]*?)\s*/\s*(?P<unit>[^/\s]+)$")
_TIME_SUFFIX = re.compile(r"^(?P<name>time|t)[ _-]+(?P<unit>[^\s_-]+)$", re.IGNORECASE)


@dataclass(frozen=True)
class HeaderUnit:
    """A header split into a name and the unit it declares.

    Attributes
    ----------
    name
        The header without its unit (the whole header when it declares none).
    unit
        SI base unit (``"s"``, ``"V"``, ``"A"``, ``"ohm"``, ``"Hz"``, ...), ``""``
        when none is declared, or the unit text verbatim when it is not recognised.
    scale
        Factor from the file's numbers to SI (1 for unknown units).
    known
        False when a unit was declared but not recognised.
    """

    name: str
    unit: str
    scale: float
    known: bool = True


def parse_unit(text: str) -> tuple[str, float] | None:
    """Read a unit such as ``"mV"``, ``"µs"``, ``"kOhm"`` or ``"MSa/s"``.

    Parameters
    ----------
    text
        The unit text, without brackets.

    Returns
    -------
    tuple of (str, float) or None
        SI base unit and scale factor, or None when the text is not a unit
        this reader knows.
    """
    text = text.strip()
    base = _base_unit(text)
    if base is not None:
        return base, 1.0
    if len(text) > 1 and text[0] in PREFIXES:
        base = _base_unit(text[1:])
        if base is not None:
            return base, PREFIXES[text[0]]
    return None


def _base_unit(text: str) -> str | None:
    """The SI base unit spelled by ``text`` without prefix, or None."""
    return BASE_UNITS.get(text) or _WORDS.get(text.lower())


def parse_header(header: str) -> HeaderUnit:
    """Split a column header into its name and unit.

    Accepted forms are ``Name (unit)``, ``Name [unit]``, ``Name {unit}``,
    ``Name / unit`` (also ``V/mV``, but not ``mV/ms``) and, for time,
    ``time_unit``. A bracket glued to a name with an unknown content
    (``V(out)``) is part of the name, not a unit; so is ``/div``.

    Parameters
    ----------
    header
        The header text as written in the file.

    Returns
    -------
    HeaderUnit
        Name, SI unit and scale.
    """
    header = header.strip()
    match = _BRACKETED.match(header)
    if match:
        name = match["name"].strip() or header
        unit_text = match["unit"].strip()
        if not unit_text:
            return HeaderUnit(name, "", 1.0)
        parsed = parse_unit(unit_text)
        if parsed is not None:
            return HeaderUnit(name, *parsed)
        if match["gap"] or not match["name"]:
            return HeaderUnit(name, unit_text, 1.0, known=False)
        return HeaderUnit(header, "", 1.0)
    for pattern in (_SLASHED, _TIME_SUFFIX):
        match = pattern.match(header)
        if match and _is_quantity_name(match["name"].strip()):
            parsed = parse_unit(match["unit"])
            if parsed is not None and (pattern is _SLASHED or parsed[0] == "s"):
                return HeaderUnit(match["name"].strip(), *parsed)
    return HeaderUnit(header, "", 1.0)


def _is_quantity_name(name: str) -> bool:
    """True for the left part of ``name / unit``: a symbol like ``V`` or a word, not a unit like ``mV``."""
    return len(name) == 1 or (bool(name) and parse_unit(name) is None)


def is_time_name(name: str) -> bool:
    """True when a header name (without unit) says the column is the time axis."""
    return " ".join(name.replace("_", " ").lower().split()) in _TIME_NAMES
