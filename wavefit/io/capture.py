"""The in-memory form of one recorded waveform table."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np


@dataclass(frozen=True)
class Channel:
    """One recorded signal, scaled to SI units.

    ``name`` is the header without its unit (``"CH2"`` for ``"CH2 (mV)"``),
    ``header`` the header exactly as the file writes it, ``unit`` the SI base
    unit (``"V"``, ``"A"``, ``""`` when the file gives none) and ``scale`` the
    factor that was applied to the file's numbers to reach SI.
    """

    name: str
    header: str
    unit: str
    scale: float
    values: np.ndarray


@dataclass(frozen=True)
class Capture:
    """A uniformly sampled record: SI time axis, named channels, metadata.

    ``time`` is in seconds; ``time_column`` is the header of the time column,
    or ``None`` when the axis was built from a sample interval. The reader
    returns read-only arrays (``time`` and every ``Channel.values``).
    """

    time: np.ndarray
    channels: tuple[Channel, ...]
    sample_interval: float
    source: str
    time_column: str | None = None
    metadata: dict[str, str] = field(default_factory=dict)
    warnings: tuple[str, ...] = ()

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
            columns = self.column_headers()
            if not 0 <= key < len(columns):
                raise SetupError(
                    f"column index {key} is out of range: {self.source} has "
                    f"{len(columns)} columns (0..{len(columns) - 1})"
                )
            header = columns[key]
            if header == self.time_column:
                raise SetupError(f"column index {key} is the time column {header!r}")
            return next(c for c in self.channels if c.header == header)
        for ch in self.channels:
            if ch.header == key:
                return ch
        for ch in self.channels:
            if ch.name == key:
                return ch
        lowered = [ch for ch in self.channels if ch.name.lower() == str(key).lower()]
        if len(lowered) == 1:
            return lowered[0]
        names = ", ".join(repr(c.header) for c in self.channels)
        raise SetupError(f"no column {key!r} in {self.source}; columns are: {names}")

    def column_headers(self) -> list[str]:
        """All headers in file order, the time column (if any) first."""
        headers = [c.header for c in self.channels]
        if self.time_column is not None:
            return [self.time_column, *headers]
        return headers

    def describe(self) -> dict[str, Any]:
        """What the reader saw, as printed by ``wavefit inspect --json``."""
        return {
            "source": self.source,
            "rows": self.rows,
            "sample_interval_s": self.sample_interval,
            "time_column": self.time_column,
            "columns": [
                {
                    "name": c.name,
                    "header": c.header,
                    "unit": c.unit,
                    "min": _finite_or_none(np.nanmin(c.values)) if c.values.size else None,
                    "max": _finite_or_none(np.nanmax(c.values)) if c.values.size else None,
                }
                for c in self.channels
            ],
            "metadata": dict(self.metadata),
            "warnings": list(self.warnings),
        }


def _finite_or_none(x: float) -> float | None:
    x = float(x)
    return x if np.isfinite(x) else None
