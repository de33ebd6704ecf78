"""A bench's history across lots: the results rows in an SQLite table, one per analysis.

Table ``results``: one row per capture analysed under one setup and one spec. Its
key is (``capture_key``, ``setup_sha256``, ``spec_sha256``), where ``capture_key``
is the capture's sha256 (``file `` and the path for a capture that could not be
read). So the same measurement is never recorded twice, whatever lot name, path or
run it comes from; such a row is skipped and reported. The quantities are one
JSON text ``{"NAME": {"value": v, "U": U}}`` (SI units), so one table serves
every method; text is stored with control characters escaped
(:func:`~wavefit.report.safe_text.escape_controls`), as in the results CSV.

The results CSV is the record of a run: when a run starts, rows of its CSV that
the table lacks (a run stopped between the two writes, or a database that was full)
are added, so the table catches up.

References
----------
.. [1] SQLite, "SQL As Understood By SQLite: INSERT" (``INSERT OR IGNORE``),
   https://www.sqlite.org/lang_insert.html
.. [2] SQLite, "ALTER TABLE" (``RENAME TO``), https://www.sqlite.org/lang_altertable.html
"""
from __future__ import annotations

import json
import math
import os
import sqlite3
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Iterable, Mapping, Sequence

from ..errors import WavefitError
from ..report.safe_text import escape_controls, unescape_controls, visible
from ..write_errors import write_failed

_COLUMNS = ("lot", "file", "verdict", "message", "method", "quantities", "tool_version",
            "capture_sha256", "setup_sha256", "spec_sha256", "analysed_at", "capture_key")
_SCHEMA = f"""
CREATE TABLE IF NOT EXISTS results (
    {', '.join(f'{name} TEXT NOT NULL' for name in _COLUMNS)},
    PRIMARY KEY (capture_key, setup_sha256, spec_sha256)
)
"""
_INSERT = f"INSERT OR IGNORE INTO results ({', '.join(_COLUMNS)}) VALUES ({', '.join('?' * len(_COLUMNS))})"
_RECORDED = ("SELECT lot, file, analysed_at FROM results "
             "WHERE capture_key = ? AND setup_sha256 = ? AND spec_sha256 = ?")
#: Table name for rows that an older table held twice (same capture, setup and spec) when it is converted.
REPEATS_TABLE = "results_repeated"
_MIGRATE = f"""
ALTER TABLE results RENAME TO results_unkeyed;
{_SCHEMA};
INSERT OR IGNORE INTO results SELECT {', '.join(_COLUMNS[:-1])},
    CASE WHEN capture_sha256 != '' THEN capture_sha256 ELSE 'file ' || file END
    FROM results_unkeyed ORDER BY analysed_at;
DELETE FROM results_unkeyed WHERE (lot, file, analysed_at) IN (SELECT lot, file, analysed_at FROM results);
ALTER TABLE results_unkeyed RENAME TO {REPEATS_TABLE};
"""


class HistoryDBError(WavefitError):
    """The history database cannot be used: not SQLite, or its table is of another kind (exit code 3)."""

    exit_code = 3


@dataclass(frozen=True)
class Recorded:
    """A row not added because its capture, setup and spec were recorded already, and where."""

    file: str
    lot: str
    as_file: str
    analysed_at: str


@dataclass
class HistoryReport:
    """What a run did to the history: rows added, rows caught up from the CSV, rows skipped."""

    added: int = 0
    caught_up: int = 0
    already_recorded: list[Recorded] = field(default_factory=list)
    converted_repeats: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {"added": self.added, "caught_up": self.caught_up, "converted_repeats": self.converted_repeats,
                "already_recorded": [{"file": r.file, "recorded_in_lot": r.lot, "recorded_as": r.as_file,
                                      "analysed_at": r.analysed_at} for r in self.already_recorded]}


class HistoryDB:
    """The history table, opened for one lot of one method; use as a context manager.

    Parameters
    ----------
    path
        The SQLite file; created when missing. A table of the earlier layout (key lot,
        file, time) is converted: rows it held twice move to table ``results_repeated``
        (counted in ``report.converted_repeats``).
    lot, method, quantities
        What the rows of this run are recorded under.
    """

    def __init__(self, path: str | os.PathLike[str], lot: str, method: str,
                 quantities: Sequence[str]) -> None:
        self.path = Path(path)
        self.lot = lot
        self.method = method
        self.quantities = tuple(quantities)
        self.report = HistoryReport()
        new = not os.path.lexists(self.path)
        try:
            self._db = sqlite3.connect(self.path, timeout=30.0, isolation_level=None)
        except sqlite3.Error as exc:
            raise write_failed("history database", self.path, exc) from None
        try:
            self._prepare()
        except sqlite3.OperationalError as exc:
            self._db.close()
            if new:  # the empty file this run made (a full disk left one behind: a fault campaign)
                self.path.unlink(missing_ok=True)
            raise write_failed("history database", self.path, exc, "nothing was analysed") from None
        except sqlite3.DatabaseError as exc:
            self._db.close()
            raise HistoryDBError(f"cannot use history database {visible(self.path)}: {visible(exc)}; "
                                 "use another --db") from None

    def __enter__(self) -> "HistoryDB":
        return self

    def __exit__(self, *exc: object) -> None:
        self.close()

    def catch_up(self, rows: Iterable[Mapping[str, Any]]) -> None:
        """Add the results file's rows that the table lacks (counted in ``report.caught_up``)."""
        self.report.caught_up += self._insert(rows, "rows of the results file are not all in it yet")

    def add(self, row: Mapping[str, Any]) -> None:
        """Add one new row, in its own transaction (counted in ``report.added``)."""
        self.report.added += self._insert([row], f"the row of {visible(row['file'])} is in the results "
                                                 "file, and the next run adds it to the database")

    def close(self) -> None:
        self._db.close()

    def _prepare(self) -> None:
        columns = [info[1] for info in self._db.execute("PRAGMA table_info(results)")]
        if not columns:
            self._db.execute(_SCHEMA)
        elif tuple(columns) == _COLUMNS[:-1]:
            with self._db:
                self._db.execute("BEGIN IMMEDIATE")
                for statement in _MIGRATE.split(";"):
                    self._db.execute(statement)
            self.report.converted_repeats = self._db.execute(f"SELECT count(*) FROM {REPEATS_TABLE}").fetchone()[0]
            if not self.report.converted_repeats:
                self._db.execute(f"DROP TABLE {REPEATS_TABLE}")
        elif tuple(columns) != _COLUMNS:
            raise sqlite3.DatabaseError("its table 'results' has other columns than a wavefit history")

    def _insert(self, rows: Iterable[Mapping[str, Any]], kept: str) -> int:
        """Insert rows in one transaction; returns how many were new. Rows whose key is held by
        another record go to ``report.already_recorded``."""
        records = [self._record(row) for row in rows]
        added, recorded = 0, []
        try:
            with self._db:  # commits, or rolls back on an exception
                self._db.execute("BEGIN IMMEDIATE")
                for record in records:
                    if self._db.execute(_INSERT, tuple(record[c] for c in _COLUMNS)).rowcount:
                        added += 1
                        continue
                    key = (record["capture_key"], record["setup_sha256"], record["spec_sha256"])
                    held = self._db.execute(_RECORDED, key).fetchone()
                    if held != (record["lot"], record["file"], record["analysed_at"]):
                        recorded.append(Recorded(unescape_controls(record["file"]), unescape_controls(held[0]),
                                                 unescape_controls(held[1]), held[2]))
        except sqlite3.Error as exc:
            raise write_failed("history database", self.path, exc, kept) from None
        self.report.already_recorded += recorded
        return added

    def _record(self, row: Mapping[str, Any]) -> dict[str, str]:
        """The table's columns for a results row (text escaped as in the results file)."""
        quantities = {name: {"value": _finite(row.get(name)), "U": _finite(row.get(f"{name}_U"))}
                      for name in self.quantities}
        record = {name: row.get(name) or "" for name in ("verdict", "tool_version", "capture_sha256",
                                                         "setup_sha256", "spec_sha256", "analysed_at")}
        record.update(lot=escape_controls(self.lot), file=escape_controls(row["file"]),
                      message=escape_controls(row.get("message") or ""), method=self.method,
                      quantities=json.dumps(quantities, allow_nan=False))
        record["capture_key"] = record["capture_sha256"] or f"file {record['file']}"
        return record


def _finite(x: Any) -> float | None:
    return float(x) if isinstance(x, (int, float)) and math.isfinite(x) else None

