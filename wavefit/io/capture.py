"""The in-memory form of one recorded waveform table."""
from __future__ import annotations

from dataclasses import dataclass, field
from functools import cached_property
from typing import TYPE_CHECKING, Any, Sequence

import numpy as np

if TYPE_CHECKING:
    from ..signal.codes import RecordLevels


@dataclass(frozen=True)
class Channel:
    """One recorded signal, scaled to SI units.

    ``name`` is the header without its unit (``"CH2"`` for ``"CH2 (mV)"``),
    ``header`` the header exactly as the file writes it, ``unit`` the SI base
    unit (``"V"``, ``"A"``, ``""`` when the file gives none) and ``scale`` the
    factor that was applied to the file's numbers to reach SI. ``position``
    is the column's 0-based place in the file (None when unknown) and
    ``alias`` a second name from a name line above the header (``""`` if none),
    shown by ``inspect``; it does not find the column, since a preamble line
    of the header's width cannot be told from a name line.
    """

    name: str
    header: str
    unit: str
    scale: float
    values: np.ndarray
    position: int | None = None
    alias: str = ""

    @cached_property
    def levels(self) -> "RecordLevels":
        """The distinct values and the converter step they show
        (:func:`wavefit.signal.codes.record_levels`), found once: the glitch check and the
        methods' clipping checks both need them, and the values are read-only."""
        from ..signal.codes import record_levels

        return record_levels(self.values)


@dataclass(frozen=True)
class LeftOut:
    """A column the reader left out, having no usable numbers: its header, its name without
    unit, its 0-based place in the file and the refusal for a setup that maps it."""

    header: str
    name: str
    position: int | None
    message: str


def _named(columns: Sequence[Channel | LeftOut], key: str) -> list[Channel | LeftOut]:
    """The columns called ``key``: by exact header, else by header without unit, else by name
    but for case (the first of these rules that finds any; several when the file repeats it)."""
    rules = (lambda c: c.header == key, lambda c: c.name == key, lambda c: c.name.lower() == str(key).lower())
    for rule in rules:
        found = [column for column in columns if rule(column)]
        if found:
            return found
    return []


@dataclass(frozen=True)
class Capture:
    """A uniformly sampled record: SI time axis, named channels, metadata.

    ``time`` is in seconds; ``time_column`` is the header of the time column,
    or ``None`` when the axis was built from a sample interval, and
    ``time_position`` its 0-based place in the file. ``interval_uncertainty``
    is the relative standard uncertainty of ``sample_interval`` that comes
    from the file itself (time stamps printed with too few digits), 0 when
    the file's axis is exact to its printing. ``notes`` say how the reader
    read something it had to infer; ``warnings`` what may be wrong. The reader
    returns read-only arrays (``time`` and every ``Channel.values``).
    ``file_state`` is the file's size in bytes and modification time in
    nanoseconds when the reader opened it (None for a capture not read from a
    file), so that a later look at the file can tell whether it changed.
    """

    time: np.ndarray
    channels: tuple[Channel, ...]
    sample_interval: float
    source: str
    time_column: str | None = None
    metadata: dict[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()
    time_position: int | None = None
    interval_uncertainty: float = 0.0
    file_state: tuple[int, int] | None = None
    left_out: tuple[LeftOut, ...] = ()

    @property
    def rows(self) -> int:
        return int(self.time.size)

    def channel(self, key: str | int) -> Channel:
        """Find a channel by exact header, by header without unit, or by 0-based index.

        Indices count the file's columns, the time column included, as a user
        sees them in the file.
        """
        from ..errors import SetupError

        if isinstance(key, bool):
            raise SetupError(f"column {key!r} is not a column name or index")
        if isinstance(key, (int, np.integer)):
            return self._channel_at(int(key))
        found = _named(self.channels, key)
        if len(found) > 1:
            places = ", ".join(str(c.position) for c in found if c.position is not None)
            raise SetupError(f"{len(found)} columns of {self.source} match {key!r}"
                             + (f" (at {places})" if places else "")
                             + ": map the role by the column's index (counted from 0, the time column included)")
        if found:
            return found[0]
        left = _named(self.left_out, key)
        self._refuse_left_out(left[0] if len(left) == 1 else None)
        names = ", ".join(repr(c.header) for c in self.channels)
        raise SetupError(f"no column {key!r} in {self.source}; columns are: {names}")

    def _channel_at(self, index: int) -> Channel:
        """The channel in the file's column ``index`` (the time column counted)."""
        from ..errors import SetupError

        if all(ch.position is None for ch in self.channels):  # built by hand: the order of column_headers
            headers = self.column_headers()
            if 0 <= index < len(headers) and headers[index] != self.time_column:
                return next(ch for ch in self.channels if ch.header == headers[index])
        if index == self.time_position and self.time_column is not None:
            raise SetupError(f"column index {index} is the time column {self.time_column!r}")
        for ch in self.channels:
            if ch.position == index:
                return ch
        self._refuse_left_out(next((c for c in self.left_out if c.position == index), None))
        places = sorted({ch.position for ch in self.channels if ch.position is not None}
                        | ({self.time_position} if self.time_position is not None else set()))
        listed = ", ".join(str(p) for p in places)
        raise SetupError(f"column index {index} is not a column of {self.source}; its columns are at {listed}")

    @staticmethod
    def _refuse_left_out(column: LeftOut | None) -> None:
        """Raise the reader's refusal of a left-out column asked for (nothing for None)."""
        from ..errors import CaptureError

        if column is not None:
            raise CaptureError(column.message)

    def column_headers(self) -> list[str]:
        """All headers in file order, the time column included (first, when the places are not known)."""
        headers = [ch.header for ch in self.channels]
        time = [] if self.time_column is None else [self.time_column]
        if all(ch.position is None for ch in self.channels):
            return [*time, *headers]
        placed = [(ch.position, ch.header) for ch in self.channels]
        placed += [(self.time_position, header) for header in time]
        return [header for _, header in sorted(placed, key=lambda c: -1 if c[0] is None else c[0])]

    def describe(self) -> dict[str, Any]:
        """What the reader saw, as printed by ``wavefit inspect --json``."""
        return {
            "source": self.source,
            "rows": self.rows,
            "sample_interval_s": self.sample_interval,
            "sample_interval_relative_uncertainty": self.interval_uncertainty,
            "time_column": self.time_column,
            "time_position": self.time_position,
            "columns": [
                {
                    "name": c.name,
                    "header": c.header,
                    "position": c.position,
                    "alias": c.alias,
                    "unit": c.unit,
                    "min": _finite_or_none(np.nanmin(c.values)) if c.values.size else None,
                    "max": _finite_or_none(np.nanmax(c.values)) if c.values.size else None,
                }
                for c in self.channels
            ],
            "left_out": [{"header": c.header, "position": c.position, "reason": c.message} for c in self.left_out],
            "metadata": dict(self.metadata),
            "warnings": list(self.warnings),
            "notes": list(self.notes),
        }


def _finite_or_none(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None
