"""Setup files (TOML) and dicts."""
import math
from pathlib import Path

import pytest

from wavefit.errors import SetupError
from wavefit.setup import load_setup

GOOD = """
method = "rl-step"
sample_interval = "10 ns"
[columns]
time = "Time (s)"
sense = "CH2"
drive = 1
[parts]
sense_resistor = "10 ohm ±0.1%"
[instrument]
timebase = "±25 ppm"
vertical_gain = "±1.5%"
vertical_gain_sense = "±1% k=2"
"""


def test_toml_setup_is_parsed(tmp_path):
    path = tmp_path / "s.toml"
    path.write_text(GOOD, encoding="utf-8")
    s = load_setup(path)
    assert s.method == "rl-step"
    assert s.sample_interval == pytest.approx(1e-8)
    assert s.columns == {"time": "Time (s)", "sense": "CH2", "drive": 1}
    assert s.parts["sense_resistor"].value == 10.0
    assert s.timebase.standard_uncertainty == pytest.approx(25e-6 / math.sqrt(3))
    assert s.gain_for("drive").standard_uncertainty == pytest.approx(0.015 / math.sqrt(3))
    assert s.gain_for("sense").standard_uncertainty == pytest.approx(0.005)


def test_defaults_describe_a_bench_scope():
    s = load_setup({"method": "rl-step", "parts": {"sense_resistor": 10}})
    assert s.timebase.fraction == pytest.approx(25e-6)
    assert s.gain_for("sense").fraction == pytest.approx(0.02)


@pytest.mark.parametrize("data, phrase", [
    ({"method": "rl-step", "colums": {}}, "unknown setup key 'colums'"),
    ({"parts": {}}, "'method' is missing"),
    ({"method": 1}, "'method' must be a method's name in quotes, got 1"),  # was "'method' is missing"
    ({"method": "rl-step", "instrument": {"time_base": "1%"}}, "unknown [instrument] key 'time_base'"),
    ({"method": "rl-step", "parts": {"sense_resistor": "ten"}}, "part 'sense_resistor'"),
    ({"method": "rl-step", "sample_interval": -1}, "must be positive"),
    ({"method": "rl-step", "columns": {"sense": 1.5}}, "0-based index"),
    # a top-level key written after [parts] (TOML puts it in that table): it was read as a part
    ({"method": "lc-sweep", "parts": {"parallel_load": "1 Gohm", "captures": "x"}},
     "'captures' is in [parts], not at the top level: TOML puts every key after a [parts] line into that table"),
    ({"parts": {}, "options": {"method": "rl-step"}}, "'method' is in [options], not at the top level"),
])
def test_bad_setups_name_the_problem(data, phrase):
    with pytest.raises(SetupError) as err:
        load_setup(data)
    assert phrase in str(err.value)
    assert "\n" not in str(err.value)


def test_invalid_toml_is_a_setup_error(tmp_path):
    path = tmp_path / "bad.toml"
    path.write_text("method = \n", encoding="utf-8")
    with pytest.raises(SetupError, match="not valid TOML"):
        load_setup(path)


@pytest.mark.parametrize("text", ["", "\n  \n"])
def test_empty_setup_file_says_so(tmp_path, text):
    # `wavefit suggest first.csv > coil.toml` that is refused leaves an empty file; it was
    # reported as "'method' is missing"
    path = tmp_path / "coil.toml"
    path.write_text(text)
    with pytest.raises(SetupError, match="is empty"):
        load_setup(path)


def test_missing_setup_file(tmp_path):
    with pytest.raises(SetupError, match="setup file .*nope.toml does not exist"):
        load_setup(tmp_path / "nope.toml")


def test_capture_entries_resolve_relative_to_setup(tmp_path):
    path = tmp_path / "sweep.toml"
    path.write_text('method = "lc-sweep"\n[[captures]]\nfile = "a.csv"\ntank_capacitor = "1 nF ±1%"\n',
                    encoding="utf-8")
    s = load_setup(path)
    assert s.captures[0].file == tmp_path / "a.csv"
    assert s.captures[0].parts["tank_capacitor"].value == pytest.approx(1e-9)


@pytest.mark.parametrize("text, u", [("exact", 0.0), ("u=0", 0.0), ("u=10 ppm", 10e-6), ("u = 1%", 0.01),
                                     ("±25 ppm", 25e-6 / math.sqrt(3)), ("±1% k=2", 0.005)])
def test_instrument_figures_in_every_written_form(text, u):
    # ±a rectangular (GUM 4.3.7), a with k (GUM 4.3.3), u given directly, or exact for studies
    s = load_setup({"method": "rl-step", "instrument": {"timebase": text, "vertical_gain": text}})
    assert s.timebase.standard_uncertainty == pytest.approx(u, abs=1e-15)
    assert s.gain_for("sense").standard_uncertainty == pytest.approx(u, abs=1e-15)


# -- unknown keys in every table ------------------------------------------------------------

RL_STEP = {"method": "rl-step", "columns": {"sense": "CH2", "drive": "CH1"},
           "parts": {"sense_resistor": "10 ohm ±0.1%"}}


@pytest.mark.parametrize("change, phrase", [
    ({"colums": {}}, "unknown setup key 'colums'; valid: method, sample_interval, columns"),
    ({"instrument": {"timebase": "±25 ppm", "time_base": "1%"}},
     "unknown [instrument] key 'time_base'; valid: timebase, vertical_gain, vertical_gain_<role>"),
    ({"instrument": {"vertical_gain_": "±1%"}}, "unknown [instrument] key 'vertical_gain_'"),
    ({"columns": {"sense": {"file": "b.csv", "column": 1, "colum": 2}}},
     "unknown key in [columns] sense table 'colum'; valid: file, column"),
    ({"captures": [{"file": "a.csv"}, "b.csv"]}, "array of tables"),
    ({"captures": {"file": "a.csv"}}, "array of tables"),
    ({"captures": [{"tank_capacitor": "1 nF"}]}, "needs a 'file' key"),
])
def test_unknown_keys_are_named_with_the_valid_ones(change, phrase):
    with pytest.raises(SetupError) as err:
        load_setup({**RL_STEP, **change})
    assert phrase in str(err.value) and "\n" not in str(err.value)


# -- instrument figures ---------------------------------------------------------------------

@pytest.mark.parametrize("figure", [2, 0.02, "2", "0.02", "±2 V", "±2%, k=0.5", "±1% u=1%", True])
def test_instrument_figures_that_could_be_misread_are_refused(figure):
    # a bare 2 could be 2 % or a fraction of 2; JCGM 100:2008 2.3.6: k below 1 is no expansion
    with pytest.raises(SetupError, match="vertical_gain"):
        load_setup({**RL_STEP, "instrument": {"vertical_gain": figure}})


def test_zero_instrument_figure_is_exact():
    s = load_setup({**RL_STEP, "instrument": {"timebase": 0, "vertical_gain": "±0%"}})
    assert s.timebase.standard_uncertainty == 0.0 and s.gain_for("sense").standard_uncertainty == 0.0


# -- parts ----------------------------------------------------------------------------------

@pytest.mark.parametrize("text, value, u", [
    ("10R", 10.0, 0.0),                              # IEC 60062: R marks the decimal place (was 1e28)
    ("10 ohms 1% k=2", 10.0, 0.1 / 2),               # JCGM 100:2008 4.3.3 (was read as 2 ohm)
    ("50,0 ohm ±1%", 50.0, 0.5 / math.sqrt(3)),      # decimal comma; 4.3.7 (was read as 500 ohm)
])
def test_parts_that_were_misread_are_read_right(text, value, u):
    part = load_setup({**RL_STEP, "parts": {"sense_resistor": text}}).parts["sense_resistor"]
    assert (part.value, part.unit) == (value, "ohm")
    assert part.standard_uncertainty == pytest.approx(u, abs=1e-15)


@pytest.mark.parametrize("text", ["10 ohm 1", "1,000 ohm", "1e400 ohm", "nan"])
def test_unreadable_part_names_the_part_and_the_accepted_forms(text):
    with pytest.raises(SetupError) as err:
        load_setup({**RL_STEP, "parts": {"sense_resistor": text}})
    message = str(err.value)
    assert message.startswith("<dict>: part 'sense_resistor': cannot read")
    assert '"10 ohm ±1%", "4R7 ±1% k=2", "4.7 nF ±5%"' in message and "\n" not in message


def test_non_finite_toml_numbers_are_refused():
    for value in (math.inf, math.nan):
        with pytest.raises(SetupError, match="not a finite number"):
            load_setup({**RL_STEP, "parts": {"sense_resistor": value}})


# -- time axis ------------------------------------------------------------------------------

@pytest.mark.parametrize("value, seconds", [("10 ns", 1e-8), ("1.5us", 1.5e-6), ("2 µs", 2e-6), (1e-8, 1e-8),
                                            ("10n", 1e-8)])
def test_sample_interval_with_units(value, seconds):
    assert load_setup({**RL_STEP, "sample_interval": value}).sample_interval == pytest.approx(seconds)


@pytest.mark.parametrize("value", ["10", "10 V", "1e400 s", "10R"])
def test_sample_interval_text_needs_a_time_unit(value):
    with pytest.raises(SetupError, match="sample_interval"):
        load_setup({**RL_STEP, "sample_interval": value})


# -- columns --------------------------------------------------------------------------------

@pytest.mark.parametrize("time", [0, "Time", "Time (s)"])
def test_time_column_by_header_or_index(time):
    assert load_setup({**RL_STEP, "columns": {"time": time, "sense": 1}}).columns["time"] == time


def test_column_from_another_file_is_relative_to_the_setup(tmp_path):
    folder = tmp_path / "bench"
    folder.mkdir()
    path = folder / "s.toml"
    path.write_text('method = "rl-step"\n[columns]\nsense = "CH2"\ndrive = { file = "ch1.csv", column = 1 }\n'
                    'probe = { file = "/data/p.csv", column = "CH3" }\n', encoding="utf-8")
    s = load_setup(path)
    assert s.columns == {"sense": "CH2", "drive": 1, "probe": "CH3"}
    assert s.column_files == {"drive": folder / "ch1.csv", "probe": Path("/data/p.csv")}
    assert all(p.is_absolute() for p in s.column_files.values())


def test_column_file_of_a_dict_setup_is_relative_to_the_working_folder():
    s = load_setup({**RL_STEP, "columns": {"sense": {"file": "ch2.csv", "column": "CH2"}}})
    assert s.column_files["sense"] == Path.cwd() / "ch2.csv" and s.columns["sense"] == "CH2"


@pytest.mark.parametrize("entry, phrase", [
    ({"file": "ch1.csv"}, "needs both 'file' and 'column'"),
    ({"column": 1}, "needs both 'file' and 'column'"),
    ({"file": "", "column": 1}, "'file' must be a file name"),
    ({"file": "ch1.csv", "column": -1}, "0-based index"),
    ({"file": "ch1.csv", "column": True}, "0-based index"),
    ({"file": "ch1.csv", "column": 1.5}, "0-based index"),
])
def test_bad_column_tables(entry, phrase):
    with pytest.raises(SetupError, match=phrase):
        load_setup({**RL_STEP, "columns": {"drive": entry}})


def test_time_cannot_come_from_another_file():
    with pytest.raises(SetupError, match="time comes from the capture itself"):
        load_setup({**RL_STEP, "columns": {"time": {"file": "t.csv", "column": 0}}})


def test_calibration_files_are_beside_the_setup(tmp_path):
    path = tmp_path / "setup.toml"
    path.write_text(GOOD + '[calibration]\nchannels = "cal/channels.toml"\nmax_age_days = 30\n', encoding="utf-8")
    setup = load_setup(path)
    assert setup.calibration.channels == (tmp_path / "cal" / "channels.toml").absolute()
    assert setup.calibration.reference is None and setup.calibration.max_age_days == 30.0
    assert load_setup({"method": "rl-step"}).calibration.channels is None


@pytest.mark.parametrize("table, phrase", [
    ({"channel": "c.toml"}, "unknown [calibration] key 'channel'"),
    ({"channels": ""}, "must be a file name"),
    ({"channels": 3}, "must be a file name"),
    ({"max_age_days": 0}, "positive number of days"),
    ({"max_age_days": True}, "positive number of days"),
    ({"max_age_days": "30 d"}, "positive number of days"),
])
def test_bad_calibration_tables_name_the_problem(table, phrase):
    with pytest.raises(SetupError, match=phrase.replace("[", r"\[").replace("]", r"\]")):
        load_setup({"method": "rl-step", "calibration": table})
