"""Setup files (TOML) and dicts."""
import math

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
    ({"method": "rl-step", "instrument": {"time_base": "1%"}}, "unknown [instrument] key 'time_base'"),
    ({"method": "rl-step", "parts": {"sense_resistor": "ten"}}, "part 'sense_resistor'"),
    ({"method": "rl-step", "sample_interval": -1}, "must be positive"),
    ({"method": "rl-step", "columns": {"sense": 1.5}}, "0-based index"),
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


def test_missing_setup_file(tmp_path):
    with pytest.raises(SetupError, match="cannot read setup file"):
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
