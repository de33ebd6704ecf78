"""Fast version of benchmarks/estimator_quality.py: the estimators against the Cramér–Rao bound.

The bound is the inverse Fisher information of the same signal model (Kay 1993 §3.9; see
benchmarks/estimator_quality.py and docs/estimator-quality.md). Loose limits, because a few
hundred trials estimate a variance only to about ±12 % and a coverage to about ±2 %.
"""
import sys
from pathlib import Path

import pytest

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from estimator_quality import Scenario, run_scenario  # noqa: E402


@pytest.mark.parametrize("method, quantity", [("rl-step", "tau"), ("lc-ring", "f0")])
def test_white_noise_efficiency_bias_and_coverage(method, quantity):
    rows = {r.quantity: r for r in run_scenario(Scenario(method, "white", 40, "short"), trials=150, seed=3)}
    row = rows[quantity]
    assert row.trials == 150
    assert row.efficiency > 0.75, row
    assert abs(row.bias_sd) < 0.3, row  # about 3.5 times the sampling error 1/√150
    assert 0.88 <= row.coverage <= 1.0, row


@pytest.mark.parametrize("method", ["rl-step", "lc-ring"])
def test_band_limited_noise_coverage(method):
    rows = run_scenario(Scenario(method, "band-limited", 40, "short"), trials=100, seed=4)
    for row in rows:
        assert row.trials == 100
        assert 0.85 <= row.coverage <= 1.0, row


def test_target_report_counts_rows_met_close_and_missed():
    from estimator_quality import Row, target_report

    white = Scenario("lc-ring", "white", 40, "short")
    rows = [Row(white, "f0", 0.95, 0.02, 0.95, 1.0, 1000),   # meets all
            Row(white, "alpha", 1.0, 0.25, 0.975, 1.0, 1000),  # bias 0.25 ± 0.032: missed; coverage close
            Row(white, "f0", 0.85, -0.05, 0.90, 1.0, 1000)]   # efficiency 0.85 ± 0.038: close; coverage missed
    report = target_report(rows)
    assert "efficiency >= 0.9 (tau, f0; white noise; SNR >= 30 dB): 1 rows met, 1 outside" in report
    assert "|bias| <= 0.1 standard errors: 2 rows met, 0 outside by less than 2 sampling errors, 1 not met" in report
    assert "coverage 93-97 % (white noise, and 8-bit, which is white noise quantised): 1 rows met, 1 outside" in report
    assert "not met: lc-ring f0 white 40 dB short: 0.900" in report
