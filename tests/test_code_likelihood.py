"""Maximum likelihood on a converter's code grid (wavefit.fit.code_likelihood).

External references: Sheppard's correction for grouped data, σ² ≈ var(grouped) − h²/12
(W. F. Sheppard, Proc. London Math. Soc. 29 (1898) 353–380, from memory; also Widrow and
Kollár, *Quantization Noise*, 2008, ch. 4–5), which holds to within exp(−2π²σ²/h²) for
Gaussian noise of σ ≳ h; and, in the same regime, quantisation acting as added uniform noise
of variance q²/12, so that the information per sample about its mean is 1/(σ² + q²/12).
"""
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

import wavefit
from wavefit.fit.code_likelihood import expected_information, fit_codes

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
from estimator_quality import Scenario, rl_case, run_scenario, scope_for  # noqa: E402


@pytest.mark.parametrize("sigma", [1.0, 2.0, 3.0])
def test_information_tends_to_that_of_noise_plus_uniform_quantisation(sigma):
    mean = np.linspace(0.0, 1.0, 4001)[:-1]  # every position of the mean within a code
    i_mm, i_ms, _ = expected_information(mean, np.full(mean.size, sigma), 1.0, -10.0)
    assert i_mm.mean() == pytest.approx(1.0 / (sigma ** 2 + 1.0 / 12.0), rel=2e-3)
    assert abs(i_ms.mean()) < 1e-9  # no mean–σ coupling on average over the grid


def _information_by_definition(mean, sigma, step, origin, codes=40):
    # Σ over the codes k of (∂P_k/∂θ)(∂P_k/∂θ)ᵀ/P_k with P_k = Φ(b_k) − Φ(a_k), each code's
    # bounds and probability on their own, by scipy's normal distribution (its survival
    # function for codes above the mean, where 1 − Φ would lose the digits)
    from scipy.stats import norm

    centre = np.round((mean - origin) / step)
    out = [np.zeros(mean.size) for _ in range(3)]
    for k in range(-codes, codes + 1):
        code = origin + (centre + k) * step
        a, b = (code - 0.5 * step - mean) / sigma, (code + 0.5 * step - mean) / sigma
        p = np.where(a > 0, norm.sf(a) - norm.sf(b), norm.cdf(b) - norm.cdf(a))
        dm = (norm.pdf(a) - norm.pdf(b)) / sigma
        ds = (a * norm.pdf(a) - b * norm.pdf(b)) / sigma
        ok = p > 0
        for acc, term in zip(out, (dm * dm, dm * ds, ds * ds)):
            acc += np.where(ok, term / np.where(ok, p, 1.0), 0.0)
    return out


@pytest.mark.parametrize("sigma_codes", [0.05, 0.3, 1.0, 3.0])
@pytest.mark.parametrize("step, origin", [(1.0, -10.0), (0.0039, 0.0017)])
def test_information_matches_its_definition(sigma_codes, step, origin):
    # the codes' boundaries are shared between neighbours in the sum; each code on its own here
    mean = origin + np.linspace(-3.0, 3.0, 601) * step
    sigma = np.full(mean.size, sigma_codes * step)
    ours = expected_information(mean, sigma, step, origin)
    reference = _information_by_definition(mean, sigma, step, origin)
    scale = max(np.max(np.abs(ours[0])), np.max(np.abs(ours[2])))  # the information's own size
    for x, y in zip(ours, reference):
        np.testing.assert_allclose(x, y, rtol=0, atol=1e-9 * scale)


def test_information_is_lost_below_one_code():
    mean = np.linspace(0.0, 1.0, 4001)[:-1]
    i_mm, _, _ = expected_information(mean, np.full(mean.size, 0.2), 1.0, -10.0)
    assert 0.2 < i_mm.mean() * 0.2 ** 2 < 0.5  # far below the 1/σ² of an unquantised sample


@pytest.mark.parametrize("sigma", [0.8, 1.2, 2.0])
def test_noise_of_grouped_data_follows_sheppards_correction(sigma):
    rng = np.random.default_rng(2)
    n = 20000
    codes = np.round(0.37 + sigma * rng.standard_normal(n))
    found = fit_codes(codes, 1.0, lambda x: np.full(n, x[0]), lambda x: np.ones((n, 1)),
                      np.array([codes.mean()]), np.zeros(n, dtype=int), np.array([0.5]))
    assert found.converged
    assert found.sigma[0] == pytest.approx(np.sqrt(codes.var() - 1.0 / 12.0), rel=1e-4)
    assert found.values[0] == pytest.approx(codes.mean(), abs=1e-3 * sigma)


def test_code_fit_removes_the_bias_least_squares_has_below_one_code():
    # a line over three codes with noise of 0.15 code: least squares on the codes is biased
    # by about one standard error; the code likelihood is not, and its intervals cover
    rng = np.random.default_rng(1)
    n, truth = 400, np.array([0.3, 2.6])
    design = np.column_stack([np.ones(n), np.linspace(0.0, 1.0, n)])
    plain, code, stderr = [], [], []
    for _ in range(200):
        y = np.round(design @ truth + 0.15 * rng.standard_normal(n))
        start = np.linalg.lstsq(design, y, rcond=None)[0]
        found = fit_codes(y, 1.0, lambda x: design @ x, lambda x: design, start, np.zeros(n, dtype=int),
                          np.array([0.25]))
        assert found.converged
        plain.append(start)
        code.append(found.values)
        stderr.append(np.sqrt(np.diag(found.covariance)))
    plain, code, stderr = np.array(plain), np.array(code), np.array(stderr)
    assert np.max(np.abs(plain.mean(0) - truth) / plain.std(0)) > 0.7
    assert np.all(np.abs(code.mean(0) - truth) / code.std(0) < 0.25)  # ±0.07 sampling error
    coverage = np.mean(np.abs(code - truth) <= 2 * stderr, axis=0)
    assert np.all((coverage > 0.9) & (coverage < 0.995))


def test_a_settled_level_that_reads_one_code_is_analysed():
    # 76 dB with 8-bit codes: the pre-edge level reads a single code; its fit once had zero
    # scatter and the analysis stopped with a singular matrix
    t, clean, setup, amp, _ = rl_case("short")
    sigma = amp / 10 ** (76 / 20)
    y = scope_for("8-bit", sigma, clean).apply(clean, np.random.default_rng(11))
    result = wavefit.analyze(pd.DataFrame({"time": t, "sense": y}), setup)
    tau = result.quantities["tau"]
    assert np.isfinite(tau.value) and tau.expanded_uncertainty > 0
    assert any("resolution-limited" in w for w in result.warnings)


def test_undithered_8_bit_step_is_unbiased_and_efficient_against_the_quantised_bound():
    # 60 dB with 8-bit codes: noise about 0.2 codes. Least squares on the codes read
    # bias +2.0 standard errors and efficiency 0.35 here (docs/estimator-quality.md)
    rows = run_scenario(Scenario("rl-step", "8-bit", 60, "short"), trials=80, seed=8)
    tau = next(r for r in rows if r.quantity == "tau")
    assert abs(tau.bias_sd) < 0.4  # ±0.11 sampling error
    assert tau.efficiency > 0.6  # bound of the quantised record, ±16 % sampling error
    assert 0.88 <= tau.coverage <= 1.0


@pytest.mark.parametrize("correlation", [0.0, 0.9])
def test_correlated_noise_keeps_the_code_fit_with_a_sandwich_covariance(correlation):
    # with noise correlated from sample to sample (a band-limited front end) the likelihood
    # of independent codes would overstate the information; the generalised residuals show it,
    # and the covariance is then the composite-likelihood sandwich (tests/test_code_sandwich.py)
    from scipy.signal import lfilter

    from wavefit.fit.engine import Block, fit_least_squares
    from wavefit.fit.quantisation import CODE_FIT_WARNING, CORRELATED_CODE_FIT_WARNING, include_quantisation

    rng = np.random.default_rng(5)
    n = 2000
    design = np.column_stack([np.ones(n), np.linspace(0.0, 1.0, n)])
    noise = lfilter([1.0], [1.0, -correlation], rng.standard_normal(n))
    y = np.round(design @ np.array([0.3, 6.0]) + 0.2 * noise / noise.std())
    fit = fit_least_squares(lambda x: y - design @ x, lambda x: -design, [0.0, 1.0], ("a", "b"),
                            [Block(0, n)], model="line")
    result = include_quantisation(fit, y, lambda x: design @ x, lambda x: design, [Block(0, n)])
    assert (CODE_FIT_WARNING if correlation == 0 else CORRELATED_CODE_FIT_WARNING) in result.warnings
    assert result.code_fit.independent_noise == (correlation == 0)
