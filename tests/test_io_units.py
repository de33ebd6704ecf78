"""Units in headers, time-like names, preamble pairs and cell rules, tested on their own."""
from __future__ import annotations

import pytest
from hypothesis import given
from hypothesis import strategies as st

from wavefit.io.cells import WHITESPACE, is_missing, is_number, row_pattern, split_line
from wavefit.io.column_units import is_time_name, parse_header, parse_unit
from wavefit.io.preamble import read_preamble, split_key_value


@pytest.mark.parametrize(
    ("header", "name", "unit", "scale"),
    [
        ("Time (s)", "Time", "s", 1.0),
        ("Time [us]", "Time", "s", 1e-6),
        ("Time [\u00b5s]", "Time", "s", 1e-6),
        ("Time [\u03bcs]", "Time", "s", 1e-6),
        ("Time(ms)", "Time", "s", 1e-3),
        ("CH1 (mV)", "CH1", "V", 1e-3),
        ("I (mA)", "I", "A", 1e-3),
        ("I {uA}", "I", "A", 1e-6),
        ("R (k\u03a9)", "R", "ohm", 1e3),
        ("R (mOhm)", "R", "ohm", 1e-3),
        ("f (MHz)", "f", "Hz", 1e6),
        ("t / ns", "t", "s", 1e-9),
        ("U/mV", "U", "V", 1e-3),
        ("V/mV", "V", "V", 1e-3),
        ("time_us", "time", "s", 1e-6),
        ("Time", "Time", "", 1.0),
        ("CH1", "CH1", "", 1.0),
        ("V/div", "V/div", "", 1.0),
        ("mV/ms", "mV/ms", "", 1.0),
        ("V(out)", "V(out)", "", 1.0),
        ("I(L1)", "I(L1)", "", 1.0),
        ("CH1 ()", "CH1", "", 1.0),
    ],
)
def test_known_header_forms(header: str, name: str, unit: str, scale: float) -> None:
    parsed = parse_header(header)
    assert (parsed.name, parsed.unit, parsed.known) == (name, unit, True)
    assert parsed.scale == pytest.approx(scale, rel=1e-15)


@pytest.mark.parametrize(("header", "unit"), [("Scale (V/div)", "V/div"), ("CH2 (probe x10)", "probe x10"), ("X [pts]", "pts")])
def test_unknown_units_are_kept_verbatim(header: str, unit: str) -> None:
    parsed = parse_header(header)
    assert (parsed.unit, parsed.scale, parsed.known) == (unit, 1.0, False)


@pytest.mark.parametrize(
    ("text", "expected"),
    [("MSa/s", ("Hz", 1e6)), ("GS/s", ("Hz", 1e9)), ("ns", ("s", 1e-9)), ("kV", ("V", 1e3)),
     ("MV", ("V", 1e6)), ("Second", ("s", 1.0)), ("mVolt", ("V", 1e-3)), ("kOHM", ("ohm", 1e3))],
)
def test_parse_unit(text: str, expected: tuple[str, float]) -> None:
    assert parse_unit(text) == expected


@pytest.mark.parametrize("text", ["div", "Mx", "", "m", "V/div", "10X"])
def test_parse_unit_refuses_non_units(text: str) -> None:
    assert parse_unit(text) is None


@pytest.mark.parametrize("name", ["t", "Time", "TIME", "time stamp", "Zeit", "elapsed_time", "Seconds"])
def test_time_names(name: str) -> None:
    assert is_time_name(name)


@pytest.mark.parametrize("name", ["CH1", "Time/div", "timer", "Index", "X"])
def test_not_time_names(name: str) -> None:
    assert not is_time_name(name)


@pytest.mark.parametrize(
    ("line", "sep", "pair"),
    [
        ("Sample interval,1e-8", ",", ("Sample interval", "1e-8")),
        ("Sample Interval: 10 ns", ",", ("Sample Interval", "10 ns")),
        ("dt;1e-9", ",", ("dt", "1e-9")),
        ("Sample interval;1,5E-9", ",", ("Sample interval", "1,5E-9")),
        ('"Probe","10X",,', ",", ("Probe", "10X")),
        ("# Operator = me", "\t", ("Operator", "me")),
        ("Sample interval 10 ns", WHITESPACE, ("Sample interval", "10 ns")),
        ("Time: 10:30:01", ",", ("Time", "10:30:01")),
        ("Recorded 2024-05-01 10:30", ",", None),
        ("recorded at 21 degrees", WHITESPACE, None),
        ("Just a sentence", ",", None),
    ],
)
def test_key_value_split(line: str, sep: str, pair: tuple[str, str] | None) -> None:
    assert split_key_value(line, sep) == pair


@pytest.mark.parametrize(
    ("line", "seconds"),
    [
        ("Sample interval,1e-8", 1e-8),
        ("Sample Interval: 10 ns", 1e-8),
        ("dt;1e-9", 1e-9),
        ("Sampling rate,100 MSa/s", 1e-8),
        ("Sample rate,1e8", 1e-8),
        ("Sample rate (MHz),250", 4e-9),
        ("Sample interval (ns),2,5", 2.5e-9),
        ("Fs: 1 GHz", 1e-9),
    ],
)
def test_preamble_sample_interval(line: str, seconds: float) -> None:
    found = read_preamble([(1, line)], ",").sample_interval
    assert found == pytest.approx(seconds, rel=1e-12)


@pytest.mark.parametrize("line", ["Time/div,1 us", "Horizontal scale,10 ns/div", "Record length,1000"])
def test_preamble_lines_that_are_not_an_interval(line: str) -> None:
    preamble = read_preamble([(1, line)], ",")
    assert preamble.sample_interval is None and preamble.warnings == ()


def test_duplicate_keys_are_kept() -> None:
    metadata = read_preamble([(1, "Probe,10X"), (2, "Probe,1X")], ",").metadata
    assert metadata == {"Probe": "10X", "Probe (2)": "1X"}


@pytest.mark.parametrize("cell", ["1", "-1.5", "+.5", "5.", "1e-9", "1.5E+03", " 2 ", "inf", "-Infinity"])
def test_numbers(cell: str) -> None:
    assert is_number(cell, ".")
    assert is_number(cell.replace(".", ","), ",")


@pytest.mark.parametrize("cell", ["1.5e", "0x10", "1 e5", "1,5", "abc", "1.2.3", "\u0661"])
def test_not_numbers(cell: str) -> None:
    assert not is_number(cell, ".")


def test_missing_tokens() -> None:
    assert all(is_missing(c) for c in ["", " ", "NaN", "nan", "N/A", "#N/A"])
    assert not is_missing("0")


def test_split_line_honours_quotes() -> None:
    assert split_line('"a, b", 1 ,2', ",") == ["a, b", "1", "2"]
    assert split_line('  "Time (s)"   "CH1 (V)"  ', WHITESPACE) == ["Time (s)", "CH1 (V)"]
    assert split_line("1\t\t2", "\t") == ["1", "", "2"]


_CELLS = st.sampled_from(["1", "-2.5", "3e-9", "", "NaN", "x", "1.2.3", " 4 ", "inf", "#N/A", "5,5"])


@given(st.lists(_CELLS, min_size=1, max_size=6), st.sampled_from([",", ";", "\t", WHITESPACE]), st.sampled_from([".", ","]))
def test_fast_row_pattern_agrees_with_the_cell_rules(cells: list[str], sep: str, decimal: str) -> None:
    if sep == decimal:
        return
    joiner = "  " if sep == WHITESPACE else sep
    line = joiner.join(cells)
    by_cells = all(is_number(c, decimal) or is_missing(c) for c in split_line(line, sep))
    if row_pattern(sep, decimal).fullmatch(line):
        assert by_cells
