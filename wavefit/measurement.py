"""A measurement: the captures of one analysis, each bound to the parts and conditions it was
recorded with.

A single-capture method gets one :class:`BoundCapture` whose parts are the setup's
``[parts]``. A method that takes several captures gets one per ``[[captures]]`` entry, each
carrying the setup's parts with its entry's own values on top (its tank capacitor, its bias
current, its frequency), so no method matches captures to entries by position.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping, Sequence

from .errors import SetupError
from .io.capture import Capture
from .setup import CaptureEntry, Setup
from .values import PartValue


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
