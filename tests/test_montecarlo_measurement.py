"""Monte Carlo (JCGM 101:2008) on a method's own measurement function, through the front door.

References: JCGM 101:2008 clause 9 (worked examples; values marked "S" as in
tests/test_montecarlo.py, confirmed from a secondary source; 9.2.2 from memory, but it is
exact: a sum of four N(0, 1) inputs is N(0, 4), whose 95 % interval is ±1.95996·2).
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest
from scipy import stats
from uncertainties import umath

import wavefit
from wavefit.cli import main
from wavefit.errors import SetupError
from wavefit.montecarlo import draw_inputs, propagate_measurement
from wavefit.uncertainty import InputSet, linearise, propagate, unit_variables

SAMPLES = Path(__file__).resolve().parent.parent / "sample_data"
P95 = 0.95


def _kept(inputs, model, units):
    """Propagate as a method does; the propagation keeps what Monte Carlo needs."""
    prop = propagate(inputs, model, units, probability=P95)
    assert prop.inputs is inputs and prop.model is model
    return prop


def test_jcgm101_9_2_2_additive_normal_inputs_mc_equals_linear():
    inputs = InputSet()
    for k in range(4):
        inputs.add(f"X{k + 1}", 0.0, 1.0)
    prop = _kept(inputs, lambda x: {"Y": sum(x.values())}, {})
    mc = propagate_measurement(prop.inputs, prop.model, draws=1_000_000, probability=P95).quantities["Y"]
    assert prop.quantities["Y"].expanded_uncertainty == pytest.approx(3.92, abs=0.005)
    assert mc.interval[0] == pytest.approx(-3.92, abs=0.015)
    assert mc.interval[1] == pytest.approx(3.92, abs=0.015)


@pytest.mark.parametrize("r, u_expected", [(0.0, 112e-6), (0.9, 121e-6)])
def test_jcgm101_9_4_comparison_loss_mc_differs_from_linear(r, u_expected):
    # JCGM 101 9.4: delta = X1² + X2², x1 = 0.010, x2 = 0, u = 0.005; MCM u = 112e-6 (r = 0) and
    # 121e-6 (r = 0.9) (S), first-order GUF u = 2·x1·u = 100e-6
    u = 0.005
    inputs = InputSet()
    inputs.add_correlated(["X1", "X2"], [0.010, 0.0], np.array([[u * u, r * u * u], [r * u * u, u * u]]),
                          ["", ""], dof=math.inf, group="pair")
    prop = _kept(inputs, lambda x: {"dY": x["X1"] ** 2 + x["X2"] ** 2}, {})
    assert prop.quantities["dY"].standard_uncertainty == pytest.approx(100e-6, rel=1e-9)
    mc = propagate_measurement(prop.inputs, prop.model, draws=1_000_000, probability=P95).quantities["dY"]
    assert mc.standard_uncertainty == pytest.approx(u_expected, abs=1.5e-6)


def test_curve_of_squares_against_the_noncentral_chi_square_jcgm101_9_4():
    """A curve Y(a) = (X1 + a)² + X2², X1 and X2 independent N(0, u²): Y/u² is noncentral χ² with
    2 degrees of freedom and noncentrality (a/u)² (the distribution of scipy.stats.ncx2), so
    each point's mean u²(2 + λ), standard deviation 2u·√(u² + a²) and 95 % quantiles are exact.
    It is JCGM 101 9.4 (comparison loss, u = 0.005) along x1 = a: at a = 0.010 the MCM
    u = 112e-6 against the GUF's 100e-6 (S); at a = 0 the GUF gives u = 0 while the MCM gives
    50e-6 and the shortest 95 % interval [0, 150e-6] (JCGM values from memory; both exact here:
    u²·2 and the exponential's u²·(−2 ln 0.05))."""
    u = 0.005
    a = np.array([0.0, 0.005, 0.010, 0.050])
    inputs = InputSet()
    inputs.add("X1", 0.0, u)
    inputs.add("X2", 0.0, u)

    def model(x):
        return {"dY": (x["X1"] + a) ** 2 + x["X2"] ** 2}

    report = propagate_measurement(inputs, model, draws=1_000_000, probability=P95)
    assert report.quantities == {} and report.invalid == {"dY": 0}
    points = report.curves["dY"]
    lam = (a / u) ** 2
    sd = 2 * u * np.sqrt(u * u + a * a)
    for k, mc in enumerate(points):
        low, high = u * u * stats.ncx2.ppf([0.025, 0.975], 2, lam[k])
        assert mc.value == pytest.approx(u * u * (2 + lam[k]), rel=0.005)
        assert mc.standard_uncertainty == pytest.approx(sd[k], rel=0.01)
        assert mc.interval[0] == pytest.approx(low, abs=0.01 * (high - low))
        assert mc.interval[1] == pytest.approx(high, abs=0.01 * (high - low))
    assert points[2].standard_uncertainty == pytest.approx(112e-6, abs=1.5e-6)
    assert points[0].shortest_interval[0] == pytest.approx(0.0, abs=1e-6)
    assert points[0].shortest_interval[1] == pytest.approx(-2 * math.log(0.05) * u * u, rel=0.01)
    variables = unit_variables(inputs)
    linear = linearise(list(model(variables)["dY"]), variables, inputs, P95)
    np.testing.assert_allclose(linear.standard_uncertainty, 2 * u * a, rtol=1e-12)  # GUF: |∂Y/∂X1|·u


@pytest.mark.parametrize("model", [
    lambda x: {"y": x["a"] if x["a"] > 0 else -x["a"]},
    lambda x: {"y": math.sqrt(x["a"])},
    lambda x: {"y": umath.sqrt(x["a"])},
])
def test_a_function_that_needs_one_number_is_refused_not_evaluated_at_one_point(model):
    inputs = InputSet()
    inputs.add("a", 2.0, 0.1)
    with pytest.raises(TypeError):
        propagate_measurement(inputs, model, draws=1000)


def test_a_block_with_finite_dof_is_drawn_as_multivariate_t():
    # the t distribution with nu degrees of freedom and scale s has variance s²·nu/(nu − 2)
    inputs = InputSet()
    inputs.add_correlated(["a", "b"], [0.0, 0.0], np.array([[1.0, 0.5], [0.5, 1.0]]), ["", ""], dof=5.0,
                          group="fit")
    drawn = draw_inputs(inputs, 400_000, np.random.default_rng(1))
    assert np.var(drawn["a"]) == pytest.approx(5 / 3, rel=0.05)
    assert np.corrcoef(drawn["a"], drawn["b"])[0, 1] == pytest.approx(0.5, abs=0.01)


@pytest.fixture(scope="module")
def ring_mc():
    return wavefit.analyze(SAMPLES / "tank_ring.csv", SAMPLES / "tank_ring.toml", uncertainty="montecarlo",
                           draws=200_000)


def test_ring_near_linear_quantities_agree_with_the_linear_interval(ring_mc):
    # f0 and alpha are near-linear in the fitted pole with Gaussian fit errors: the law of
    # propagation and Monte Carlo must agree (JCGM 101 5.11: the GUF is valid there)
    for name in ("f0", "alpha", "Q_loaded"):
        q, mc = ring_mc.quantities[name], ring_mc.monte_carlo.quantities[name]
        assert mc.standard_uncertainty == pytest.approx(q.standard_uncertainty, rel=0.01)
        assert mc.interval[0] == pytest.approx(q.value - q.expanded_uncertainty, abs=0.03 * q.expanded_uncertainty)
        assert mc.interval[1] == pytest.approx(q.value + q.expanded_uncertainty, abs=0.03 * q.expanded_uncertainty)


def test_ring_inductance_dominated_by_a_rectangular_tolerance_has_a_shorter_mc_interval(ring_mc):
    # L's budget is led by the capacitor's ±1 % band (rectangular): the output is not Gaussian and
    # k = 2 overstates the 95.45 % interval, as in JCGM 101 9.2.4 (GUF ±19.9 against MCM ±17.0)
    q, mc = ring_mc.quantities["L"], ring_mc.monte_carlo.quantities["L"]
    assert (mc.interval[1] - mc.interval[0]) / 2 < 0.95 * q.expanded_uncertainty
    assert mc.standard_uncertainty == pytest.approx(q.standard_uncertainty, rel=0.02)


def test_monte_carlo_json_and_reproducibility(ring_mc):
    data = json.loads(json.dumps(ring_mc.to_dict(), allow_nan=False))["monte_carlo"]
    assert data["draws"] == 200_000 and data["seed"] == 12345 and data["coverage_probability"] == 0.9545
    entry = data["quantities"]["L"]
    q = ring_mc.quantities["L"]
    assert entry["linear_interval"] == [q.value - q.expanded_uncertainty, q.value + q.expanded_uncertainty]
    assert set(entry) == {"mean", "standard_uncertainty", "interval", "shortest_interval", "invalid_draws",
                          "linear_interval"}
    again = wavefit.analyze(SAMPLES / "tank_ring.csv", SAMPLES / "tank_ring.toml", uncertainty="montecarlo",
                            draws=200_000)
    assert again.monte_carlo == ring_mc.monte_carlo
    assert ring_mc.quantities == again.quantities  # the linear result does not move


def test_rl_step_measurement_function_runs_on_draws():
    result = wavefit.analyze(SAMPLES / "choke_step.csv", SAMPLES / "choke_step.toml", uncertainty="montecarlo",
                             draws=100_000)
    mc = result.monte_carlo.quantities
    assert set(mc) == set(result.quantities)
    assert mc["I_final"].value > 0  # the sign is fixed at the estimates, as in the linear evaluation
    assert mc["L"].standard_uncertainty == pytest.approx(result.quantities["L"].standard_uncertainty, rel=0.05)


def test_unknown_uncertainty_mode_is_a_setup_error():
    with pytest.raises(SetupError, match="uncertainty must be one of"):
        wavefit.analyze(SAMPLES / "tank_ring.csv", SAMPLES / "tank_ring.toml", uncertainty="bootstrap")


def test_cli_reports_both_intervals(capsys):
    args = ["analyze", str(SAMPLES / "tank_ring.csv"), "--setup", str(SAMPLES / "tank_ring.toml"),
            "--uncertainty", "montecarlo"]
    assert main(args) == 0
    text = capsys.readouterr().out
    assert "Monte Carlo (JCGM 101, 1000000 draws" in text and "linear y ± U" in text
    assert main([*args, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert set(data["monte_carlo"]["quantities"]) == set(data["quantities"])


def test_cli_draws_and_seed(capsys):
    args = ["analyze", str(SAMPLES / "tank_ring.csv"), "--setup", str(SAMPLES / "tank_ring.toml"),
            "--uncertainty", "montecarlo", "--draws", "20000", "--json"]
    runs = []
    for seed in ("7", "7", "8"):
        assert main([*args, "--seed", seed]) == 0
        runs.append(json.loads(capsys.readouterr().out)["monte_carlo"])
    assert runs[0] == runs[1] != runs[2]  # a seed repeats its run; another seed gives other draws
    assert runs[0]["draws"] == 20000 and runs[0]["seed"] == 7


@pytest.mark.parametrize("extra, message", [
    (["--uncertainty", "montecarlo", "--draws", "100"], "too few"),
    (["--draws", "20000"], "applies only with --uncertainty montecarlo"),
    (["--uncertainty", "montecarlo", "--draws", "20000", "--seed", "-1"], "-1 is negative"),  # was exit 4, after the analysis
])
def test_cli_refuses_unusable_draws(capsys, extra, message):
    args = ["analyze", str(SAMPLES / "tank_ring.csv"), "--setup", str(SAMPLES / "tank_ring.toml"), *extra]
    try:
        code = main(args)
    except SystemExit as stop:  # argparse's own refusal of an option's value
        code = stop.code
    assert code == 2
    assert message in capsys.readouterr().err


def test_study_rectangular_led_inductance_mc_covers_and_linear_overstates():
    # fast version of benchmarks/montecarlo_vs_linear.py: with the capacitor drawn from its ±2 %
    # band in every trial, the Monte Carlo interval of L covers near 95.45 % while y ± 2u covers
    # every trial (the GUF overstates a rectangular-led output, JCGM 101 9.2.4); 150 trials give
    # a coverage to about ±1.7 % (one sd)
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    from montecarlo_vs_linear import run_snr

    rows = {r.quantity: r for r in run_snr(30.0, 150, np.random.default_rng(5))}
    row = rows["L"]
    assert row.trials == 150
    assert row.linear_coverage == 1.0
    assert 0.90 <= row.mc_coverage <= 0.99, row
    assert row.width_ratio < 0.9, row
    assert abs(rows["f0"].width_ratio - 1) < 0.01, rows["f0"]
