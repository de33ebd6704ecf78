"""Lot statistics: counts, yield, mean/s/min/max and process capability indices."""
from __future__ import annotations

import math

import pytest

from wavefit.batch.spec import Limit, parse_limit
from wavefit.batch.statistics import capability, far_from_limits, quantity_statistics, summarize, usable


def test_capability_indices_follow_the_handbook_definitions():
    # NIST/SEMATECH e-Handbook §6.1.6: Cp = (USL-LSL)/(6s), Cpk = min(USL-mean, mean-LSL)/(3s).
    # Hand values USL = 20, LSL = 8, mean = 16, s = 2 (the handbook's worked example, from memory):
    # Cp = 12/12 = 1.00, Cpk = min(4, 8)/6 = 0.667.
    cp, cpk = capability(16.0, 2.0, 8.0, 20.0)
    assert cp == pytest.approx(1.0)
    assert cpk == pytest.approx(4.0 / 6.0)


def test_one_sided_capability():
    # Cpu = (USL - mean)/(3s) with an upper limit only, Cpl = (mean - LSL)/(3s) with a lower one (§6.1.6)
    assert capability(0.10, 0.01, None, 0.15) == (None, pytest.approx(5.0 / 3.0))
    assert capability(55.0, 5.0, 40.0, None) == (None, pytest.approx(1.0))
    assert capability(1.0, 0.0, 0.0, 2.0) == (None, None)  # no spread: the index is undefined


def test_mean_and_sample_standard_deviation():
    # NIST StRD univariate "NumAcc1" (values and certified results from memory; checked by hand):
    # 10000001, 10000003, 10000002 -> mean 10000002, s = 1 (n - 1 in the denominator)
    stats = quantity_statistics("x", [10000001.0, 10000003.0, 10000002.0], parse_limit("x", "0 .. 2e7"))
    assert stats.mean == 10000002.0
    assert stats.std == pytest.approx(1.0, rel=1e-12)
    assert (stats.minimum, stats.maximum, stats.n) == (10000001.0, 10000003.0, 3)


def test_summary_counts_yield_and_skips_error_rows():
    limit = parse_limit("L", "100 uH ±10%")
    rows = [{"verdict": "pass", "L": 100e-6}, {"verdict": "pass", "L": 102e-6},
            {"verdict": "conditional pass", "L": 109e-6}, {"verdict": "fail", "L": 115e-6},
            {"verdict": "error", "L": None}]
    summary = summarize(rows, {"L": limit})
    assert summary.total == 5
    assert summary.counts == {"pass": 2, "conditional pass": 1, "conditional fail": 0, "fail": 1, "error": 1}
    assert summary.yield_ == pytest.approx(2 / 5)            # passes over all rows: the error row did not pass
    assert summary.yield_with_conditional == pytest.approx(3 / 5)
    assert summary.to_dict()["errors_counted_as_not_passed"] == 1
    stats = summary.quantities["L"]
    values = [100e-6, 102e-6, 109e-6, 115e-6]
    mean = sum(values) / 4
    s = math.sqrt(sum((v - mean) ** 2 for v in values) / 3)
    assert stats.n == 4 and stats.mean == pytest.approx(mean) and stats.std == pytest.approx(s)
    assert stats.cpk == pytest.approx(min(110e-6 - mean, mean - 90e-6) / (3 * s))
    assert summary.to_dict()["quantities"]["L"]["cp"] == pytest.approx(20e-6 / (6 * s))


def test_summary_of_a_lot_without_analysed_parts():
    summary = summarize([{"verdict": "error"}], {"L": parse_limit("L", "100 uH ±10%")})
    assert summary.yield_ == 0.0
    assert summarize([], {"L": parse_limit("L", "100 uH ±10%")}).yield_ is None
    data = summary.to_dict()
    assert data["quantities"]["L"]["n"] == 0 and data["quantities"]["L"]["mean"] is None


def test_zero_spread_leaves_capability_undefined():
    # equal values: s is only the rounding of the mean (the issue's Cpk 2.6e14); values that
    # differ are a spread however small it is against the limits
    limit = parse_limit("L", "100 uH ±10%")
    for value in (100e-6, 110e-6 * (1 - 1e-16), 0.1 + 0.2):
        stats = quantity_statistics("L", [value] * 37, limit)
        assert stats.std == 0.0 and stats.cp is None and stats.cpk is None
        assert summarize([{"verdict": "pass", "L": value}] * 3, {"L": limit}).to_dict()["quantities"]["L"]["cpk"] is None
    spread = quantity_statistics("L", [100e-6, 100e-6 * (1 + 1e-9)], limit)
    assert spread.std > 0 and spread.cp == pytest.approx(20e-6 / (6 * spread.std))


def test_impossible_values_never_enter_the_statistics():
    limit = parse_limit("L", "100 uH ±10%")
    rows = [{"verdict": "pass", "L": 100e-6}, {"verdict": "pass", "L": 104e-6},
            {"verdict": "fail", "L": float("inf")}, {"verdict": "fail", "L": float("nan")},
            {"verdict": "fail", "L": -100e-6}, {"verdict": "fail", "L": 0.0},
            {"verdict": "error", "L": 1.0}, {"verdict": "pass", "L": None}]
    stats = summarize(rows, {"L": limit}, positive=("L",)).quantities["L"]
    assert stats.n == 2 and stats.excluded == 4
    assert stats.mean == pytest.approx(102e-6) and stats.maximum == 104e-6
    # a quantity that may be negative keeps its negative values
    assert summarize(rows, {"L": limit}).quantities["L"].n == 4


def test_values_near_the_float_limit_give_undefined_not_a_warning(recwarn):
    stats = quantity_statistics("L", [1e308, 1.7e308], parse_limit("L", "100 uH ±10%"))
    assert stats.cp is None and stats.cpk is None and summarize([], {}).to_dict()["quantities"] == {}
    assert not [w for w in recwarn if issubclass(w.category, RuntimeWarning)]


def test_text_summary_says_undefined_and_how_errors_count():
    from wavefit.batch.spec import parse_spec
    from wavefit.batch.summary_text import render_summary

    spec = parse_spec({"limits": {"L": "100 uH ±10%"}})
    rows = [{"verdict": "pass", "L": 100e-6}] * 3 + [{"verdict": "error", "L": None}]
    text = render_summary(summarize(rows, spec.limits), spec, "0412")
    assert "yield: 75.0 % pass" in text and "the 1 error row counted as not passed" in text
    assert text.splitlines()[-1].split()[-2:] == ["undefined", "undefined"]


def test_the_plot_takes_the_values_the_statistics_take():
    """One rule for both: no error rows, no value a part could not have (usable)."""
    rows = [{"verdict": "pass", "L": 1e-4}, {"verdict": "error", "L": 1e-4}, {"verdict": "fail", "L": -1e-4},
            {"verdict": "fail", "L": math.nan}, {"verdict": "pass", "L": None}, {"verdict": "fail", "R": -1.0}]
    assert [usable(row, "L", True) for row in rows] == [1e-4, None, None, None, None, None]
    assert usable(rows[2], "L", False) == -1e-4 and usable(rows[5], "R", False) == -1.0
    limit = Limit("L", None, 2e-4, "H", "<= 200 uH")
    plotted = [v for v in (usable(row, "L", True) for row in rows) if v is not None]
    assert summarize(rows, {"L": limit}, ("L",)).quantities["L"].n == len(plotted)


def test_values_far_beyond_a_limit_without_a_unit_are_flagged():
    # a spec ">= 297" meant in µH is read as 297 H: every part fails by a factor of about 10⁶,
    # and nothing said why; a factor of 10³ (one unit prefix) or more in one direction is named
    henries = Limit("L", 297.0, None, "", ">= 297")
    assert far_from_limits([330e-6, None, 315e-6], henries) == pytest.approx(297.0 / 330e-6)
    assert far_from_limits([330e-6, 0.5], henries) is None            # not every value
    assert far_from_limits([330e-6], Limit("L", 297e-6, 363e-6, "uH", "297 uH .. 363 uH")) is None
    assert far_from_limits([3.3], Limit("L", None, 363e-6, "", "<= 363e-6")) == pytest.approx(3.3 / 363e-6)
    assert far_from_limits([0.33], Limit("L", None, 363e-6, "", "<= 363e-6")) is None  # 909 times: below 10³
    assert far_from_limits([None], henries) is None


def test_verdicts_within_U_of_a_limit_are_counted_and_named_under_simple_acceptance():
    # ILAC-G8:09/2019 §4.2.1: under simple acceptance a measured value within U of a limit is
    # judged on a value the measurement does not pin down; a QA lot of 12 parts had 5 such
    # verdicts (3 good parts failed, 1 bad part passed) and the summary said only "pass: 8 fail: 4"
    from wavefit.batch.spec import parse_spec
    from wavefit.batch.statistics import within_uncertainty_of_a_limit
    from wavefit.batch.summary_text import render_summary

    spec = parse_spec({"limits": {"L": "100 uH ±10%"}, "decision": {"rule": "simple"}})
    limits = spec.limits
    assert within_uncertainty_of_a_limit({"L": 91e-6, "L_U": 2e-6}, limits)        # 1 µH from 90 µH
    assert within_uncertainty_of_a_limit({"L": 109.5e-6, "L_U": 2e-6}, limits)     # 0.5 µH from 110 µH
    assert not within_uncertainty_of_a_limit({"L": 100e-6, "L_U": 2e-6}, limits)
    assert not within_uncertainty_of_a_limit({"L": 93e-6, "L_U": 2e-6}, limits)    # 3 µH: outside U
    assert not within_uncertainty_of_a_limit({"L": 91e-6, "L_U": None}, limits)
    rows = [{"verdict": "pass", "L": 100e-6, "L_U": 2e-6}, {"verdict": "pass", "L": 91e-6, "L_U": 2e-6},
            {"verdict": "fail", "L": 110.5e-6, "L_U": 2e-6}, {"verdict": "error", "L": None, "L_U": None}]
    summary = summarize(rows, limits)
    assert summary.near_limits == 2 and summary.to_dict()["decisions_within_U_of_a_limit"] == 2
    assert "2 of 3 verdicts lie within U of a limit" in render_summary(summary, spec, "lot")
    guarded = parse_spec({"limits": {"L": "100 uH ±10%"}, "decision": {"rule": "guard-band"}})
    assert "within U of a limit" not in render_summary(summary, guarded, "lot")  # its conditional counts say it


def test_only_positive_lots_are_judged_for_a_missing_prefix():
    # values at or below zero say nothing of a prefix: parts far inside "<= 0.15" on the negative
    # side, or a quantity nil within its noise, were called 10³ times beyond (a review's probe)
    upper = Limit("R", None, 0.15, "", "<= 0.15")
    lower = Limit("R", 0.05, None, "", ">= 0.05")
    assert far_from_limits([-200.0, -180.0, -250.0], upper) is None
    assert far_from_limits([2e-5, -3e-5, 1e-5], lower) is None
    assert far_from_limits([2e-5, 3e-5, 1e-5], lower) == pytest.approx(0.05 / 3e-5)
