"""Hostile names: control characters never reach the terminal or a CSV cell raw, and read back exactly.

The sequences are the ECMA-48 ones a terminal obeys (ESC [2J clears the screen, ESC ]0;…BEL sets
the window title, ESC c resets), the C1 control CSI (U+009B), and U+202E RIGHT-TO-LEFT OVERRIDE,
which reverses the rest of a line on display.
"""
from __future__ import annotations

import csv
import json
import sqlite3
import unicodedata
from pathlib import Path

import pytest
from hypothesis import given
from hypothesis import strategies as st

from wavefit.batch.command import run
from wavefit.cli import build_parser
from wavefit.report.safe_text import (escape_controls, from_spreadsheet_cell, spreadsheet_cell, unescape_controls,
                                      visible)

from test_batch_runner import fake_analyse, make_lot

HOSTILE = ["\x1b[2J", "\x1b]0;owned\x07", "\x1bc", "\u202e", "\x9b31m", "\x00", "\x7f", "\r", "\n", "\t",
           "\u2028", "\ufeff", "\udcff"]


@pytest.mark.parametrize("bad", HOSTILE)
def test_visible_shows_every_control_as_an_escape(bad):
    shown = visible(f"part{bad}01.csv")
    assert shown.isprintable() and bad not in shown              # nothing a terminal would act on
    assert shown.startswith("part\\") and shown.endswith("01.csv")
    assert visible(shown) == shown                               # idempotent: safe to apply twice


def test_visible_leaves_ordinary_text_alone():
    for text in ("lot 0412", "L = 47 µH ±5 %", "C:\\lot\\p1.csv", "Ω", "φ € 測定"):
        assert visible(text) == text


@given(st.text(alphabet=st.characters(blacklist_categories=()), max_size=40))
def test_escape_controls_reads_back_exactly(text):
    escaped = escape_controls(text)
    assert all(ch.isprintable() or unicodedata.category(ch) == "Zs" for ch in escaped)   # nothing hidden left
    assert unescape_controls(escaped) == text


@given(st.text(alphabet="\\xuU01ab\x1b\u202e", max_size=12))
def test_escape_controls_is_exact_on_backslash_runs(text):
    # the hard cases: backslashes next to escape letters, hex digits and hidden characters
    assert unescape_controls(escape_controls(text)) == text


@pytest.mark.parametrize("text", ["=1+1", "+SUM(A1)", "-2", "@x", "'quoted", "\t=1", "\x1b=1"])
def test_spreadsheet_cell_is_never_a_formula_and_reads_back(text):
    # OWASP "CSV Injection": a cell must not start with = + - @ (or tab / CR, escaped here)
    cell = spreadsheet_cell(text)
    assert not cell.startswith(("=", "+", "-", "@", "\t", "\r"))
    assert from_spreadsheet_cell(cell) == text


def hostile_lot(folder: Path, monkeypatch) -> list[str]:
    """Captures with hostile names, as relative paths from ``folder`` (the working directory)."""
    monkeypatch.chdir(folder)
    paths = make_lot(folder, [100.0, 101.0, 99.0, 102.0])
    renamed = []
    for path, bad in zip(paths, ["\x1b[2J", "\x1b]0;owned\x07\u202e", "=cmd|' -C calc'!A0", "\x9b\x1bc"]):
        path.rename(bad + path.name)
        renamed.append(bad + path.name)
    return renamed


def hostile_args(*extra: str):
    return build_parser().parse_args(["batch", ".", "--setup", "setup.toml", "--spec", "spec.toml",
                                      "--out", "out.csv", "--workers", "1", *extra])


def test_batch_keeps_controls_out_of_terminal_csv_and_database(tmp_path, capsys, monkeypatch):
    paths = hostile_lot(tmp_path, monkeypatch)
    db = tmp_path / "h.sqlite"
    args = hostile_args("--db", str(db), "--lot", "lot\x1b[2J\u202e")
    assert run(args, analyse=fake_analyse) == 0
    captured = capsys.readouterr()
    for stream in (captured.out, captured.err):
        assert "\x1b" not in stream and "\u202e" not in stream and "\x9b" not in stream and "\x07" not in stream
    assert "lot lot\\x1b[2J\\u202e: 4 captures" in captured.out
    raw = (tmp_path / "out.csv").read_text(encoding="utf-8")
    assert all(line.isprintable() for line in raw.splitlines())               # no control in any cell
    cells = list(csv.reader(raw.splitlines()))
    assert sorted(row[0] for row in cells[1:])[0] == "'=cmd|' -C calc'!A0part03.txt"   # text, not a formula
    assert all(not row[0].startswith(("=", "+", "-", "@")) for row in cells[1:])
    # the file cells read back as the exact names, so a second run resumes instead of analysing again
    assert run(args, analyse=fake_analyse) == 0
    assert "0 rows written, 4 found from earlier runs" in capsys.readouterr().out
    with sqlite3.connect(db) as con:
        stored = [r[0] for r in con.execute("SELECT file FROM results")] + \
                 [r[0] for r in con.execute("SELECT DISTINCT lot FROM results")]
    assert len(stored) == 5 and all(text.isprintable() for text in stored)
    assert sorted(unescape_controls(f) for f in stored[:4]) == sorted(paths)


def test_changed_capture_warning_shows_the_name_escaped(tmp_path, capsys, monkeypatch):
    paths = hostile_lot(tmp_path, monkeypatch)
    args = hostile_args()
    assert run(args, analyse=fake_analyse) == 0
    Path(paths[0]).write_text("90e-6 2e-6\n", encoding="utf-8")
    capsys.readouterr()
    assert run(args, analyse=fake_analyse) == 0
    err = capsys.readouterr().err
    assert "\\x1b[2Jpart01.txt changed since its row was written" in err and "\x1b" not in err


def test_json_summary_has_no_raw_control(tmp_path, capsys, monkeypatch):
    hostile_lot(tmp_path, monkeypatch)
    assert run(hostile_args("--json", "--lot", "\x1b]0;t\x07"), analyse=fake_analyse) == 0
    out = capsys.readouterr().out
    assert out.isascii() and "\x1b" not in out and json.loads(out)["lot"] == "\x1b]0;t\x07"


def test_spec_errors_show_the_file_name_and_the_limit_escaped(tmp_path):
    from wavefit.batch.spec import load_spec
    from wavefit.errors import SetupError

    spec = tmp_path / "spec\x1b[2J.toml"
    spec.write_text('[limits]\nL = "47 \\u001b]0;t\\u0007uH ±5%"\n', encoding="utf-8")   # TOML escapes
    with pytest.raises(SetupError) as caught:
        load_spec(spec)
    assert str(caught.value).isprintable() and "spec\\x1b[2J.toml" in str(caught.value)
