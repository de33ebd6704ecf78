"""A bench's history across lots: the results rows in an SQLite table.

Table ``results``: one row per analysis of a capture, with the lot name; the
quantities are one JSON text ``{"NAME": {"value": v, "U": U}}`` (SI units), so
one table serves every method. The results CSV is the record of a run: when a
run starts, rows of its CSV that the table lacks (a run killed between the two
writes) are added, so the table catches up; the key (lot, file, analysed_at)
makes that idempotent.

References
----------
.. [1] SQLite, "SQL As Understood By SQLite: INSERT" (``INSERT OR IGNORE``),
   https://www.sqlite.org/lang_insert.html
"""
from __future__ import annotations

import json
import math
import os
import sqlite3
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

from .results_file import ResultsFileError

_SCHEMA = """
CREATE TABLE IF NOT EXISTS results (
    lot TEXT NOT NULL,
    file TEXT NOT NULL,
    verdict TEXT NOT NULL,
    message TEXT NOT NULL,
    method TEXT NOT NULL,
    quantities TEXT NOT NULL,
    tool_version TEXT NOT NULL,
    capture_sha256 TEXT NOT NULL,
    setup_sha256 TEXT NOT NULL,
    spec_sha256 TEXT NOT NULL,
    analysed_at TEXT NOT NULL,
    PRIMARY KEY (lot, file, analysed_at)
)
"""
_COLUMNS = ("lot", "file", "verdict", "message", "method", "quantities", "tool_version",
            "capture_sha256", "setup_sha256", "spec_sha256", "analysed_at")
_INSERT = f"INSERT OR IGNORE INTO results ({', '.join(_COLUMNS)}) VALUES ({', '.join('?' * len(_COLUMNS))})"


class HistoryDB:
    """The history table, opened for one lot of one method; use as a context manager."""

    def __init__(self, path: str | os.PathLike[str], lot: str, method: str,
                 quantities: Sequence[str]) -> None:
        self.path = Path(path)
        self.lot = lot
        self.method = method
        self.quantities = tuple(quantities)
        try:
            self._db = sqlite3.connect(self.path, timeout=30.0, isolation_level=None)
            self._db.execute(_SCHEMA)
        except sqlite3.DatabaseError as exc:
            raise ResultsFileError(f"cannot use history database {self.path}: {exc}") from None

    def __enter__(self) -> "HistoryDB":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def add(self, row: Mapping[str, Any]) -> None:
        """Insert one results row in its own transaction."""
        self.add_many([row])

    def add_many(self, rows: Iterable[Mapping[str, Any]]) -> None:
        """Insert rows (those already present are left alone) in one transaction."""
        records = [self._record(row) for row in rows]
        if not records:
            return
        with self._db:  # commits, or rolls back on an exception
            self._db.execute("BEGIN")
            self._db.executemany(_INSERT, records)

    def close(self) -> None:
        self._db.close()

    def _record(self, row: Mapping[str, Any]) -> tuple[Any, ...]:
        quantities = {name: {"value": _finite(row.get(name)), "U": _finite(row.get(f"{name}_U"))}
                      for name in self.quantities}
        return (self.lot, row["file"], row["verdict"], row.get("message") or "", self.method,
                json.dumps(quantities, allow_nan=False), row.get("tool_version") or "",
                row.get("capture_sha256") or "", row.get("setup_sha256") or "",
                row.get("spec_sha256") or "", row.get("analysed_at") or "")


def _finite(x: Any) -> float | None:
    return float(x) if isinstance(x, (int, float)) and math.isfinite(x) else None
