"""Monte Carlo propagation against the worked examples of JCGM 101:2008, clause 9.

Values from ../shared/reference/CHECK-VALUES.md §2 ("S" = confirmed secondary source).
"""
import math

import numpy as np
import pytest

from wavefit.montecarlo import propagate_distributions
from wavefit.uncertainty import InputSet

P95 = 0.95


def _additive(widths_sd):
    inputs = InputSet()
    for k, sd in enumerate(widths_sd):
        inputs.add(f"X{k + 1}", 0.0, sd, distribution="rectangular")
    return propagate_distributions(inputs, lambda x: {"Y": sum(x.values())}, draws=1_000_000,
                                   probability=P95)["Y"]


def test_jcgm101_9_2_3_four_rectangular_inputs():
    # JCGM 101 9.2.3: u = 2.00 (S), 95 % interval [-3.88, 3.88] (S); exact Irwin-Hall value ±3.8794
    y = _additive([1.0] * 4)
    assert y.standard_uncertainty == pytest.approx(2.00, abs=0.005)
    assert y.interval[0] == pytest.approx(-3.88, abs=0.01)
    assert y.interval[1] == pytest.approx(3.88, abs=0.01)


def test_jcgm101_9_2_4_one_dominant_rectangular_input():
    # JCGM 101 9.2.4: u = 10.15 (S); MCM interval ±17.0 (S), the GUF's ±19.9 is too wide
    y = _additive([1.0, 1.0, 1.0, 10.0])
    assert y.standard_uncertainty == pytest.approx(math.sqrt(103), rel=0.003)
    assert y.interval[0] == pytest.approx(-17.0, abs=0.06)
    assert y.interval[1] == pytest.approx(17.0, abs=0.06)


def test_jcgm101_9_3_mass_calibration():
    # JCGM 101 9.3, Table 6: MCM delta_m = 1.2341 mg, u = 0.0754 mg (S); first-order GUF 0.0539 (S)
    inputs = InputSet()
    inputs.add("m_rc", 100_000.0, 0.050)
    inputs.add("dm_rc", 1.234, 0.020)
    inputs.add("rho_a", 1.20, 0.10 / math.sqrt(3), distribution="rectangular")
    inputs.add("rho_w", 8000.0, 1000.0 / math.sqrt(3), distribution="rectangular")
    inputs.add("rho_r", 8000.0, 50.0 / math.sqrt(3), distribution="rectangular")

    def model(x):
        return {"dm": (x["m_rc"] + x["dm_rc"]) * (1 + (x["rho_a"] - 1.2) * (1 / x["rho_w"] - 1 / x["rho_r"]))
                - 100_000.0}

    y = propagate_distributions(inputs, model, draws=1_000_000, probability=P95)["dm"]
    assert y.value == pytest.approx(1.2341, abs=2e-4)
    assert y.standard_uncertainty == pytest.approx(0.0754, abs=5e-4)


@pytest.mark.parametrize("r, u_expected", [(0.0, 112e-6), (0.9, 121e-6)])
def test_jcgm101_9_4_comparison_loss(r, u_expected):
    # JCGM 101 9.4 (Tables 8, 9): delta_Y = X1^2 + X2^2, x1 = 0.010, x2 = 0, u = 0.005 each;
    # MCM u = 112e-6 at r = 0 and 121e-6 at r = 0.9 (S); mean about 150e-6
    inputs = InputSet()
    u = 0.005
    inputs.add_correlated(["X1", "X2"], [0.010, 0.0], np.array([[u * u, r * u * u], [r * u * u, u * u]]),
                          ["", ""], dof=math.inf, group="pair")
    y = propagate_distributions(inputs, lambda x: {"dY": x["X1"] ** 2 + x["X2"] ** 2},
                                draws=1_000_000, probability=P95)["dY"]
    assert y.standard_uncertainty == pytest.approx(u_expected, abs=1.5e-6)
    assert y.value == pytest.approx(150e-6, abs=2e-6)
