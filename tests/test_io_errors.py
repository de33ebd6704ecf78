"""Broken captures give one CaptureError with a one-line message saying what was found and what to do."""
from __future__ import annotations

import gzip
import os
import tempfile
import time
import zipfile
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from wavefit.errors import CaptureError
from wavefit.io import capture_from_frame, read_capture


def _rows(n: int, dt: float = 1e-8, sep: str = ",") -> list[str]:
    return [f"{i * dt:.10e}{sep}{np.sin(i / 7):.6f}{sep}{np.cos(i / 5):.6f}" for i in range(n)]


def _write(tmp_path: Path, content: str | bytes, name: str = "bad.csv") -> Path:
    path = tmp_path / name
    path.write_bytes(content.encode() if isinstance(content, str) else content)
    return path


def _message(path: Path | str, **options: object) -> str:
    with pytest.raises(CaptureError) as caught:
        read_capture(path, **options)
    message = str(caught.value)
    assert "\n" not in message and message.strip() == message
    return message


HEADER = "Time (s),CH1 (V),CH2 (V)"


def test_empty_file(tmp_path: Path) -> None:
    assert "is empty" in _message(_write(tmp_path, b""))


def test_blank_lines_only(tmp_path: Path) -> None:
    assert "only blank lines" in _message(_write(tmp_path, "\n \r\n\t\n"))


def test_binary_file_with_nul_bytes(tmp_path: Path) -> None:
    data = bytes(range(256)) * 40
    assert "looks binary" in _message(_write(tmp_path, data, "scope.bin"))


def test_binary_file_without_nul_bytes(tmp_path: Path) -> None:
    data = np.random.default_rng(0).integers(1, 256, 4000, dtype=np.uint8).tobytes()
    assert "looks binary" in _message(_write(tmp_path, data))


def test_zip_archive_is_named(tmp_path: Path) -> None:
    path = tmp_path / "capture.zip"
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("capture.csv", "\n".join([HEADER, *_rows(50)]))
    assert "zip archive" in _message(path)


def test_damaged_gzip(tmp_path: Path) -> None:
    data = gzip.compress("\n".join([HEADER, *_rows(3000)]).encode())
    assert "damaged gzip" in _message(_write(tmp_path, data[: len(data) // 2], "cut.csv.gz"))


def test_missing_file(tmp_path: Path) -> None:
    assert "does not exist" in _message(tmp_path / "nowhere.csv")


def test_directory(tmp_path: Path) -> None:
    assert "is a directory" in _message(tmp_path)


def test_pipe_and_device_are_refused_without_blocking(tmp_path: Path) -> None:
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    assert "is a pipe (FIFO)" in _message(fifo)
    assert "is a device" in _message("/dev/zero")


def test_line_longer_than_the_csv_field_limit(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f}" for i in range(100)]
    capture = read_capture(_write(tmp_path, "\n".join(["Note," + "x" * 200_000, "Time (s),CH1 (V)", *rows])))
    assert capture.rows == 100 and len(capture.metadata["Note"]) == 200_000


def test_bare_cr_file_with_a_later_line_feed(tmp_path: Path) -> None:
    rows = [f"{i * 1e-6:.6f};{np.sin(i / 5):.4f}".replace(".", ",") for i in range(60_000)]
    text = "Zeit (s);U (V)\r" + "\r".join(rows[:40_000]) + "\n" + "\r".join(rows[40_000:])
    capture = read_capture(_write(tmp_path, text))
    assert capture.rows == 60_000
    np.testing.assert_allclose(capture.channel(1).values, np.round(np.sin(np.arange(60_000) / 5), 4))


def test_header_only(tmp_path: Path) -> None:
    message = _message(_write(tmp_path, HEADER + "\n"))
    assert "no data rows" in message and "one line only, a header or text" in message


def test_text_only(tmp_path: Path) -> None:
    assert "no data rows" in _message(_write(tmp_path, "Exported capture\nnothing was recorded\n"))


@pytest.mark.parametrize("header", [True, False], ids=["named", "unnamed"])
def test_a_column_of_text_beside_the_numbers_is_left_out(tmp_path: Path, header: bool) -> None:
    # a status column ("ok", "TRIG") in every row: no line is all numbers; the column is left out
    # with a warning and the others are read; a setup that maps it gets the refusal naming the
    # first data line's cell
    rows = [f"{i * 1e-8:.10e};{np.sin(i / 7):.6f};{'TRIG' if i == 0 else 'ok'};{np.cos(i / 5):.6f}".replace(".", ",")
            for i in range(300)]
    lines = ["# recorder export", *(["Time (s);CH1 (V);Status;CH2 (V)"] if header else []), *rows]
    path = _write(tmp_path, "\n".join(lines) + "\n")
    capture = read_capture(path, **({} if header else {"time_column": 0}))
    assert capture.rows == 300 and len(capture.channels) == 2
    assert np.array_equal(capture.channels[1].values, [np.cos(i / 5).round(6) for i in range(300)])
    with pytest.raises(CaptureError, match=f"line {3 if header else 2}: found 'TRIG'"):
        capture.channel("Status" if header else 2)
    assert [w for w in capture.warnings if "holds text where numbers are expected" in w]


@pytest.mark.parametrize("line", [
    "note {i}: the probe was moved and the trace redrawn",
    "Step {i} of 30: applied 5 V to the coil for 10 ms",           # numbers, but text the most
    "2024-05-01 12:00:{i:02d} INFO reading 3.{i:02d}",              # a log: text as much as numbers
])
def test_lines_of_prose_or_a_log_are_not_taken_for_a_text_column(tmp_path: Path, line: str) -> None:
    prose = "\n".join(line.format(i=i) for i in range(30))
    message = _message(_write(tmp_path, prose + "\n"))
    assert "no data rows" in message and "text in" not in message


def test_a_count_line_above_a_table_of_two_columns_is_not_a_row_with_a_word(tmp_path: Path) -> None:
    # '200,points' has the shape of the rows below and a number first; as the first row of the
    # table its word would be a text column and 200 a time: it stays a line above the table
    rows = [f"{i * 1e-6:.6e},{np.sin(i / 9):.5f}" for i in range(200)]
    message = _message(_write(tmp_path, "\n".join(["200,points", *rows]) + "\n"))
    assert "line 1: found 'points'" in message and "delete that line" in message
    capture = read_capture(_write(tmp_path, "\n".join(["200,points", "Time (s),CH1 (V)", *rows]) + "\n", "named.csv"))
    assert capture.rows == 200 and [c.header for c in capture.channels] == ["CH1 (V)"] and not capture.left_out


def test_settings_lines_shaped_like_rows_are_not_rows_with_words(tmp_path: Path) -> None:
    # '10,V/div,0' above a headerless table, '2,channels' or '10,V/div,0' after one: a number
    # first and no more words than numbers, but their first values do not continue the time
    rows = [f"{i * 1e-6:.6e},{np.sin(i / 9):.5f},{np.cos(i / 7):.5f}" for i in range(3000)]
    above = _message(_write(tmp_path, "\n".join(["10,V/div,0", "5,V/div,0", *rows]) + "\n", "above.csv"))
    assert "line 2: found 'V/div'" in above and "delete that line" in above
    header = "Time (s),CH1 (V),CH2 (V)"
    after = _message(_write(tmp_path, "\n".join([header, *rows, "10,V/div,0", "5,V/div,0"]) + "\n", "after.csv"))
    assert "line 3002: found 'V/div'" in after
    two = [r.rsplit(",", 1)[0] for r in rows]
    footer = _message(_write(tmp_path, "\n".join(["Time (s),CH1 (V)", *two, "2,channels", "3000,points"]) + "\n"))
    assert "line 3002: found 'channels'" in footer


def test_rows_with_words_only_make_a_table_when_their_first_column_steps_evenly(tmp_path: Path) -> None:
    # a block of settings ('10,V/div,0') has the shape of a status-column table but no time
    lines = [f"{v},V/div,{k}" for k, v in enumerate([10, 5, 2, 1, 0.5, 0.2, 0.1, 20, 50, 100, 2, 5])]
    message = _message(_write(tmp_path, "\n".join(lines) + "\n"))
    assert "line 1 on: every row has text in cell 2 (such as 'V/div')" in message


@pytest.mark.parametrize("clock", [False, True])
def test_two_status_columns_are_both_left_out(tmp_path: Path, clock: bool) -> None:
    def stamp(i: int) -> str:
        return f"11:44:{55 + i // 100000:02d}.{i % 100000 * 10:06d}" if clock else f"{i * 1e-8:.9e}"

    rows = [f"{stamp(i)},{np.sin(i / 7):.5f},{np.cos(i / 5):.5f},ok,CH1" for i in range(300)]
    path = _write(tmp_path, "\n".join(["Time,CH1 (V),CH2 (V),Status,Source", *rows]) + "\n")
    capture = read_capture(path)
    assert capture.rows == 300 and [c.header for c in capture.channels] == ["CH1 (V)", "CH2 (V)"]
    assert [c.header for c in capture.left_out] == ["Status", "Source"]


def test_a_text_column_is_left_out_when_a_footer_follows_the_table(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f},ok" for i in range(50)]
    path = _write(tmp_path, "\n".join(["Time (s),CH1 (V),Flag", *rows, "", "Settings", "Probe: 10X"]) + "\n")
    capture = read_capture(path)
    assert capture.rows == 50 and [c.header for c in capture.channels] == ["CH1 (V)"]
    assert "line 2: found 'ok'" in _left_out_message(path, "Flag")


def test_too_few_rows(tmp_path: Path) -> None:
    message = _message(_write(tmp_path, "\n".join([HEADER, *_rows(10)])))
    assert "only 10 data rows" in message and "at least 16" in message


def test_single_column_without_time(tmp_path: Path) -> None:
    content = "\n".join(["CH1 (V)", *[f"{np.sin(i):.5f}" for i in range(100)]])
    message = _message(_write(tmp_path, content))
    assert "single column" in message and "--sample-interval" in message and "sample_interval" in message


def test_headerless_single_column_without_time(tmp_path: Path) -> None:
    message = _message(_write(tmp_path, "\n".join(f"{np.sin(i):.5f}" for i in range(100))))
    assert "single column" in message and "sample interval" in message


def test_columns_without_time(tmp_path: Path) -> None:
    content = "\n".join(["CH1 (V),CH2 (V)", *[f"{np.sin(i):.4f},{np.cos(i):.4f}" for i in range(100)]])
    message = _message(_write(tmp_path, content))
    assert "no time column" in message and "'CH1 (V)'" in message and "--sample-interval" in message


def test_headerless_columns_without_time(tmp_path: Path) -> None:
    rows = [row.split(",", 1)[1] for row in _rows(100)]  # no first column that increases uniformly
    message = _message(_write(tmp_path, "\n".join(rows)))
    assert "no header row" in message and "--sample-interval" in message


def _left_out_message(path: Path, key: str | int) -> str:
    """The column ``key`` is left out with a warning; a setup that asks for it gets the refusal."""
    capture = read_capture(path)
    with pytest.raises(CaptureError) as caught:
        capture.channel(key)
    message = str(caught.value)
    assert "\n" not in message
    assert [w for w in capture.warnings if "left out (a setup that uses it is refused)" in w]
    return message


def test_all_nan_column(tmp_path: Path) -> None:
    # a channel switched off on the scope: left out, refused only when a setup maps it
    rows = [f"{i * 1e-8:.10e},{np.sin(i):.5f},NaN" for i in range(100)]
    path = _write(tmp_path, "\n".join([HEADER, *rows]))
    assert [c.header for c in read_capture(path).channels] == ["CH1 (V)"]
    for key in ("CH2 (V)", "CH2", "ch2", 2):
        message = _left_out_message(path, key)
        assert "'CH2 (V)'" in message and "has no numbers" in message


def test_empty_column(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e},,{np.sin(i):.5f}" for i in range(100)]
    assert "'CH1 (V)' has no numbers" in _left_out_message(_write(tmp_path, "\n".join([HEADER, *rows])), "CH1")


def test_only_unusable_signal_columns_or_time_column_are_refused(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e},,NaN" for i in range(100)]
    assert "'CH1 (V)' has no numbers" in _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    rows = [f",{np.sin(i):.5f},{np.cos(i):.5f}" for i in range(100)]
    assert "'Time (s)' has no numbers" in _message(_write(tmp_path, "\n".join([HEADER, *rows]), "time.csv"))


def test_too_many_missing_cells(tmp_path: Path) -> None:
    rows = _rows(2000)
    for k in (100, 700, 1300):
        rows[k] = rows[k].rsplit(",", 1)[0] + ","
    message = _left_out_message(_write(tmp_path, "\n".join([HEADER, *rows])), "CH2 (V)")
    assert "'CH2 (V)' has 3 empty" in message and "line 102" in message and "at most 2" in message


def test_text_among_numbers_leaves_its_column_out(tmp_path: Path) -> None:
    # an auxiliary channel with a word in one row ('overflow') does not stop the others being read
    rows = _rows(300)
    rows[150] = rows[150].rsplit(",", 1)[0] + ",overflow"
    rows[200] = rows[200].rsplit(",", 1)[0] + ",overflow"
    capture = read_capture(_write(tmp_path, "\n".join([HEADER, *rows]) + "\n"))
    assert [c.header for c in capture.channels] == ["CH1 (V)"] and capture.rows == 300
    expected = np.array([float(r.split(",")[1]) for r in rows])
    assert np.array_equal(capture.channel("CH1").values, expected)
    assert [w for w in capture.warnings if "'CH2 (V)' holds text where numbers are expected (first at line 152)" in w]
    assert [c.position for c in capture.left_out] == [2]


def test_text_in_two_columns_leaves_both_out_and_refuses_when_nothing_is_left(tmp_path: Path) -> None:
    header = "Time (s),CH1 (V),CH2 (V),CH3 (V)"
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f},{np.cos(i / 5):.6f},{np.sin(i / 3):.6f}" for i in range(300)]
    rows[40] = f"{40e-8:.10e},0.1,over,0.2"
    rows[90] = f"{90e-8:.10e},0.1,0.2,under"
    capture = read_capture(_write(tmp_path, "\n".join([header, *rows])))
    assert [c.header for c in capture.channels] == ["CH1 (V)"]
    assert "line 42: found 'over'" in _left_out_message(_write(tmp_path, "\n".join([header, *rows])), "CH2")
    assert "line 92: found 'under'" in _left_out_message(_write(tmp_path, "\n".join([header, *rows])), 3)
    rows[10] = f"{10e-8:.10e},bad,0.2,0.3"
    assert "line 12: found 'bad'" in _message(_write(tmp_path, "\n".join([header, *rows]), "none.csv"))


@pytest.mark.parametrize("above", [[], ["Probe,10x,,"]])
def test_text_on_the_first_data_row_leaves_its_column_out(tmp_path: Path, above: list[str]) -> None:
    header = "Time (s),CH1 (V),CH2 (V),AUX (V)"
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f},{np.cos(i / 5):.6f},{np.sin(i / 3):.6f}" for i in range(300)]
    rows[0] = rows[0].rsplit(",", 1)[0] + ",OVLD"
    path = _write(tmp_path, "\n".join([*above, header, *rows]))
    capture = read_capture(path)
    assert capture.rows == 300 and [c.header for c in capture.channels] == ["CH1 (V)", "CH2 (V)"]
    assert f"line {len(above) + 2}: found 'OVLD'" in _left_out_message(path, "AUX")


def test_text_among_numbers_in_rows_that_start_with_an_empty_cell(tmp_path: Path) -> None:
    # a separator before the first cell of every row; the word within the lines sniffed
    rows = [f",{i * 1e-8:.10e},{np.sin(i / 7):.6f},{np.cos(i / 5):.6f}" for i in range(300)]
    rows[40] = rows[40].rsplit(",", 1)[0] + ",overflow"
    path = _write(tmp_path, "\n".join([",Time (s),CH1 (V),CH2 (V)", *rows]))
    assert read_capture(path).rows == 300
    assert "line 42: found 'overflow'" in _left_out_message(path, "CH2")


def test_text_among_numbers_on_a_row_with_settings_beside_it(tmp_path: Path) -> None:
    # settings written in the leftmost cells of the first data rows, a word in one of those rows
    data = [f"{i * 1e-7:.6e},{np.sin(i / 7):.5f},{np.cos(i / 5):.5f}" for i in range(400)]
    side = ["Record Length,400,Points", "Sample Interval,1e-07,s", "Trigger Point,0,Samples"]
    lines = [f"{s},{d}" for s, d in zip(side, data)] + [f",,,{d}" for d in data[3:]]
    lines[1] = lines[1].rsplit(",", 1)[0] + ",overflow"
    path = _write(tmp_path, "\n".join(lines))
    capture = read_capture(path)
    assert capture.rows == 400 and capture.sample_interval == pytest.approx(1e-7)
    assert capture.metadata.get("Record Length") == "400 Points"
    assert "line 2: found 'overflow'" in _left_out_message(path, 5)


def test_a_row_with_a_cell_too_many_is_refused_after_a_column_is_left_out(tmp_path: Path) -> None:
    # the parser given only some columns would take the shifted row's cells in the wrong places
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f},{np.cos(i / 5):.6f}" for i in range(3000)]
    rows[1000] = rows[1000].rsplit(",", 1)[0] + ",overflow"
    rows[2000] = f"{2000e-8:.10e},0.5,0.7,0.8"
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 2002: 4 cells where the table has 3" in message


def test_a_row_with_a_cell_too_many_is_refused_beside_settings(tmp_path: Path) -> None:
    # rows with settings in their leftmost cells: the settings' cells are passed over, and a row
    # with a cell too many is refused, not read with its cells out of place
    data = [f"{i * 1e-7:.6e},{np.sin(i / 7):.5f},{np.cos(i / 5):.5f}" for i in range(400)]
    side = ["Record Length,400,Points", "Sample Interval,1e-07,s", "Trigger Point,0,Samples"]
    lines = [f"{s},{d}" for s, d in zip(side, data)] + [f",,,{d}" for d in data[3:]]
    assert read_capture(_write(tmp_path, "\n".join(lines), "good.csv")).rows == 400
    lines[300] += ",0.9"
    assert "line 301: 7 cells where the table has 6" in _message(_write(tmp_path, "\n".join(lines)))


@pytest.mark.parametrize("with_time", [True, False])
def test_a_line_of_text_that_starts_with_a_number_is_not_a_text_column(tmp_path: Path, with_time: bool) -> None:
    header = "Time (s),CH1 (V),CH2 (V),AUX (V)" if with_time else "CH1 (V),CH2 (V),AUX (V)"
    rows = [f"{i * 1e-8:.10e},{np.sin(i / 7):.6f},{np.cos(i / 5):.6f},{np.sin(i / 3):.6f}" for i in range(3000)]
    if not with_time:
        rows = [r.split(",", 1)[1] for r in rows]
    rows[2000] = "5000,trigger,event,here" if with_time else "2,segments,follow"
    preamble = [] if with_time else ["Sample interval,1e-8"]
    message = _message(_write(tmp_path, "\n".join([*preamble, header, *rows])))
    assert f"line {2002 + len(preamble)}: found '{'trigger' if with_time else 'segments'}'" in message
    assert message.endswith("fix or delete that line")  # a line of text: not one cell to empty


def test_text_in_the_time_column_is_refused(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[150] = "oops," + rows[150].split(",", 1)[1]
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 152: found 'oops'" in message and "empty it" in message  # one cell: filled in if emptied
    # without a header the first column would be time: its text is the reason given
    assert "line 151: found 'oops'" in _message(_write(tmp_path, "\n".join(rows), "headerless.csv"))


def test_text_column_with_a_footer_and_decimal_commas(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e};{np.sin(i / 7):.6f};{np.cos(i / 5):.6f}".replace(".", ",") for i in range(300)]
    rows[77] = rows[77].rsplit(";", 1)[0] + ";----"
    content = "\n".join(["Time (s);CH1 (V);CH2 (V)", *rows, "Settings", "Probe;10x"]) + "\n"
    capture = read_capture(_write(tmp_path, content))
    assert capture.rows == 300 and [c.header for c in capture.channels] == ["CH1 (V)"]
    assert capture.metadata.get("Probe") == "10x"
    assert "line 79: found '----'" in _left_out_message(_write(tmp_path, content), "CH2")


def test_time_going_backwards(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[150], rows[151] = rows[151], rows[150]
    message = _message(_write(tmp_path, "\n".join(["Note,swapped rows", HEADER, *rows])))
    assert "line 154" in message and "goes backwards" in message


def test_time_repeating(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[200] = rows[199]
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 202" in message and "repeats" in message


def test_time_going_backwards_after_blank_lines(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[250], rows[251] = rows[251], rows[250]
    body = [*rows[:100], "", "", *rows[100:]]
    message = _message(_write(tmp_path, "\n".join([HEADER, *body])))
    assert "line 255" in message  # header, 100 rows, 2 blank lines, then row 251


def test_text_in_data_near_the_top(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[8] = rows[8].replace(rows[8].split(",")[1], "overload", 1)
    message = _left_out_message(_write(tmp_path, "\n".join([HEADER, *rows])), "CH1 (V)")
    assert "line 10" in message and "'overload'" in message


def test_text_row_in_data_near_the_top(tmp_path: Path) -> None:
    rows = _rows(300)
    rows[5] = "--- trigger ---"
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 7" in message and "trigger" in message


def test_text_in_data_far_below_the_sniffed_lines(tmp_path: Path) -> None:
    rows = _rows(20000)
    rows[15000] = rows[15000].rsplit(",", 1)[0] + ",1.2.3"
    message = _left_out_message(_write(tmp_path, "\n".join(["Sample interval,1e-8", HEADER, *rows])), "CH2 (V)")
    assert "line 15003" in message and "'1.2.3'" in message


def test_text_in_gzip_data(tmp_path: Path) -> None:
    rows = _rows(5000)
    rows[4000] = "4e-05,#N/A?,0.5"
    data = gzip.compress("\n".join([HEADER, *rows]).encode())
    message = _left_out_message(_write(tmp_path, data, "bad.csv.gz"), "CH1 (V)")
    assert "line 4002" in message and "'#N/A?'" in message


def test_row_with_extra_cells(tmp_path: Path) -> None:
    rows = _rows(3000)
    rows[2500] += ",7"
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 2502" in message and "4 cells" in message


def test_value_beyond_the_header_columns(tmp_path: Path) -> None:
    rows = [r + "," for r in _rows(3000)]
    rows[2000] += "9"
    message = _message(_write(tmp_path, "\n".join([HEADER + ",", *rows])))
    assert "line 2002" in message and "a value in cell 4" in message


def test_header_that_does_not_match_the_rows(tmp_path: Path) -> None:
    rows = [f"{i * 1e-8:.10e},{np.sin(i):.5f}" for i in range(100)]
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 1" in message and "3 names" in message and "make the header and the rows agree" in message


def test_non_uniform_sampling(tmp_path: Path) -> None:
    rows = _rows(400)
    del rows[300]
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "not uniform" in message and "line 302" in message and "limit 1 %" in message


def test_time_column_with_a_non_time_unit(tmp_path: Path) -> None:
    content = "\n".join(["Time (V),CH1 (V),CH2 (V)", *_rows(100)])
    assert "not in seconds" in _message(_write(tmp_path, content))


def test_time_column_with_an_unknown_unit(tmp_path: Path) -> None:
    content = "\n".join(["Time (div),CH1 (V),CH2 (V)", *_rows(100)])
    assert "'div', not in seconds" in _message(_write(tmp_path, content))


def test_only_a_time_column(tmp_path: Path) -> None:
    content = "\n".join(["Time (s)", *[f"{i * 1e-8:.10e}" for i in range(100)]])
    assert "no signal column" in _message(_write(tmp_path, content))


@pytest.mark.parametrize("value", [0.0, -1e-8, float("nan"), float("inf"), "1e-8", True])
def test_bad_sample_interval_argument(tmp_path: Path, value: object) -> None:
    path = _write(tmp_path, "\n".join([HEADER, *_rows(100)]))
    assert "positive number of seconds" in _message(path, sample_interval=value)


def _frame_message(frame: object, **options: object) -> str:
    with pytest.raises(CaptureError) as caught:
        capture_from_frame(frame, **options)  # type: ignore[arg-type]
    message = str(caught.value)
    assert "\n" not in message
    return message


def test_frame_with_text_column() -> None:
    frame = pd.DataFrame({"Time (s)": np.arange(20) * 1e-6, "CH1 (V)": ["1.0"] * 19 + ["high"]})
    message = _frame_message(frame)
    assert "'CH1 (V)' is not numeric" in message and "'high' at row 19" in message


def test_frame_time_backwards_names_the_row() -> None:
    time = np.arange(40) * 1e-6
    time[[10, 11]] = time[[11, 10]]
    message = _frame_message(pd.DataFrame({"Time": time, "v": np.ones(40)}))
    assert "row 11: time in column 'Time' goes backwards" in message


def test_frame_unknown_time_column() -> None:
    frame = pd.DataFrame({"a": np.ones(20), "b": np.ones(20)})
    message = _frame_message(frame, time_column="c")
    assert "time column 'c' is not in <DataFrame>; its columns are: 'a', 'b'" in message


def test_frame_without_time() -> None:
    frame = pd.DataFrame({"a": np.ones(20), "b": np.ones(20)})
    assert "no time column" in _frame_message(frame)


def test_empty_frame() -> None:
    assert "has no columns" in _frame_message(pd.DataFrame())


def test_not_a_frame() -> None:
    assert "not a pandas DataFrame" in _frame_message([1, 2, 3])


_VALID = "\n".join(["Sample interval,1e-8", "Time (s),CH1 (V),CH2 (V)", *_rows(40)]).encode()


@settings(max_examples=150, deadline=None)
@given(
    st.lists(
        st.tuples(
            st.integers(0, len(_VALID)),
            st.integers(0, 8),
            st.binary(max_size=6)
            | st.text(',;\t "\n\r.-+eE0123456789aN#\u00b5', max_size=6).map(str.encode),
        ),
        min_size=1,
        max_size=6,
    ),
    st.booleans(),
)
def test_damaged_files_give_a_capture_or_a_capture_error(
    edits: list[tuple[int, int, bytes]], compress: bool
) -> None:
    data = bytearray(_VALID)
    for at, cut, insert in edits:
        data[at : at + cut] = insert
    payload = gzip.compress(bytes(data)) if compress else bytes(data)
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "damaged.csv"
        path.write_bytes(payload)
        try:
            capture = read_capture(path)
        except CaptureError as exc:
            assert "\n" not in str(exc) and str(exc)
            return
    assert capture.rows >= 16
    assert np.all(np.isfinite(capture.time)) and np.all(np.diff(capture.time) > 0)
    assert all(np.all(np.isfinite(c.values)) for c in capture.channels)


def test_cut_last_row_is_not_a_footer(tmp_path: Path) -> None:
    rows = _rows(3000)
    rows[-1] = rows[-1][:6] + "e-"
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows])))
    assert "line 3001" in message and "where a number was expected" in message


def test_damaged_last_row_is_not_a_footer(tmp_path: Path) -> None:
    rows = [*_rows(3000), "3e-05,0.5,abc"]
    assert "line 3002: found 'abc'" in _left_out_message(_write(tmp_path, "\n".join([HEADER, *rows])), "CH2 (V)")


def test_nul_padding_after_the_table_is_an_error(tmp_path: Path) -> None:
    data = "\n".join([HEADER, *_rows(20000)]).encode() + b"\n" + b"\x00" * 64
    assert "line 20002" in _message(_write(tmp_path, data))


def test_bad_cell_in_long_padded_rows_is_found_quickly(tmp_path: Path) -> None:
    header = "   ".join(["t", *[f"CH{k}" for k in range(30)]])
    rows = ["   ".join([f"{i * 1e-8:.8e}", *["  1.5"] * 30]) for i in range(5000)]
    rows[4000] = rows[4000][:-3] + "abc"
    started = time.perf_counter()
    message = _left_out_message(_write(tmp_path, "\n".join([header, *rows])), "CH29")
    assert "line 4002" in message and "'abc'" in message
    assert time.perf_counter() - started < 10.0


def test_one_bad_cell_among_numbers_is_to_be_emptied_and_a_text_line_deleted(tmp_path: Path) -> None:
    # deleting a row of a uniformly sampled table leaves a gap the time checks refuse; an empty
    # cell is filled in from its neighbours, so that is the advice for one bad cell in a row
    rows = _rows(300)
    rows[150] = rows[150].rsplit(",", 1)[0] + ",overflow"
    message = _left_out_message(_write(tmp_path, "\n".join([HEADER, *rows]) + "\n"), "CH2 (V)")
    assert "line 152" in message and "'overflow'" in message and "empty it" in message
    emptied = _write(tmp_path, "\n".join([HEADER, *rows]).replace("overflow", "") + "\n", "emptied.csv")
    assert read_capture(emptied).rows == 300
    rows[150] = "# segment 2"
    message = _message(_write(tmp_path, "\n".join([HEADER, *rows]) + "\n", "text.csv"))
    assert "line 152" in message and "delete that line" in message


@pytest.mark.parametrize("tail", [8192, 5_000_000])
def test_a_text_followed_by_nul_bytes_is_read_up_to_them(tmp_path: Path, tail: int) -> None:
    # a file extended but not written when the power failed ends in NULs: they were read as one
    # cell of one line and held about eleven times over (20 GB exhausted the machine); the text
    # before them is read now, with a warning
    rows = "\n".join(f"{k * 1e-6:.6e},{np.sin(k / 9):.5f},{np.cos(k / 9):.5f}" for k in range(2000))
    clean = _write(tmp_path, f"{HEADER}\n{rows}\n", "clean.csv")
    padded = _write(tmp_path, f"{HEADER}\n{rows}\n".encode() + b"\0" * tail, "padded.csv")
    a, b = read_capture(clean), read_capture(padded)
    assert b.rows == a.rows == 2000 and np.array_equal(a.channel(1).values, b.channel(1).values)
    assert any(f"ends in {tail:,} NUL bytes" in w for w in b.warnings)
    assert not any("NUL" in w for w in a.warnings)


def test_utf32_text_is_named(tmp_path: Path) -> None:
    # its little-endian byte-order mark begins with UTF-16's: it was decoded as UTF-16 and
    # refused as "no line of numbers in its first 200 lines"
    path = _write(tmp_path, f"{HEADER}\n0,1,2\n1e-6,1,2\n".encode("utf-32"), "u32.csv")
    assert "is UTF-32 text" in _message(path)


def test_a_bad_cell_is_shown_short_whatever_its_characters() -> None:
    # 60 NUL characters were shown as 240 characters of escapes
    from wavefit.io.layout import bad_cell_message

    for cell in ("\x00" * 5000, "x" * 100, "\x1b[2J" * 30):
        message = bad_cell_message("f.csv", 3, cell)
        shown = message.split("found ", 1)[1].split(" where", 1)[0]
        assert len(shown) <= 66 and shown.endswith("...'")
    assert "found 'abc' where" in bad_cell_message("f.csv", 3, "abc")


def test_text_after_a_run_of_nul_bytes_is_not_dropped(tmp_path: Path) -> None:
    # only whole 4 KB blocks were looked at: 8192 NULs followed by 51 bytes of rows were taken
    # as a NUL tail, and those rows were dropped without a word
    from wavefit.io.source import nul_tail_start

    head = f"{HEADER}\n0,1,2\n".encode()
    path = _write(tmp_path, head + b"\0" * 8192 + b"1e-6,1,2\n" * 5, "mid.csv")
    assert nul_tail_start(path) is None
    small = _write(tmp_path, head + b"\0" * 100, "small.csv")   # a few NULs: the table's own message
    assert nul_tail_start(small) is None
    tail = _write(tmp_path, head + b"\0" * 10_000, "tail.csv")
    assert nul_tail_start(tail) == len(head)
