"""What the reader decides and reports: time source, metadata, filled cells, warnings, frames."""
from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wavefit.errors import CaptureError
from wavefit.io import capture_from_frame, read_capture
from wavefit.io.timebase import Printing, printing_resolution

N = 500
DT = 1e-8


def _write(tmp_path: Path, lines: list[str], name: str = "capture.csv") -> Path:
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _signal(n: int = N) -> np.ndarray:
    return np.sin(np.arange(n) / 11.0)


def _rows(time: np.ndarray, values: np.ndarray, fmt: str = ".12g") -> list[str]:
    return [f"{t:{fmt}},{v:.9f}" for t, v in zip(time, values)]


def test_metadata_pairs_and_free_text(tmp_path: Path) -> None:
    lines = [
        "Instrument,bench scope", "Probe: 10X", "Operator = night shift",
        "Captured after the second pulse, cold start", "Record length;500", "",
        "Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal()),
    ]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.metadata == {
        "Instrument": "bench scope",
        "Probe": "10X",
        "Operator": "night shift",
        "note1": "Captured after the second pulse, cold start",
        "Record length": "500",
    }
    assert capture.warnings == ()


def test_free_text_lines_become_notes(tmp_path: Path) -> None:
    lines = ["Step response of L3", "recorded at 21 degrees", "CH1 (V)", *[f"{v:.6f}" for v in _signal()]]
    capture = read_capture(_write(tmp_path, lines), sample_interval=DT)
    assert capture.metadata == {"note1": "Step response of L3", "note2": "recorded at 21 degrees"}


def test_time_column_is_used_with_its_start(tmp_path: Path) -> None:
    time = -2e-6 + np.arange(N) * DT
    capture = read_capture(_write(tmp_path, ["Time [us],CH1 [V]", *_rows(time * 1e6, _signal())]))
    assert capture.time_column == "Time [us]"
    assert capture.time[0] == pytest.approx(-2e-6, rel=1e-12)
    assert capture.sample_interval == pytest.approx(DT, rel=1e-9)
    assert [c.header for c in capture.channels] == ["CH1 [V]"]


def test_start_time_from_preamble(tmp_path: Path) -> None:
    lines = ["Sample interval,10 ns", "t0,-1 us", "CH1 (V)", *[f"{v:.6f}" for v in _signal()]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.time[0] == pytest.approx(-1e-6)
    assert capture.time[-1] == pytest.approx(-1e-6 + (N - 1) * DT)


def test_argument_overrides_time_column_and_keeps_it_as_a_column(tmp_path: Path) -> None:
    # the given interval agrees with the column's (one that contradicts it is refused:
    # tests/test_hostile_input.py)
    path = _write(tmp_path, ["Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())])
    capture = read_capture(path, sample_interval=1.001e-8)
    assert capture.sample_interval == 1.001e-8
    assert capture.time_column is None
    assert capture.time[-1] == pytest.approx((N - 1) * 1.001e-8)
    assert [c.header for c in capture.channels] == ["Time (s)", "CH1 (V)"]
    assert capture.channel(1).header == "CH1 (V)"
    assert any("is not used as time axis" in w for w in capture.warnings)


def test_argument_overrides_preamble_interval(tmp_path: Path) -> None:
    lines = ["Sample interval,1e-8", "CH1 (V)", *[f"{v:.6f}" for v in _signal()]]
    capture = read_capture(_write(tmp_path, lines), sample_interval=4e-9)
    assert capture.sample_interval == 4e-9
    assert any("overrides the preamble's 1e-08 s" in w for w in capture.warnings)


def test_time_column_wins_over_a_disagreeing_preamble(tmp_path: Path) -> None:
    lines = ["Sample interval,5e-9", "Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.sample_interval == pytest.approx(DT)
    assert any("the time column is used" in w for w in capture.warnings)


@pytest.mark.parametrize("scale, named", [(1e6, "is it in us"), (1e9, "is it in ns"), (1e3, "is it in ms")])
def test_a_unitless_time_column_that_contradicts_the_preamble_is_refused(tmp_path: Path, scale, named) -> None:
    # a column without a unit is read as seconds only for want of one: under a preamble whose
    # interval it steps 10³ⁿ times it was used with a warning, and L came out 10⁶ times too
    # large, exit 0
    lines = ["Sample interval,1e-8", "Time,CH1 (V)", *_rows(np.arange(N) * DT * scale, _signal())]
    with pytest.raises(CaptureError) as caught:
        read_capture(_write(tmp_path, lines))
    message = str(caught.value)
    assert "has no unit" in message and "Give the column its unit" in message and named in message


@pytest.mark.parametrize("scale", [1e-6, 7.0])
def test_a_unitless_time_column_that_a_preamble_contradicts_otherwise_is_used(tmp_path: Path, scale) -> None:
    # a preamble's interval 10⁶ times the column's step is the suspect (its number in µs, the
    # unit on another line; a review found such a file refused), and a ratio of no unit prefix
    # names neither: the column is used, with the warning
    lines = ["Sample interval,1e-8", "Time,CH1 (V)", *_rows(np.arange(N) * 1e-8 * scale, _signal())]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.sample_interval == pytest.approx(1e-8 * scale)
    assert any("the time column is used" in w for w in capture.warnings)


def test_coarse_stamps_that_the_preamble_confirms_are_a_note(tmp_path: Path) -> None:
    # stamps printed to four digits of 3.3e-4 s at 10 ns: the preamble's interval agrees and is
    # used; nothing is wrong with the file, but it was said as a warning
    time = 3.3e-4 + np.arange(N) * DT
    lines = ["Sample interval,1e-8", "Time (s),CH1 (V)", *[f"{a:.3e},{v:.6f}" for a, v in zip(time, _signal())]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.sample_interval == 1e-8 and capture.warnings == ()
    assert any("printed too coarsely" in n and "agrees with it and is used" in n for n in capture.notes)


def test_agreeing_preamble_gives_no_warning(tmp_path: Path) -> None:
    lines = ["Sample rate,100 MSa/s", "Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())]
    assert read_capture(_write(tmp_path, lines)).warnings == ()


def test_unreadable_preamble_interval_is_reported(tmp_path: Path) -> None:
    lines = ["Sample interval,ten ns", "Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())]
    capture = read_capture(_write(tmp_path, lines))
    assert any("line 1" in w and "not readable" in w for w in capture.warnings)


def test_time_per_division_is_not_a_sample_interval(tmp_path: Path) -> None:
    lines = ["Time/div,1 us", "Vertical scale,0.5 V/div", "CH1 (V)", *[f"{v:.6f}" for v in _signal()]]
    capture = read_capture(_write(tmp_path, lines), sample_interval=DT)
    assert capture.metadata["Time/div"] == "1 us"
    assert capture.warnings == ()


def test_few_missing_cells_are_interpolated_and_reported(tmp_path: Path) -> None:
    rows = _rows(np.arange(N) * DT, _signal())
    rows[123] = rows[123].split(",")[0] + ","
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    values = capture.channel("CH1").values
    assert np.all(np.isfinite(values))
    assert values[123] == pytest.approx((_signal()[122] + _signal()[124]) / 2, abs=1e-9)
    (warning,) = capture.warnings
    assert "line 125" in warning and "linear interpolation" in warning


def test_missing_time_stamp_is_interpolated(tmp_path: Path) -> None:
    rows = _rows(np.arange(N) * DT, _signal())
    rows[40] = "NaN," + rows[40].split(",")[1]
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    assert capture.time[40] == pytest.approx(40 * DT)
    assert any("'Time (s)'" in w and "line 42" in w for w in capture.warnings)


def test_unknown_unit_is_kept_and_reported(tmp_path: Path) -> None:
    lines = ["Time (s),Probe (div),CH2 (V)", *[f"{i * DT:.12g},{v:.6f},{v:.6f}" for i, v in enumerate(_signal())]]
    capture = read_capture(_write(tmp_path, lines))
    probe = capture.channel("Probe")
    assert (probe.unit, probe.scale) == ("div", 1.0)
    np.testing.assert_allclose(probe.values, np.round(_signal(), 6))
    assert any("'div' is not recognised" in w for w in capture.warnings)


def test_small_jitter_is_a_warning(tmp_path: Path) -> None:
    rng = np.random.default_rng(3)
    time = np.arange(N) * DT + rng.normal(0, 1.5e-3 * DT, N)
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *_rows(time, _signal(), ".15e")]))
    assert capture.sample_interval == pytest.approx(DT, rel=1e-3)
    (warning,) = capture.warnings
    assert "jitter" in warning and "% rms" in warning


def test_coarsely_printed_time_is_rebuilt_as_a_grid(tmp_path: Path) -> None:
    dt = 1.2345678e-9
    time = 1e-4 + np.arange(4000) * dt
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *_rows(time, _signal(4000), ".7g")]))
    assert capture.sample_interval == pytest.approx(dt, rel=1e-6)
    np.testing.assert_allclose(np.diff(capture.time), dt, rtol=1e-5)
    (warning,) = capture.warnings
    assert "rebuilt as a uniform grid" in warning


@pytest.mark.skipif(np.finfo(np.longdouble).eps > 1e-18, reason="needs an extended-precision long double")
def test_grid_slope_of_a_long_column_is_the_least_squares_slope_to_rounding() -> None:
    # the rebuilt grid's slope, a chunk of rows at a time, against the same least-squares slope
    # summed in extended precision (64-bit significand): stamps printed to 8 digits over
    # several chunks and decades, from a negative trigger offset
    from wavefit.io.timebase import GRID_CHUNK, _line_slope, _Rows

    n = 5 * GRID_CHUNK + 123
    stamps = np.array([float(f"{t:.7e}") for t in -3e-6 + np.arange(n) * 9.37e-10])
    rows = np.arange(n, dtype=np.longdouble)
    for start, stop in ((0, n), (17, n - 5), (GRID_CHUNK - 1, 3 * GRID_CHUNK + 2)):
        part = rows[start:stop] - rows[start:stop].mean()
        exact = float((part * stamps[start:stop].astype(np.longdouble)).sum() / (part * part).sum())
        assert _line_slope(stamps, start, stop, _Rows()) == pytest.approx(exact, rel=1e-15)


def test_grid_segments_across_chunks_are_the_runs_of_one_step_and_sign() -> None:
    from wavefit.io.timebase import GRID_CHUNK, _segment_edges

    n = 3 * GRID_CHUNK + 7
    steps = np.ones(n)
    steps[GRID_CHUNK - 1:] = 10.0  # a change just before a chunk's end
    steps[2 * GRID_CHUNK:] = 100.0  # and on a chunk's first row
    time = np.linspace(-1.0, 5.0, n)
    key = steps * np.sign(time)
    expected = [0, *(np.flatnonzero(key[1:] != key[:-1]) + 1).tolist(), n]
    assert _segment_edges(time, steps) == expected
    assert len(expected) == 6  # the two steps' changes, the sign's change through the zero stamp


@pytest.mark.parametrize("stamp", ["0.001", "1e+300", "-1e+300"])
def test_a_time_column_that_stands_still_is_refused_not_rebuilt(tmp_path: Path, stamp: str) -> None:
    # one value on every row is no grid of rounded stamps: its fitted "interval" was 7e-24 s
    # (known to 1e16 relative) at 0.001, a division by zero at 1e300 (a fault campaign's files)
    rows = [f"{stamp},{v:.6f}" for v in _signal(4000)]
    with pytest.raises(CaptureError, match="repeats the value"):
        read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))


@pytest.mark.parametrize("first, second", [
    ("Sample interval,4e-07", "Sample interval,2e-07"),  # one key twice (was read as "not readable")
    ("dt,4e-07", "Sample interval,2e-07"),
    ("Sample interval,2e-07", "Sample rate,2.5 MSa/s"),
])
def test_two_sample_intervals_without_a_time_column_are_refused(tmp_path: Path, first: str, second: str) -> None:
    # the first of two contradicting intervals was used: L twice the truth with exit 0 (a fault
    # campaign's files); a given interval decides, and two that agree are one
    rows = [f"{v:.6f},{-v:.6f}" for v in _signal(400)]
    path = _write(tmp_path, [first, second, "CH1 (V),CH2 (V)", *rows])
    with pytest.raises(CaptureError, match=r"gives two sample intervals, .* and another \(line 2 "):
        read_capture(path)
    assert read_capture(path, sample_interval=2e-7).sample_interval == 2e-7
    agreeing = _write(tmp_path, ["Sample interval,4e-07", "Sample rate,2.5 MSa/s", "CH1 (V),CH2 (V)", *rows], "ok.csv")
    assert read_capture(agreeing).sample_interval == pytest.approx(4e-7)
    # a rate and an interval that agree to their printing (1e-4 apart) are one time base (a review
    # found them refused)
    printed = _write(tmp_path, ["Sample rate,3 GSa/s", "Sample interval,333.3 ps", "CH1 (V),CH2 (V)", *rows], "p.csv")
    assert read_capture(printed).sample_interval == pytest.approx(1 / 3e9)
    footer = _write(tmp_path, ["Sample interval,4e-07", "CH1 (V),CH2 (V)", *rows, "Sample interval,2e-07"], "f.csv")
    with pytest.raises(CaptureError, match="gives two sample intervals"):
        read_capture(footer)


def test_rows_that_go_on_with_another_separator_are_refused_not_a_footer(tmp_path: Path) -> None:
    # commas to tabs partway (two exports joined): the last 1,250 rows were dropped as a footer
    # with a warning only (a fault campaign's file); one line of numbers after the table, a
    # setting, is still a footer
    time, v = np.arange(300) * DT, _signal(300)
    rows = [f"{t:.9e},{a:.6f},{-a:.6f}" for t, a in zip(time[:200], v[:200])]
    tabbed = [f"{t:.9e}\t{a:.6f}\t{-a:.6f}" for t, a in zip(time[200:], v[200:])]
    with pytest.raises(CaptureError, match="line 202: the rows go on with another separator than the table's ','"):
        read_capture(_write(tmp_path, ["Time (s),CH1 (V),CH2 (V)", *rows, *tabbed]))
    # a block of numeric settings after the table (a matrix of three columns, which does not step
    # on from the table's time) stays a footer (a review found such blocks refused)
    settings = ["Settings", *["1 0 5", "0 1 2", "3 3 1", "2 2 2", "9 8 7", "1 1 1"]]
    kept = read_capture(_write(tmp_path, ["Time (s),CH1 (V),CH2 (V)", *rows, *settings], "s.csv"))
    assert kept.rows == 200 and any("not data" in w for w in kept.warnings)


@pytest.mark.parametrize("line, warned", [("Sample rate,5", True), ("Sample interval,0.002", True),
                                           ("Sample rate,5 MSa/s", False), ("Sample interval,2e-7", False),
                                           ("Sample interval (ms),2", False)])
def test_a_slow_time_base_without_a_unit_is_warned(tmp_path: Path, line: str, warned: bool) -> None:
    # a bare "Sample rate,5" was read as 5 Hz and gave L = 470 H with no word (a fault campaign's
    # file); a unit in the value or the key, or an interval under 1 ms, needs none
    rows = [f"{v:.6f},{-v:.6f}" for v in _signal(200)]
    capture = read_capture(_write(tmp_path, [line, "CH1 (V),CH2 (V)", *rows]))
    assert any("has no unit and is read in SI" in w for w in capture.warnings) == warned
    # a time column sets the axis: the preamble's interval is not used, and not warned (a review)
    timed = [f"{k * 2e-3:.6f},{v:.6f}" for k, v in enumerate(_signal(200))]
    with_time = read_capture(_write(tmp_path, [line, "Time (s),CH1 (V)", *timed], "t.csv"))
    assert not any("has no unit" in w for w in with_time.warnings)


def test_printing_resolution_of_fixed_and_significant_formats() -> None:
    time = 1e-4 + np.arange(1000) * 1.2345678e-9
    fixed = np.array([float(f"{t:.12f}") for t in time])
    significant = np.array([float(f"{t:.6e}") for t in time])
    assert printing_resolution(fixed) == pytest.approx(1e-12)
    assert printing_resolution(significant) == pytest.approx(1e-10)


@pytest.mark.parametrize("scale", [1.0, 1e-6])
def test_printing_steps_of_a_column_in_order_are_those_of_each_stamp(scale: float) -> None:
    # a column in order takes its decades as runs found by bisection; each stamp's step must be
    # what its own decade gives, floor(log10(|t|)), including the floats either side of each
    # power of ten, both signs and exact zeros; a column out of order takes the per-stamp path
    rng = np.random.default_rng(5)
    powers = 10.0 ** np.arange(-15, 3)
    near = np.concatenate([powers, np.nextafter(powers, 0), np.nextafter(powers, np.inf)])
    spread = 10 ** rng.uniform(-16, 2, 20_000)
    stamps = np.sort(np.concatenate([near, -near, spread, -spread, [0.0, 0.0]])) * scale
    stamps = np.repeat(stamps, 2)  # repeated stamps (coarse printing) are in order too
    for digits in (3, 8):
        printing = Printing(digits=digits, scale=scale)
        printed = np.abs(stamps) / scale
        expected = np.where(printed > 0, 10.0 ** (np.floor(np.log10(np.where(printed > 0, printed, 1.0)))
                                                  - digits + 1) * scale, 0.0)
        np.testing.assert_array_equal(printing.steps(stamps), expected)
        order = rng.permutation(stamps.size)
        np.testing.assert_array_equal(printing.steps(stamps[order]), expected[order])


def test_body_beyond_the_sniffed_lines_is_read_whole(tmp_path: Path) -> None:
    n = 30000
    rows = _rows(np.arange(n) * DT, _signal(n))
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    assert capture.rows == n
    assert capture.channel(1).values[-1] == pytest.approx(_signal(n)[-1], abs=1e-9)


def test_describe_is_json_ready(tmp_path: Path) -> None:
    lines = ["Note,x", "Time (s),CH1 (mV)", *_rows(np.arange(N) * DT, _signal())]
    described = read_capture(_write(tmp_path, lines)).describe()
    assert json.loads(json.dumps(described)) == described
    assert described["columns"][0]["unit"] == "V"
    assert described["columns"][0]["max"] == pytest.approx(_signal().max() * 1e-3, rel=1e-8)


def test_frame_with_time_column_and_units() -> None:
    frame = pd.DataFrame({"Time (us)": np.arange(N) * 0.01, "CH1 (mV)": _signal(), "I (A)": _signal()})
    capture = capture_from_frame(frame, source="bench")
    assert capture.source == "bench"
    assert capture.time_column == "Time (us)"
    assert capture.sample_interval == pytest.approx(DT)
    assert capture.channel("CH1").unit == "V"
    np.testing.assert_allclose(capture.channel("CH1").values, _signal() * 1e-3)


def test_frame_with_explicit_time_column_and_integer_labels() -> None:
    frame = pd.DataFrame({0: np.arange(N) * DT, 1: _signal()})
    capture = capture_from_frame(frame, time_column="0")
    assert capture.time_column == "0"
    assert [c.header for c in capture.channels] == ["1"]


def test_frame_with_sample_interval() -> None:
    frame = pd.DataFrame({"CH1": _signal(), "CH2": np.arange(N, dtype=np.int64)})
    capture = capture_from_frame(frame, sample_interval=DT)
    assert capture.time_column is None
    assert capture.time[-1] == pytest.approx((N - 1) * DT)
    assert capture.channel("CH2").values.dtype == np.float64


def test_text_after_the_table_is_a_footer(tmp_path: Path) -> None:
    lines = ["Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal()), "", "End of record", "checksum ok"]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.rows == N
    assert capture.metadata == {"footer1": "End of record", "footer2": "checksum ok"}
    (warning,) = capture.warnings
    assert f"lines {N + 3}-{N + 4}" in warning and "footer" in warning


def test_end_of_file_mark_is_ignored(tmp_path: Path) -> None:
    path = tmp_path / "dos.csv"
    path.write_bytes(("\r\n".join(["Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())]) + "\r\n\x1a").encode())
    capture = read_capture(path)
    assert capture.rows == N and capture.warnings == () and capture.metadata == {}


def test_rows_without_values_at_the_edges_are_left_out(tmp_path: Path) -> None:
    lines = ["Time (s),CH1 (V)", ",", *_rows(np.arange(N) * DT, _signal()), ",", ","]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.rows == N
    assert capture.time[0] == 0.0
    (warning,) = capture.warnings
    assert "3 rows without any value" in warning and "line 2" in warning and f"line {N + 3}" in warning


def test_comment_mark_before_the_header_is_dropped(tmp_path: Path) -> None:
    lines = ["# Time (s), CH1 (V)", *_rows(np.arange(N) * DT, _signal())]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.time_column == "Time (s)"


def test_index_column_is_an_ordinary_column(tmp_path: Path) -> None:
    lines = ["No.,Time (s),CH1 (V)", *[f"{k},{r}" for k, r in enumerate(_rows(np.arange(N) * DT, _signal()))]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.time_column == "Time (s)"
    assert [c.header for c in capture.channels] == ["No.", "CH1 (V)"]
    assert capture.channel(2).header == "CH1 (V)"


def test_unitless_slow_time_column_is_questioned(tmp_path: Path) -> None:
    capture = read_capture(_write(tmp_path, ["Time,CH1", *_rows(np.arange(N) * 0.5, _signal())]))
    assert capture.sample_interval == 0.5
    (warning,) = capture.warnings
    assert "has no unit" in warning and "'Time (us)'" in warning


def test_unitless_fast_time_column_is_seconds_without_warning(tmp_path: Path) -> None:
    capture = read_capture(_write(tmp_path, ["Time,CH1", *_rows(np.arange(N) * DT, _signal())]))
    assert capture.sample_interval == pytest.approx(DT) and capture.warnings == ()


def test_arrays_are_read_only(tmp_path: Path) -> None:
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (mV),CH2 (V)", *[f"{r},1" for r in _rows(np.arange(N) * DT, _signal())]]))
    for array in (capture.time, *(c.values for c in capture.channels)):
        with pytest.raises(ValueError):
            array[0] = 1.0


def test_frame_capture_does_not_follow_later_edits() -> None:
    frame = pd.DataFrame({"t": np.arange(N) * DT, "v": _signal()})
    capture = capture_from_frame(frame)
    frame.loc[0, "v"] = 99.0
    assert capture.channel("v").values[0] == 0.0


def test_channels_named_by_number(tmp_path: Path) -> None:
    lines = ["Time,1,2", *[f"{r},{v:.4f}" for r, v in zip(_rows(np.arange(N) * DT, _signal()), _signal())]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.time_column == "Time"
    assert [c.header for c in capture.channels] == ["1", "2"]


@pytest.mark.parametrize("name", ["capture.csv.gz", "capture.csv.zip", "capture.csv.xz", "capture.csv.bz2",
                                  "capture.tar"])
def test_plain_text_is_read_whatever_its_name_says(tmp_path: Path, name: str) -> None:
    # a download unpacked but still named as compressed: the bytes decide, not the name
    lines = ["Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())]
    capture = read_capture(_write(tmp_path, lines, name))
    np.testing.assert_allclose(capture.channels[0].values, _signal(), atol=1e-9)


def test_a_folder_named_tilde_is_not_the_home_folder(tmp_path: Path, monkeypatch) -> None:
    (tmp_path / "~").mkdir()
    _write(tmp_path / "~", ["Time (s),CH1 (V)", *_rows(np.arange(N) * DT, _signal())])
    monkeypatch.chdir(tmp_path)
    assert read_capture("~/capture.csv").rows == N


def test_rows_without_values_before_and_after_the_data_are_left_out(tmp_path: Path) -> None:
    # rows of empty cells at the ends of the table are dropped with a warning naming them;
    # an empty row inside the data is not (its cells are filled in and named by that warning)
    time = np.arange(N) * 1e-6
    body = _rows(time, _signal())
    body[N // 2] = ","
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", ",", ",", *body, ","]))
    assert capture.rows == N
    assert capture.time[0] == 0.0
    dropped = [w for w in capture.warnings if "without any value" in w]
    assert len(dropped) == 1 and dropped[0].startswith("3 rows") and "line 2" in dropped[0]
    assert any("filled by linear interpolation" in w for w in capture.warnings)


def _cut_file(tmp_path: Path, tail: str, ending: str, name: str = "cut.csv", encoding: str = "utf-8",
              compress: bool = False) -> Path:
    """A capture whose last line is ``tail`` and whose text ends with ``ending`` after it (a
    write cut short ends inside a line, with no line break)."""
    import gzip

    time = np.arange(N) * DT
    text = "\n".join(["# operator: Müller", "Time (s);CH1 (V);CH2 (V)",   # a letter beyond ASCII
                      *[f"{t:.12g};{v:.9f};{-v:.9f}" for t, v in zip(time, _signal())], tail]) + ending
    data = text.encode(encoding)
    path = tmp_path / name
    path.write_bytes(gzip.compress(data) if compress else data)
    return path


@pytest.mark.parametrize("encoding, compress", [("utf-8", False), ("utf-8", True), ("utf-16", False),
                                                ("latin-1", True)])
def test_a_last_line_cut_short_is_left_out_with_a_warning(tmp_path: Path, encoding: str, compress: bool) -> None:
    # the file ends inside its last line: CH1 cut to "0.3" (of 0.3125…) and CH2 missing; the row
    # is dropped whole (not filled in), and the warning names its line and the empty cell
    path = _cut_file(tmp_path, f"{N * DT:.12g};0.3", "", encoding=encoding, compress=compress)
    capture = read_capture(path)
    assert capture.rows == N
    cut = [w for w in capture.warnings if "cut short" in w]
    assert len(cut) == 1 and f"line {N + 3}" in cut[0] and "'CH2 (V)'" in cut[0] and "'CH1 (V)'" not in cut[0]
    assert not any("filled" in w for w in capture.warnings)
    np.testing.assert_allclose(capture.channels[0].values, _signal(), rtol=0, atol=1e-9)   # no 0.3 at the end


def test_a_complete_last_line_without_a_line_break_is_kept(tmp_path: Path) -> None:
    path = _cut_file(tmp_path, f"{N * DT:.12g};0.250000000;-0.250000000", "")   # printed as the rows above
    capture = read_capture(path)
    assert capture.rows == N + 1 and capture.channels[0].values[-1] == 0.25
    assert not capture.warnings


@pytest.mark.parametrize("cut", ["-0.25", "-0.", "-0", "-2.5e-0"])   # ("-2.5e" is no number: refused)
def test_a_last_number_cut_short_is_left_out_with_a_warning(tmp_path: Path, cut: str) -> None:
    # the file ends inside the last cell: printed shorter than the same column above it
    # (9 decimals; in the exponent case, 1 decimal and a two-digit exponent)
    time = np.arange(N) * DT
    exponent = "e" in cut
    rows = [f"{t:.12g};{v:.9f};" + (f"{-v:.1e}" if exponent else f"{-v:.9f}") for t, v in zip(time, _signal())]
    path = tmp_path / "cut.csv"
    path.write_text("\n".join(["Time (s);CH1 (V);CH2 (V)", *rows, f"{N * DT:.12g};0.250000000;{cut}"]))
    capture = read_capture(path)
    assert capture.rows == N
    cut_warnings = [w for w in capture.warnings if "cut short" in w]
    assert len(cut_warnings) == 1 and f"line {N + 2}" in cut_warnings[0] and repr(cut) in cut_warnings[0]


def test_a_last_number_in_a_column_printed_in_varying_form_is_not_judged(tmp_path: Path) -> None:
    # shortest-form printing (0.25, 0.3125, 1e-05 ...): the lines above do not agree, so a short
    # last cell is a value, not a cut
    time = np.arange(N) * DT
    rows = [f"{t:.12g};{v:.9f};{float(round(-v, 1 + i % 4))!r}" for i, (t, v) in enumerate(zip(time, _signal()))]
    path = tmp_path / "varying.csv"
    path.write_text("\n".join(["Time (s);CH1 (V);CH2 (V)", *rows, f"{N * DT:.12g};0.250000000;-0.5"]))
    capture = read_capture(path)
    assert capture.rows == N + 1 and capture.channels[1].values[-1] == -0.5
    assert not any("cut short" in w for w in capture.warnings)


@pytest.mark.parametrize("ending", ["\n", "\r\n", "\n\x1a"])
def test_an_empty_last_cell_on_a_line_with_its_break_is_filled_as_anywhere(tmp_path: Path, ending: str) -> None:
    path = _cut_file(tmp_path, f"{N * DT:.12g};0.25;", ending)
    capture = read_capture(path)
    assert capture.rows == N + 1 and capture.channels[0].values[-1] == 0.25
    assert not any("cut short" in w for w in capture.warnings)
    assert any("filled by linear interpolation" in w for w in capture.warnings)


@pytest.mark.parametrize("tail, kept_rows, warned", [
    (f"{N * DT:.12g};0.25;NaN", N + 1, "filled"),        # a missing-value word is written, not cut
    (";;", N, "without any value"),                       # no value at all: the rule for empty end rows
])
def test_a_written_missing_value_or_an_empty_row_at_the_end_is_not_taken_for_a_cut(
        tmp_path: Path, tail: str, kept_rows: int, warned: str) -> None:
    capture = read_capture(_cut_file(tmp_path, tail, ""))
    assert capture.rows == kept_rows
    assert not any("cut short" in w for w in capture.warnings)
    assert any(warned in w for w in capture.warnings)


@pytest.mark.parametrize("header, preamble, warned", [
    ("Time (s),CH1,CH2", ["CH1 scale,0.02 V/code", "CH10 scale,5 V/code"], ["CH1"]),   # CH10 is not CH1
    ("Time (s),CH1 (V),CH2 (V)", ["CH1 scale,0.02 V/code"], []),                       # a unit: as written
    ("Time (s),CH1,CH2", ["CH1 label,coil side"], []),                                 # no number: not a scale
])
def test_a_column_without_unit_that_the_preamble_scales_is_flagged(tmp_path: Path, header: str,
                                                                   preamble: list[str], warned: list[str]) -> None:
    # converter codes with their scale in the preamble: taken as volts they would make a ratio
    # of two channels wrong by the ratio of their scales, so the reader says so
    time = np.arange(N) * DT
    rows = [f"{t:.12g},{round(100 * v)},{round(-50 * v)}" for t, v in zip(time, _signal())]
    capture = read_capture(_write(tmp_path, [*preamble, header, *rows]))
    flagged = [w.split("'")[1] for w in capture.warnings if "has no unit" in w]
    assert flagged == warned


@pytest.mark.parametrize("codec", ["utf-16-le", "utf-16-be"])
def test_utf16_without_a_byte_order_mark_is_read(tmp_path: Path, codec: str) -> None:
    # a table saved as UTF-16 without its mark: NUL beside every ASCII character, on one side
    time = np.arange(N) * DT
    text = "\r\n".join(["Zeit (µs);U (V)", *[f"{t * 1e6:.6f};{v:.6f}".replace(".", ",")
                                            for t, v in zip(time, _signal())]]) + "\r\n"
    path = tmp_path / "wide.csv"
    path.write_bytes(text.encode(codec))
    capture = read_capture(path)
    assert capture.rows == N and capture.sample_interval == pytest.approx(DT)
    np.testing.assert_allclose(capture.channels[0].values, _signal(), atol=1e-6)


def test_sixteen_bit_binary_numbers_are_not_taken_for_utf16(tmp_path: Path) -> None:
    from wavefit.errors import CaptureError

    path = tmp_path / "codes.csv"
    (np.round(100 * _signal()).astype("<i2") + 128).tofile(path)   # small values: high bytes NUL
    with pytest.raises(CaptureError, match="looks binary"):
        read_capture(path)


def test_a_commented_header_that_fits_only_with_its_mark_names_the_index_column(tmp_path: Path) -> None:
    # '# Time CH1' over blank-separated rows of an index, a time and a value: dropping the mark
    # before the split left two names for three columns and refused the file (a review found
    # it); the mark counts as the first name again where only that fits
    lines = ["# Time CH1", *[f"{k} {k * DT:.9g} {v:.6f}" for k, v in enumerate(_signal())]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.sample_interval == pytest.approx(DT) and capture.time_column == "Time"
    assert [c.name for c in capture.channels] == ["0", "CH1"]
