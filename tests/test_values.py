"""Part values, tolerances and engineering notation.

External references for the checks below:

* IEC 60062:2016, letter code for resistance and capacitance values: a letter stands where
  the decimal mark would be and gives the multiplier; resistance L (1e-3), R, K, M, G, T,
  capacitance p, n, µ, m, F. Taken from the summary of the standard in the Wikipedia
  article "RKM code" (the standard itself was not consulted). Lowercase ``k`` for K and
  ``u`` for µ are common practice, not letters of the standard.
* BIPM, The International System of Units (SI Brochure, 9th ed., 2019), Table 7: the SI
  prefixes f p n µ m k M G T and their powers of ten.
* JCGM 100:2008 (GUM) 4.3.7: a bound ±a with nothing else known is a rectangular
  distribution, u = a/√3; 4.3.3: an expanded uncertainty U with coverage factor k gives
  u = U/k.
"""
import math
from decimal import Decimal

import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st

from wavefit.errors import SetupError
from wavefit.values import (LARGEST_MAGNITUDE, SMALLEST_MAGNITUDE, eng, eng_pm, parse_number_with_unit,
                            parse_part, parse_relative, parse_relative_uncertainty)

# SI Brochure (2019), Table 7; "u" for µ is common practice, µ as U+00B5 or U+03BC.
SI_PREFIXES = {"f": -15, "p": -12, "n": -9, "u": -6, "\u00b5": -6, "\u03bc": -6, "m": -3,
               "k": 3, "M": 6, "G": 9, "T": 12}
# "K" for kilo before a unit: not SI, common practice.
PREFIXES_BEFORE_UNIT = {**SI_PREFIXES, "": 0, "K": 3}
# The unit spellings the setup-file reference promises (docs/setup-file.md).
UNIT_SPELLINGS = {"ohm": ["ohm", "ohms", "Ohm", "Ohms", "\u03a9", "\u2126"], "F": ["F"], "H": ["H"],
                  "Hz": ["Hz"], "s": ["s"], "V": ["V"], "A": ["A"], "W": ["W"], "J": ["J"]}
# IEC 60062 letters (see the module docstring) plus the common-practice k, u and μ.
CODE_LETTERS = {"L": (-3, "ohm"), "R": (0, "ohm"), "K": (3, "ohm"), "k": (3, "ohm"), "M": (6, "ohm"),
                "G": (9, "ohm"), "T": (12, "ohm"),
                "p": (-12, "F"), "n": (-9, "F"), "\u00b5": (-6, "F"), "\u03bc": (-6, "F"), "u": (-6, "F"),
                "m": (-3, "F"), "F": (0, "F")}
# letters that may end a code with no digit after them (IEC 60062 examples 470R, 47K; "10L")
LETTERS_ENDING_A_CODE = {"L", "R", "K"}


# -- the grammar, value by value ---------------------------------------------------------------

@pytest.mark.parametrize("text, value, unit", [
    ("10 ohm", 10.0, "ohm"),
    ("4.7 nF", 4.7e-9, "F"),
    ("9.99 kohm", 9990.0, "ohm"),
    ("2.2 MΩ", 2.2e6, "ohm"),
    ("47 uH", 47e-6, "H"),
    ("47 µH", 47e-6, "H"),
    ("100 mohm", 0.1, "ohm"),
    ("12 pF", 12e-12, "F"),
    ("10 Kohm", 1e4, "ohm"),          # K for kilo: common practice, read so before
    ("1e-08 F", 1e-8, "F"),           # Python's repr of a float, as test code writes it
    ("50,0 ohm", 50.0, "ohm"),        # decimal comma
    ("4,7 nF", 4.7e-9, "F"),
    ("1,0000 ohm", 1.0, "ohm"),       # four digits after the comma: not a thousands group
    ("0,297 mH", 297e-6, "H"),        # a lone zero groups no thousands: a decimal comma
])
def test_value_and_unit(text, value, unit):
    part = parse_part(text)
    assert part.value == pytest.approx(value, rel=1e-12)
    assert part.unit == unit
    assert part.standard_uncertainty == 0.0 and part.distribution == "exact"


@pytest.mark.parametrize("code, value, unit", [
    # IEC 60062 examples as summarised in the Wikipedia article "RKM code"
    ("R47", 0.47, "ohm"), ("4R7", 4.7, "ohm"), ("470R", 470.0, "ohm"), ("4K7", 4.7e3, "ohm"),
    ("47K", 47e3, "ohm"), ("47K3", 47.3e3, "ohm"), ("4M7", 4.7e6, "ohm"), ("1M0", 1e6, "ohm"),
    ("2G2", 2.2e9, "ohm"), ("6L8", 6.8e-3, "ohm"),
    ("4n7", 4.7e-9, "F"), ("p47", 0.47e-12, "F"), ("2µ2", 2.2e-6, "F"), ("1m5", 1.5e-3, "F"),
    # common practice: lowercase k, u for µ, R after a whole number
    ("4k7", 4.7e3, "ohm"), ("2u2", 2.2e-6, "F"), ("10R", 10.0, "ohm"),
])
def test_iec_60062_letter_code(code, value, unit):
    part = parse_part(code)
    assert (part.value, part.unit) == (pytest.approx(value, rel=1e-12), unit)
    assert parse_part(code, unit).value == pytest.approx(value, rel=1e-12)


def test_a_prefix_alone_takes_the_expected_unit():
    assert parse_number_with_unit("10k", "ohm") == (pytest.approx(1e4), "ohm")
    assert parse_number_with_unit("4.7n", "F") == (pytest.approx(4.7e-9), "F")
    assert parse_number_with_unit("4.7n") == (pytest.approx(4.7e-9), "")


@pytest.mark.parametrize("code, expected", [("4R7", "H"), ("4n7", "ohm"), ("2u2", "H"), ("4k7", "F")])
def test_a_code_of_another_kind_than_expected_is_refused(code, expected):
    # IEC 60062: R K are resistance letters, n u capacitance letters; a 4R7 on an inductor
    # (4.7 µH in some makers' marking, per the same article) must not become 4.7 H
    with pytest.raises(SetupError, match="IEC 60062"):
        parse_part(code, expected)
    with pytest.raises(SetupError, match="IEC 60062"):
        parse_part(f"{code} {expected}")


# -- tolerances (JCGM 100:2008) --------------------------------------------------------------

def test_tolerance_is_rectangular_half_width():
    # JCGM 100:2008 4.3.7: bounds only -> rectangular, u = a/sqrt(3)
    part = parse_part("10 ohm ±0.1%")
    assert part.distribution == "rectangular"
    assert part.standard_uncertainty == pytest.approx(0.01 / math.sqrt(3), rel=1e-12)
    assert parse_part("12 pF ±3 pF").standard_uncertainty == pytest.approx(3e-12 / math.sqrt(3))
    assert parse_part("1 kohm +/-2%").standard_uncertainty == pytest.approx(20 / math.sqrt(3))
    assert parse_part("10 ohm ± 50 mΩ").standard_uncertainty == pytest.approx(0.05 / math.sqrt(3))
    assert parse_part("10 ohm 1%").standard_uncertainty == pytest.approx(0.1 / math.sqrt(3))


def test_a_bound_wider_than_the_value_is_refused():
    # "10 ohm ±20 ohm" and "±200%" were accepted: a part that could be negative; ±100 % (zero to
    # twice the value) is the widest bound, and a standard uncertainty is not a bound
    for text in ("10 ohm ±20 ohm", "10 ohm ±200%", "47 uH ±60 uH k=2"):
        with pytest.raises(SetupError, match="a tolerance wider than the value"):
            parse_part(text)
    assert parse_part("5 pF ±5 pF").standard_uncertainty == pytest.approx(5e-12 / math.sqrt(3))
    assert parse_part("5 pF u=6 pF").standard_uncertainty == pytest.approx(6e-12)


def test_tolerance_with_coverage_factor_is_normal():
    # JCGM 100:2008 4.3.3: an expanded uncertainty with stated k -> u = U/k
    part = parse_part("47 uH ±1% k=2")
    assert part.distribution == "normal"
    assert part.standard_uncertainty == pytest.approx(0.235e-6)
    assert parse_part("10 ohm u=0.01 ohm").standard_uncertainty == pytest.approx(0.01)
    assert parse_part("4.7 nF u=0.3 nF").standard_uncertainty == pytest.approx(0.3e-9)
    assert parse_part("10 ohm u = 0.1%").standard_uncertainty == pytest.approx(0.01)


def test_unitless_signed_tolerance_only_after_an_unscaled_value():
    # "10 ohm ±0.1" can only mean 0.1 ohm; after "4.7 nF" a bare 0.1 could be nF or F
    assert parse_part("10 ohm ±0.1").standard_uncertainty == pytest.approx(0.1 / math.sqrt(3))
    with pytest.raises(SetupError, match="could be in either"):
        parse_part("4.7 nF ±0.1")


def test_plain_numbers_are_si_and_exact():
    part = parse_part(4.7e-9, "F")
    assert part.value == 4.7e-9 and part.unit == "F" and part.standard_uncertainty == 0


# -- the misreadings of issue 14, each now read right or refused ------------------------------

def test_10R_is_ten_ohm_not_ten_ronna_ohm():
    # IEC 60062: R marks the decimal place with multiplier 1 (470R = 470 ohm)
    part = parse_part("10R")
    assert (part.value, part.unit) == (10.0, "ohm")


def test_a_tolerance_without_sign_keeps_the_value():
    # was read as 2 ohm; JCGM 100:2008 4.3.3: 1 % of 10 ohm at k=2 is u = 0.05 ohm
    part = parse_part("10 ohms 1% k=2")
    assert part.value == 10.0 and part.unit == "ohm"
    assert part.standard_uncertainty == pytest.approx(0.05) and part.distribution == "normal"


def test_decimal_comma_is_a_decimal_mark():
    # was read as 500 ohm
    part = parse_part("50,0 ohm ±1%")
    assert part.value == 50.0
    assert part.standard_uncertainty == pytest.approx(0.5 / math.sqrt(3))


@pytest.mark.parametrize("text", ["1,000 ohm", "4,700 nF ±1%", "10 ohm ±1,000 ppm", "2,500e3 ohm"])
def test_a_comma_before_three_digits_is_refused(text):
    with pytest.raises(SetupError, match=r"write \d+ or \d+\.\d{3}"):
        parse_part(text)


@given(whole=st.integers(1, 999), group=st.integers(0, 999))
def test_any_comma_before_exactly_three_digits_is_refused(whole, group):
    # (after a lone zero the comma groups no thousands: "0,297 mH" is read, above)
    with pytest.raises(SetupError, match="thousands separator"):
        parse_part(f"{whole},{group:03d} ohm")


@pytest.mark.parametrize("bad", [
    "", "ten ohm", "10 furlongs", "10 ohm ±", "10 ohm ±2 F", "10 ohm 1", "10 ohm k=2", "10 ohm u=1% k=2",
    "1e400 ohm", "1e400", "nan", "inf", "-inf ohm", "1e-400 ohm", "1e20 ohm", "1 kOHM", "1_000 ohm",
    "10 ohm ±1% k=0.5", "10 ohm ±1% k=2 extra", "4R7J", "10 R", "10 ohm, 1%", "±1%", "10 ohm +10/-20%",
    "10 k", "1u=1%",
    True, [1], math.inf, math.nan, 10 ** 400, 1e300,
])
def test_bad_values_raise_setup_error(bad):
    with pytest.raises(SetupError) as err:
        parse_part(bad)
    assert "\n" not in str(err.value)


def test_the_refusal_shows_the_accepted_forms():
    with pytest.raises(SetupError) as err:
        parse_part("10 ohm 1")
    message = str(err.value)
    assert "cannot read '10 ohm 1'" in message and '"4R7 ±1% k=2"' in message


# -- relative figures ----------------------------------------------------------------------

def test_relative_figures():
    assert parse_relative("±25 ppm") == pytest.approx(25e-6)
    assert parse_relative("±1.5%") == pytest.approx(0.015)
    assert parse_relative("2 %") == pytest.approx(0.02)
    assert parse_relative("±0") == 0.0
    for bad in ("lots", "0.02", "2", "±1% k=2", "u=1%", "±2 ohm"):
        with pytest.raises(SetupError):
            parse_relative(bad)


@pytest.mark.parametrize("text, fraction, k", [
    ("±25 ppm", 25e-6, None), ("±1% k=2", 0.01, 2.0), ("±1 % (k=2)", 0.01, 2.0), ("1%, k=2", 0.01, 2.0),
    ("u=10 ppm", 10e-6, 1.0), ("u = 1%", 0.01, 1.0), ("u=0", 0.0, 1.0),
])
def test_relative_uncertainty_statements(text, fraction, k):
    assert parse_relative_uncertainty(text) == (pytest.approx(fraction), k)


# -- property: every accepted spelling reads back the generated truth --------------------------

@st.composite
def digits_with_mark(draw, max_decimals=4):
    """(number text, Decimal value): point or decimal comma, never a comma before three digits."""
    n = draw(st.integers(1, 99999))
    decimals = draw(st.integers(0, max_decimals))
    whole, fraction = divmod(n, 10 ** decimals)
    value = Decimal(n).scaleb(-decimals)
    if decimals == 0:
        return str(whole), value
    mark = draw(st.sampled_from([".", ","])) if decimals != 3 else "."
    return f"{whole}{mark}{fraction:0{decimals}d}", value


@st.composite
def written_values(draw):
    """(text, expected-unit argument, SI truth as Decimal, unit) of one VALUE spelling."""
    unit = draw(st.sampled_from(sorted(UNIT_SPELLINGS)))
    form = draw(st.sampled_from(["unit", "prefix alone", "plain", "code"]))
    if form == "code":
        letter = draw(st.sampled_from(sorted(CODE_LETTERS)))
        power, unit = CODE_LETTERS[letter]
        n = draw(st.integers(1, 9999))
        decimals = draw(st.integers(0 if letter in LETTERS_ENDING_A_CODE else 1, 3))
        whole, fraction = divmod(n, 10 ** decimals)
        head = draw(st.sampled_from(["", "0"])) if whole == 0 else str(whole)
        tail = f"{fraction:0{decimals}d}" if decimals else ""
        suffix = draw(st.sampled_from(["", " "])) + draw(st.sampled_from(["", *UNIT_SPELLINGS[unit]]))
        text = f"{head}{letter}{tail}{suffix}".rstrip()
        return text, draw(st.sampled_from([None, unit])), Decimal(n).scaleb(-decimals + power), unit
    number, value = draw(digits_with_mark())
    exponent = draw(st.sampled_from(["", "e-3", "e2", "E+1"]))
    value = value.scaleb(int(exponent[1:]) if exponent else 0)
    space = draw(st.sampled_from(["", " "]))
    if form == "unit":
        prefix = draw(st.sampled_from(sorted(PREFIXES_BEFORE_UNIT)))
        spelling = draw(st.sampled_from(UNIT_SPELLINGS[unit]))
        return (f"{number}{exponent}{space}{prefix}{spelling}", draw(st.sampled_from([None, unit])),
                value.scaleb(PREFIXES_BEFORE_UNIT[prefix]), unit)
    if form == "prefix alone":  # attached to the number; takes the expected unit, so one is passed
        prefix = draw(st.sampled_from(sorted(SI_PREFIXES)))
        return f"{number}{exponent}{prefix}", unit, value.scaleb(SI_PREFIXES[prefix]), unit
    return f"{number}{exponent}", unit, value, unit


@st.composite
def written_tolerances(draw, unit):
    """(text, relative?, magnitude as Decimal: fraction or SI, stated standard?, k) of one TOLERANCE."""
    kind = draw(st.sampled_from(["%", "ppm", "absolute"]))
    number, magnitude = draw(digits_with_mark(max_decimals=2))
    space = draw(st.sampled_from(["", " "]))
    if kind == "%":
        scale_text, magnitude = "%", magnitude.scaleb(-2)
    elif kind == "ppm":
        scale_text, magnitude = "ppm", magnitude.scaleb(-6)
    else:
        prefix = draw(st.sampled_from(sorted(PREFIXES_BEFORE_UNIT)))
        scale_text = prefix + draw(st.sampled_from(UNIT_SPELLINGS[unit]))
        magnitude = magnitude.scaleb(PREFIXES_BEFORE_UNIT[prefix])
    relative = kind != "absolute"
    if draw(st.booleans()):  # u=a: the standard uncertainty itself
        mark = draw(st.sampled_from(["u=", "u = ", "u ="]))
        return f" {mark}{number}{space}{scale_text}", relative, magnitude, True, None
    # an absolute tolerance carries its sign ("4.7 nF 2.2 nF" could be two values)
    sign = draw(st.sampled_from(["", "±", "± ", "+/-", "+-"] if relative else ["±", "± ", "+/-", "+-"]))
    lead = " " if not sign else draw(st.sampled_from(["", " "]))
    k = draw(st.sampled_from([None, "1", "2", "2.0", "3", "1.5"]))
    glued = ["k={}"] if scale_text == "%" else []  # "±1%k=2"; after a letter a separator is needed
    k_text = "" if k is None else draw(st.sampled_from(
        [" k={}", *glued, " (k={})", " ( k = {} )", ", k={}", "; k = {}"])).format(k)
    return f"{lead}{sign}{number}{space}{scale_text}{k_text}", relative, magnitude, False, (
        float(k) if k else None)


@settings(max_examples=400, deadline=None)
@given(data=st.data())
def test_every_spelling_reads_back_the_generated_value(data):
    text, expected, truth, unit = data.draw(written_values())
    assume(SMALLEST_MAGNITUDE <= truth <= LARGEST_MAGNITUDE)
    part = parse_part(text, expected)
    assert (part.value, part.unit) == (pytest.approx(float(truth), rel=1e-12), unit), text
    assert part.standard_uncertainty == 0.0 and part.distribution == "exact"


@settings(max_examples=600, deadline=None)
@given(data=st.data())
def test_every_tolerance_spelling_gives_the_gum_standard_uncertainty(data):
    text, expected, truth, unit = data.draw(written_values())
    assume(SMALLEST_MAGNITUDE <= truth <= LARGEST_MAGNITUDE)
    tolerance, relative, magnitude, standard, k = data.draw(written_tolerances(unit))
    assume(SMALLEST_MAGNITUDE <= magnitude <= LARGEST_MAGNITUDE)
    half_width = float(magnitude * truth) if relative else float(magnitude)
    if not standard and half_width > float(truth):  # a bound that lets the part be negative
        with pytest.raises(SetupError, match="a tolerance wider than the value"):
            parse_part(text + tolerance, expected)
        return
    part = parse_part(text + tolerance, expected)
    if standard:
        expected_u, distribution = half_width, "normal"
    elif k is None:
        expected_u, distribution = half_width / math.sqrt(3), "rectangular"  # JCGM 100:2008 4.3.7
    else:
        expected_u, distribution = half_width / k, "normal"                  # JCGM 100:2008 4.3.3
    assert (part.value, part.unit) == (pytest.approx(float(truth), rel=1e-12), unit), text + tolerance
    assert part.standard_uncertainty == pytest.approx(expected_u, rel=1e-12), text + tolerance
    assert part.distribution == distribution


# -- printing ------------------------------------------------------------------------------

def test_engineering_notation():
    assert eng(47.03e-6, "H") == "47.03 µH"
    assert eng_pm(47.03e-6, 0.21e-6, "H") == "47.03 ± 0.21 µH"
    assert eng_pm(0.1234, 0.0031, "ohm") == "123.4 ± 3.1 mΩ"
    assert eng_pm(1234.5, 12, "Hz") == "1.234 ± 0.012 kHz"


@pytest.mark.parametrize("text", ["4.7 nF 2.2 nF", "4 700 pF", "12 pF 3 pF", "10 ohm 50 mohm"])
def test_a_second_value_without_its_sign_is_no_tolerance(text):
    # "4.7 nF 2.2 nF" was read as 4.7 nF ± 2.2 nF and "4 700 pF" as 4 F ± 700 pF (then refused as
    # "4 F, far above any tank"): a second value may be another value or split digits
    with pytest.raises(SetupError, match="without ±, is not a tolerance"):
        parse_part(text, "F" if "F" in text else "ohm")


def test_a_toml_date_as_a_part_is_named_plainly():
    # an unquoted TOML date was shown as Python's "datetime.datetime(1979, 5, 27, 7, 32, tzinfo=...)"
    import datetime

    with pytest.raises(SetupError) as err:
        parse_part(datetime.datetime(1979, 5, 27, 7, 32), "ohm")
    assert str(err.value).startswith("1979-05-27 07:32:00 (a date and time) is not a part value")
    for value, named in ((True, "true (a boolean)"), ([1, 2], "an array"), ({"value": "10 nF"}, "a table")):
        with pytest.raises(SetupError, match=named.replace("(", "\\(").replace(")", "\\)")):
            parse_part(value, "F")
