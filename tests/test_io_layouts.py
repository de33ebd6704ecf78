"""The same waveform written in many generic layouts must read back identically."""
from __future__ import annotations

import gzip
import tempfile
from collections.abc import Callable
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from wavefit.io import read_capture

N = 240
DT = 2.5e-8
TIME = np.arange(N) * DT
VOLTS = 1.5 * np.sin(2 * np.pi * TIME / (N * DT / 3)) + 0.25
AMPS = 2e-3 * np.exp(-TIME / (N * DT / 4)) - 4e-4


def _table(cols: list[np.ndarray], sep: str = ",", decimal: str = ".", end: str = "") -> list[str]:
    """Rows of ``cols`` with 12 significant digits, in the given separator and decimal mark."""
    rows = []
    for values in zip(*cols):
        cells = [f"{v:.12g}" for v in values]
        if decimal == ",":
            cells = [c.replace(".", ",") for c in cells]
        rows.append(sep.join(cells) + end)
    return rows


def _si_table(sep: str = ",", **kw: str) -> list[str]:
    return _table([TIME, VOLTS, AMPS], sep, **kw)


Layout = Callable[[], tuple[bytes, dict]]


def comma() -> tuple[bytes, dict]:
    return "\n".join(["Time (s),CH1 (V),CH2 (A)", *_si_table()]).encode(), {}


def semicolon_decimal_comma() -> tuple[bytes, dict]:
    rows = _table([TIME * 1e6, VOLTS * 1e3, AMPS * 1e3], ";", ",")
    return "\n".join(["Zeit (µs);U (mV);I (mA)", *rows]).encode(), {}


def tab() -> tuple[bytes, dict]:
    return "\n".join(["time\tV (V)\tI (A)", *_si_table("\t")]).encode() + b"\n", {}


def spaces() -> tuple[bytes, dict]:
    rows = [f"  {t:16.9f}   {v:+.10e}    {i:.10e}" for t, v, i in zip(TIME * 1e9, VOLTS * 1e3, AMPS * 1e6)]
    return "\n".join(["   t [ns]          CH1 [mV]         CH2 [uA]", *rows]).encode(), {}


def utf8_bom() -> tuple[bytes, dict]:
    return b"\xef\xbb\xbf" + comma()[0], {}


def latin1_micro() -> tuple[bytes, dict]:
    rows = _table([TIME * 1e6, VOLTS, AMPS * 1e3])
    return "\n".join(["Time (µs),CH1 (V),CH2 (mA)", *rows]).encode("latin-1"), {}


def utf16_bom() -> tuple[bytes, dict]:
    return "\r\n".join(["Time (s),CH1 (V),CH2 (A)", *_si_table()]).encode("utf-16"), {}


def crlf() -> tuple[bytes, dict]:
    return "\r\n".join(["Time (s),CH1 (V),CH2 (A)", *_si_table()]).encode() + b"\r\n", {}


def bare_cr() -> tuple[bytes, dict]:
    return "\r".join(["Note,old line endings", "", "Time (s),CH1 (V),CH2 (A)", *_si_table()]).encode(), {}


def trailing_separators() -> tuple[bytes, dict]:
    rows = _table([TIME, VOLTS, AMPS], end=",")
    return "\n".join(["Time (s),CH1 (V),CH2 (A),", *rows]).encode(), {}


def blank_lines() -> tuple[bytes, dict]:
    rows = _si_table()
    body = rows[:50] + [""] + rows[50:120] + ["", "   "] + rows[120:]
    return "\n".join(["", "Time (s),CH1 (V),CH2 (A)", "", *body, "", ""]).encode(), {}


def key_value_preamble() -> tuple[bytes, dict]:
    preamble = ["Instrument,generic scope", "Channel 1 probe,10X", "Record length,240", "Vertical scale,0.5 V/div"]
    return "\n".join([*preamble, "", "Time (s),CH1 (V),CH2 (A)", *_si_table()]).encode(), {}


def free_text_preamble() -> tuple[bytes, dict]:
    preamble = ["Inductor step response", "recorded at the bench, 21 degrees", "# operator notes follow"]
    return "\n".join([*preamble, "Time (s);CH1 (V);CH2 (A)", *_si_table(";")]).encode(), {}


def headerless_interval() -> tuple[bytes, dict]:
    rows = _table([VOLTS, AMPS])
    return "\n".join(["Sample interval,2.5e-8", *rows]).encode(), {}


def preamble_interval_text() -> tuple[bytes, dict]:
    rows = _table([VOLTS * 1e3, AMPS * 1e3], "\t")
    return "\n".join(["Sample Interval: 25 ns", "CH1 (mV)\tCH2 (mA)", *rows]).encode(), {}


def preamble_rate() -> tuple[bytes, dict]:
    rows = _table([VOLTS, AMPS], ";", ",")
    return "\n".join(["Sampling rate;40 MSa/s", "CH1 (V);CH2 (A)", *rows]).encode(), {}


def preamble_dt() -> tuple[bytes, dict]:
    rows = _table([VOLTS, AMPS], ";")
    return "\n".join(["dt;2.5e-8", "CH1 (V);CH2 (A)", *rows]).encode(), {}


def interval_argument() -> tuple[bytes, dict]:
    return "\n".join(["CH1 (V),CH2 (A)", *_table([VOLTS, AMPS])]).encode(), {"sample_interval": DT}


def headerless_argument() -> tuple[bytes, dict]:
    return "\n".join(_table([VOLTS, AMPS], " ")).encode(), {"sample_interval": DT}


def gzip_suffix() -> tuple[bytes, dict]:
    return gzip.compress(comma()[0]), {"suffix": ".csv.gz"}


def gzip_magic_only() -> tuple[bytes, dict]:
    return gzip.compress(semicolon_decimal_comma()[0]), {"suffix": ".dat"}


def prefixed_units() -> tuple[bytes, dict]:
    rows = _table([TIME * 1e6, VOLTS * 1e3, AMPS * 1e6])
    return "\n".join(["Time (μs),CH1 (mV),CH2 (uA)", *rows]).encode(), {}


def units_row() -> tuple[bytes, dict]:
    rows = _table([TIME * 1e3, VOLTS, AMPS * 1e3])
    return "\n".join(["Time,CH1,CH2", "(ms),(V),(mA)", *rows]).encode(), {}


def units_row_words() -> tuple[bytes, dict]:
    return "\n".join(["X,CH1,CH2", "Second,Volt,Ampere", *_si_table()]).encode(), {}


def empty_cells_and_rule() -> tuple[bytes, dict]:
    rows = [f",{r.replace(',', ',,')}" for r in _si_table()]
    return "\n".join([",Time (s),,CH1 (V),,CH2 (A)", "-----,-----,-----", *rows]).encode(), {}


def slash_units() -> tuple[bytes, dict]:
    rows = _table([TIME * 1e9, VOLTS * 1e3, AMPS * 1e3], "|")
    return "\n".join(["t / ns|U / mV|I / mA", *rows]).encode(), {}


def quoted() -> tuple[bytes, dict]:
    rows = ['"' + r.replace(",", '","') + '"' for r in _si_table()]
    return "\n".join(['"Time (s)","CH1 (V)","CH2 (A)"', *rows]).encode(), {}


def quoted_decimal_comma() -> tuple[bytes, dict]:
    rows = ['"' + r.replace(",", "_").replace(".", ",").replace("_", '","') + '"' for r in _si_table()]
    return "\n".join(['"Time (s)","CH1 (V)","CH2 (A)"', *rows]).encode(), {}


def time_offset_column() -> tuple[bytes, dict]:
    # Time starts at 0 here too; a start offset is checked in test_io_reader.
    rows = _table([TIME * 1e3, VOLTS, AMPS])
    return "\n".join(["#Capture exported as text", "X [ms],Y1 [V],Y2 [A]", *rows]).encode(), {}


def commented_header_and_units() -> tuple[bytes, dict]:
    # names and units both behind a comment mark, split on blanks (the mark was a cell of its
    # own: no header was found, µs were read as seconds and mV as V)
    rows = [f"{t:.9f} {v:.12g} {i:.12g}" for t, v, i in zip(TIME * 1e6, VOLTS * 1e3, AMPS * 1e3)]
    return "\n".join(["# record 17", "# t CH1 CH2", "# us mV mA", *rows]).encode(), {}


def commented_header_units_row() -> tuple[bytes, dict]:
    rows = [f"  {t:14.9f}  {v:18.12g}  {i:18.12g}" for t, v, i in zip(TIME * 1e6, VOLTS * 1e3, AMPS * 1e3)]
    return "\n".join(["%  t   CH1   CH2", "   us   mV   mA", *rows]).encode(), {}


LAYOUTS: list[Layout] = [
    commented_header_and_units, commented_header_units_row,
    comma, semicolon_decimal_comma, tab, spaces, utf8_bom, latin1_micro, utf16_bom, crlf,
    bare_cr, trailing_separators, blank_lines, key_value_preamble, free_text_preamble,
    headerless_interval, preamble_interval_text, preamble_rate, preamble_dt, interval_argument,
    headerless_argument, gzip_suffix, gzip_magic_only, prefixed_units, units_row, units_row_words, empty_cells_and_rule, slash_units,
    quoted, quoted_decimal_comma, time_offset_column,
]


@pytest.mark.parametrize("layout", LAYOUTS, ids=[f.__name__ for f in LAYOUTS])
def test_every_layout_reads_the_same_waveform(layout: Layout, tmp_path: Path) -> None:
    data, options = layout()
    path = tmp_path / f"capture{options.pop('suffix', '.csv')}"
    path.write_bytes(data)
    capture = read_capture(path, **options)
    assert capture.rows == N
    assert capture.sample_interval == pytest.approx(DT, rel=1e-9)
    np.testing.assert_allclose(capture.time, TIME, rtol=0, atol=DT * 1e-6)
    channels = [c for c in capture.channels if c.unit != "s"]
    assert len(channels) == 2
    for channel, reference in zip(channels, (VOLTS, AMPS)):
        assert channel.values.dtype == np.float64
        np.testing.assert_allclose(channel.values, reference, rtol=1e-9, atol=1e-15)
        described = next(c for c in capture.describe()["columns"] if c["header"] == channel.header)
        assert described["min"] == pytest.approx(reference.min(), rel=1e-9)
        assert described["max"] == pytest.approx(reference.max(), rel=1e-9)


@pytest.mark.parametrize("preamble", [
    ["Record Length,240", "Sample Interval,2.5e-08", ""],   # a logger's export: a blank line, then the numbers
    ["Sample Interval: 25 ns"],
    ["Record Length;240", "Sampling rate;40 MSa/s"],
])
def test_one_column_under_its_interval_line(preamble: list[str], tmp_path: Path) -> None:
    # a table of one column has no header here: the line right above it is the preamble's
    # interval, whose one cell would fit a header of one column (it was taken as the column's
    # name, and the file refused as having "no time information")
    path = tmp_path / "logger.csv"
    path.write_text("\n".join([*preamble, *_table([VOLTS])]) + "\n")
    capture = read_capture(path)
    assert capture.rows == N
    assert capture.sample_interval == pytest.approx(DT, rel=1e-9)
    (channel,) = capture.channels
    np.testing.assert_allclose(channel.values, VOLTS, rtol=1e-9)


def test_a_one_column_header_is_still_a_header(tmp_path: Path) -> None:
    path = tmp_path / "logger.csv"
    path.write_text("\n".join(["Sample Interval,2.5e-08", "CH1 (V)", *_table([VOLTS])]) + "\n")
    capture = read_capture(path)
    assert [c.header for c in capture.channels] == ["CH1 (V)"]
    assert capture.sample_interval == pytest.approx(DT, rel=1e-9)


def test_units_found_in_each_layout(tmp_path: Path) -> None:
    path = tmp_path / "units.csv"
    path.write_bytes(prefixed_units()[0])
    capture = read_capture(path)
    assert capture.time_column == "Time (μs)"
    assert [(c.name, c.unit, c.scale) for c in capture.channels] == [("CH1", "V", 1e-3), ("CH2", "A", 1e-6)]


_SEPARATORS = {"comma": ",", "semicolon": ";", "tab": "\t", "spaces": "   ", "bar": "|"}


@st.composite
def random_capture(draw: st.DrawFn) -> tuple[bytes, dict, np.ndarray, list[np.ndarray], list[float]]:
    """A random table written in a random generic layout, with what it should read back as."""
    rows = draw(st.integers(16, 80))
    n_channels = draw(st.integers(1, 3))
    dt = draw(st.sampled_from([1e-9, 2e-9, 4e-8, 1e-6, 5e-5]))
    t0 = draw(st.sampled_from([0.0, -1e-6, 3e-6]))
    values = [
        np.array(draw(st.lists(st.floats(-1e3, 1e3, allow_nan=False, width=32), min_size=rows, max_size=rows)))
        for _ in range(n_channels)
    ]
    units = draw(st.lists(st.sampled_from([("V", 1.0), ("mV", 1e-3), ("A", 1.0), ("mA", 1e-3), ("µA", 1e-6)]),
                          min_size=n_channels, max_size=n_channels))
    sep = _SEPARATORS[draw(st.sampled_from(sorted(_SEPARATORS)))]
    decimal = draw(st.sampled_from([".", ","])) if sep.strip() != "," else "."
    time_source = draw(st.sampled_from(["column", "preamble", "argument"]))
    trailing = sep if sep.strip() and draw(st.booleans()) else ""
    newline = draw(st.sampled_from(["\n", "\r\n", "\r"]))
    quote = '"' if draw(st.booleans()) else ""
    blank_after = draw(st.lists(st.integers(0, rows - 1), max_size=3))
    preamble = draw(st.lists(st.sampled_from(["Device,bench scope", "Free text line", "Probe: 10X"]), max_size=3))
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "latin-1"]))
    compress = draw(st.booleans())

    def fmt(x: float) -> str:
        text = repr(float(x))
        return text.replace(".", ",") if decimal == "," else text

    time = t0 + np.arange(rows) * dt
    headers = [f"CH{k + 1} ({u})" for k, (u, _) in enumerate(units)]
    columns = list(values)
    options: dict = {}
    if time_source == "column":
        headers.insert(0, "Time (s)")
        columns.insert(0, time)
    elif time_source == "preamble":
        preamble = [*preamble, f"Sample interval: {fmt(dt)} s"]
        time = np.arange(rows) * dt
    else:
        options["sample_interval"] = dt
        time = np.arange(rows) * dt
    lines = [*preamble, sep.join(f"{quote}{h}{quote}" for h in headers) + trailing]
    for k, row in enumerate(zip(*columns)):
        lines.append(sep.join(f"{quote}{fmt(v)}{quote}" for v in row) + trailing)
        lines += [""] * blank_after.count(k)
    data = newline.join(lines).encode(encoding)
    if compress:
        data = gzip.compress(data)
    expected = [v * scale for v, (_, scale) in zip(values, units)]
    return data, options, time, expected, [dt]


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(random_capture())
def test_random_layouts_round_trip(case: tuple[bytes, dict, np.ndarray, list[np.ndarray], list[float]]) -> None:
    data, options, time, expected, (dt,) = case
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / "random.csv"
        path.write_bytes(data)
        capture = read_capture(path, **options)
    assert capture.rows == time.size
    assert capture.sample_interval == pytest.approx(dt, rel=1e-9)
    np.testing.assert_allclose(capture.time, time, rtol=0, atol=dt * 1e-6)
    assert len(capture.channels) == len(expected)
    for channel, values in zip(capture.channels, expected):
        np.testing.assert_allclose(channel.values, values, rtol=1e-12, atol=0)
