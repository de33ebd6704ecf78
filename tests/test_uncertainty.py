"""Propagation of uncertainty against published values (JCGM 100:2008)."""
import math

import numpy as np
import pytest
from uncertainties import umath

from wavefit.uncertainty import InputSet, coverage_factor, propagate

# JCGM 100:2008 Annex H.2, Table H.2 (values confirmed via the GTC test suite; see
# ../shared/reference/CHECK-VALUES.md §1)
H2_V = [5.007, 4.994, 5.005, 4.990, 4.999]
H2_I = [19.663e-3, 19.639e-3, 19.640e-3, 19.685e-3, 19.678e-3]
H2_PHI = [1.0456, 1.0438, 1.0468, 1.0428, 1.0433]


def _h2_propagation():
    obs = np.vstack([H2_V, H2_I, H2_PHI])
    inputs = InputSet()
    inputs.add_correlated(["V", "I", "phi"], obs.mean(axis=1), np.cov(obs) / obs.shape[1],
                          ["V", "A", "rad"], dof=4, group="observations")

    def model(x):
        z = x["V"] / x["I"]
        return {"R": z * umath.cos(x["phi"]), "X": z * umath.sin(x["phi"]), "Z": z}

    return propagate(inputs, model, {"R": "ohm", "X": "ohm", "Z": "ohm"})


def test_gum_h2_values_and_uncertainties():
    p = _h2_propagation()
    # GUM Table H.3 / H.2.3 approach 1: R = 127.732(71), X = 219.847(295), Z = 254.260(236) ohm
    assert p.quantities["R"].value == pytest.approx(127.732, abs=5e-4)
    assert p.quantities["X"].value == pytest.approx(219.847, abs=5e-4)
    assert p.quantities["Z"].value == pytest.approx(254.260, abs=5e-4)
    assert p.quantities["R"].standard_uncertainty == pytest.approx(0.071, abs=5e-4)
    assert p.quantities["X"].standard_uncertainty == pytest.approx(0.295, abs=1e-3)  # GUM prints 0.295
    assert p.quantities["Z"].standard_uncertainty == pytest.approx(0.236, abs=5e-4)


def test_gum_h2_output_correlations():
    p = _h2_propagation()
    # GUM H.2.3: r(R,X) = -0.588, r(R,Z) = -0.485, r(X,Z) = 0.993
    assert p.correlation["R"]["X"] == pytest.approx(-0.588, abs=1e-3)
    assert p.correlation["R"]["Z"] == pytest.approx(-0.485, abs=1e-3)
    assert p.correlation["X"]["Z"] == pytest.approx(0.993, abs=1e-3)


def test_variance_shares_add_to_one_with_correlations():
    p = _h2_propagation()
    for name in ("R", "X", "Z"):
        assert sum(line.variance_share for line in p.budget[name]) == pytest.approx(1.0, abs=1e-9)


@pytest.mark.parametrize("dof, k", [(1, 13.97), (2, 4.53), (3, 3.31), (4, 2.87), (5, 2.65),
                                    (10, 2.28), (20, 2.13), (50, 2.05), (math.inf, 2.00)])
def test_coverage_factor_matches_gum_table_g2(dof, k):
    # JCGM 100:2008 Table G.2, p = 95.45 % column (values from memory; they agree with
    # Student-t quantiles to the printed digits)
    assert coverage_factor(dof) == pytest.approx(k, abs=0.005)


def test_welch_satterthwaite_formula():
    # JCGM 100:2008 eq. (G.2b): y = x1 + x2, u1 = u2 = 1, nu1 = 4, nu2 = inf -> nu_eff = 4 / (1/4) = 16
    inputs = InputSet()
    inputs.add("x1", 1.0, 1.0, kind="A", dof=4)
    inputs.add("x2", 2.0, 1.0)
    q = propagate(inputs, lambda x: {"y": x["x1"] + x["x2"]}, {"y": ""}).quantities["y"]
    assert q.degrees_of_freedom == pytest.approx(16.0)
    assert q.coverage_factor == pytest.approx(coverage_factor(16.0))
    assert q.standard_uncertainty == pytest.approx(math.sqrt(2.0))


def test_sensitivity_coefficients_are_exact_derivatives():
    inputs = InputSet()
    inputs.add("tau", 2e-6, 1e-8, "s", kind="A", dof=100)
    inputs.add("R", 60.0, 0.1, "ohm")
    p = propagate(inputs, lambda x: {"L": x["tau"] * x["R"]}, {"L": "H"})
    lines = {line.source: line for line in p.budget["L"]}
    assert lines["tau"].sensitivity == pytest.approx(60.0)
    assert lines["R"].sensitivity == pytest.approx(2e-6)
    assert lines["R"].contribution == pytest.approx(2e-7)
    assert p.quantities["L"].standard_uncertainty == pytest.approx(math.hypot(60 * 1e-8, 2e-6 * 0.1))


def test_input_added_twice_is_rejected():
    inputs = InputSet()
    inputs.add("a", 1.0, 0.1)
    with pytest.raises(ValueError):
        inputs.add("a", 1.0, 0.1)
