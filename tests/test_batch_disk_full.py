"""A full disk: every failed write of a batch output is one line and exit 5; nothing written is lost.

The disk is simulated: the write or sync of the results file raises OSError(ENOSPC) or (EIO) at a
chosen row, the history database's insert raises SQLite's "database or disk is full", the plot's
save raises ENOSPC. After each failure the results file holds complete rows only, the database
is at most the failed row behind it, and the next run completes both.
"""
from __future__ import annotations

import errno
import io
import os
import sqlite3
from pathlib import Path

import pytest

from wavefit.batch import history_db
from wavefit.batch.command import run
from wavefit.batch.run_lock import lock_path
from wavefit.errors import OutputError

from test_batch_fakes import delayed_analyse, write_lot
from test_batch_runner import batch_args as runner_args
from test_batch_runner import read_rows

COUNT = 6


def batch_args(folder: Path, *extra: str):
    return runner_args(folder, "--workers", "1", *extra)


def names(folder: Path) -> list[str]:
    return sorted(Path(r["file"]).name for r in read_rows(folder / "out.csv"))


def everything(count: int = COUNT) -> list[str]:
    return [f"part{i:02d}.txt" for i in range(1, count + 1)]


def fail_write_of(monkeypatch, marker: bytes, exc: OSError, partial: bool = False) -> None:
    """``os.write`` fails with ``exc`` on the data holding ``marker``; when ``partial``, it first
    takes half of that data, as a disk does that fills up during the write."""
    real_write = os.write
    state = {"half_written": False}

    def write(fd, data):
        if state["half_written"]:
            raise exc
        if marker in bytes(data):
            if partial:
                state["half_written"] = True
                return real_write(fd, bytes(data)[:len(data) // 2])
            raise exc
        return real_write(fd, data)

    monkeypatch.setattr(os, "write", write)


def assert_one_line_output_error(caught: pytest.ExceptionInfo, *fragments: str) -> None:
    message = str(caught.value)
    assert caught.value.exit_code == 5 and "\n" not in message
    for fragment in fragments:
        assert fragment in message, message


def test_header_with_no_space_left(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0] * COUNT)
    fail_write_of(monkeypatch, b"file,verdict", OSError(errno.ENOSPC, os.strerror(errno.ENOSPC)))
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "No space left on device", "no capture was analysed", "free some space")
    assert (tmp_path / "out.csv").read_bytes() == b""
    assert not lock_path(tmp_path / "out.csv").exists()
    monkeypatch.undo()
    assert run(batch_args(tmp_path), analyse=delayed_analyse) == 0
    assert names(tmp_path) == everything()


@pytest.mark.parametrize("partial", [False, True])
def test_row_with_no_space_left_keeps_the_earlier_rows_whole(tmp_path, monkeypatch, partial):
    write_lot(tmp_path, [100.0] * COUNT)
    fail_write_of(monkeypatch, b"part04.txt", OSError(errno.ENOSPC, os.strerror(errno.ENOSPC)), partial)
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "its earlier rows are kept")
    data = (tmp_path / "out.csv").read_bytes()
    assert data.endswith(b"\n") and b"part04" not in data          # no partial line left behind
    assert names(tmp_path) == everything(3)
    monkeypatch.undo()
    assert run(batch_args(tmp_path), analyse=delayed_analyse) == 0
    assert names(tmp_path) == everything()


def test_failed_sync_takes_the_row_back(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0] * COUNT)
    real_fsync, calls = os.fsync, []

    def fsync(fd):
        calls.append(fd)
        if len(calls) == 3:                    # header, row 1, then row 2 cannot be made durable
            raise OSError(errno.EIO, os.strerror(errno.EIO))
        real_fsync(fd)

    monkeypatch.setattr(os, "fsync", fsync)
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "Input/output error", "check free space and permissions")
    assert names(tmp_path) == everything(1)


class FullAfter:
    """An SQLite connection whose inserts fail as on a full disk once ``allowed`` have succeeded."""

    def __init__(self, connection: sqlite3.Connection, allowed: int) -> None:
        self.connection, self.allowed = connection, allowed

    def execute(self, sql: str, *params):
        if sql.startswith("INSERT"):
            if self.allowed == 0:
                raise sqlite3.OperationalError("database or disk is full")
            self.allowed -= 1
        return self.connection.execute(sql, *params)

    def __enter__(self):
        return self.connection.__enter__()

    def __exit__(self, *exc):
        return self.connection.__exit__(*exc)

    def close(self) -> None:
        self.connection.close()


def db_files(db: Path) -> list[str]:
    with sqlite3.connect(db) as con:
        return sorted(Path(row[0]).name for row in con.execute("SELECT file FROM results"))


def test_database_full_then_resume_catches_up(tmp_path, monkeypatch, capsys):
    write_lot(tmp_path, [100.0 + i for i in range(COUNT)])
    db = tmp_path / "h.sqlite"
    real_connect = sqlite3.connect
    monkeypatch.setattr(history_db.sqlite3, "connect", lambda *a, **k: FullAfter(real_connect(*a, **k), 2))
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path, "--db", str(db)), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "database or disk is full", "part03.txt is in the results file",
                                 "the next run adds it")
    assert names(tmp_path) == everything(3)            # the CSV is the record: the row stays
    assert db_files(db) == everything(2)               # the database is that one row behind
    monkeypatch.undo()
    capsys.readouterr()
    assert run(batch_args(tmp_path, "--db", str(db)), analyse=delayed_analyse) == 0
    assert "3 rows added, 1 caught up from the results file" in capsys.readouterr().out
    assert db_files(db) == names(tmp_path) == everything()


def test_database_full_during_catch_up(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0 + i for i in range(COUNT)])
    assert run(batch_args(tmp_path), analyse=delayed_analyse) == 0      # a lot analysed without --db
    db = tmp_path / "h.sqlite"
    real_connect = sqlite3.connect
    monkeypatch.setattr(history_db.sqlite3, "connect", lambda *a, **k: FullAfter(real_connect(*a, **k), 4))
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path, "--db", str(db)), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "rows of the results file are not all in it yet")
    assert db_files(db) == []                           # the catch-up is one transaction: rolled back
    monkeypatch.undo()
    assert run(batch_args(tmp_path, "--db", str(db)), analyse=delayed_analyse) == 0
    assert db_files(db) == everything()


def test_plot_with_no_space_left_keeps_the_old_plot(tmp_path, monkeypatch, capsys):
    from matplotlib.figure import Figure

    write_lot(tmp_path, [100.0] * COUNT)
    png = tmp_path / "lot.png"
    png.write_bytes(b"\x89PNG\r\n\x1a\n an earlier plot")

    def no_space(self, *args, **kwargs):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))

    monkeypatch.setattr(Figure, "savefig", no_space)
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path, "--plot", str(png)), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "cannot write plot", "has every row and the summary is printed")
    assert "rows written" in capsys.readouterr().out  # the summary comes first: a failed plot keeps it
    assert png.read_bytes() == b"\x89PNG\r\n\x1a\n an earlier plot"
    assert sorted(p.name for p in tmp_path.iterdir() if p.name.startswith(".")) == []   # no temporary left
    assert names(tmp_path) == everything()


class FullStream(io.StringIO):
    def write(self, text):
        raise OSError(errno.ENOSPC, os.strerror(errno.ENOSPC))


def test_summary_to_a_full_disk(tmp_path, monkeypatch):
    write_lot(tmp_path, [100.0] * COUNT)
    monkeypatch.setattr("sys.stdout", FullStream())
    with pytest.raises(OutputError) as caught:
        run(batch_args(tmp_path), analyse=delayed_analyse)
    assert_one_line_output_error(caught, "cannot write the summary to standard output", "has every row")
    assert names(tmp_path) == everything()


@pytest.mark.parametrize("option", ["--out", "--plot"])
def test_an_output_in_a_folder_that_cannot_take_files_is_refused_before_any_analysis(tmp_path, monkeypatch,
                                                                                      option):
    # a plot into a folder that could not be written was found only after the whole lot, and
    # --out into a missing folder gave exit 5 where --plot gave 3: both are exit 3, at once
    write_lot(tmp_path, [100.0] * COUNT)
    target = tmp_path / "missing" / ("out.csv" if option == "--out" else "lot.png")
    args = batch_args(tmp_path, *(["--plot", str(target)] if option == "--plot" else []))
    if option == "--out":
        args.out = str(target)
    calls = []
    with pytest.raises(Exception) as caught:
        run(args, analyse=lambda *a, **k: calls.append(a))
    assert caught.value.exit_code == 3 and "does not exist" in str(caught.value) and not calls
    (tmp_path / "missing").mkdir()
    real_access = os.access
    monkeypatch.setattr(os, "access", lambda path, mode, **kw: Path(path) != target.parent and real_access(path, mode))
    with pytest.raises(Exception) as caught:
        run(args, analyse=lambda *a, **k: calls.append(a))
    assert caught.value.exit_code == 3 and "cannot be written" in str(caught.value) and not calls
