"""The reference substitution file: round trip, refusals, and its use in an analysis.

The captures here are synthetic and serve only the file's mechanics; the check of the values
against an external reference is tests/test_reference_substitution_spice.py (ngspice).
"""
from __future__ import annotations

import contextlib
import datetime as dt
import io
import math

import numpy as np
import pytest
import tomli_w

import wavefit
from wavefit.calibration.reference_file import ReferenceSubstitution, read_reference, write_reference
from wavefit.cli import main
from wavefit.errors import SetupError
from wavefit.fitted import FittedBlock
from wavefit.synth.rl import rl_square_wave
from wavefit.uncertainty import InputQuantity
from wavefit.values import parse_part

import tomllib

L, DCR, RS, RSRC = 220e-6, 1.0, 10.0, 50.0
TAU = L / (RSRC + DCR + RS)
SETUP = """method = "rl-step"
[columns]
time = "time"
sense = "sense"
drive = "drive"
[parts]
sense_resistor = "10 ohm ±1%"
"""


def sample_reference(**changes) -> ReferenceSubstitution:
    block = FittedBlock(("tau_fit", "sense_high"), (3.6e-6, 0.16), [[1e-18, 2e-13], [2e-13, 1e-8]], ("s", "V"),
                        math.inf)
    fields = dict(method="rl-step", quantity="L", known=parse_part("1 mH ±0.05%", "H"),
                  made=dt.datetime(2026, 12, 3, 22, 0, tzinfo=dt.timezone.utc), capture="/bench/ref.csv",
                  capture_sha256="ab" * 32, tool_version="1.2.3", blocks=(block,),
                  inputs=(InputQuantity("model", 0.0, 1e-9, "s", "B", math.inf, None, "rectangular"),),
                  settings={"has_drive": True, "parts": frozenset({"sense_resistor"}), "present": ("a", "b"),
                            "coil_loss": "unknown"},
                  correction=(1.04, 0.018))
    return ReferenceSubstitution(**(fields | changes))


def test_round_trip(tmp_path):
    for reference in (sample_reference(), sample_reference(columns={"drive": "CH1", "sense": "2"})):
        write_reference(reference, tmp_path / "ref.toml")
        assert read_reference(tmp_path / "ref.toml", "rl-step") == reference


def broken(tmp_path, edit) -> str:
    path = tmp_path / "ref.toml"
    write_reference(sample_reference(), path)
    data = tomllib.loads(path.read_text())
    edit(data)
    path.write_bytes(tomli_w.dumps(data).encode())
    with pytest.raises(SetupError) as info:
        read_reference(path, "rl-step")
    message = str(info.value)
    assert "\n" not in message and str(path) in message
    return message


@pytest.mark.parametrize("edit, expected", [
    (lambda d: d.update(kind="channel comparison"), "is not a reference substitution"),
    (lambda d: d.update(method="lc-ring"), "was made with method 'lc-ring'"),
    (lambda d: d.pop("blocks"), "lacks blocks"),
    (lambda d: d.update(extra=1), "extra"),
    (lambda d: d["blocks"][0].update(covariance=[[1e-18, 2e-13]]), "do not match"),
    (lambda d: d["blocks"][0].update(covariance=[[1e-18, 3e-13], [2e-13, 1e-8]]), "do not match"),
    (lambda d: d["blocks"][0].update(degrees_of_freedom=0), "degrees_of_freedom"),
    (lambda d: d.update(made=dt.datetime(2026, 12, 3, 22, 0)), "UTC offset"),
    (lambda d: d.update(known="1 mH"), "uncertainty"),
    (lambda d: d["settings"]["has_drive"].update(value="yes"), "not a bool"),
    (lambda d: d["inputs"][0].update(standard_uncertainty=-1.0), "standard_uncertainty"),
])
def test_broken_files_are_refused_in_one_line(tmp_path, edit, expected):
    assert expected in broken(tmp_path, edit)


def write_bench(tmp_path, drive: bool = True) -> None:
    t, d, s = rl_square_wave(L, DCR, RS, RSRC, 1.0, 40 * TAU, TAU / 40, 100 * TAU)
    rng = np.random.default_rng(5)
    columns = {"time": t, "sense": s + rng.normal(0, 1e-4, s.size)}
    if drive:
        columns["drive"] = d + rng.normal(0, 1e-3, d.size)
    import pandas as pd

    pd.DataFrame(columns).to_csv(tmp_path / "capture.csv", index=False)
    (tmp_path / "plain.toml").write_text(SETUP)
    (tmp_path / "setup.toml").write_text(SETUP + '[calibration]\nreference = "ref.toml"\n')


def calibrate(tmp_path, part: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["calibrate", "reference", str(tmp_path / "capture.csv"), "--setup", str(tmp_path / "plain.toml"),
                     "--part", part, "--out", str(tmp_path / "ref.toml")])
    return code, out.getvalue(), err.getvalue()


def test_the_part_as_its_own_reference_gives_the_known_value(tmp_path):
    # algebra of substitution: y·Y_known/y = Y_known when the reference capture is the part's own
    write_bench(tmp_path)
    code, out, _ = calibrate(tmp_path, "L = 230 uH ±0.1%")
    assert code == 0 and "Safety:" in out  # the part is put in the fixture at this step
    result = wavefit.analyze(tmp_path / "capture.csv", tmp_path / "setup.toml")
    plain = wavefit.analyze(tmp_path / "capture.csv", tmp_path / "plain.toml")
    assert result.quantities["L"].value == pytest.approx(230e-6, rel=1e-12)
    assert result.quantities["R"].value == plain.quantities["R"].value
    assert "known reference L (ref.toml)" in {line.source for line in result.budget["L"]}
    stored = read_reference(tmp_path / "ref.toml")
    assert stored.correction[0] == pytest.approx(230e-6 / plain.quantities["L"].value, rel=1e-9)


@pytest.mark.parametrize("part, expected", [
    ("L 230 uH", "must read 'QUANTITY = VALUE"),
    ("Q = 3 ±1%", "reports L, R"),
    ("L = 230 uH", "carry its uncertainty"),
    ("L = 230 pF ±1%", "'H' is expected"),
])
def test_calibrate_refuses_a_bad_part_in_one_line(tmp_path, part, expected):
    write_bench(tmp_path)
    code, _, err = calibrate(tmp_path, part)
    assert code == 3 and expected in err and err.count("\n") == 1
    assert not (tmp_path / "ref.toml").exists()


def test_a_reference_of_another_method_or_wiring_is_refused(tmp_path):
    write_bench(tmp_path)
    write_reference(sample_reference(method="lc-ring"), tmp_path / "ref.toml")
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["analyze", str(tmp_path / "capture.csv"), "--setup", str(tmp_path / "setup.toml")])
    assert code == 3 and "made with method 'lc-ring'" in err.getvalue() and err.getvalue().count("\n") == 1
    write_reference(sample_reference(settings={"has_drive": False, "parts": frozenset({"sense_resistor"})}),
                    tmp_path / "ref.toml")
    with pytest.raises(SetupError, match="other settings"):
        wavefit.analyze(tmp_path / "capture.csv", tmp_path / "setup.toml")


def test_a_reference_recorded_on_other_channels_is_refused(tmp_path):
    # made with drive and sense on two columns, used by a setup that maps them to two others
    # (another pair of scope channels, whose gain ratio the reference did not see)
    write_bench(tmp_path)
    assert calibrate(tmp_path, "L = 230 uH ±0.1%")[0] == 0
    assert read_reference(tmp_path / "ref.toml").columns == {"drive": "drive", "sense": "sense"}
    data = (tmp_path / "capture.csv").read_text().replace("time,sense,drive", "time,sense,drive2", 1)
    (tmp_path / "rewired.csv").write_text(data)
    (tmp_path / "rewired.toml").write_text(SETUP.replace('drive = "drive"', 'drive = "drive2"')
                                           + '[calibration]\nreference = "ref.toml"\n')
    err = io.StringIO()
    with contextlib.redirect_stderr(err):
        code = main(["analyze", str(tmp_path / "rewired.csv"), "--setup", str(tmp_path / "rewired.toml")])
    assert code == 3 and err.getvalue().count("\n") == 1
    assert "with 'drive' on column 'drive', the setup" in err.getvalue() and "maps it to 'drive2'" in err.getvalue()
    # the same channels under the same names: used; a file made before columns were kept: used
    assert wavefit.analyze(tmp_path / "capture.csv", tmp_path / "setup.toml").quantities["L"].value == pytest.approx(
        230e-6, rel=1e-12)
    data = tomllib.loads((tmp_path / "ref.toml").read_text())
    data.pop("columns")
    (tmp_path / "ref.toml").write_bytes(tomli_w.dumps(data).encode())
    assert wavefit.analyze(tmp_path / "rewired.csv", tmp_path / "rewired.toml").quantities["L"].value > 0


def test_a_method_whose_function_is_built_per_capture_refuses_a_reference(tmp_path):
    # pulse-ramp's measurement function holds each capture's ramps: no reference file is made for
    # it, and a setup naming one is refused, each in one line
    write_bench(tmp_path)
    pulse = ('method = "pulse-ramp"\n[columns]\ntime = "time"\ncurrent = "sense"\nvoltage = "drive"\n'
             '[parts]\nshunt_resistor = "10 mohm ±1%"\ndut_resistance = "50 mohm ±1%"\n')
    (tmp_path / "plain.toml").write_text(pulse)
    code, _, err = calibrate(tmp_path, "L0 = 47 uH ±0.1%")
    assert code == 3 and "cannot be corrected by a reference part" in err and err.count("\n") == 1
    assert not (tmp_path / "ref.toml").exists()
    write_reference(sample_reference(method="pulse-ramp", quantity="L0"), tmp_path / "ref.toml")
    (tmp_path / "setup.toml").write_text(pulse + '[calibration]\nreference = "ref.toml"\n')
    with pytest.raises(SetupError, match="cannot be corrected by a reference part"):
        wavefit.analyze(tmp_path / "capture.csv", tmp_path / "setup.toml")


def test_an_old_reference_is_warned(tmp_path):
    write_bench(tmp_path)
    assert calibrate(tmp_path, "L = 230 uH ±0.1%")[0] == 0
    old = read_reference(tmp_path / "ref.toml")
    write_reference(sample_reference(**{**old.__dict__, "made": old.made - dt.timedelta(days=40)}), tmp_path / "ref.toml")
    (tmp_path / "aged.toml").write_text(SETUP + '[calibration]\nreference = "ref.toml"\nmax_age_days = 30\n')
    (tmp_path / "fresh.toml").write_text(SETUP + '[calibration]\nreference = "ref.toml"\nmax_age_days = 60\n')
    aged = wavefit.analyze(tmp_path / "capture.csv", tmp_path / "aged.toml")
    fresh = wavefit.analyze(tmp_path / "capture.csv", tmp_path / "fresh.toml")
    assert any("40 days old" in w for w in aged.warnings)
    assert not any("days old" in w for w in fresh.warnings)
    # made after now (a file dated 2999 was used without a word): warned, with or without a limit
    write_reference(sample_reference(**{**old.__dict__, "made": old.made + dt.timedelta(days=400)}),
                    tmp_path / "ref.toml")
    ahead = wavefit.analyze(tmp_path / "capture.csv", tmp_path / "setup.toml")
    assert any("says it was made on" in w and "after now" in w for w in ahead.warnings)
