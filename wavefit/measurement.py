"""A measurement: the captures of one analysis, each bound to the parts and conditions it was
recorded with.

A method declares how many captures one measurement takes (:class:`CaptureCount`); the
setup says which case applies: with ``[[captures]]`` entries one measurement is the
entries' captures, each carrying the setup's parts with its entry's own values on top (its
tank capacitor, its bias current, its frequency), so no method matches captures to entries
by position; without entries it is one capture with the setup's ``[parts]``.
:func:`takes_entries` checks the setup against the declaration and :func:`capture_sources`
finds the sources, for the library, the command line and batch alike.
"""
from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

from .errors import AnalysisRefused, SetupError
from .io.capture import Capture
from .setup import CaptureEntry, Setup
from .values import PartValue

#: Counts written as words in messages ("at least two captures").
_COUNT_WORDS = ("no", "one", "two", "three", "four", "five", "six", "seven", "eight", "nine", "ten")


@dataclass(frozen=True)
class CaptureCount:
    """How many captures one measurement of a method takes: from ``minimum`` to ``maximum``
    (``None``: no upper bound). ``reason`` completes the message of a measurement with too
    few ("with different tank capacitors")."""

    minimum: int = 1
    maximum: int | None = 1
    reason: str = ""

    @property
    def several(self) -> bool:
        """Whether a measurement may be more than one capture (named in ``[[captures]]``)."""
        return self.maximum is None or self.maximum > 1

    def allows(self, count: int) -> bool:
        return count >= self.minimum and (self.maximum is None or count <= self.maximum)

    def describe(self) -> str:
        """``"one capture"``, ``"at least two captures"``, ``"two to four captures"``."""
        low = _count_word(self.minimum)
        if self.maximum == self.minimum:
            return f"{low} capture{'s' if self.minimum != 1 else ''}"
        if self.maximum is None:
            return f"at least {low} captures"
        return f"{low} to {_count_word(self.maximum)} captures"


@dataclass(frozen=True)
class BoundCapture:
    """One capture with the parts and conditions that hold for it alone or for all captures."""

    capture: Capture
    parts: Mapping[str, PartValue]

    @property
    def source(self) -> str:
        return self.capture.source


@dataclass(frozen=True)
class Measurement:
    """The captures of one analysis, each with its own parts, and the parts common to all."""

    captures: tuple[BoundCapture, ...]
    parts: Mapping[str, PartValue]

    @property
    def source(self) -> str | list[str]:
        """The capture's source, or the list of them when the measurement has several."""
        if len(self.captures) == 1:
            return self.captures[0].source
        return [c.source for c in self.captures]

    @property
    def first(self) -> BoundCapture:
        return self.captures[0]


def bind(captures: Sequence[Capture], setup: Setup, entries: Sequence[CaptureEntry] | None = None) -> Measurement:
    """Bind each capture to its entry's parts (on top of the setup's).

    Parameters
    ----------
    captures
        The loaded captures.
    setup
        The parsed setup; its ``parts`` hold for every capture.
    entries
        The ``[[captures]]`` entries the captures were loaded from, one per capture, or
        ``None`` when the captures came from elsewhere (the command line, the API): then
        they take the setup's parts only.

    Returns
    -------
    Measurement

    Raises
    ------
    SetupError
        When ``entries`` and ``captures`` differ in number.
    """
    if entries is None:
        entries = ()
    elif len(entries) != len(captures):
        raise SetupError(f"{setup.source}: {len(captures)} captures for {len(entries)} [[captures]] entries")
    bound = tuple(BoundCapture(c, {**setup.parts, **(entries[k].parts if entries else {})})
                  for k, c in enumerate(captures))
    return Measurement(bound, dict(setup.parts))


def takes_entries(setup: Setup, count: CaptureCount) -> bool:
    """Whether one measurement is the setup's ``[[captures]]`` entries (else one capture given
    apart from the setup), checked against what the method declares.

    Raises
    ------
    SetupError
        When the setup has entries and the method takes one capture, or has none and the
        method needs several, or has more entries than the method takes.
    """
    if setup.captures:
        if not count.several:
            raise SetupError(f"{setup.source}: method {setup.method!r} takes its capture from the command line, "
                             "not from [[captures]]; remove the [[captures]] entries")
        if count.maximum is not None and len(setup.captures) > count.maximum:
            raise SetupError(f"{setup.source}: method {setup.method!r} takes {count.describe()}, "
                             f"the setup names {len(setup.captures)} in [[captures]]")
        return True
    if count.minimum > 1:
        raise SetupError(f"{setup.source}: method {setup.method!r} takes several captures ({count.describe()}); "
                         "name each with its own parts in a [[captures]] entry")
    return False


def capture_sources(source: Any, setup: Setup, count: CaptureCount
                    ) -> tuple[list[Any], tuple[CaptureEntry, ...] | None]:
    """The sources of one measurement and the entries they are bound to.

    Parameters
    ----------
    source
        Without ``[[captures]]`` entries: the one capture (path, DataFrame, Capture).
        With entries: ``None`` (the entries' files), a folder holding a file of each
        entry's name (one part's captures, as batch gives them; also as a sequence of that one
        folder, as the command line gives it), or a sequence of sources that replaces the
        entries' files in order.
    setup
        The parsed setup.
    count
        What the method declares (:attr:`wavefit.methods.base.Method.capture_count`).

    Returns
    -------
    tuple of (list, tuple of CaptureEntry or None)
        The sources, and the entries in the same order, or ``None`` for a method that takes
        one capture (it then takes the setup's parts only).

    Raises
    ------
    SetupError
        From :func:`takes_entries`, when a single-capture method gets no capture, or when the
        sources given are not one per entry.
    AnalysisRefused
        When the number of entries is not one the method takes.
    """
    if not takes_entries(setup, count):
        if source is None:
            raise SetupError(f"method {setup.method!r} needs a capture to analyse")
        return [source], None
    if isinstance(source, (list, tuple)) and len(source) == 1 and _is_folder(source[0]):
        source = source[0]  # (the command line gives its one CAPTURE in a list)
    if source is None:
        sources: list[Any] = [entry.file for entry in setup.captures]
    elif _is_folder(source):
        sources = [os.path.join(source, entry.file.name) for entry in setup.captures]
    else:
        sources = list(source) if isinstance(source, (list, tuple)) else [source]
    if len(sources) != len(setup.captures):
        # the sources replace the entries' files in order: another number cannot be bound to their
        # parts (each capture then had none of its own: "no tank_capacitor for this capture")
        raise SetupError(f"{setup.source}: {_count_word(len(sources))} capture(s) given for {len(setup.captures)} "
                         "[[captures]] entries; the captures given replace the entries' files in order, so give "
                         "one per entry, or none to read the entries' own files")
    if not count.allows(len(sources)):
        reason = f" {count.reason}" if count.reason else ""
        raise AnalysisRefused(f"{setup.source}: {setup.method} needs {count.describe()}{reason}, "
                              f"got {_count_word(len(sources))}")
    return sources, setup.captures


def _is_folder(source: Any) -> bool:
    return isinstance(source, (str, os.PathLike)) and os.path.isdir(source)


def _count_word(count: int) -> str:
    return _COUNT_WORDS[count] if count < len(_COUNT_WORDS) else str(count)
