"""Checks of a setup against a method (``Method.check_setup``) and time options with units."""
import math

import numpy as np
import pytest

from wavefit.cli import main
from wavefit.errors import SetupError
from wavefit.measurement import CaptureCount
from wavefit.methods import get_method
from wavefit.methods.base import Method, PartSpec, parse_time_option
from wavefit.setup import load_setup


class TwoChannel(Method):
    """A method declared for these tests only (not registered)."""

    name = "two-channel"
    roles = {"sense": True, "drive": False}
    parts = {"sense_resistor": PartSpec("ohm", True, "shunt"), "tank_capacitor": PartSpec("F", False, "tank")}
    options = {"skip": "auto", "fit_start": None}


class FromSetupCaptures(TwoChannel):
    name = "from-setup"
    capture_count = CaptureCount(minimum=2, maximum=None)


def _setup(**changes):
    data = {"method": "two-channel", "columns": {"sense": "CH2", "drive": "CH1"},
            "parts": {"sense_resistor": "10 ohm ±0.1%"}}
    data.update(changes)
    return load_setup(data)


def test_a_complete_setup_passes():
    TwoChannel().check_setup(_setup(instrument={"vertical_gain_drive": "±1%", "vertical_gain_sense": "u=0.5%"},
                                    options={"skip": "30 ns"}))


@pytest.mark.parametrize("changes, phrase", [
    ({"instrument": {"vertical_gain_CH2": "±0.1%"}},
     "unknown [instrument] key 'vertical_gain_CH2' (method 'two-channel' has no role 'CH2'); "
     "valid: timebase, vertical_gain, vertical_gain_sense, vertical_gain_drive"),
    ({"instrument": {"vertical_gain_time": "±0.1%"}}, "has no role 'time'"),
    ({"columns": {"sense": "CH2", "drvie": "CH1"}}, "unknown role in [columns] 'drvie'; valid: time, sense, drive"),
    ({"parts": {"sense_resistor": "10 ohm", "shunt": "1 ohm"}},
     "unknown part in [parts] 'shunt'; valid: sense_resistor, tank_capacitor"),
    ({"options": {"skipp": 1}}, "unknown option in [options] 'skipp'; valid: skip, fit_start"),
    ({"captures": [{"file": "a.csv"}]}, "takes its capture from the command line, not from [[captures]]"),
    ({"parts": {"sense_resistor": "4n7"}}, "part 'sense_resistor' = '4n7' is in 'F', expected 'ohm'"),
    ({"parts": {"sense_resistor": "-10 ohm"}}, "must be positive"),
    # unit slips that gave a coil of femtohenries with exit 0: a plain 472 (the three-digit
    # code of 4.7 nF) read as 472 F, an old "MF" for microfarads read as megafarads
    ({"parts": {"sense_resistor": "10 ohm", "tank_capacitor": "472"}}, "'472' is 472 F, far above any tank"),
    ({"parts": {"sense_resistor": "10 ohm", "tank_capacitor": "4.7 MF"}}, "is 4.7e+06 F, far above"),
    ({"parts": {"sense_resistor": "10 ohm", "tank_capacitor": "0.47"}}, "a plain number is in farads"),
    # with its unit written the prefix is the slip ("10 mF" was told a plain number is in farads)
    ({"parts": {"sense_resistor": "10 ohm", "tank_capacitor": "10 mF"}}, "far above any tank, probe or winding "
                                                                         "capacitance: check its prefix"),
])
def test_unknown_or_wrong_keys_list_the_valid_ones(changes, phrase):
    with pytest.raises(SetupError) as err:
        TwoChannel().check_setup(_setup(**changes))
    assert phrase in str(err.value) and "\n" not in str(err.value)


def test_large_but_possible_capacitors_pass():
    for value in ("100 uF ±5%", "4n7", "2.2e-3"):
        TwoChannel().check_setup(_setup(parts={"sense_resistor": "10 ohm", "tank_capacitor": value}))


def test_capture_entries_accept_only_file_and_parts():
    setup = _setup(captures=[{"file": "a.csv", "tank_capacitor": "1 nF"}, {"file": "b.csv", "tank_capcitor": "2n2"}])
    with pytest.raises(SetupError) as err:
        FromSetupCaptures().check_setup(setup)
    assert ("unknown key in [[captures]] entry 2 'tank_capcitor'; valid: file, sense_resistor, tank_capacitor"
            in str(err.value))
    FromSetupCaptures().check_setup(_setup(captures=[{"file": "a.csv", "tank_capacitor": "1 nF"}]))


@pytest.mark.parametrize("start, end", [("600 us", "30 us"), ("30 us", "30 us")])
def test_a_ring_fit_window_that_ends_before_it_starts_is_a_setup_error(start, end):
    # was refused at analysis (exit 4) as a window of too few samples, blaming the tank column
    setup = load_setup({"method": "lc-ring", "columns": {"tank": "CH1"}, "parts": {"tank_capacitor": "10 nF"},
                        "options": {"fit_start": start, "fit_end": end}})
    with pytest.raises(SetupError, match="option fit_end .* must come after fit_start"):
        get_method("lc-ring").check_setup(setup)


def test_a_part_every_entry_gives_is_not_also_taken_in_parts():
    # docs/setup-file.md: "Every key is checked; nothing is ignored" (the [parts] value was
    # silently overridden by every entry's own)
    entries = [{"file": "a.csv", "tank_capacitor": "1 nF"}, {"file": "b.csv", "tank_capacitor": "2n2"}]
    setup = _setup(parts={"sense_resistor": "10 ohm", "tank_capacitor": "4.7 nF"}, captures=entries)
    with pytest.raises(SetupError, match="part 'tank_capacitor' in \\[parts\\] is given by every"):
        FromSetupCaptures().check_setup(setup)
    some = [entries[0], {"file": "b.csv"}]  # a default for the entries that do not give their own
    FromSetupCaptures().check_setup(_setup(parts={"sense_resistor": "10 ohm", "tank_capacitor": "4.7 nF"},
                                           captures=some))


@pytest.mark.parametrize("probe, refused", [("1 mohm ±2%", True), ("5 ohm", True), ("49.9 ohm", False),
                                             ("50 ohm", False), ("1 Mohm ±1%", False)])
def test_a_probe_resistance_below_any_scope_input_is_refused(probe, refused):
    # "1 mohm" (milliohm) typed for 1 Mohm shorted the sense resistor in the model: L 10⁴ too small
    setup = load_setup({"method": "rl-step", "columns": {"sense": "CH2", "drive": "CH1"},
                        "parts": {"sense_resistor": "10 ohm", "probe_resistance": probe}})
    if refused:
        with pytest.raises(SetupError, match="far below any scope input .* write 'Mohm' for megaohm"):
            get_method("rl-step").check_setup(setup)
    else:
        get_method("rl-step").check_setup(setup)


def test_rl_step_lists_its_per_channel_gain_keys():
    setup = load_setup({"method": "rl-step", "columns": {"sense": "CH2", "drive": "CH1"},
                        "parts": {"sense_resistor": "10 ohm"}, "instrument": {"vertical_gain_CH2": "±0.1%"}})
    with pytest.raises(SetupError, match="valid: timebase, vertical_gain, vertical_gain_sense, vertical_gain_drive"):
        get_method("rl-step").check_setup(setup)


# -- time options ----------------------------------------------------------------------------

@pytest.mark.parametrize("value, seconds", [
    ("30 ns", 30e-9), ("1.5us", 1.5e-6), ("2 µs", 2e-6), ("2 μs", 2e-6), ("30n", 30e-9), ("0,5 ms", 0.5e-3),
    (3e-8, 3e-8), (0, 0.0), ("0 s", 0.0),
])
def test_time_option_accepts_seconds_or_a_time_unit(value, seconds):
    # SI Brochure (2019) Table 7: n = 1e-9, µ = 1e-6, m = 1e-3
    assert parse_time_option(value, "skip", "s.toml") == pytest.approx(seconds, rel=1e-12)


def test_time_option_keywords_and_unset():
    assert parse_time_option("auto", "skip", "s.toml", keywords=("auto",)) == "auto"
    assert parse_time_option(None, "fit_start", "s.toml") is None
    assert parse_time_option("-2 us", "fit_start", "s.toml", negative=True) == pytest.approx(-2e-6)


@pytest.mark.parametrize("value, phrase", [
    ("30", "has no unit"), ("30 V", "'s' is expected"), ("thirty ns", "cannot read"), ("1e400 s", "finite"),
    ("auto", "cannot read"), (True, "a number of seconds"), (math.nan, "a number of seconds"),
    (math.inf, "a number of seconds"), (-1e-9, "a time >= 0"), ("-1 ns", "a time >= 0"), ([1], "a number"),
    ("30 ns 5%", "cannot read"), ("", "cannot read"),
])
def test_time_option_refusals_are_one_line(value, phrase):
    with pytest.raises(SetupError) as err:
        parse_time_option(value, "skip", "s.toml")
    assert str(err.value).startswith("s.toml: option skip") and phrase in str(err.value)
    assert "\n" not in str(err.value)


def test_method_time_option_reads_the_setup_or_the_default():
    method = TwoChannel()
    assert method.time_option(_setup(options={"skip": "30 ns"}), "skip", keywords=("auto",)) == pytest.approx(3e-8)
    assert method.time_option(_setup(), "skip", keywords=("auto",)) == "auto"
    assert method.time_option(_setup(), "fit_start") is None


# -- the command line ------------------------------------------------------------------------

@pytest.mark.parametrize("line", ['sense_resistor = "10 ohm 1"', 'sense_resistor = "1,000 ohm"',
                                  'sense_resistor = "1e400 ohm"'])
def test_bad_part_is_one_line_and_exit_3(tmp_path, capsys, line):
    capture = tmp_path / "c.csv"
    capture.write_text("Time (s),CH1 (V)\n" + "".join(f"{k * 1e-6:g},{np.sin(k):.4f}\n" for k in range(50)),
                       encoding="utf-8")
    setup = tmp_path / "s.toml"
    setup.write_text(f'method = "rl-step"\n[columns]\nsense = "CH1"\n[parts]\n{line}\n', encoding="utf-8")
    assert main(["analyze", str(capture), "--setup", str(setup)]) == 3
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "part 'sense_resistor': cannot read" in err and "Traceback" not in err


@pytest.mark.parametrize("value, shown", [("2 A", '"2 A"'), (4, "4")])
def test_a_list_option_given_as_one_value_is_refused_in_one_line(value, shown):
    # pulse-ramp's at_currents = "2 A" was read a character at a time ("entry ' ' is not a
    # current"), at_currents = 4 raised a traceback (a fault campaign's setups)
    setup = load_setup({"method": "pulse-ramp", "columns": {"current": "i", "voltage": "v"},
                        "parts": {"shunt_resistor": "10 mohm", "dut_resistance": "20 mohm"},
                        "options": {"at_currents": value}})
    with pytest.raises(SetupError, match=rf"option at_currents = {shown} must be a list in brackets, "
                                         rf"e.g. at_currents = \[{shown}\]"):
        get_method("pulse-ramp").check_setup(setup)
