"""Decision rules against the definitions of ILAC-G8:09/2019 with hand-made values.

§4.2.1 simple acceptance: accept when the measured value lies within the
tolerance limits (w = 0). §4.2.3 non-binary statement with guard band w = U:
pass when the value is inside the limits by more than w, conditional pass when
inside but within w of a limit, conditional fail when outside but within w,
fail when outside by more than w.
"""
from __future__ import annotations

import math

import pytest
from hypothesis import given, strategies as st

from wavefit.batch.decision import (CONDITIONAL_FAIL, CONDITIONAL_PASS, ERROR, FAIL, PASS, classify,
                                    decide_part, decide_quantity, worst)
from wavefit.batch.spec import parse_spec
from wavefit.results import QuantityResult

GUARD = parse_spec({"limits": {"L": "100 uH ±10%", "R": "<= 0.15 ohm"}, "decision": {"rule": "guard-band"}})
SIMPLE = parse_spec({"limits": {"L": "100 uH ±10%", "R": "<= 0.15 ohm"}})


def q(name: str, value: float, expanded: float, unit: str) -> QuantityResult:
    return QuantityResult(name, value, unit, expanded / 2, expanded, 2.0)


# Upper limit 110 uH, U = 2 uH: pass below 108 uH, fail above 112 uH (ILAC-G8 §4.2.3, w = U).
@pytest.mark.parametrize("value_uh, verdict", [
    (100.0, PASS), (107.9, PASS), (108.1, CONDITIONAL_PASS), (110.0, CONDITIONAL_PASS),
    (110.1, CONDITIONAL_FAIL), (111.9, CONDITIONAL_FAIL), (112.1, FAIL),
    # the lower limit 90 uH mirrors it
    (92.1, PASS), (91.9, CONDITIONAL_PASS), (89.9, CONDITIONAL_FAIL), (87.9, FAIL),
])
def test_guard_band_statements(value_uh, verdict):
    decision = decide_quantity(q("L", value_uh * 1e-6, 2e-6, "H"), GUARD.limits["L"], GUARD)
    assert decision.verdict == verdict
    assert decision.guard_band == pytest.approx(2e-6)


@pytest.mark.parametrize("value_uh, verdict", [(110.0, PASS), (109.9, PASS), (110.1, FAIL), (89.9, FAIL)])
def test_simple_acceptance_ignores_uncertainty(value_uh, verdict):
    # §4.2.1: w = 0, a value on the limit is within it
    decision = decide_quantity(q("L", value_uh * 1e-6, 5e-6, "H"), SIMPLE.limits["L"], SIMPLE)
    assert decision.verdict == verdict and decision.guard_band == 0.0


def test_guard_factor_scales_the_band():
    spec = parse_spec({"limits": {"L": "100 uH ±10%"}, "decision": {"rule": "guard-band", "guard_factor": 2}})
    # 3 uH inside the upper limit with U = 2 uH: inside w = 4 uH -> conditional pass
    assert decide_quantity(q("L", 107e-6, 2e-6, "H"), spec.limits["L"], spec).verdict == CONDITIONAL_PASS
    assert decide_quantity(q("L", 105e-6, 2e-6, "H"), spec.limits["L"], spec).verdict == PASS


def test_classify_boundaries():
    assert classify(0.0, 0.0) == PASS
    assert classify(1.0, 1.0) == CONDITIONAL_PASS   # not inside by *more* than w
    assert classify(-1.0, 1.0) == CONDITIONAL_FAIL
    assert classify(-1.0001, 1.0) == FAIL


def test_part_verdict_is_the_worst_of_its_quantities():
    quantities = {"L": q("L", 100e-6, 1e-6, "H"), "R": q("R", 0.149, 0.01, "ohm")}
    verdict, decisions = decide_part(quantities, GUARD)
    assert verdict == CONDITIONAL_PASS
    assert [d.verdict for d in decisions] == [PASS, CONDITIONAL_PASS]
    assert "R conditional pass against <= 0.15 ohm" in decisions[1].reason
    assert worst([PASS, FAIL, CONDITIONAL_FAIL]) == FAIL
    assert worst([CONDITIONAL_FAIL, ERROR]) == ERROR


def test_missing_quantity_wrong_unit_or_non_finite_is_an_error():
    verdict, decisions = decide_part({"L": q("L", 100e-6, 1e-6, "H")}, GUARD)
    assert verdict == ERROR and "not reported" in decisions[1].reason
    wrong_unit = decide_quantity(q("L", 100e-6, 1e-6, "F"), GUARD.limits["L"], GUARD)
    assert wrong_unit.verdict == ERROR and "'H'" in wrong_unit.reason
    nan_u = decide_quantity(q("L", 100e-6, math.nan, "H"), GUARD.limits["L"], GUARD)
    assert nan_u.verdict == ERROR
    nan_value = decide_quantity(q("L", math.nan, 1e-6, "H"), SIMPLE.limits["L"], SIMPLE)
    assert nan_value.verdict == ERROR



@given(true=st.floats(70.0, 130.0), expanded=st.floats(0.01, 5.0), error=st.floats(-1.0, 1.0))
def test_guard_band_never_misjudges_a_part_far_from_the_limits(true, expanded, error):
    # The acceptance rule of the batch issue: with w = U and a measurement within U of the true
    # value, a part more than 2U inside the limits passes, more than 2U outside fails.
    measured = true + error * expanded
    verdict = decide_quantity(q("L", measured * 1e-6, expanded * 1e-6, "H"), GUARD.limits["L"], GUARD).verdict
    inside = min(true - 90.0, 110.0 - true)
    slack = 1e-9  # µH: keeps floating-point rounding at the exact boundaries out of the test
    if inside > 2 * expanded + slack:
        assert verdict == PASS
    elif inside < -2 * expanded - slack:
        assert verdict == FAIL
    elif inside >= slack and abs(error) < 1:
        assert verdict != FAIL          # a conforming part is never a plain fail
