"""The result object for work in Python: correlated values, frames, lmfit parameters, report, plot.

Checks rest on the GUM's definitions (JCGM 100:2008): the covariance of two outputs is
u(y_i, y_j) = r(y_i, y_j)·u(y_i)·u(y_j) (5.2.2, C.3.6), and a function of the outputs
propagated to first order with their covariance has the uncertainty that the chain rule
gives from the inputs (5.1.2) - so a quantity the method reports as a function of two
others (E = L·I²/2 in rl-step, Q_loaded = π·f0/alpha in lc-ring) must come out of the
correlated values with the reported u. That fails if a correlation is lost or misplaced.
"""
from __future__ import annotations

import json
import math
from pathlib import Path

import lmfit
import numpy as np
import pandas as pd
import pytest
from uncertainties import correlation_matrix, covariance_matrix

import wavefit
from wavefit.report.text import render
from wavefit.results import AnalysisResult, QuantityResult

SAMPLES = Path(__file__).resolve().parent.parent / "sample_data"


@pytest.fixture(scope="module")
def step_result():
    return wavefit.analyze(SAMPLES / "choke_step.csv", SAMPLES / "choke_step.toml")


@pytest.fixture(scope="module")
def ring_result():
    return wavefit.analyze(SAMPLES / "tank_ring.csv", SAMPLES / "tank_ring.toml")


def test_uvalues_carry_the_reported_u_and_correlation(step_result):
    values = step_result.uvalues()
    names = list(step_result.quantities)
    assert list(values) == names
    corr = correlation_matrix([values[n] for n in names])
    for a, na in enumerate(names):
        q = step_result.quantities[na]
        assert values[na].nominal_value == q.value
        assert values[na].std_dev == pytest.approx(q.standard_uncertainty, rel=1e-9)
        for b, nb in enumerate(names):
            assert corr[a, b] == pytest.approx(step_result.correlation[na][nb], abs=1e-7)


def test_uvalues_reproduce_a_derived_quantity_through_the_correlations(step_result, ring_result):
    # GUM 5.1.2 (chain rule): E = L·I²/2 from the correlated L and I_final has the reported u(E)
    v = step_result.uvalues()
    energy = v["L"] * v["I_final"] ** 2 / 2
    assert energy.std_dev == pytest.approx(step_result.quantities["E"].standard_uncertainty, rel=1e-6)
    # the same with the correlations dropped is visibly wrong (the test can fail)
    q = step_result.quantities
    independent = math.hypot(q["I_final"].value ** 2 / 2 * q["L"].standard_uncertainty,
                             q["L"].value * q["I_final"].value * q["I_final"].standard_uncertainty)
    assert abs(independent / q["E"].standard_uncertainty - 1) > 1e-3
    # lc-ring: Q_loaded = w0/(2·alpha) = π·f0/alpha
    r = ring_result.uvalues()
    q_loaded = math.pi * r["f0"] / r["alpha"]
    assert q_loaded.nominal_value == pytest.approx(ring_result.value("Q_loaded"), rel=1e-12)
    assert q_loaded.std_dev == pytest.approx(ring_result.quantities["Q_loaded"].standard_uncertainty, rel=1e-6)


def test_covariance_frame_is_labelled_and_matches_uvalues(step_result):
    frame = step_result.covariance()
    names = list(step_result.quantities)
    assert list(frame.index) == names and list(frame.columns) == names
    assert frame.attrs["units"]["L"] == "H"
    assert np.allclose(frame.values, frame.values.T, rtol=0, atol=0)
    u = np.array([step_result.quantities[n].standard_uncertainty for n in names])
    assert np.allclose(np.diag(frame.values), u ** 2, rtol=1e-12)
    values = step_result.uvalues()
    expected = np.array(covariance_matrix([values[n] for n in names]))
    assert np.allclose(frame.values, expected, rtol=1e-6, atol=1e-12 * np.outer(u, u).max())


def test_to_frame_has_one_row_per_quantity(step_result):
    frame = step_result.to_frame()
    assert list(frame.index) == list(step_result.quantities)
    assert list(frame.columns) == ["value", "unit", "u", "U", "k", "dof"]
    for name, q in step_result.quantities.items():
        row = frame.loc[name]
        assert (row["value"], row["unit"], row["u"], row["U"], row["k"], row["dof"]) == (
            q.value, q.unit, q.standard_uncertainty, q.expanded_uncertainty, q.coverage_factor,
            q.degrees_of_freedom)


@pytest.mark.parametrize("which", ["step_result", "ring_result"])
def test_params_are_the_fitted_inputs_of_the_budget(which, request):
    result = request.getfixturevalue(which)
    params = result.params
    assert isinstance(params, lmfit.Parameters) and len(params) >= 2
    budget = {line.source: line for lines in result.budget.values() for line in lines}
    for name, p in params.items():
        line = budget[p.user_data["input"]]
        assert line.kind == "A"
        assert p.value == line.value
        assert p.stderr == pytest.approx(line.standard_uncertainty, rel=1e-12)
        for other, r in p.correl.items():
            assert params[other].correl[name] == pytest.approx(r, rel=1e-12)
            assert -1.0 <= r <= 1.0
    block = result.fitted[0]
    cov = block.covariance_matrix()
    first, second = (params[n] for n in list(params)[:2])
    assert first.correl[second.name] * first.stderr * second.stderr == pytest.approx(cov[0, 1], rel=1e-9)


def test_ring_params_are_named_as_identifiers(ring_result):
    assert list(ring_result.params) == ["fit_alpha", "fit_w_d"]
    assert ring_result.params["fit_w_d"].user_data["unit"] == "rad/s"


def test_fit_report_lists_parameters_and_degrees_of_freedom(step_result):
    text = step_result.fit_report()
    block = step_result.fitted[0]
    for name in block.names:
        assert name in text
    assert f"degrees of freedom {block.degrees_of_freedom:.4g}" in text
    assert "r(tau_fit, " in text  # tau is strongly correlated with the drive levels in this fit


def test_repr_is_short_and_str_is_the_text_report(step_result):
    text = repr(step_result)
    assert "\n" not in text and len(text) < 200
    assert text.startswith("<AnalysisResult rl-step 'choke_step.csv': L = ")
    assert str(step_result) == render(step_result)


def test_plot_returns_a_figure_without_pyplot(step_result):
    import matplotlib.pyplot as plt
    from matplotlib.figure import Figure

    before = plt.get_fignums()
    fig = step_result.plot()
    assert isinstance(fig, Figure) and len(fig.axes) == 4  # two channels, each with its residuals
    assert plt.get_fignums() == before
    own = Figure()
    ax = own.add_subplot()
    assert step_result.plot(ax=ax) is own
    assert len(ax.lines) == 4  # recorded and fitted, per channel


def test_a_result_built_by_hand_has_no_params():
    q = QuantityResult("L", 1e-6, "H", 1e-8, 2e-8, 2.0)
    result = AnalysisResult("toy", "x.csv", {"L": q}, {}, {})
    assert len(result.params) == 0
    assert "no fitted parameters" in result.fit_report()
    assert result.uvalues()["L"].std_dev == pytest.approx(1e-8)
    assert "provenance" not in result.to_dict()


def test_line_fit_result_plots_and_reports_its_line():
    from matplotlib.figure import Figure

    result = wavefit.analyze(None, SAMPLES / "tank_sweep" / "sweep.toml")
    assert len(result.plot().axes) == 1
    ax = Figure().add_subplot()
    result.plot(ax=ax)
    assert len(ax.lines) >= 2  # the points (with their error bars) and the fitted line
    assert list(result.params) == ["line_slope", "line_intercept"]
    report = result.fit_report()
    assert "s2" in report and "fs2" not in report  # no SI prefix on a squared unit


# tau for the step: its fit carries most of tau's budget, while L's is the channels' gains almost
# entirely (the fit's share fell to 0.05 % once the sample's undithered codes were fitted)
@pytest.mark.parametrize("which, quantity", [("step_result", "tau"), ("ring_result", "alpha")])
def test_json_fitted_blocks_read_back_give_the_budget(which, quantity, request):
    """The JSON ``fitted`` block, read back, is the budget's type A inputs: its covariance's
    diagonal their u(x_i)², and c V cᵀ with the budget's sensitivities the part of u_c² that the
    budget's shares give the block (GUM 5.2.2 eq. 16; the block is independent of the others)."""
    result = request.getfixturevalue(which)
    data = json.loads(json.dumps(result.to_dict(), allow_nan=False))
    (block,) = data["fitted"]
    assert set(block) == {"group", "type", "names", "units", "values", "covariance", "degrees_of_freedom"}
    assert block["degrees_of_freedom"] == pytest.approx(result.fitted[0].degrees_of_freedom, rel=1e-15)
    lines = {line["source"]: line for line in data["budget"][quantity]}
    cov = np.array(block["covariance"])
    for k, name in enumerate(block["names"]):
        if name in lines:
            assert lines[name]["value"] == block["values"][k] and lines[name]["type"] == block["type"]
            assert lines[name]["standard_uncertainty"] == pytest.approx(math.sqrt(cov[k, k]), rel=1e-12)
    c = np.array([lines[name]["sensitivity"] if name in lines else 0.0 for name in block["names"]])
    u_c = data["quantities"][quantity]["standard_uncertainty"]
    share = sum(lines[name]["variance_share"] for name in block["names"] if name in lines)
    assert c @ cov @ c == pytest.approx(share * u_c ** 2, rel=1e-9)
    assert share > 0.01  # the fit carries a visible part of the budget: the check is not empty


def test_a_result_pickles_without_its_propagation(ring_result):
    """A result crosses process boundaries (multiprocessing, caches); the propagation it carries
    for a Monte Carlo run stays behind, everything compared comes back equal."""
    import pickle

    assert ring_result.propagation is not None
    back = pickle.loads(pickle.dumps(ring_result))
    assert back == ring_result and back.propagation is None
    assert back.to_dict() == ring_result.to_dict()


def test_an_exact_input_has_a_share_of_zero_not_minus_zero():
    # an input given as exact (u = 0) with a negative sensitivity (f0 falls as the timebase
    # factor grows) printed "share =  -0.00 %" in the budget
    from wavefit.synth.lc import Tank, ringdown

    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=2.0, feed_resistance=20e3)
    alpha, w_d = tank.poles()
    t, v = ringdown(tank, 2 * math.pi / (w_d * 30), 3000, pre_trigger=50)
    v = v + 0.01 * np.abs(v).max() * np.random.default_rng(1).standard_normal(v.size)
    setup = {"method": "lc-ring", "columns": {"time": "t", "tank": "v"},
             "parts": {"tank_capacitor": "10 nF ±1%", "parallel_load": "20 kohm ±1%"},
             "instrument": {"timebase": "exact", "vertical_gain": "exact"}}
    text = render(wavefit.analyze(pd.DataFrame({"t": t, "v": v}), setup=setup))
    assert "timebase" in text and "share =   0.00 %" in text and "-0.00" not in text


def test_a_long_trace_is_drawn_as_its_envelope():
    # a 10⁷-sample record's plot took over 100 s: more than MOST_DRAWN samples are drawn as the
    # lowest and highest of each run, which keeps every extreme and the order in time
    from wavefit.report.plot import MOST_DRAWN, _envelope

    rng = np.random.default_rng(3)
    t = np.arange(1_000_003) * 1e-6
    y = np.sin(t * 50) + 0.1 * rng.standard_normal(t.size)
    y[:1000] = np.nan   # a model outside its window
    tt, yy = _envelope(t, y)
    assert yy.size <= MOST_DRAWN + 2 * t.size // (MOST_DRAWN // 2) and np.all(np.diff(tt) > 0)
    assert np.nanmax(yy) == np.nanmax(y) and np.nanmin(yy) == np.nanmin(y)
    short = np.arange(10.0)
    assert _envelope(short, short)[1] is short
