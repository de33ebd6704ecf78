"""Metadata lines above the table: ``key,value`` pairs, ``Key: value`` lines and free text.

Pairs go into the capture's metadata as strings; free-text lines are stored
under ``note1``, ``note2``, ... Pairs whose key names a sample interval,
a sample rate or a start time give the time axis of tables without a time
column (``Sample interval,1e-8``, ``Sample Interval: 10 ns``, ``dt;1e-9``,
``Sampling rate,100 MSa/s``), also when the value is repeated once per
column (``delta t,2E-6,2E-6``). The same reading serves the block of text and
settings that some tools write after the table.
"""
from __future__ import annotations

import math
import re
from collections.abc import Iterable
from dataclasses import dataclass, field

from .cells import WHITESPACE
from .clock import is_clock
from .column_units import parse_header, parse_unit

_INTERVAL_KEYS = frozenset({
    "sampleinterval", "samplinginterval", "sampleperiod", "samplingperiod", "samplespacing",
    "dt", "deltat", "timestep", "timeincrement", "xincrement", "increment", "timeinterval",
    "timeresolution", "horizontalresolution", "interval", "sampletime", "timeperpoint",
    "timepersample",
})
_RATE_KEYS = frozenset({
    "samplerate", "samplingrate", "samplefrequency", "samplingfrequency",
    "samplespersecond", "fs", "rate", "acquisitionrate",
})
_START_KEYS = frozenset({"t0", "starttime", "tstart", "timestart"})

_COMMENT_MARK = re.compile(r"^\s*(?:#+|%+|//+)\s*")
_GENERIC_SEPARATORS = (":", "=", "\t", ";", ",")
_TRAILING_SEPARATORS = ",;\t| "
_COLON_IN_NUMBER = re.compile(r"(?<=\d):(?=\d)")
_WORDS_AND_NUMBER = re.compile(
    r"^(?P<key>[^\W\d][^\d:=]*?)\s+"
    r"(?P<value>[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?(?:\s*[^\s\d]\S*)?)$"
)
_QUANTITY = re.compile(
    r"^\s*(?P<number>[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?)\s*(?P<unit>\S*)\s*$"
)
# Cells of a value repeated per column: the table's separator (blanks for a blank-separated table).
_COPY_SEPARATORS = {",": r",", ";": r";", "\t": r"\t", "|": r"\|", WHITESPACE: r"[ \t]+"}
_MAX_KEY_CHARS = 40
_MAX_KEY_WORDS = 4
_SAME = 1e-6


@dataclass(frozen=True)
class Preamble:
    """What the lines above the table say.

    Attributes
    ----------
    metadata
        Every pair as ``key -> value`` strings, free text under ``noteN``.
    sample_interval
        Seconds between samples, when a line gives an interval or a rate.
    interval_line
        The line that gave it, for messages (``"line 3 'dt;1e-9'"``).
    start_time
        Time of the first sample in seconds, when a line gives it.
    warnings
        Lines that named a time quantity but could not be read.
    other_interval
        A later line that gives another sample interval than ``interval_line``, beyond printing
        precision (:func:`contradicts`), with its value (``"line 2 'dt,2e-07' gives 2e-07 s"``);
        None when none contradicts it.
    interval_without_unit
        Whether ``interval_line`` names no unit (read in SI, seconds or Hz).
    """

    metadata: dict[str, str] = field(default_factory=dict)
    sample_interval: float | None = None
    interval_line: str | None = None
    start_time: float | None = None
    warnings: tuple[str, ...] = ()
    other_interval: str | None = None
    interval_without_unit: bool = False


def read_preamble(lines: Iterable[tuple[int, str]], sep: str, *, text_key: str = "note",
                  taken: Iterable[str] = ()) -> Preamble:
    """Read metadata and time hints from preamble lines.

    Parameters
    ----------
    lines
        ``(1-based line number, text)`` of each non-blank line above the table.
    sep
        The table's separator, tried first to split a key from its value.
        Numbers in values may use either decimal mark.
    text_key
        Free-text lines are stored as ``<text_key>1``, ``<text_key>2``, ...
    taken
        Metadata keys already in use (a repeated key gets a number).

    Returns
    -------
    Preamble
        Metadata, sample interval and start time found, and warnings.
    """
    metadata: dict[str, str] = {}
    used = set(taken)
    warnings: list[str] = []
    interval: tuple[float, str] | None = None
    without_unit = False
    other: str | None = None
    start: float | None = None
    notes = 0
    for number, text in lines:
        pair = split_key_value(text, sep)
        if pair is None:
            notes += 1
            metadata[f"{text_key}{notes}"] = text.strip()
            continue
        key, value = pair
        kind, seconds = _time_quantity(key, value, sep)  # by its own key, before a repeat is numbered
        key = _unique_key(used, key)
        used.add(key)
        metadata[key] = value
        where = f"line {number} {text.strip()!r}"
        if kind is None:
            continue
        if seconds is None:
            warnings.append(f"preamble {where} names a time quantity but its value is not readable; ignored")
        elif kind == "start":
            start = seconds if start is None else start
        elif interval is None:
            interval = (seconds, where)
            without_unit = _without_unit(pair[0], value)
        elif not same_interval(seconds, interval[0]):
            warnings.append(
                f"preamble {where} gives a sample interval of {seconds:.6g} s, but "
                f"{interval[1]} gave {interval[0]:.6g} s; the first is used"
            )
            if contradicts(seconds, interval[0]):
                other = other or f"{where} gives {seconds:.6g} s"
    return Preamble(
        metadata=metadata,
        sample_interval=None if interval is None else interval[0],
        interval_line=None if interval is None else interval[1],
        start_time=start,
        warnings=tuple(warnings),
        other_interval=other,
        interval_without_unit=without_unit,
    )


def same_interval(a: float, b: float) -> bool:
    """Whether two sample intervals a preamble states are the same number (1e-6 relative)."""
    return abs(a - b) <= _SAME * b


#: Two stated sample intervals that differ by more than this share are two time bases: a rate
#: and an interval printed to three or four digits (3 GSa/s and 333.3 ps) differ by 1e-4 and
#: are one (a review found such pairs refused at 1e-6).
CONTRADICTING_SHARE = 0.01


def contradicts(a: float, b: float) -> bool:
    """Whether two stated sample intervals are two time bases (:data:`CONTRADICTING_SHARE`)."""
    return abs(a - b) > CONTRADICTING_SHARE * b


def split_key_value(text: str, sep: str) -> tuple[str, str] | None:
    """Split a preamble line into ``(key, value)``, or None for free text.

    Parameters
    ----------
    text
        The line.
    sep
        The table's separator; it and ``:``, ``=``, tab, ``;``, ``,`` are
        looked for, and the first one in the line splits it.

    Returns
    -------
    tuple of (str, str) or None
        Key and value, both non-empty, or None when the line is free text.
    """
    text = _COMMENT_MARK.sub("", text).strip()
    marks = _GENERIC_SEPARATORS if sep == WHITESPACE else (sep, *_GENERIC_SEPARATORS)
    spots = [spot for spot in (_find_separator(text, mark) for mark in marks) if spot > 0]
    if spots:
        spot = min(spots)
        key = text[:spot].strip().strip('"').strip()
        value = text[spot + 1 :].strip().rstrip(_TRAILING_SEPARATORS).strip('"').strip()
        if _is_key(key) and value:
            return key, value
    match = _WORDS_AND_NUMBER.match(text)
    if match and _is_key(match["key"]) and _names_a_quantity(match["key"], match["value"]):
        return match["key"].strip(), match["value"]
    return None


def gives_time_base(text: str, sep: str) -> bool:
    """Whether a line is a preamble entry of the time base: a start time, sample interval or
    sample rate key with a number (``Sample Interval: 1.05e-08``). Above a table of one column
    such a line is no header, though its one cell would fit one."""
    pair = split_key_value(text, sep)
    return pair is not None and _key_kind(pair[0]) is not None and _QUANTITY.match(pair[1]) is not None


def _names_a_quantity(key: str, value: str) -> bool:
    """For ``words number`` lines: the words are a time key or the number has a known unit."""
    unit = _QUANTITY.match(value)
    return _key_kind(key) is not None or bool(unit and unit["unit"] and parse_unit(unit["unit"]))


def _key_kind(key: str) -> str | None:
    """``"start"``, ``"interval"``, ``"rate"`` or None for a preamble key (a unit in it ignored)."""
    name = re.sub(r"[^a-z0-9]", "", parse_header(key).name.lower())
    if name in _START_KEYS:
        return "start"
    if name in _INTERVAL_KEYS:
        return "interval"
    if name in _RATE_KEYS:
        return "rate"
    return None


def _find_separator(text: str, mark: str) -> int:
    """Index of the first ``mark`` in ``text``; a colon between digits (``10:30``) does not count."""
    if mark != ":":
        return text.find(mark)
    masked = _COLON_IN_NUMBER.sub("\x00", text)
    return masked.find(":")


def _is_key(text: str) -> bool:
    """A plausible metadata key: short, a few words, not a number."""
    text = text.strip()
    return (
        0 < len(text) <= _MAX_KEY_CHARS
        and len(text.split()) <= _MAX_KEY_WORDS
        and _QUANTITY.match(text) is None
    )


def _unique_key(used: set[str], key: str) -> str:
    """``key``, or ``key (2)``, ``key (3)``, ... when it is already taken."""
    if key not in used:
        return key
    n = 2
    while f"{key} ({n})" in used:
        n += 1
    return f"{key} ({n})"


def _time_quantity(key: str, value: str, sep: str = ",") -> tuple[str | None, float | None]:
    """Classify a pair as ``"interval"``, ``"start"`` or not a time hint, with its value in seconds.

    The value's own unit wins over a unit in the key (``Sample interval (ns),10``);
    a rate (``Hz``, ``Sa/s``) is turned into an interval. A value given once
    per column (``2E-6,2E-6``) counts when every copy agrees. Returns
    ``(kind, None)`` when the key names a time quantity but the value cannot
    be read.
    """
    key_kind = _key_kind(key)
    if key_kind is None:
        return None, None
    kind = "start" if key_kind == "start" else "interval"
    copies = [c.strip().strip('"') for c in re.split(_COPY_SEPARATORS[sep], value) if c.strip().strip('"')]
    if kind == "start" and all(is_clock(c) for c in copies):
        return None, None  # a clock time of the first sample: the axis starts at 0 from it
    if len(copies) > 1:
        found = [_seconds(key, key_kind, kind, c) for c in copies]
        first = found[0]
        if first is not None and all(f is not None and abs(f - first) <= _SAME * abs(first) for f in found):
            return kind, first
    # one value, perhaps with a decimal comma (``2,5 ns``) or its unit in the next cell (``2E-6,s``)
    whole = _seconds(key, key_kind, kind, value)
    if whole is None and len(copies) == 2:
        whole = _seconds(key, key_kind, kind, " ".join(copies))
    return kind, whole


def _without_unit(key: str, value: str) -> bool:
    """Whether a time-base line names no unit, neither in its value nor in its key."""
    match = _QUANTITY.match(value)
    return match is not None and not match["unit"] and not parse_header(key).unit


def _seconds(key: str, key_kind: str, kind: str, value: str) -> float | None:
    """The time quantity ``value`` in seconds (an interval from a rate), or None when unreadable."""
    head = parse_header(key)
    match = _QUANTITY.match(value)
    if match is None:
        return None
    number = float(match["number"].replace(",", "."))
    unit = match["unit"]
    parsed = parse_unit(unit) if unit else ((head.unit, head.scale) if head.unit else None)
    if (unit and parsed is None) or not math.isfinite(number):
        return None
    base, scale = parsed if parsed is not None else ("Hz" if key_kind == "rate" else "s", 1.0)
    if base == "s":
        seconds = number * scale
    elif base == "Hz" and kind == "interval" and number > 0:
        seconds = 1.0 / (number * scale)
    else:
        return None
    if kind == "interval" and not seconds > 0:
        return None
    return seconds
