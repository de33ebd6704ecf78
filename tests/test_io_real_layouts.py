"""Layouts that bench instruments and data loggers write, each built here by code with a known truth.

Every file is generated in the test (none is copied from anywhere); each test
checks the rows, the sample interval and the SI values the reader returns
against the values the file was written from.
"""
from __future__ import annotations

import datetime as dt
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from wavefit.errors import CaptureError
from wavefit.io import capture_from_frame, read_capture

N = 600
INTERVAL = 2e-6
TIME = np.arange(N) * INTERVAL
SIGNAL = np.round(1.0 - np.exp(-TIME / 2e-4), 4)
START = dt.datetime(2021, 5, 26, 11, 44, 55, 465797)


def _write(tmp_path: Path, lines: list[str], name: str = "capture.csv") -> Path:
    path = tmp_path / name
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


def _us_stamp(seconds: float) -> str:
    moment = START + dt.timedelta(seconds=float(seconds))
    return f"{moment.month}/{moment.day}/{moment.year}  {moment:%H:%M:%S.%f}"


def _assert_signal(capture, key: str | int = "CH1", values: np.ndarray = SIGNAL) -> None:
    np.testing.assert_allclose(capture.channel(key).values, values, rtol=0, atol=1e-12)


# -- clock-time stamps ------------------------------------------------------------------------


def test_clock_stamps_with_an_interval_in_the_preamble(tmp_path: Path) -> None:
    lines = ["Sample interval,2.000000E-06", "Points,600", "Time,CH1 (V)",
             *[f"{_us_stamp(t)},{v:.4f}" for t, v in zip(TIME, SIGNAL)]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.rows == N and capture.time_column == "Time"
    assert capture.sample_interval == pytest.approx(INTERVAL, rel=1e-9)
    np.testing.assert_allclose(capture.time, TIME, rtol=0, atol=1e-12)
    _assert_signal(capture)
    assert capture.warnings == ()


def test_clock_stamps_coarser_than_the_stated_interval_use_the_interval(tmp_path: Path) -> None:
    interval = 1e-4
    stamps = [(START + dt.timedelta(seconds=k * interval)) for k in range(N)]
    lines = ["Sampling period: 100 us", "Time,CH1 (V)",
             *[f"{s:%Y-%m-%d %H:%M:%S}.{s.microsecond // 1000:03d},{v:.4f}" for s, v in zip(stamps, SIGNAL)]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.rows == N
    assert capture.sample_interval == pytest.approx(interval, rel=1e-12)
    np.testing.assert_allclose(capture.time, np.arange(N) * interval, rtol=1e-12)
    (warning,) = capture.warnings
    assert "resolve only 0.001 s" in warning and "built from that interval" in warning


@pytest.mark.parametrize("form", ["iso", "time only", "am/pm", "across midnight"])
def test_clock_stamp_forms(tmp_path: Path, form: str) -> None:
    start = {"across midnight": dt.datetime(2022, 12, 31, 23, 59, 59, 999000)}.get(form, START)
    moments = [start + dt.timedelta(seconds=float(t)) for t in TIME]
    text = {
        "iso": lambda m: m.isoformat(timespec="microseconds") + "Z",
        "time only": lambda m: f"{m:%H:%M:%S.%f}",
        "am/pm": lambda m: f"{m:%m/%d/%Y %I:%M:%S.%f %p}",
        "across midnight": lambda m: f"{m:%d.%m.%Y %H:%M:%S.%f}",
    }[form]
    lines = ["stamp;CH1 (mV)", *[f"{text(m)};{1e3 * v:.1f}" for m, v in zip(moments, SIGNAL)]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.time_column == "stamp"
    np.testing.assert_allclose(capture.time, TIME, rtol=0, atol=1e-12)
    _assert_signal(capture)


def test_text_in_a_clock_column_is_named(tmp_path: Path) -> None:
    rows = [f"{_us_stamp(t)},{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    rows[300] = "overflow," + rows[300].split(",")[1]
    with pytest.raises(CaptureError, match="line 302: found 'overflow'"):
        read_capture(_write(tmp_path, ["Time,CH1", *rows]))


# -- sample interval in the preamble ----------------------------------------------------------


@pytest.mark.parametrize(("line", "interval"), [
    ("delta t,2E-6", 2e-6),
    ("delta t,2E-6,2E-6", 2e-6),          # once per column
    ("dt: 2 us", 2e-6),
    ("Increment,2.0e-06", 2e-6),
    ("X increment = 2e-6 s", 2e-6),
    ("Sample interval;0,000002", 2e-6),
    ("Sampling period,2 µs", 2e-6),
    ("Horizontal resolution,2.000E-06,s", 2e-6),
    ("Sample rate,500 kSa/s", 2e-6),
    ("Sampling frequency (kHz),500", 2e-6),
    ("Sample rate,500000,500000", 2e-6),
])
def test_interval_lines_in_the_preamble(tmp_path: Path, line: str, interval: float) -> None:
    sep = ";" if ";" in line else ","
    lines = [line, f"CH1 (V){sep}CH2 (V)", *[f"{v:.4f}{sep}{-v:.4f}".replace(".", "," if sep == ";" else ".")
                                             for v in SIGNAL]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.rows == N and capture.time_column is None
    assert capture.sample_interval == pytest.approx(interval, rel=1e-12)
    _assert_signal(capture)
    _assert_signal(capture, "CH2", -SIGNAL)


def test_per_column_intervals_that_disagree_are_not_used(tmp_path: Path) -> None:
    lines = ["delta t,2E-6,4E-6", "CH1 (V),CH2 (V)", *[f"{v:.4f},{v:.4f}" for v in SIGNAL]]
    with pytest.raises(CaptureError, match="no time column"):
        read_capture(_write(tmp_path, lines))


# -- a block of text and settings after the table ---------------------------------------------


def _settings_block(count: int) -> list[str]:
    block = ["Display settings", "Graph 1", "Min\t0\tMax\t5", "Units\ts\tV"]
    while len(block) < count:
        k = len(block)
        block += [f"Trace {k}\tcolour\t{k % 7}", f"{k}\t{k * 0.5}", f"Smoothing\t{k % 3}\tpoints"]
    return block[:count]


def test_settings_block_after_the_table_is_a_footer(tmp_path: Path) -> None:
    table = [f"{t:.6f}\t{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    capture = read_capture(_write(tmp_path, ["Time (s)\tCH1 (V)", *table, *_settings_block(60)], "log.txt"))
    assert capture.rows == N
    assert capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture)
    (warning,) = capture.warnings
    assert warning.startswith("60 lines after the table") and f"lines {N + 2}-{N + 61}" in warning
    assert capture.metadata["footer1"] == "Display settings"


def test_text_line_that_breaks_the_table_is_an_error(tmp_path: Path) -> None:
    table = [f"{t:.6f}\t{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    table.insert(400, "pause in recording")
    with pytest.raises(CaptureError, match="line 402: found 'pause in recording'"):
        read_capture(_write(tmp_path, ["Time (s)\tCH1 (V)", *table]))


def test_sample_rate_in_the_settings_block_gives_the_axis(tmp_path: Path) -> None:
    block = ["Settings", "Sample rate\t500000\tHz", "Channels\t2"]
    rows = [f"{v:.4f}\t{-v:.4f}" for v in SIGNAL]
    capture = read_capture(_write(tmp_path, ["CH1 (V)\tCH2 (V)", *rows, *block], "log.txt"))
    assert capture.sample_interval == pytest.approx(INTERVAL)
    assert capture.metadata["Sample rate"] == "500000\tHz"


# -- headers over several lines, count lines, no header ---------------------------------------


def test_name_symbol_and_unit_lines(tmp_path: Path) -> None:
    rows = [f"{t:.6f}\t{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    capture = read_capture(_write(tmp_path, ["Run 1", "Time\tPotential", "t\tU", "s\tmV", *rows], "log.txt"))
    assert capture.sample_interval == pytest.approx(INTERVAL)
    for key in ("U", 1):
        np.testing.assert_allclose(capture.channel(key).values, SIGNAL * 1e-3, atol=1e-15)
    assert capture.channel("U").unit == "V" and capture.channel("U").alias == "Potential"


def test_a_preamble_line_of_the_headers_width_finds_no_column(tmp_path: Path) -> None:
    rows = [f"{t:.6e},{v:.4f},{-v:.4f}" for t, v in zip(TIME, SIGNAL)]
    capture = read_capture(_write(tmp_path, ["Source,CH2,CH1", "t,V1,V2", *rows]))
    with pytest.raises(Exception, match="no column 'CH1'"):
        capture.channel("CH1")


def test_column_descriptions_above_a_count_line(tmp_path: Path) -> None:
    rows = [f"{t:.6e} {v:.4f}" for t, v in zip(TIME, SIGNAL)]
    lines = ["2 columns", "Time (s)", "Tank voltage (V)", str(N), *rows]
    capture = read_capture(_write(tmp_path, lines, "record.dat"))
    assert capture.rows == N and capture.time_position == 0
    assert capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture, 1)
    assert any("no header" in note for note in capture.notes)


def test_logger_text_with_column_blocks_a_count_line_and_numeric_settings_after(tmp_path: Path) -> None:
    """Column descriptions in blocks (name, symbol, unit, a line of display numbers), a count line,
    tab-separated rows with a trailing tab, then settings written as numbers and words."""
    blocks = ["logger v2", "Index", "k", "", "0 600 1 0 0", "Time", "t", "s", "0 0.01 0.001 0 1",
              "Voltage", "U1", "V", "-10 10 2 0 1", f"3 {N}"]
    rows = [f"{k}\t{t:.6g}\t{v:.4f}\t" for k, (t, v) in enumerate(zip(TIME, SIGNAL), 1)]
    after = ["1 0", "1 0 0", "-1", "-1", "0", "0 2E-6 0.0012 0 1", "Standard", "1 0 0.0012 3", "0"]
    capture = read_capture(_write(tmp_path, [*blocks, *rows, *after], "run.txt"), time_column=1)
    assert capture.rows == N and capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture, 2)
    np.testing.assert_array_equal(capture.channel(0).values, np.arange(1, N + 1))
    assert capture.warnings[-1].startswith(f"{len(after)} lines after the table")


def test_header_less_first_column_that_increases_uniformly_is_time(tmp_path: Path) -> None:
    capture = read_capture(_write(tmp_path, [f"{t:.6e},{v:.4f}" for t, v in zip(TIME, SIGNAL)]))
    assert capture.time_position == 0
    assert capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture, 1)
    (note,) = capture.notes
    assert "increases uniformly" in note and "time = 0" in note


def test_header_less_sample_counter_is_not_time(tmp_path: Path) -> None:
    lines = [f"{k},{v:.4f}" for k, v in enumerate(SIGNAL)]
    with pytest.raises(CaptureError, match="no header row"):
        read_capture(_write(tmp_path, lines))
    capture = read_capture(_write(tmp_path, lines), sample_interval=INTERVAL)
    np.testing.assert_array_equal(capture.channel(0).values, np.arange(N))


@pytest.mark.parametrize("key", [1, "1"])
def test_time_column_named_by_the_caller(tmp_path: Path, key: int | str) -> None:
    lines = [f"{v:.4f},{t:.6e}" for t, v in zip(TIME, SIGNAL)]
    capture = read_capture(_write(tmp_path, lines), time_column=key)
    assert capture.time_position == 1 and capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture, 0)


def test_time_column_index_counts_the_file_columns(tmp_path: Path) -> None:
    lines = ["No.,Time (s),CH1 (V)", *[f"{k},{t:.6e},{v:.4f}" for k, (t, v) in enumerate(zip(TIME, SIGNAL))]]
    capture = read_capture(_write(tmp_path, lines))
    assert capture.channel(0).header == "No." and capture.channel(2).header == "CH1 (V)"
    with pytest.raises(Exception, match="is the time column"):
        capture.channel(1)


# -- time printed with too few digits ---------------------------------------------------------


def test_time_with_three_significant_digits_is_rebuilt(tmp_path: Path) -> None:
    n, interval = 1400, 4e-8
    time = 4.05e-5 + np.arange(n) * interval  # one decade: the printing step is 1e-7 s throughout
    values = np.round(np.sin(np.arange(n) / 40.0), 4)
    rows = [f"{t:.2E},{v:.4f}" for t, v in zip(time, values)]
    stamps = [row.split(",")[0] for row in rows]
    assert sum(a == b for a, b in zip(stamps, stamps[1:])) > n / 3  # the stamps repeat
    capture = read_capture(_write(tmp_path, ["TIME,CH1", *rows]))
    assert capture.rows == n
    # stamps printed coarser than the interval: a sawtooth of rounding errors, of which only the
    # two ends count (two uniform errors over r = 1e-7 s): u = r/(sqrt(6)*(n-1)*dt)
    u = capture.interval_uncertainty
    assert u == pytest.approx(1e-7 / (np.sqrt(6.0) * (n - 1) * capture.sample_interval), rel=1e-9)
    assert abs(capture.sample_interval / interval - 1) < 3 * u
    _assert_signal(capture, values=values)
    (warning,) = capture.warnings
    assert "repeats its value" in warning and "rebuilt" in warning


@pytest.mark.parametrize("digits", [2, 4])
def test_rebuilt_interval_uncertainty_is_honest(tmp_path: Path, digits: int) -> None:
    """Over many record lengths, intervals and start times, the rebuilt interval's error stays
    within its stated uncertainty (rms of error/u at most 1.5, none beyond 4): the stated value
    is a bound-based one (two ends of each segment), so it covers generously."""
    rng = np.random.default_rng(digits)
    z = []
    for trial in range(40):
        n = int(rng.integers(300, 3000))
        interval = float(rng.uniform(2e-8, 9e-8))
        time = float(rng.uniform(1.1e-5, 1.5e-5)) + np.arange(n) * interval
        rows = [f"{t:.{digits}E},{k % 5}" for k, t in enumerate(time)]
        capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows], f"r{trial}.csv"))
        z.append((capture.sample_interval / interval - 1) / capture.interval_uncertainty)
    z = np.array(z)
    assert np.sqrt(np.mean(z ** 2)) < 1.5 and np.max(np.abs(z)) < 4


@pytest.mark.parametrize("digits", [7, 8])
def test_stamps_a_few_digits_short_give_their_rate_not_their_median(tmp_path: Path, digits: int) -> None:
    """Seven significant digits on 33.33 ns intervals (30 MS/s) vary the printed intervals by
    0.2 %, inside the limits for a uniform column, yet leave their median 1e-4 off the interval
    (3.333e-8 s, reported before with no uncertainty): the interval is now the grid fitted to the
    stamps, within its stated uncertainty, with a note and no warning."""
    n, interval = 4000, 1 / 30e6
    time = np.arange(n) * interval
    values = np.round(np.sin(np.arange(n) / 40.0), 4)
    rows = [f"{t:.{digits - 1}e},{v:.4f}" for t, v in zip(time, values)]
    printed = np.array([float(row.split(",")[0]) for row in rows])
    assert abs(np.median(np.diff(printed)) / interval - 1) > 1e-6  # the median is biased here
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    assert capture.warnings == ()
    (note,) = capture.notes
    assert "rebuilt as a uniform grid" in note
    u = capture.interval_uncertainty
    assert 0 < u < 1e-7
    assert abs(capture.sample_interval / interval - 1) < 3 * u
    _assert_signal(capture, values=values)


@pytest.mark.parametrize(("interval", "rows", "form", "resolution"),
                         [(1.5e-7, 20000, ".5g", "1e-07"), (1.5e-3, 1000, ".4g", "0.001")])
def test_stamps_printed_shortest_are_rebuilt_by_their_whole_column(
        tmp_path: Path, interval: float, rows: int, form: str, resolution: str) -> None:
    """A general format drops trailing zeros, so the first lines (the text the printing is read
    from) can show fewer digits than the column holds: 1.5e-07, 3e-07, ... then 1.0002e-03 with
    a step of 1e-7 s, two thirds of the interval (was refused as not uniform: stamps printed
    coarser than half an interval were not rebuilt unless they repeated); or fixed decimals 0.0015, 0.003 then 1.499 with four significant digits (was
    taken for steps of 1e-4 s, too fine for the departures, refused). Both are rounding: the
    axis is rebuilt, its interval within its stated uncertainty."""
    time = np.arange(rows) * interval
    values = np.round(np.sin(np.arange(rows) / 40.0), 4)
    lines = [f"{t:{form}},{v:.4f}" for t, v in zip(time, values)]
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *lines]))
    (warning,) = capture.warnings
    assert f"resolution of about {resolution} s" in warning and "rebuilt" in warning
    assert abs(capture.sample_interval / interval - 1) < 3 * capture.interval_uncertainty
    _assert_signal(capture, values=values)


def test_stamps_at_full_precision_keep_their_median_interval(tmp_path: Path) -> None:
    n, interval = 4000, 1 / 30e6
    rows = [f"{k * interval!r},{k % 5}" for k in range(n)]
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    assert capture.warnings == () and capture.notes == () and capture.interval_uncertainty == 0
    assert capture.sample_interval == np.median(np.diff(np.arange(n) * interval))


def test_time_that_really_stands_still_is_refused(tmp_path: Path) -> None:
    rows = [f"{t:.9e},{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    rows[200] = rows[199].split(",")[0] + "," + rows[200].split(",")[1]
    with pytest.raises(CaptureError, match="repeats the value"):
        read_capture(_write(tmp_path, ["Time (s),CH1", *rows]))


def test_time_truncated_to_three_digits_is_rebuilt(tmp_path: Path) -> None:
    n, interval = 1500, 4e-8
    time = np.arange(n) * interval
    printed = [f"{np.floor(t / 10 ** (np.floor(np.log10(t)) - 2)) * 10 ** (np.floor(np.log10(t)) - 2):.2E}"
               if t > 0 else "0" for t in time]  # cut, not rounded, to three significant digits
    values = np.round(np.cos(np.arange(n) / 25.0), 3)
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *[f"{a},{b:.3f}" for a, b in zip(printed, values)]]))
    assert capture.rows == n
    assert abs(capture.sample_interval / interval - 1) < 3 * capture.interval_uncertainty
    _assert_signal(capture, values=values)


# -- settings beside the data rows ------------------------------------------------------------


def test_settings_in_the_leftmost_columns(tmp_path: Path) -> None:
    settings = [("Record Length", "600", "Points"), ("Sample Interval", "2.000000e-06", "s"),
                ("Trigger Point", "100", "Samples"), ("", "", ""), ("", "", ""), ("Source", "CH1", ""),
                ("Vertical Units", "V", ""),
                ("Vertical Scale", "0.2", ""), ("Horizontal Offset", "-2e-4", "s")]
    rows = []
    for k, (t, v) in enumerate(zip(TIME, SIGNAL)):
        key, value, unit = settings[k] if k < len(settings) else ("", "", "")
        rows.append(f"{key},{value},{unit},{t:.6e},{v:.4f},")
    capture = read_capture(_write(tmp_path, rows))
    assert capture.rows == N  # no sample lost to the settings
    assert capture.time_position == 3 and capture.sample_interval == pytest.approx(INTERVAL)
    _assert_signal(capture, 4)
    assert capture.metadata["Sample Interval"] == "2.000000e-06 s"
    assert capture.metadata["Source"] == "CH1"


# -- frames whose index is time ---------------------------------------------------------------


@pytest.mark.parametrize("kind", ["datetime", "timedelta", "named float"])
def test_frame_index_as_time(kind: str) -> None:
    index = {
        "datetime": pd.DatetimeIndex([START + dt.timedelta(seconds=float(t)) for t in TIME]),
        "timedelta": pd.to_timedelta(np.round(TIME * 1e9).astype(np.int64), unit="ns"),
        "named float": pd.Index(TIME * 1e6, name="time (us)"),
    }[kind]
    capture = capture_from_frame(pd.DataFrame({"CH1 (V)": SIGNAL}, index=index))
    np.testing.assert_allclose(capture.time, TIME, rtol=0, atol=1e-12)
    _assert_signal(capture, 0)


def test_clock_stamps_with_missing_samples_are_refused(tmp_path: Path) -> None:
    kept = np.r_[0:300, 350:N]  # 50 samples missing
    lines = ["Sample interval,2.000000E-06", "Time,CH1 (V)",
             *[f"{_us_stamp(TIME[k])},{SIGNAL[k]:.4f}" for k in kept]]
    with pytest.raises(CaptureError, match="samples missing"):
        read_capture(_write(tmp_path, lines))


def test_index_of_a_capture_built_by_hand() -> None:
    from wavefit.io.capture import Capture, Channel

    capture = Capture(time=TIME, channels=(Channel("a", "a", "V", 1.0, SIGNAL), Channel("b", "b", "V", 1.0, -SIGNAL)),
                      sample_interval=INTERVAL, source="hand", time_column="t")
    assert capture.column_headers() == ["t", "a", "b"]
    assert capture.channel(2).header == "b"


def test_rows_of_the_table_after_a_text_line_are_not_a_footer(tmp_path: Path) -> None:
    rows = [f"{t:.6e},{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    with pytest.raises(CaptureError, match=f"line {N - 2}: found 'paused'"):
        read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows[:-4], "paused", *rows[-4:]]))
    with pytest.raises(CaptureError, match=f"line {N + 1}: 3 cells where the table has 2"):
        read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows[:-1], rows[-1] + ",7"]))


def test_a_number_in_a_clock_column_is_named_by_its_line(tmp_path: Path) -> None:
    rows = [f"{_us_stamp(t)},{v:.4f}" for t, v in zip(TIME, SIGNAL)]
    rows[498] = "12.5," + rows[498].split(",")[1]
    with pytest.raises(CaptureError, match="line 500: found '12.5'"):
        read_capture(_write(tmp_path, ["Time,CH1", *rows]))


def test_trailing_separators_on_some_rows_keep_the_table_whole(tmp_path: Path) -> None:
    rows = [f"{t:.6e},{v:.4f}" + ("," if k < 20 else "") for k, (t, v) in enumerate(zip(TIME, SIGNAL))]
    capture = read_capture(_write(tmp_path, ["Time (s),CH1 (V)", *rows]))
    assert capture.rows == N and capture.time_column == "Time (s)"
    _assert_signal(capture)
