"""Damped-sine fitter: matrix pencil, noiseless recovery, Cramér–Rao efficiency, coverage.

References named beside each check. The synthetic rings come from wavefit.synth.lc;
their truth is the analytic pole pair of the circuit equations (eigenvalues of the
2x2 state matrix), not a value the fitter produced.
"""
from __future__ import annotations

import math

import numpy as np
import pytest

from wavefit.fit.jacobian import CHUNK_ELEMENTS
from wavefit.fit.damped_sine import fit_ring, grid_jacobian, grid_model, model, ring_window
from wavefit.fit.pencil import matrix_pencil
from wavefit.synth.lc import Tank, ringdown
from wavefit.synth.scope import ScopeModel


def test_pencil_recovers_exact_poles():
    # Hua & Sarkar 1990: noiseless sums of M exponentials are recovered exactly (identity)
    n = np.arange(200)
    z = np.array([1.0, 0.99 * np.exp(0.3j), 0.99 * np.exp(-0.3j)])
    h = np.array([0.2, 0.5 - 0.1j, 0.5 + 0.1j])
    y = (h[None, :] * z[None, :] ** n[:, None]).sum(axis=1).real
    poles, amps = matrix_pencil(y, 3)
    order = np.argsort(poles.imag)
    np.testing.assert_allclose(poles[order], z[[2, 0, 1]], atol=1e-10)
    np.testing.assert_allclose(amps[order], h[[2, 0, 1]], atol=1e-9)


def test_synth_poles_obey_natural_frequency_identity():
    # exact second-order relation w0² = w_d² + alpha² = (1 + r·G)/(L·C) (characteristic equation)
    tank = Tank(inductance=47e-6, tank_capacitor=22e-9, dcr=0.8, core_loss_resistance=20e3,
                feed_resistance=5e3)
    alpha, w_d = tank.poles()
    g = tank.conductance
    assert w_d ** 2 + alpha ** 2 == pytest.approx((1 + tank.dcr * g) / (tank.inductance * tank.capacitance), rel=1e-12)
    assert alpha == pytest.approx(tank.dcr / (2 * tank.inductance) + g / (2 * tank.capacitance), rel=1e-12)


@pytest.mark.parametrize("spp, records, pre", [(40, 4000, 200), (12, 3000, 0), (2000, 200_000, 5000)])
def test_noiseless_ring_recovered(spp, records, pre):
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=2.0, feed_resistance=20e3)
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * spp)
    t, v = ringdown(tank, dt, records, pre_trigger=pre)
    ring = fit_ring(t, v)
    assert ring.w_d == pytest.approx(w_d, rel=1e-8)
    assert ring.alpha == pytest.approx(alpha, rel=1e-6)
    assert ring.start >= pre


def test_window_stops_at_a_second_excitation():
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=5.0, feed_resistance=20e3)
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * 25)
    t, v = ringdown(tank, dt, 3000, pre_trigger=100)
    v = v - np.concatenate([np.zeros(1500), v[100:1600]])  # the step returns at sample 1500
    win = ring_window(v)
    assert 1300 < win.stop <= 1500 and win.second_excitation
    assert fit_ring(t, v).w_d == pytest.approx(w_d, rel=1e-6)


def test_log_decrement_matches_fitted_q():
    # Q ≈ π/δ with δ = ln(v_k / v_{k+1}) between successive peaks (common practice, light damping);
    # exact: δ = 2π·alpha/w_d, so π/δ = w_d/(2·alpha) = Q·w_d/w0
    tank = Tank(inductance=220e-6, tank_capacitor=4.7e-9, dcr=3.0, feed_resistance=50e3)
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * 400)
    t, v = ringdown(tank, dt, 8000)
    v = v - tank.dcr / (tank.feed_resistance + tank.dcr)  # final DC level of the divider
    peaks = [k for k in range(1, v.size - 1) if v[k] > v[k - 1] and v[k] >= v[k + 1] and v[k] > 0]
    delta = math.log(v[peaks[2]] / v[peaks[3]])
    ring = fit_ring(t, v)
    q_fit = ring.w0 / (2 * ring.alpha)
    assert math.pi / delta == pytest.approx(q_fit, rel=2e-3)


def _fisher_bound(x: np.ndarray, n: int, sigma: float) -> float:
    """CRB of w0 = √(w_d² + alpha²) (sample units) in white noise: Kay 1993 §3.9 (memory),
    I = JᵀJ/σ² of the same model."""
    j = grid_jacobian(x, 0, n)
    cov = np.linalg.inv(j.T @ j / sigma ** 2)
    w0 = math.hypot(x[3], x[4])
    g = np.array([0, 0, 0, x[3] / w0, x[4] / w0])
    return float(g @ cov @ g)


def test_numerical_bound_matches_closed_form():
    # CHECK-VALUES.md §5b (derived, recomputed): var(w) ≈ (2σ²/A²)(1−z)³/z, z = e^(−2α), long record
    x = np.array([0.0, 1.0, 0.0, 0.01, 0.7])
    j = grid_jacobian(x, 0, 5000)
    var_w = np.linalg.inv(j.T @ j)[4, 4]
    z = math.exp(-2 * 0.01)
    assert var_w == pytest.approx(2 * (1 - z) ** 3 / z, rel=0.02)


@pytest.mark.parametrize("correlation, bits", [(0, None), (10, 8)])
def test_monte_carlo_efficiency_and_coverage(correlation, bits):
    # Kay 1993 §3.9 (memory): efficiency = CRB / observed variance; loose bounds for a fast test
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=3.0, feed_resistance=10e3)
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * 25)
    n, pre = 1600, 100
    t, v = ringdown(tank, dt, n, pre_trigger=pre)
    amp = float(np.abs(v).max())
    sigma = amp / math.sqrt(2 * 10 ** 3.5)  # 35 dB
    w0_true = math.hypot(alpha, w_d)
    rng = np.random.default_rng(20240 + correlation)
    est, se = [], []
    for _ in range(120):
        y = ScopeModel(noise_rms=sigma, correlation_samples=correlation, bits=bits).apply(v, rng)
        ring = fit_ring(t, y)
        g = np.array([ring.alpha, ring.w_d]) / ring.w0
        _, cov = ring.fit.subset(("alpha", "w_d"))
        est.append(ring.w0)
        se.append(math.sqrt(g @ cov @ g))
    est, se = np.array(est), np.array(se)
    covered = np.mean(np.abs(est - w0_true) <= 1.96 * se)
    assert 0.85 <= covered <= 0.99
    assert abs(est.mean() - w0_true) < 0.4 * est.std()
    if correlation == 0:
        x_true = np.array([0.0, 0.0, amp, alpha * dt, w_d * dt])
        x_true = _true_params(v[pre:], x_true)
        efficiency = _fisher_bound(x_true, n - pre, sigma) / np.var(est * dt)
        assert efficiency > 0.8


def _true_params(v: np.ndarray, x0: np.ndarray) -> np.ndarray:
    """The clean ring's exact parameters in sample units (its poles are fixed; a, b, offset
    follow by linear least squares on the noiseless record)."""
    tau = np.arange(v.size, dtype=float)
    basis = np.column_stack([np.ones_like(tau), np.exp(-x0[3] * tau) * np.cos(x0[4] * tau),
                             np.exp(-x0[3] * tau) * np.sin(x0[4] * tau)])
    coef, *_ = np.linalg.lstsq(basis, v, rcond=None)
    x = np.array([coef[0], coef[1], coef[2], x0[3], x0[4]])
    assert np.max(np.abs(model(x, tau) - v)) < 1e-9 * np.abs(v).max()
    return x


@pytest.mark.parametrize("alpha, w", [(1e-4, 0.05), (2e-3, 2.9), (0.0, 1e-3)])
def test_grid_forms_match_the_direct_model(alpha, w):
    # the fits evaluate the ring at sample numbers through products of exponentials
    # (grid_model, grid_jacobian); they must equal the direct exp·cos/sin form (model) and its
    # derivatives by central differences, across the chunks the long records are cut into
    x = np.array([0.3, 1.2, -0.7, alpha, w])
    n = CHUNK_ELEMENTS + 4099
    direct = model(x, np.arange(n, dtype=float))
    grid = grid_model(x, n)
    # the direct form's own rounding of w·τ is about 1e-16·w·τ radians
    assert np.max(np.abs(grid - direct)) < 1e-13 * max(1.0, w * n)
    start, stop = n - 3000, n
    j = grid_jacobian(x, start, stop)
    tau = np.arange(start, stop, dtype=float)
    for k in range(5):
        h = 1e-6 / float(tau[-1]) if k >= 3 else 1e-6  # a phase or decay step of 1e-6 at the end
        up, down = x.copy(), x.copy()
        up[k] += h
        down[k] -= h
        numeric = (model(up, tau) - model(down, tau)) / (2 * h)
        assert np.max(np.abs(j[:, k] - numeric)) < 1e-5 * max(1.0, np.max(np.abs(numeric)))


def tank_ring(samples_per_period: float, dcr: float, pre_trigger: int = 0) -> tuple[np.ndarray, np.ndarray, float]:
    """A 60,000-sample ring of 100 µH and 10 nF (Q set by ``dcr``), without noise: times,
    samples, and the ring's radians per sample."""
    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=dcr, feed_resistance=20e3)
    _, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * samples_per_period)
    t, v = ringdown(tank, dt, 60_000, pre_trigger=pre_trigger)
    return t, v, w_d * dt


@pytest.mark.parametrize("correlation", [1, 6])
def test_fit_from_a_solved_start_is_the_fit_that_solves_again(correlation):
    # a window's final fit told that its start is already the unweighted least squares on it
    # (refine's converged last stage) skips that solve: the same values, covariance and noise
    # model as the fit that solves it again, in white and in band-limited noise
    from wavefit.fit.damped_sine import fit_damped_sine, initial_estimate, refined

    t, v, _ = tank_ring(50, 4.0)
    dt = t[1] - t[0]
    y = ScopeModel(noise_rms=0.002, correlation_samples=correlation).apply(v, np.random.default_rng(correlation))
    win = ring_window(y)
    alpha0, w0 = initial_estimate(y[win.start:win.start + win.strong], win.samples_per_period)
    x, solved, factor = refined(y[win.start:], alpha0, w0)
    assert solved and factor is not None  # (60,000 samples: a long window, solved through its factor)
    seg = slice(win.start, None)
    again = fit_damped_sine(t[seg], y[seg], x, dt)
    skipped = fit_damped_sine(t[seg], y[seg], x, dt, solved=True)
    reused = fit_damped_sine(t[seg], y[seg], x, dt, solved=True, factor=factor)  # its covariance from that factor
    for fit in (skipped, reused):
        np.testing.assert_allclose(fit.fit.values, again.fit.values, rtol=1e-11)
        np.testing.assert_allclose(fit.fit.covariance, again.fit.covariance, rtol=1e-8)
        assert fit.fit.noise_model == again.fit.noise_model


@pytest.mark.parametrize("dcr, records", [(40.0, 20_000), (0.1, 20_000)])
def test_fit_ring_skips_the_solve_only_on_the_refined_window(monkeypatch, dcr, records):
    # the final fit takes the refinement's solution as solved only when its window is the one
    # the refinement ended on: a ring that decays into the noise early has its window cut at the
    # envelope's end (the refinement's solution is not that window's), one that rings through
    # the record keeps it. Either way the result is the one of a fit that solves again.
    import wavefit.fit.damped_sine as damped_sine

    tank = Tank(inductance=100e-6, tank_capacitor=10e-9, dcr=dcr, feed_resistance=1e6)
    alpha, w_d = tank.poles()
    dt = 2 * math.pi / (w_d * 40)
    t, v = ringdown(tank, dt, records, pre_trigger=0)
    y = ScopeModel(noise_rms=1e-3 * float(np.max(np.abs(v)))).apply(v, np.random.default_rng(3))
    skipped = fit_ring(t, y)
    refined = damped_sine.refined
    monkeypatch.setattr(damped_sine, "refined", lambda *a: (refined(*a)[0], False, None))
    again = fit_ring(t, y)
    assert (skipped.stop < t.size) == (dcr > 10.0)  # the early decay is cut, the long ring not
    assert (skipped.start, skipped.stop) == (again.start, again.stop)
    np.testing.assert_allclose(skipped.fit.values, again.fit.values, rtol=1e-10)


@pytest.mark.parametrize("correlation", [0, 6])
def test_a_close_start_gives_the_fit_of_the_trust_region_solve(correlation):
    # the model check's halves start from the whole ring's fit carried to their first sample and
    # take Gauss–Newton steps (close=True); the solve of the trust-region solver from that start
    # is the truth: the same values to a millionth of a standard error, the same covariance
    from wavefit.methods._ring import _halves

    t, v, _ = tank_ring(50, 4.0)
    dt = t[1] - t[0]
    y = ScopeModel(noise_rms=0.002, correlation_samples=correlation).apply(v, np.random.default_rng(7))
    ring = fit_ring(t, y)
    stepped = _halves(ring, y, "auto")
    import wavefit.fit.damped_sine as damped_sine
    solver = []
    for part, lo in zip(stepped, (0, stepped[0].stop - stepped[0].start)):
        x0 = damped_sine.ring_parameters_at(ring, lo)
        seg = y[ring.start + lo:ring.start + lo + part.stop - part.start]
        solver.append(damped_sine.fit_damped_sine(np.arange(seg.size) * dt, seg, x0, dt))
    for a, b in zip(stepped, solver):
        (ma,), (mb,) = a.fit.noise_model.values(), b.fit.noise_model.values()
        assert (ma["kind"], ma["order"]) == (mb["kind"], mb["order"])
        assert ma["sigma"] == pytest.approx(mb["sigma"], rel=1e-8)
        se = np.sqrt(np.diag(b.fit.covariance))
        assert np.all(np.abs(a.fit.values - b.fit.values) <= 1e-6 * se)
        np.testing.assert_allclose(a.fit.covariance, b.fit.covariance, rtol=1e-8, atol=1e-12 * np.max(se) ** 2)


@pytest.mark.parametrize("correlation, noise", [(0, 0.01), (6, 0.01), (0, 0.1)])
def test_a_refinement_on_every_kth_sample_leads_to_the_same_fit(monkeypatch, correlation, noise):
    # at 200 samples per period the refinement's shorter windows see every 8th to 12th
    # sample; the fit on every sample from its solution is the fit from the refinement on
    # every sample, to a millionth of a standard error, with the same covariance (noise 1 %
    # and 10 % of the ring's peak)
    import wavefit.fit.damped_sine as damped_sine

    t, v, w = tank_ring(200, 0.5, pre_trigger=500)
    y = ScopeModel(noise_rms=noise * float(np.max(np.abs(v))),
                   correlation_samples=correlation).apply(v, np.random.default_rng(11))
    strided = fit_ring(t, y)
    assert damped_sine.refine_stride(w, strided.stop - strided.start) >= 8  # so the case tests a stride
    monkeypatch.setattr(damped_sine, "refine_stride", lambda w, n: 1)
    every = fit_ring(t, y)
    assert (strided.start, strided.stop) == (every.start, every.stop)
    se = np.sqrt(np.diag(every.fit.covariance))
    assert np.all(np.abs(strided.fit.values - every.fit.values) <= 1e-6 * se)
    np.testing.assert_allclose(strided.fit.covariance, every.fit.covariance, rtol=1e-7, atol=1e-12 * np.max(se) ** 2)
