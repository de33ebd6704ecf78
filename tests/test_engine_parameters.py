"""The fit engine on lmfit Parameters: fixed values and constraint expressions.

External reference: NIST StRD Misra1a (https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml),
y = b1·(1 − exp(−b2·x)), certified values and standard deviations read from the NIST file.
With b2 fixed the model is linear in b1, whose least-squares value and standard error have
the closed form of linear regression through the origin (Seber & Wild 1989, §1.1).
"""
from __future__ import annotations

import lmfit
import numpy as np
import pytest

from test_fit_exponential import read_strd, sig_digits
from wavefit.fit.engine import Block, fit_parameters
from wavefit.fit.jacobian import Jacobian, Piece


def misra1a_problem():
    starts, certified, x, y = read_strd("Misra1a.dat")

    def fun(b):
        return y - b[0] * (1.0 - np.exp(-b[1] * x))

    def jac(b):
        # stored by pieces (no dense array), so the chain rule acts on the pieces' coefficients
        def basis(lo, hi):
            e = np.exp(-b[1] * x[lo:hi])
            return np.column_stack((-(1.0 - e), -b[0] * x[lo:hi] * e))
        return Jacobian(x.size, [Piece(0, x.size, basis, np.eye(2))])

    return starts, certified, x, y, fun, jac


def test_an_expression_parameter_carries_the_certified_values():
    # b2 = c/1000 with c free: c and its standard deviation are 1000 times b2's certified ones
    starts, certified, x, y, fun, jac = misra1a_problem()
    params = lmfit.Parameters()
    params.add("b1", value=starts[0][0])
    params.add("c", value=1000 * starts[0][1])
    params.add("b2", expr="c / 1000")
    select = np.array([[1.0, 0.0, 0.0], [0.0, 0.0, 1.0]])  # (b1, b2) from (b1, c, b2)

    def fun_all(v):  # the model's functions take all parameters in params' order: b1, c, b2
        return fun(v[[0, 2]])

    def jac_all(v):
        return Jacobian(x.size, [Piece(0, x.size, jac(v[[0, 2]]).pieces[0].basis, select)])

    fit = fit_parameters(fun_all, jac_all, params, [Block(0, x.size)], model="misra1a", noise="white")
    assert fit.names == ("b1", "c", "b2")
    assert sig_digits(fit["b1"], certified["b1"][0]) >= 6
    assert sig_digits(fit["c"] / 1000, certified["b2"][0]) >= 6
    assert sig_digits(fit.stderr("c") / 1000, certified["b2"][1]) >= 6
    assert sig_digits(fit.stderr("b2"), certified["b2"][1]) >= 6
    assert sig_digits(fit.stderr("b1"), certified["b1"][1]) >= 6


def test_a_fixed_parameter_leaves_the_linear_least_squares_of_the_others():
    starts, certified, x, y, fun, jac = misra1a_problem()
    b2 = certified["b2"][0]
    params = lmfit.Parameters()
    params.add("b1", value=starts[0][0])
    params.add("b2", value=b2, vary=False)
    fit = fit_parameters(fun, jac, params, [Block(0, x.size)], model="misra1a", noise="white")
    g = 1.0 - np.exp(-b2 * x)
    b1 = float(g @ y / (g @ g))
    rss = float(np.sum((y - b1 * g) ** 2))
    assert fit["b1"] == pytest.approx(b1, rel=1e-12)
    assert fit["b2"] == b2 and fit.stderr("b2") == 0.0
    assert fit.stderr("b1") == pytest.approx(np.sqrt(rss / (x.size - 1) / (g @ g)), rel=1e-10)
    assert fit.dof == x.size - 1
