"""Part values, tolerances and engineering notation."""
import math

import pytest

from wavefit.errors import SetupError
from wavefit.values import eng, eng_pm, parse_part, parse_relative


@pytest.mark.parametrize("text, value, unit", [
    ("10 ohm", 10.0, "ohm"),
    ("4.7 nF", 4.7e-9, "F"),
    ("9.99 kohm", 9990.0, "ohm"),
    ("2.2 MΩ", 2.2e6, "ohm"),
    ("47 uH", 47e-6, "H"),
    ("47 µH", 47e-6, "H"),
    ("100 mohm", 0.1, "ohm"),
    ("12 pF", 12e-12, "F"),
])
def test_value_and_unit(text, value, unit):
    part = parse_part(text)
    assert part.value == pytest.approx(value, rel=1e-12)
    assert part.unit == unit
    assert part.standard_uncertainty == 0.0 and part.distribution == "exact"


def test_tolerance_is_rectangular_half_width():
    # JCGM 100:2008 4.3.7: bounds only -> rectangular, u = a/sqrt(3)
    part = parse_part("10 ohm ±0.1%")
    assert part.distribution == "rectangular"
    assert part.standard_uncertainty == pytest.approx(0.01 / math.sqrt(3), rel=1e-12)
    assert parse_part("12 pF ±3 pF").standard_uncertainty == pytest.approx(3e-12 / math.sqrt(3))
    assert parse_part("1 kohm +/-2%").standard_uncertainty == pytest.approx(20 / math.sqrt(3))


def test_tolerance_with_coverage_factor_is_normal():
    # JCGM 100:2008 4.3.3: an expanded uncertainty with stated k -> u = U/k
    part = parse_part("47 uH ±1% k=2")
    assert part.distribution == "normal"
    assert part.standard_uncertainty == pytest.approx(0.235e-6)
    assert parse_part("10 ohm u=0.01 ohm").standard_uncertainty == pytest.approx(0.01)


def test_plain_numbers_are_si_and_exact():
    part = parse_part(4.7e-9, "F")
    assert part.value == 4.7e-9 and part.unit == "F" and part.standard_uncertainty == 0


@pytest.mark.parametrize("bad", ["", "ten ohm", "10 furlongs", "10 ohm ±", "10 ohm ±2 F", True, [1]])
def test_bad_values_raise_setup_error(bad):
    with pytest.raises(SetupError):
        parse_part(bad)


def test_relative_figures():
    assert parse_relative("±25 ppm") == pytest.approx(25e-6)
    assert parse_relative("±1.5%") == pytest.approx(0.015)
    with pytest.raises(SetupError):
        parse_relative("lots")


def test_engineering_notation():
    assert eng(47.03e-6, "H") == "47.03 µH"
    assert eng_pm(47.03e-6, 0.21e-6, "H") == "47.03 ± 0.21 µH"
    assert eng_pm(0.1234, 0.0031, "ohm") == "123.4 ± 3.1 mΩ"
    assert eng_pm(1234.5, 12, "Hz") == "1.234 ± 0.012 kHz"
