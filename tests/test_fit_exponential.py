"""The exponential fitter against NIST StRD certified results (external reference).

Misra1a and BoxBOD (NIST Statistical Reference Datasets, nonlinear regression,
https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml) use the model
y = b1·(1 − exp(−b2·x)), the step response from zero. The certified values and
standard deviations are read from the unchanged NIST files, not typed in here.
"""
from __future__ import annotations

import math
import re
from pathlib import Path

import numpy as np
import pytest

from wavefit.fit.exponential import fit_saturating

# the workplace's shared reference folder, else the unchanged copy bundled with the tests
NIST_PLACES = (Path(__file__).resolve().parents[2] / "shared/reference/nist-strd",
               Path(__file__).resolve().parent / "reference/nist-strd")


def read_strd(name: str):
    """Starting values, certified (value, std) per parameter and (x, y) data of a StRD file."""
    path = next((p / name for p in NIST_PLACES if (p / name).exists()), NIST_PLACES[0] / name)
    if not path.exists():
        pytest.skip(f"NIST StRD file {path} not present")
    lines = path.read_text().splitlines()
    starts, certified = [], {}
    for line in lines:
        m = re.match(r"\s*(b\d)\s*=\s*(\S+)\s+(\S+)\s+(\S+)\s+(\S+)", line)
        if m:
            starts.append((float(m.group(2)), float(m.group(3))))
            certified[m.group(1)] = (float(m.group(4)), float(m.group(5)))
    first = max(i for i, line in enumerate(lines) if re.match(r"\s*Data:\s+y\s+x\s*$", line))
    data = np.array([[float(v) for v in line.split()] for line in lines[first + 1:] if line.strip()])
    return [tuple(s[k] for s in starts) for k in range(2)], certified, data[:, 1], data[:, 0]


def sig_digits(a: float, b: float) -> float:
    return math.inf if a == b else -math.log10(abs(a - b) / abs(b))


@pytest.mark.parametrize("name", ["Misra1a.dat", "BoxBOD.dat"])
@pytest.mark.parametrize("start", [0, 1])
def test_certified_values_and_standard_deviations(name, start):
    # NIST StRD certified parameters and standard deviations, both NIST starting points.
    starts, certified, x, y = read_strd(name)
    fit = fit_saturating(x, y, starts[start])
    for b in ("b1", "b2"):
        value, std = certified[b]
        assert sig_digits(fit[b], value) >= 6, (b, fit[b], value)
        assert sig_digits(fit.stderr(b), std) >= 6, (b, fit.stderr(b), std)


@pytest.mark.parametrize("tau_samples", [3.0, 40.0, 5000.0])
def test_start_from_a_strided_grid_is_the_start_from_every_sample(monkeypatch, tau_samples):
    """The start's grid on every stride-th sample of a long window only brackets the minimum:
    the variable-projection start is the one the full grid gives (to its tolerance), for a
    tau of a few samples as for a long one."""
    import wavefit.fit.exponential as exponential

    rng = np.random.default_rng(int(tau_samples))
    n = 40000
    t = np.arange(n) * 1e-8
    tau = tau_samples * 1e-8
    chans = [exponential.WindowChannel("sense", t, 1 - np.exp(-t / tau) + 0.01 * rng.standard_normal(n)),
             exponential.WindowChannel("drive", t, 2 + 0.1 * np.exp(-t / tau) + 0.02 * rng.standard_normal(n))]
    strided = exponential.projected_tau(chans, 1.4 * tau)
    monkeypatch.setattr(exponential, "GRID_SAMPLES", n + 1)
    full = exponential.projected_tau(chans, 1.4 * tau)
    assert strided == pytest.approx(full, rel=1e-5)
    assert strided == pytest.approx(tau, rel=0.05)


@pytest.mark.parametrize("span", [0.01, 0.1, 1.0, 12.0, 60.0])
def test_curve_information_is_taus_entry_of_the_linearised_information(span):
    """1/var(tau) of final + amplitude·exp(−u/tau) is the squared last diagonal entry of the
    triangular factor of its Jacobian [1, e, amplitude·u·e/tau²] (Householder QR, backward
    stable: G. H. Golub and C. F. Van Loan, *Matrix Computations*, 4th ed., §5.3), on short
    windows, where the columns nearly coincide, as on long ones."""
    from wavefit.fit.exponential import curve_information

    tau, amplitude = 2e-6, -0.7
    u = np.linspace(0.0, span * tau, 20001)
    e = np.exp(-u / tau)
    jac = np.column_stack((np.ones_like(u), e, amplitude * u * e / tau ** 2))
    expected = np.linalg.qr(jac, mode="r")[2, 2] ** 2
    assert curve_information(u, amplitude, tau) == pytest.approx(expected, rel=1e-8)


def test_linear_part_is_the_least_squares_level_and_amplitude():
    """(final, coefficient) for a fixed basis against numpy's least-squares solution."""
    from wavefit.fit.exponential import linear_part

    rng = np.random.default_rng(5)
    e = np.exp(-np.linspace(0.0, 7.0, 5000))
    y = 1.5 - 0.8 * e + 0.01 * rng.standard_normal(e.size)
    expected, *_ = np.linalg.lstsq(np.column_stack((np.ones_like(e), e)), y, rcond=None)
    assert linear_part(e, y) == pytest.approx(tuple(expected), rel=1e-12)
    assert linear_part(np.ones(10), np.arange(10.0)) == (4.5, 0.0)  # a basis that does not vary


def test_decay_is_the_expression_bit_for_bit():
    """exp(−u/tau) in one array: the same numbers as the expression (IEEE 754 division is
    correctly rounded, so u/(−tau) is −u/tau exactly), with and without an output array."""
    from wavefit.fit.exponential import decay

    rng = np.random.default_rng(8)
    for _ in range(20):
        scale = 10.0 ** rng.integers(-9, 3)  # seconds to ks; u/tau within −30 … 400
        u = rng.uniform(-3.0, 40.0, 5000) * scale
        u[:3] = (0.0, -0.0, 1e-300)
        tau = float(rng.uniform(0.1, 10.0) * scale)
        expected = np.exp(-u / tau)
        assert np.array_equal(decay(u, tau), expected)
        out = np.empty_like(u)
        assert decay(u, tau, out=out) is out and np.array_equal(out, expected)


def _weighted_least_squares_tau(chans, tau_start):
    """tau of the weighted least squares of the whole window (levels, coefficients and tau by
    scipy's solver, to its tightest tolerances), each channel weighed by its scatter about the
    variable-projection start, as the fit's first solve weighs it: computed here with numpy's
    lstsq for the start's levels and scipy for the solve, not with the code under test."""
    from scipy.optimize import least_squares

    n_par = 1 + 2 * len(chans)
    total = sum(ch.values.size for ch in chans)
    scatter = []
    for ch in chans:
        u = ch.time - ch.time[0]
        design = np.column_stack((np.ones_like(u), np.exp(-u / tau_start)))
        coef, *_ = np.linalg.lstsq(design, ch.values, rcond=None)
        r = ch.values - design @ coef
        scatter.append(math.sqrt(float(r @ r) / (r.size - n_par * r.size / total)))

    def residuals(x):
        return np.concatenate([(ch.values - x[1 + 2 * c]
                                - x[2 + 2 * c] * np.exp(-(ch.time - ch.time[0]) / (x[0] * tau_start))) / scatter[c]
                               for c, ch in enumerate(chans)])

    x0 = [1.0]
    for ch in chans:
        u = ch.time - ch.time[0]
        design = np.column_stack((np.ones_like(u), np.exp(-u / tau_start)))
        x0 += list(np.linalg.lstsq(design, ch.values, rcond=None)[0])
    found = least_squares(residuals, x0, method="lm", xtol=1e-15, ftol=1e-15, gtol=1e-15)
    return found.x[0] * tau_start, found


@pytest.mark.parametrize("channels, noise", [(1, 1e-3), (2, 1e-3), (2, 1e-9)])
def test_weighted_solution_is_the_weighted_least_squares(channels, noise):
    """The first solve's solution by Gauss–Newton steps on the projected problem is the
    weighted least squares of the whole window (Kaufman's step is the full problem's
    Gauss–Newton step in tau: L. Kaufman, BIT 15 (1975) 49–57), to a small fraction of tau's
    standard error, for one channel and for two whose noise differs tenfold, also where the
    noise is 1e-9 of the signal (a simulator's output printed to many digits: each channel's
    sum of squares as a difference of large sums lost its digits there, and the weights were
    6 to 10 times off)."""
    from wavefit.fit.exponential import ProjectedProblem, WindowChannel, projected_tau

    rng = np.random.default_rng(11)
    n, tau = 20000, 3e-6
    t = np.arange(n) * 1e-9
    chans = [WindowChannel("sense", t, 0.2 * (1 - np.exp(-t / tau)) + noise * rng.standard_normal(n)),
             WindowChannel("drive", t, 1.0 + 2.0 * np.exp(-t / tau) + 10 * noise * rng.standard_normal(n))][:channels]
    start = projected_tau(chans, 1.3 * tau)
    found = ProjectedProblem(chans).weighted_solution(start, [ch.group for ch in chans])
    expected, solve = _weighted_least_squares_tau(chans, start)
    # tau's standard error from the solve's Jacobian (unit weights after the scatter)
    jac = solve.jac
    deviation = math.sqrt(np.linalg.inv(jac.T @ jac)[0, 0] * 2 * solve.cost / (jac.shape[0] - jac.shape[1])) * start
    assert found is not None
    assert abs(found - expected) < 1e-5 * deviation  # the start itself is 3e-3 deviations off
    assert abs(found - tau) < 5 * deviation


def test_weighted_solution_leaves_an_undetermined_tau_to_the_solver():
    """A window with no decay in it (noise about a level) has no minimum near its start: the
    steps go beyond the start's bracket and the projected solution says None."""
    from wavefit.fit.exponential import ProjectedProblem, WindowChannel

    rng = np.random.default_rng(2)
    t = np.arange(5000) * 1e-9
    flat = ProjectedProblem([WindowChannel("sense", t, 1.0 + 1e-3 * rng.standard_normal(t.size))])
    assert flat.weighted_solution(2e-7, ["sense"]) is None
