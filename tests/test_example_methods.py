"""A method added as one module outside the package (tests/example_rc_step.py), checked against
ngspice, and its curve output rendered by every report with no method-specific code.

External references: the ngspice transient simulation of the RC circuit (the netlist's R and C
are the truth); the law of propagation of uncertainty, JCGM 100:2008 5.2.2 eq. (16), as the
``uncertainties`` package evaluates it for correlated outputs (its ``covariance_matrix``).
"""
from __future__ import annotations

import functools
import json
import math

import numpy as np
import pandas as pd
import pytest
from uncertainties import covariance_matrix, ufloat, unumpy

import example_rc_step  # noqa: F401  (registers the example methods)
import wavefit
from wavefit.cli import main
from wavefit.methods import available
from spice import needs_ngspice, simulate

R_TRUE, C_TRUE = 1000.0, 10e-9
FREQUENCIES = [1e3, 1e4, 1e5]
PARTS = {"capacitor": "10 nF ±1%"}


@functools.lru_cache(maxsize=None)
def rc_step() -> pd.DataFrame:
    """The capacitor voltage of a 1 V step through R into C, from ngspice, with white scope
    noise of 2 mV rms (seeded)."""
    netlist = f"V1 in 0 PULSE(0 1 20e-6 1e-9 1e-9 1 2)\nR1 in cap {R_TRUE}\nC1 cap 0 {C_TRUE:.3e}\n"
    t, v = simulate(netlist, 50e-9, 100e-6, ["v(cap)"])
    y = v["v(cap)"] + np.random.default_rng(1).normal(0.0, 2e-3, t.size)
    return pd.DataFrame({"t": t - t[0], "cap": y})


def setup(method: str) -> dict:
    return {"method": method, "columns": {"time": "t", "capacitor": "cap"}, "parts": PARTS,
            "options": {"frequencies": FREQUENCIES} if method == "example-rc-impedance" else {}}


def impedance_files(folder) -> tuple:
    """The ngspice RC capture and a setup file of the impedance example, written in ``folder``."""
    capture = folder / "rc.csv"
    rc_step().to_csv(capture, index=False)
    setup_file = folder / "setup.toml"
    setup_file.write_text('method = "example-rc-impedance"\n[columns]\ntime = "t"\ncapacitor = "cap"\n'
                          '[parts]\ncapacitor = "10 nF ±1%"\n[options]\nfrequencies = [1e3, 1e4, 1e5]\n')
    return capture, setup_file


def test_example_methods_are_registered_by_importing_their_module():
    assert {"example-rc-step", "example-rc-impedance"} <= set(available())


@needs_ngspice
@pytest.mark.ngspice
def test_rc_step_resistance_against_ngspice():
    result = wavefit.analyze(rc_step(), setup("example-rc-step"))
    r = result.quantities["R"]
    assert r.unit == "ohm"
    assert abs(r.value / R_TRUE - 1) < 0.01, r.value
    assert abs(r.value - R_TRUE) <= r.expanded_uncertainty, (r.value, r.expanded_uncertainty)
    assert result.curves == {} and "curves" not in result.to_dict()


@needs_ngspice
@pytest.mark.ngspice
def test_impedance_curve_against_ngspice():
    curve = wavefit.analyze(rc_step(), setup("example-rc-impedance")).curves["Z"]
    f = np.asarray(FREQUENCIES)
    truth = np.sqrt(R_TRUE ** 2 + (1.0 / (2 * math.pi * f * C_TRUE)) ** 2)
    np.testing.assert_array_equal(curve.axis_values, f)
    assert curve.unit == "ohm" and (curve.axis_name, curve.axis_unit) == ("f", "Hz")
    assert np.all(np.abs(curve.values - truth) <= curve.expanded_uncertainty), (curve.values, truth)


@needs_ngspice
@pytest.mark.ngspice
def test_curve_covariance_is_the_law_of_propagation():
    """C V Cᵀ point by point, correlations between points kept (GUM 5.2.2 eq. 16), against the
    ``uncertainties`` package given the same inputs; each point's budget shares add up to 1."""
    curve = wavefit.analyze(rc_step(), setup("example-rc-impedance")).curves["Z"]
    x = {line.source: ufloat(line.value, line.standard_uncertainty) for line in curve.budget}
    resistance = x["tau_fit"] / x["timebase"] / x["capacitor"]
    z = unumpy.sqrt(resistance ** 2 + (1.0 / (2 * math.pi * np.asarray(FREQUENCIES) * x["capacitor"])) ** 2)
    expected = np.array(covariance_matrix(list(z)))
    np.testing.assert_allclose(curve.covariance, expected, rtol=1e-9)
    np.testing.assert_allclose(curve.standard_uncertainty, np.sqrt(np.diag(expected)), rtol=1e-9)
    assert abs(expected[0, 2]) > 0.5 * math.sqrt(expected[0, 0] * expected[2, 2])  # shared inputs correlate
    np.testing.assert_allclose(sum(line.variance_share for line in curve.budget), 1.0, rtol=1e-9)


@needs_ngspice
@pytest.mark.ngspice
def test_curve_renders_in_text_json_csv_and_plot(tmp_path, capsys):
    capture, setup_file = impedance_files(tmp_path)
    base = ["analyze", str(capture), "--setup", str(setup_file)]

    assert main([*base, "--plot", str(tmp_path / "rc.png")]) == 0
    text = capsys.readouterr().out
    assert "Z against f (Hz):" in text
    for label in ("1 kHz", "10 kHz", "100 kHz"):
        assert label in text
    assert (tmp_path / "rc.png").read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"

    assert main([*base, "--json"]) == 0
    payload = json.loads(capsys.readouterr().out)["curves"]["Z"]
    assert payload["axis"] == {"name": "f", "unit": "Hz", "log": True, "values": FREQUENCIES}
    assert len(payload["values"]) == 3 and np.shape(payload["covariance"]) == (3, 3)
    assert {line["source"] for line in payload["budget"]} >= {"tau_fit", "capacitor"}

    assert main([*base, "--csv"]) == 0
    from io import StringIO

    table = pd.read_csv(StringIO(capsys.readouterr().out))
    assert list(table["output"]) == ["Z"] * 3
    assert list(table["axis_value"]) == FREQUENCIES
    np.testing.assert_allclose(table["value"], payload["values"], rtol=1e-15)


@needs_ngspice
@pytest.mark.ngspice
def test_batch_takes_the_scalar_outputs_and_no_limit_on_a_curve_only_method(tmp_path, capsys):
    """(Curves in batch: tests/test_batch_curves.py.)"""
    capture = tmp_path / "lot" / "rc1.csv"
    capture.parent.mkdir()
    rc_step().to_csv(capture, index=False)
    spec = tmp_path / "spec.toml"
    spec.write_text('[limits]\nR = "1 kohm ±5%"\n')
    for method, code in (("example-rc-step", 0), ("example-rc-impedance", 3)):
        setup_file = tmp_path / f"{method}.toml"
        setup_file.write_text(f'method = "{method}"\n[columns]\ntime = "t"\ncapacitor = "cap"\n'
                              '[parts]\ncapacitor = "10 nF ±1%"\n')
        out = tmp_path / f"{method}.csv"
        assert main(["batch", "--setup", str(setup_file), "--spec", str(spec), "--out", str(out),
                     "--workers", "1", str(capture.parent)]) == code
        captured = capsys.readouterr()
        if code:
            assert "reports only: curves, so give no limits" in captured.err
            assert len(captured.err.strip().splitlines()) == 1
        else:
            row = pd.read_csv(out).iloc[0]
            assert {"R", "R_U", "tau", "tau_U"} <= set(row.index) and row["verdict"] == "pass"


def test_a_curve_point_at_or_below_zero_is_refused_for_a_positive_output():
    """Plausibility covers every point of a curve, as it covers a scalar (refused, exit 4)."""
    from wavefit.errors import AnalysisRefused
    from wavefit.results import AnalysisResult, CurveResult

    class PositiveImpedance(example_rc_step.ExampleRcImpedance):
        positive = ("Z",)

    def result(values):
        n = len(values)
        curve = CurveResult("Z", "ohm", "f", "Hz", np.arange(1.0, n + 1), np.asarray(values), np.ones(n),
                            2 * np.ones(n), 2 * np.ones(n), np.full(n, np.inf), np.eye(n))
        return AnalysisResult("example-rc-impedance", "capture.csv", {}, {}, {}, curves={"Z": curve})

    PositiveImpedance().check_physical(result([3.0, 2.0, 1.0]))
    with pytest.raises(AnalysisRefused, match="Z came out as -1"):
        PositiveImpedance().check_physical(result([3.0, 2.0, -1.0]))
    with pytest.raises(AnalysisRefused, match="not a finite number"):
        example_rc_step.ExampleRcImpedance().check_physical(result([3.0, np.nan, 1.0]))


@needs_ngspice
@pytest.mark.ngspice
def test_the_measurement_function_is_evaluated_once_for_scalars_and_curves():
    """One evaluation on the unit variables gives every output's sensitivities (GUM 5.1.3), the
    scalars' and the curve's alike."""
    calls = []

    class CountedImpedance(example_rc_step.ExampleRcImpedance):
        outputs = {"R": example_rc_step.Scalar("ohm"), **example_rc_step.ExampleRcImpedance.outputs}

        def model(self, x, settings):
            calls.append(1)
            return {**example_rc_step.ExampleRcStep.model(self, x, settings), **super().model(x, settings)}

    from wavefit.analysis import load_capture
    from wavefit.measurement import bind
    from wavefit.setup import load_setup

    parsed = load_setup(setup("example-rc-impedance"))
    result = CountedImpedance().analyze(bind([load_capture(rc_step(), None, "t")], parsed), parsed)
    assert len(calls) == 1
    assert set(result.quantities) == {"R"} and set(result.curves) == {"Z"}


@needs_ngspice
@pytest.mark.ngspice
def test_monte_carlo_of_a_near_linear_curve_agrees_with_the_linear_interval():
    """With Gaussian inputs and |Z(f)| near-linear in them over ±2u (u_rel < 1 %), the law of
    propagation is valid (JCGM 101 5.11) and Monte Carlo must give, point by point, the same
    standard uncertainty and 95.45 % interval within its own error at M = 2·10⁵: u/√(2M), 0.16 %
    of u, for the standard deviation, and about 0.3 % of U for an interval's end (the standard
    error of a sample quantile, √(p(1 − p)/M)/φ(z), its asymptotic normal law; common practice).
    The tolerances leave room for the slight curvature of |Z|."""
    gaussian = {**setup("example-rc-impedance"), "parts": {"capacitor": "10 nF ±0.5% k=2"}}
    result = wavefit.analyze(rc_step(), gaussian, uncertainty="montecarlo", draws=200_000)
    curve, points = result.curves["Z"], result.monte_carlo.curves["Z"]
    assert len(points) == len(curve) == len(FREQUENCIES)
    for value, u, big_u, mc in zip(curve.values, curve.standard_uncertainty, curve.expanded_uncertainty, points):
        assert mc.standard_uncertainty == pytest.approx(u, rel=0.01)
        assert mc.value == pytest.approx(value, abs=0.02 * u)
        assert mc.interval[0] == pytest.approx(value - big_u, abs=0.02 * big_u)
        assert mc.interval[1] == pytest.approx(value + big_u, abs=0.02 * big_u)


@needs_ngspice
@pytest.mark.ngspice
def test_curve_monte_carlo_renders_in_text_json_and_csv(tmp_path, capsys):
    capture, setup_file = impedance_files(tmp_path)
    base = ["analyze", str(capture), "--setup", str(setup_file), "--uncertainty", "montecarlo", "--draws", "20000"]

    assert main(base) == 0
    text = capsys.readouterr().out
    section = text[text.index("Monte Carlo (JCGM 101, 20000 draws"):]
    assert "Z against f (Hz):" in section and "linear y ± U" in section
    assert all(label in section for label in ("1 kHz", "10 kHz", "100 kHz"))

    assert main([*base, "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    entry = data["monte_carlo"]["curves"]["Z"]
    assert data["monte_carlo"]["quantities"] == {}
    assert set(entry) == {"mean", "standard_uncertainty", "interval", "shortest_interval", "invalid_draws",
                          "linear_interval"}
    values, big_u = np.array(data["curves"]["Z"]["values"]), np.array(data["curves"]["Z"]["expanded_uncertainty"])
    np.testing.assert_array_equal(np.array(entry["linear_interval"]), np.c_[values - big_u, values + big_u])
    assert np.shape(entry["interval"]) == (3, 2) and entry["invalid_draws"] == 0

    assert main([*base, "--csv"]) == 0
    from io import StringIO

    table = pd.read_csv(StringIO(capsys.readouterr().out))
    np.testing.assert_allclose(table["monte_carlo_standard_uncertainty"], entry["standard_uncertainty"], rtol=1e-15)
    np.testing.assert_allclose(table[["monte_carlo_interval_low", "monte_carlo_interval_high"]],
                               entry["interval"], rtol=1e-15)
