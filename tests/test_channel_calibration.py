"""A setup's channel comparison checked against the method and the setup: the refusals, the
orientation of the ratio and skew, the age. The numbers checked here are the file's own,
transformed by definitions (ratio inverted when the reference is the numerator, u(1/g) =
u(g)/g², JCGM 100:2008 5.1.3 first order); the measurement with a comparison is checked
against ngspice in tests/test_channel_calibration_spice.py."""
from __future__ import annotations

import datetime as dt
from pathlib import Path

import pytest

from wavefit.calibration.channel_file import ChannelComparison, ChannelRole, Estimated, write_channel_comparison
from wavefit.calibration.in_use import channel_calibration
from wavefit.cli import main
from wavefit.errors import SetupError
from wavefit.methods import get_method
from wavefit.setup import load_setup

NOW = dt.datetime(2026, 12, 3, 12, 0, tzinfo=dt.timezone.utc)
MADE = dt.datetime(2026, 11, 23, 12, 0, tzinfo=dt.timezone.utc)  # ten days before NOW


def write(path: Path, reference=("drive", "CH1"), other=("sense", "CH2"), ratio=1.02, skew=2e-9) -> Path:
    write_channel_comparison(ChannelComparison(
        ChannelRole(*reference), ChannelRole(*other), Estimated(ratio, 2e-4, 40.0, ""),
        Estimated(1e-3, 1e-4, 40.0, "V"), Estimated(skew, 30e-12, 40.0, "s"), MADE, "channels.csv", "0" * 64,
        "test"), path)
    return path


def rl_setup(tmp_path: Path, columns=None, **calibration) -> object:
    columns = columns or {"time": "Time (s)", "drive": "CH1", "sense": "CH2"}
    return load_setup({"method": "rl-step", "columns": columns, "parts": {"sense_resistor": "10 ohm ±0.1%",
                       "source_resistance": "50 ohm", "dut_resistance": "0.1 ohm"},
                       "calibration": {"channels": str(tmp_path / "channels.toml"), **calibration}})


def calibration_of(setup, now=NOW):
    method = get_method(setup.method)
    return channel_calibration(setup, method.name, method.channel_ratio_roles, now)


def test_the_ratio_and_skew_keep_the_files_orientation_when_the_other_channel_is_sense(tmp_path):
    write(tmp_path / "channels.toml")
    cal = calibration_of(rl_setup(tmp_path))
    assert (cal.ratio.value, cal.ratio.standard_uncertainty, cal.ratio.degrees_of_freedom) == (1.02, 2e-4, 40.0)
    assert cal.skew.value == 2e-9 and cal.dropped_gain == "drive"
    assert cal.origin.age_days == pytest.approx(10.0) and cal.too_old is None


def test_the_ratio_is_inverted_and_the_skew_negated_when_the_reference_is_sense(tmp_path):
    write(tmp_path / "channels.toml", reference=("sense", "CH2"), other=("drive", "CH1"))
    cal = calibration_of(rl_setup(tmp_path))
    assert cal.ratio.value == pytest.approx(1 / 1.02, rel=1e-15)
    assert cal.ratio.standard_uncertainty == pytest.approx(2e-4 / 1.02 ** 2, rel=1e-15)
    assert cal.skew.value == -2e-9


def test_an_age_beyond_the_limit_is_warned_and_none_without_a_limit(tmp_path):
    write(tmp_path / "channels.toml")
    assert "10.0 days old" in calibration_of(rl_setup(tmp_path, max_age_days=7)).too_old
    assert calibration_of(rl_setup(tmp_path, max_age_days=11)).too_old is None


def test_a_file_of_other_columns_is_refused_naming_both(tmp_path):
    write(tmp_path / "channels.toml", reference=("drive", "CH3"))
    with pytest.raises(SetupError, match="'CH3'.*'CH1'"):
        calibration_of(rl_setup(tmp_path))


def test_a_file_of_other_roles_is_refused(tmp_path):
    write(tmp_path / "channels.toml", reference=("tank", "CH1"))
    with pytest.raises(SetupError, match="roles 'tank' and 'sense'"):
        calibration_of(rl_setup(tmp_path))


def test_a_sense_only_setup_refuses_a_comparison_before_any_capture_is_read(tmp_path):
    setup = rl_setup(tmp_path, columns={"time": "Time (s)", "sense": "CH2"})
    with pytest.raises(SetupError, match="maps no 'drive'"):
        get_method("rl-step").check_setup(setup)  # the file is not needed for this refusal


@pytest.mark.parametrize("method", ["lc-ring", "lc-sweep"])
def test_a_one_channel_method_refuses_a_comparison(tmp_path, method):
    write(tmp_path / "channels.toml")
    data = {"method": method, "columns": {"tank": "CH1"}, "parts": {"tank_capacitor": "10 nF ±1%"},
            "calibration": {"channels": str(tmp_path / "channels.toml")}}
    if method == "lc-sweep":
        data = {**data, "parts": {}, "captures": [{"file": "a.csv", "tank_capacitor": "10 nF"},
                                                  {"file": "b.csv", "tank_capacitor": "22 nF"}]}
    setup = load_setup(data)
    with pytest.raises(SetupError, match="one voltage channel"):
        get_method(method).check_setup(setup)


def test_a_non_positive_ratio_is_refused(tmp_path):
    write(tmp_path / "channels.toml", ratio=-1.0)
    with pytest.raises(SetupError, match="gain_ratio must be positive"):
        calibration_of(rl_setup(tmp_path))


def test_the_command_refuses_a_mismatched_file_in_one_line(tmp_path, capsys):
    from wavefit.synth.rl import rl_square_wave

    t, drive, sense = rl_square_wave(100e-6, 1.0, 10.0, 50.0, 2.0, 40e-6, 20e-9, 100e-6)
    capture = tmp_path / "c.csv"
    capture.write_text("Time (s),CH1,CH2\n" + "".join(f"{a:.9e},{b:.6f},{c:.6f}\n" for a, b, c in zip(t, drive, sense)))
    write(tmp_path / "channels.toml", other=("sense", "CH4"))
    setup = tmp_path / "s.toml"
    setup.write_text('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\nsense = "CH2"\n'
                     '[parts]\nsense_resistor = "10 ohm"\n[calibration]\nchannels = "channels.toml"\n')
    assert main(["analyze", str(capture), "--setup", str(setup)]) == 3
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "'CH4'" in err and "'CH2'" in err


def test_the_note_is_kept_and_a_file_without_one_still_reads(tmp_path):
    from wavefit.calibration.channel_file import read_channel_comparison

    plain = write(tmp_path / "plain.toml")  # as files were written before the note existed
    assert "note" not in plain.read_text(encoding="utf-8")
    assert read_channel_comparison(plain).note == ""
    noted = tmp_path / "noted.toml"
    write_channel_comparison(ChannelComparison(
        ChannelRole("drive", "CH1"), ChannelRole("sense", "CH2"), Estimated(1.02, 2e-4, 40.0, ""),
        Estimated(1e-3, 1e-4, 40.0, "V"), Estimated(2e-9, 3e-9, float("inf"), "s"), MADE, "channels.csv",
        "0" * 64, "test", note="coherent sampling: a bound"), noted)
    assert read_channel_comparison(noted).note == "coherent sampling: a bound"
    assert read_channel_comparison(noted).skew.degrees_of_freedom == float("inf")


def test_a_skew_beyond_the_record_or_in_another_unit_is_refused(tmp_path, capsys):
    # a hand edited skew of 1 s on a record of 100 µs overflowed the measurement function and
    # was reported as a capture the method did not expect (exit 4); a skew in "V" was taken
    from wavefit.synth.rl import rl_square_wave

    t, drive, sense = rl_square_wave(100e-6, 1.0, 10.0, 50.0, 2.0, 40e-6, 20e-9, 100e-6)
    capture = tmp_path / "c.csv"
    capture.write_text("Time (s),CH1,CH2\n" + "".join(f"{a:.9e},{b:.6f},{c:.6f}\n" for a, b, c in zip(t, drive, sense)))
    setup = tmp_path / "s.toml"
    setup.write_text('method = "rl-step"\n[columns]\ntime = "Time (s)"\ndrive = "CH1"\nsense = "CH2"\n'
                     '[parts]\nsense_resistor = "10 ohm"\n[calibration]\nchannels = "channels.toml"\n')
    write(tmp_path / "channels.toml", skew=1.0)
    assert main(["analyze", str(capture), "--setup", str(setup)]) == 3
    err = capsys.readouterr().err.strip()
    assert "\n" not in err and "its skew (1 s) is more than 10% of the record analysed" in err
    write(tmp_path / "channels.toml", skew=5e-6)  # 5 % of the record: taken
    assert main(["analyze", str(capture), "--setup", str(setup)]) == 0
    capsys.readouterr()
    path = write(tmp_path / "channels.toml")
    path.write_text(path.read_text(encoding="utf-8").replace('unit = "s"', 'unit = "V"'), encoding="utf-8")
    with pytest.raises(SetupError, match=r"\[skew\] unit is 'V'; a skew is in 's'"):
        calibration_of(rl_setup(tmp_path))


def test_a_file_made_after_now_is_warned(tmp_path):
    # a comparison dated 2999 was used without a word: its age, and max_age_days, cannot be judged
    write(tmp_path / "channels.toml")
    assert calibration_of(rl_setup(tmp_path), now=MADE - dt.timedelta(days=3)).too_old.startswith(
        "the channel comparison channels.toml says it was made on 2026-11-23 12:00 UTC, after now")
    assert calibration_of(rl_setup(tmp_path), now=MADE - dt.timedelta(hours=12)).too_old is None  # time zones
