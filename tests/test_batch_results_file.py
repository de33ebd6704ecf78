"""The results CSV: header, formula defusing, control characters, exact read-back, partial lines, refusals."""
from __future__ import annotations

import csv

import pytest

from wavefit.batch.results_file import ResultsFile, ResultsFileError, encode_cell, result_columns

COLUMNS = result_columns(("L", "R"))


def test_columns_follow_the_method_quantities():
    assert COLUMNS == ("file", "verdict", "message", "L", "L_U", "R", "R_U", "tool_version",
                       "capture_sha256", "setup_sha256", "spec_sha256", "analysed_at")


@pytest.mark.parametrize("text", ["=HYPERLINK(\"http://x\")", "+1+1", "-2+3", "@SUM(A1)", "'quoted"])
def test_formula_like_text_gets_an_apostrophe(text):
    # OWASP "CSV Injection": prefix cells starting with = + - @ with a single quote
    assert encode_cell(text) == "'" + text


@pytest.mark.parametrize("text, cell", [("\tx", "\\x09x"), ("\r=1", "\\x0d=1"),
                                        ("line one\nline two", "line one\\x0aline two")])
def test_tab_cr_and_line_breaks_are_escaped_not_written(text, cell):
    # OWASP lists a leading tab and CR too: escaped, they no longer start the cell
    assert encode_cell(text) == cell


def test_numbers_stay_numbers():
    assert encode_cell(-4.7e-05) == "-4.7e-05"
    assert float(encode_cell(0.1 + 0.2)) == 0.1 + 0.2          # repr: read back exactly
    assert encode_cell(None) == "" and encode_cell(float("nan")) == ""


def test_rows_read_back_exactly(tmp_path):
    path = tmp_path / "out.csv"
    row = {"file": "=cmd|' /C calc'!A0", "verdict": "pass", "message": "-tricky, \"quoted\"",
           "L": 4.7123456789012345e-05, "L_U": 1e-7, "R": None, "R_U": None, "analysed_at": "2026"}
    with ResultsFile(path, COLUMNS) as results:
        assert results.rows == []
        results.append(row)
    with ResultsFile(path, COLUMNS) as results:
        back = results.rows
    assert len(back) == 1
    for key, value in row.items():
        assert back[0][key] == value
    cells = list(csv.reader(path.open(encoding="utf-8")))
    assert cells[0] == list(COLUMNS)
    assert cells[1][0].startswith("'=")              # as a spreadsheet sees it: text, not a formula


def test_partial_last_line_is_dropped(tmp_path):
    path = tmp_path / "out.csv"
    with ResultsFile(path, COLUMNS) as results:
        results.append({"file": "a.csv", "verdict": "pass"})
    with path.open("a", encoding="utf-8") as stream:
        stream.write("b.csv,pass,,4.7e-0")                # a run killed in the middle of a row
    with ResultsFile(path, COLUMNS) as results:
        assert [r["file"] for r in results.rows] == ["a.csv"] and results.dropped_partial_line
        results.append({"file": "b.csv", "verdict": "fail"})
    lines = path.read_text(encoding="utf-8").splitlines()
    assert len(lines) == 3 and lines[2].startswith("b.csv,fail")


def test_partial_header_is_rewritten(tmp_path):
    path = tmp_path / "out.csv"
    path.write_text("file,verd", encoding="utf-8")
    with ResultsFile(path, COLUMNS) as results:
        assert results.rows == []
    assert path.read_text(encoding="utf-8").splitlines() == [",".join(COLUMNS)]


def test_other_header_is_refused(tmp_path):
    path = tmp_path / "out.csv"
    with ResultsFile(path, COLUMNS):
        pass
    with pytest.raises(ResultsFileError, match="another method"):
        ResultsFile(path, result_columns(("L", "R", "Q"))).open()


def test_damaged_row_is_refused(tmp_path):
    path = tmp_path / "out.csv"
    path.write_text(",".join(COLUMNS) + "\na.csv,pass\n", encoding="utf-8")
    with pytest.raises(ResultsFileError, match="line 2 has 2 cells"):
        ResultsFile(path, COLUMNS).open()


@pytest.mark.parametrize("content", [b"Time (s),CH1 (V)\n0,0.1\n1e-8,0.2", b"just one line", b"\xff\xfe\x00binary"])
def test_foreign_file_is_refused_and_left_unchanged(tmp_path, content):
    path = tmp_path / "capture.csv"   # e.g. a capture named as --out by mistake
    path.write_bytes(content)
    with pytest.raises(ResultsFileError, match="another --out"):
        ResultsFile(path, COLUMNS).open()
    assert path.read_bytes() == content


def test_a_line_break_inside_a_cell_is_refused(tmp_path):
    """Each row is one line (text cells escape line breaks), so a quoted line break is not ours."""
    path = tmp_path / "r.csv"
    path.write_text(",".join(COLUMNS) + "\n" + 'a.csv,pass,"two\nlines"' + "," * (len(COLUMNS) - 3) + "\n")
    with pytest.raises(ResultsFileError, match="line break inside a cell"):
        ResultsFile(path, COLUMNS).open()


def test_a_results_file_saved_with_a_byte_order_mark_is_named(tmp_path):
    # a results file saved again by a program that writes a byte-order mark was refused as having
    # the columns "\ufefffile, verdict, …", which looked like this run's own
    path = tmp_path / "out.csv"
    with ResultsFile(path, COLUMNS) as results:
        results.append({"file": "a.csv", "verdict": "pass"})
    path.write_bytes(b"\xef\xbb\xbf" + path.read_bytes())
    with pytest.raises(ResultsFileError, match="starts with a byte-order mark"):
        ResultsFile(path, COLUMNS).open()
