"""Spec files: limit grammar, decision rule, errors that name what is wrong."""
from __future__ import annotations

import pytest

from wavefit.batch.spec import load_spec, parse_limit, parse_spec
from wavefit.errors import SetupError


def test_tolerance_gives_symmetric_bounds_in_si():
    limit = parse_limit("L", "47 uH ±5%")
    assert limit.lower == pytest.approx(44.65e-6, rel=1e-12)
    assert limit.upper == pytest.approx(49.35e-6, rel=1e-12)
    assert limit.unit == "H"


def test_absolute_tolerance_and_ppm():
    absolute = parse_limit("L", "47 uH ±2 uH")
    assert (absolute.lower, absolute.upper) == (pytest.approx(45e-6), pytest.approx(49e-6))
    ppm = parse_limit("f0", "1 MHz +/- 500 ppm")
    assert (ppm.lower, ppm.upper) == (pytest.approx(999_500.0), pytest.approx(1_000_500.0))


@pytest.mark.parametrize("text, lower, upper, unit", [
    ("<= 0.15 ohm", None, 0.15, "ohm"),
    ("≤ 150 mohm", None, 0.15, "ohm"),
    (">= 40", 40.0, None, ""),
    (">= 2 MHz", 2e6, None, "Hz"),
    ("44 uH .. 50 uH", 44e-6, 50e-6, "H"),
    ("30 .. 60", 30.0, 60.0, ""),
])
def test_bounds_and_ranges(text, lower, upper, unit):
    limit = parse_limit("x", text)
    assert limit.lower == (pytest.approx(lower) if lower is not None else None)
    assert limit.upper == (pytest.approx(upper) if upper is not None else None)
    assert limit.unit == unit


@pytest.mark.parametrize("text, fragment", [
    ("±2 uH", "no nominal"),
    ("50 uH .. 44 uH", "empty interval"),
    ("44 .. 50 uH", "unit on both ends"),
    ("47 uH ±2", "has no unit"),
    ("47 uH ±2 ohm", "differs"),
    ("about 47 uH", "cannot read"),
    ("47 uH ±0%", "positive"),
    ("330 uH ±200%", "wider than its nominal"),  # a lower limit of -330 µH was accepted
    ("330 uH ±400 uH", "wider than its nominal"),
])
def test_bad_limits_say_what_is_wrong(text, fragment):
    with pytest.raises(SetupError, match=fragment):
        parse_limit("L", text)


def test_number_instead_of_text_is_refused():
    with pytest.raises(SetupError, match="as text"):
        parse_limit("Q", 40)


def test_decision_rules():
    simple = parse_spec({"limits": {"Q": ">= 40"}})
    assert simple.rule == "simple" and simple.guard_factor == 0.0
    guard = parse_spec({"limits": {"Q": ">= 40"}, "decision": {"rule": "guard-band"}})
    assert guard.guard_factor == 1.0  # ILAC-G8 §4.2.3: w = U by default
    wide = parse_spec({"limits": {"Q": ">= 40"}, "decision": {"rule": "guard-band", "guard_factor": 1.5}})
    assert wide.guard_factor == 1.5


@pytest.mark.parametrize("data, fragment", [
    ({"limits": {"Q": ">= 40"}, "limts": {}}, "unknown spec key 'limts'"),
    ({"limits": {"Q": ">= 40"}, "decision": {"rule": "simple", "gaurd": 1}}, "'gaurd'"),
    ({"limits": {"Q": ">= 40"}, "decision": {"rule": "strict"}}, "unknown decision rule"),
    ({"limits": {"Q": ">= 40"}, "decision": {"guard_factor": 2}}, "needs rule"),
    ({"limits": {"Q": ">= 40"}, "decision": {"rule": "guard-band", "guard_factor": -1}}, ">= 0"),
    ({"limits": {}}, "empty"),
])
def test_bad_spec_files(data, fragment):
    with pytest.raises(SetupError, match=fragment):
        parse_spec(data)


def test_limit_on_a_quantity_the_method_does_not_report():
    spec = parse_spec({"limits": {"Q": ">= 40"}}, source="spec.toml")
    with pytest.raises(SetupError, match="reports only: L, R"):
        spec.check_quantities(("L", "R"), "rl-step")


def test_load_spec_from_toml(tmp_path):
    path = tmp_path / "spec.toml"
    path.write_text('[limits]\nL = "47 uH ±5%"\nR = "<= 0.15 ohm"\n[decision]\nrule = "guard-band"\n',
                    encoding="utf-8")
    spec = load_spec(path)
    assert set(spec.limits) == {"L", "R"} and spec.rule == "guard-band"
    path.write_text("[limits\n", encoding="utf-8")
    with pytest.raises(SetupError, match="not valid TOML"):
        load_spec(path)
    with pytest.raises(SetupError, match="spec file .*missing.toml does not exist"):
        load_spec(tmp_path / "missing.toml")


@pytest.mark.parametrize("toml, fragment", [
    ('[limit]\nL = "47 uH ±5%"\n', "unknown spec key 'limit'; valid: limits, decision"),
    ('[limits]\nL = "47 uH ±5%"\n[decision]\nrule = "simple"\nguard = 1\n',
     "unknown [decision] key 'guard'; valid: rule, guard_factor"),
    ('rule = "simple"\n[limits]\nL = "47 uH ±5%"\n', "unknown spec key 'rule'"),
])
def test_every_spec_table_rejects_unknown_keys(tmp_path, toml, fragment):
    path = tmp_path / "spec.toml"
    path.write_text(toml, encoding="utf-8")
    with pytest.raises(SetupError) as err:
        load_spec(path)
    assert fragment in str(err.value) and "\n" not in str(err.value)


def test_limits_table_keys_are_checked_against_the_method():
    # [limits] keys are quantity names: the method's list is the set of valid keys
    spec = parse_spec({"limits": {"L": "47 uH ±5%", "Lx": "<= 1 mH"}}, source="spec.toml")
    with pytest.raises(SetupError, match="limit for 'Lx', but method 'rl-step' reports only: L, R, tau"):
        spec.check_quantities(("L", "R", "tau"), "rl-step")


@pytest.mark.parametrize("text, lower, upper", [
    ("<= 10R", None, 10.0),                  # IEC 60062: 10R = 10 ohm (was 1e28 ohm)
    ("50,0 uH .. 60,0 uH", 50e-6, 60e-6),    # decimal comma (was 500 uH)
])
def test_limits_use_the_strict_value_grammar(text, lower, upper):
    limit = parse_limit("x", text)
    assert limit.lower == (pytest.approx(lower) if lower is not None else None)
    assert limit.upper == pytest.approx(upper)


@pytest.mark.parametrize("text", ["<= 1,000 ohm", "<= 1e400 ohm", "47 uH ±5% k=2", "<= 10 ohm 1", "<= nan"])
def test_limits_that_would_be_misread_are_refused(text):
    with pytest.raises(SetupError) as err:
        parse_limit("x", text)
    assert "\n" not in str(err.value)


@pytest.mark.parametrize("text", ["330 uH ±10% k=2", "330 uH ±10 % u=1%", "<= 0.15 ohm k = 2"])
def test_a_coverage_factor_in_a_limit_is_named(text):
    # it was refused as "'% k=2' follows the value", which does not say what is wrong
    with pytest.raises(SetupError, match="a limit does not have"):
        parse_limit("L", text)


def test_a_limit_in_another_unit_is_refused_before_any_analysis():
    # "330 nF" for L: every capture was analysed and each row said "error", and the results
    # file was then bound to the wrong spec (docs/batch.md: spec errors are refused, code 3,
    # before anything is analysed)
    spec = parse_spec({"limits": {"L": "330 nF ±10%", "Q": ">= 40"}})
    with pytest.raises(SetupError, match="limit for 'L' is in 'F', but L is in 'H'"):
        spec.check_quantities(("L", "Q"), "lc-ring", units={"L": "H", "Q": ""})
    parse_spec({"limits": {"L": "330 uH ±10%", "Q": ">= 40"}}).check_quantities(
        ("L", "Q"), "lc-ring", units={"L": "H", "Q": ""})
