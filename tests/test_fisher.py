"""Cramér–Rao bounds against closed forms (../shared/reference/CHECK-VALUES.md §5)."""
import numpy as np
import pytest

from wavefit.fit.fisher import crlb, numerical_jacobian


def test_exponential_amplitude_and_tau_bound():
    # CHECK-VALUES §5a (derived and recomputed there): A·exp(-t/tau), A and tau unknown, white noise:
    # var(tau) >= (sigma² tau⁴/(A² dt²))·(1-z)³/z with z = exp(-2 dt/tau)
    a, tau, dt, sigma = 2.0, 1.0, 0.02, 0.01
    t = np.arange(0, 40 * tau, dt)
    jac = numerical_jacobian(lambda th: th[0] * np.exp(-t / th[1]), np.array([a, tau]))
    z = np.exp(-2 * dt / tau)
    exact = sigma ** 2 * tau ** 4 / (a ** 2 * dt ** 2) * (1 - z) ** 3 / z
    assert crlb(jac, sigma)[1, 1] == pytest.approx(exact, rel=1e-3)
    assert exact == pytest.approx(8 * sigma ** 2 * tau * dt / a ** 2, rel=0.03)  # the dt << tau limit


def test_undamped_sinusoid_frequency_bound():
    # Kay (1993) eq. (3.41) (from memory; reproduces in numerics per CHECK-VALUES §5b):
    # var(f) >= 12 / ((2π)² η N (N²-1)), f in cycles/sample, η = A²/(2σ²)
    n, amp, sigma, f, phi = 200, 1.0, 0.1, 0.12, 0.3
    k = np.arange(n)
    jac = numerical_jacobian(lambda th: th[0] * np.cos(2 * np.pi * th[1] * k + th[2]), np.array([amp, f, phi]))
    eta = amp ** 2 / (2 * sigma ** 2)
    assert crlb(jac, sigma)[1, 1] == pytest.approx(12 / ((2 * np.pi) ** 2 * eta * n * (n ** 2 - 1)), rel=0.01)


def test_coloured_noise_bound_reduces_to_white():
    t = np.linspace(0, 1, 300)
    jac = numerical_jacobian(lambda th: th[0] * np.exp(-t / th[1]), np.array([1.0, 0.3]))
    assert crlb(jac, autocovariance=np.array([0.04])) == pytest.approx(crlb(jac, sigma=0.2), rel=1e-10)
