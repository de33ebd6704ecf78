"""The history database: one row per capture, setup and spec, whatever lot name, path or run it comes from.

The issue's case: a lot of 12 captures analysed, then resumed with another --lot, gave 24 rows.
"""
from __future__ import annotations

import json
import shutil
import sqlite3
from pathlib import Path

import pytest

from wavefit.batch.command import run
from wavefit.batch.history_db import REPEATS_TABLE, HistoryDBError

from test_batch_fakes import delayed_analyse, write_lot
from test_batch_runner import batch_args


def table(db: Path, sql: str = "SELECT lot, file, capture_sha256, setup_sha256, spec_sha256 FROM results"):
    with sqlite3.connect(db) as con:
        return con.execute(sql).fetchall()


def run_json(folder: Path, capsys, *extra: str) -> dict:
    capsys.readouterr()
    assert run(batch_args(folder, "--workers", "1", "--json", *extra), analyse=delayed_analyse) == 0
    return json.loads(capsys.readouterr().out)


def test_resume_with_another_lot_adds_nothing_twice_and_says_so(tmp_path, capsys):
    write_lot(tmp_path, [95.0 + i for i in range(12)])
    db = str(tmp_path / "h.sqlite")
    first = run_json(tmp_path, capsys, "--db", db)
    assert first["history"]["added"] == 12
    again = run_json(tmp_path, capsys, "--db", db, "--lot", "0412")
    rows = table(db)
    assert len(rows) == 12 and {r[0] for r in rows} == {"out"}
    assert len({(r[2], r[3], r[4]) for r in rows}) == 12           # keyed by capture, setup and spec hashes
    assert again["history"]["added"] == 0 and again["history"]["caught_up"] == 0
    skipped = again["history"]["already_recorded"]
    assert len(skipped) == 12 and {s["recorded_in_lot"] for s in skipped} == {"out"}
    capsys.readouterr()
    assert run(batch_args(tmp_path, "--workers", "1", "--db", db, "--lot", "0412"), analyse=delayed_analyse) == 0
    assert "12 not added again: the same capture, setup and spec are recorded under lot 'out' (12)" in \
        capsys.readouterr().out


def test_plain_resume_reports_nothing_skipped(tmp_path, capsys):
    write_lot(tmp_path, [95.0 + i for i in range(4)])
    db = str(tmp_path / "h.sqlite")
    run_json(tmp_path, capsys, "--db", db)
    again = run_json(tmp_path, capsys, "--db", db)
    assert again["history"] == {"database": db, "added": 0, "caught_up": 0, "converted_repeats": 0,
                                "already_recorded": []}


def test_a_copied_capture_is_one_measurement(tmp_path, capsys):
    paths = write_lot(tmp_path, [95.0, 100.0, 105.0])
    shutil.copy(paths[1], tmp_path / "part04.txt")                 # the same bytes under another name
    db = str(tmp_path / "h.sqlite")
    result = run_json(tmp_path, capsys, "--db", db)
    assert result["summary"]["total"] == 4                          # the results file has every input
    assert len(table(db)) == 3
    [skipped] = result["history"]["already_recorded"]
    assert (Path(skipped["file"]).name, Path(skipped["recorded_as"]).name) == ("part04.txt", "part02.txt")


def test_another_setup_is_another_measurement(tmp_path, capsys):
    write_lot(tmp_path, [95.0, 100.0])
    db = str(tmp_path / "h.sqlite")
    run_json(tmp_path, capsys, "--db", db)
    other = tmp_path / "other"
    other.mkdir()
    for name in ("part01.txt", "part02.txt", "spec.toml"):
        shutil.copy(tmp_path / name, other / name)
    (other / "setup.toml").write_text((tmp_path / "setup.toml").read_text() + "# re-calibrated\n")
    assert run_json(other, capsys, "--db", db)["history"]["added"] == 2
    assert len(table(db)) == 4


OLD_SCHEMA = """CREATE TABLE results (lot TEXT NOT NULL, file TEXT NOT NULL, verdict TEXT NOT NULL,
    message TEXT NOT NULL, method TEXT NOT NULL, quantities TEXT NOT NULL, tool_version TEXT NOT NULL,
    capture_sha256 TEXT NOT NULL, setup_sha256 TEXT NOT NULL, spec_sha256 TEXT NOT NULL,
    analysed_at TEXT NOT NULL, PRIMARY KEY (lot, file, analysed_at))"""


def test_a_database_of_the_earlier_layout_is_converted_without_losing_a_row(tmp_path, capsys):
    write_lot(tmp_path, [95.0 + i for i in range(3)])
    db = tmp_path / "h.sqlite"
    run_json(tmp_path, capsys, "--db", str(db))
    old = table(db, "SELECT lot, file, verdict, message, method, quantities, tool_version, capture_sha256, "
                    "setup_sha256, spec_sha256, analysed_at FROM results")
    db.unlink()
    with sqlite3.connect(db) as con:                               # as the earlier version left it: the
        con.execute(OLD_SCHEMA)                                    # lot twice, under two names
        con.executemany(f"INSERT INTO results VALUES ({', '.join('?' * 11)})",
                        old + [("0412", *row[1:]) for row in old])
    result = run_json(tmp_path, capsys, "--db", str(db))
    assert result["history"]["converted_repeats"] == 3
    assert len(table(db)) == 3
    assert len(table(db, f"SELECT * FROM {REPEATS_TABLE}")) == 3    # kept, not deleted


def test_a_file_that_is_not_a_history_database_is_refused(tmp_path):
    write_lot(tmp_path, [100.0])
    foreign = tmp_path / "foreign.sqlite"
    with sqlite3.connect(foreign) as con:
        con.execute("CREATE TABLE results (id INTEGER, note TEXT)")
    with pytest.raises(HistoryDBError, match="other columns than a wavefit history"):
        run(batch_args(tmp_path, "--workers", "1", "--db", str(foreign)), analyse=delayed_analyse)
    (tmp_path / "text.sqlite").write_text("not a database, just text that is long enough to be read" * 20)
    with pytest.raises(HistoryDBError, match="use another --db") as caught:
        run(batch_args(tmp_path, "--workers", "1", "--db", str(tmp_path / "text.sqlite")), analyse=delayed_analyse)
    assert caught.value.exit_code == 3 and "\n" not in str(caught.value)


def test_a_database_that_cannot_be_made_leaves_no_empty_file(tmp_path, monkeypatch):
    # a full disk refused --db (exit 5, nothing analysed) but left an empty database file behind
    # (a fault campaign's tmpfs); an existing database is never removed
    from wavefit.batch.history_db import HistoryDB
    from wavefit.errors import OutputError

    def full(self):
        raise sqlite3.OperationalError("database or disk is full")

    monkeypatch.setattr(HistoryDB, "_prepare", full)
    path = tmp_path / "h.sqlite"
    with pytest.raises(OutputError, match="database or disk is full"):
        HistoryDB(path, "lot", "rl-step", ("L",))
    assert not path.exists()
    path.write_bytes(b"")
    with pytest.raises(OutputError):
        HistoryDB(path, "lot", "rl-step", ("L",))
    assert path.exists()
