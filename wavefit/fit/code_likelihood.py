"""Maximum likelihood on a converter's code grid: Gaussian noise before an ideal quantiser.

A sample that reads the code c tells only that the analogue value s_i(θ) + ε_i lay
between c − q/2 and c + q/2. With ε_i independent N(0, σ²) the log-likelihood is

    ℓ(θ, σ) = Σ_i log[Φ(b_i) − Φ(a_i)],  a_i = (c_i − q/2 − s_i)/σ,  b_i = (c_i + q/2 − s_i)/σ,

the interval-censored normal model. Each sample may have its own grid (q and the origin
per sample: the channels of a fit read different converters). When the noise is well below
a code, least squares on the codes is biased by the deterministic quantisation error (B. Widrow and I. Kollár,
*Quantization Noise*, Cambridge University Press 2008, ch. 4–5), while this likelihood
describes the record exactly and its maximum is consistent; the estimation of signal
parameters from quantised data by this likelihood is reviewed by P. Carbone, J. Schoukens
and A. Moschitta, "Parametric system identification using quantized data", IEEE Trans.
Instrum. Meas. 64 (2015) (cited from memory). Noise of σ ≲ q/3 is the regime where the
quantiser's grouping matters (J. Rapp, R. M. A. Dawson and V. K. Goyal, "Estimation from
quantized Gaussian measurements: when and how to use dither", arXiv:1811.06856).

The maximum is found by Fisher scoring (C. R. Rao, *Linear Statistical Inference and its
Applications*, 2nd ed., Wiley 1973, §5g) from the least-squares estimate, with the
expected information of each sample summed over the codes it could have read, and the
covariance of θ̂ is the θ-block of the inverse expected information at the maximum.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy.special import log_ndtr

from .jacobian import Jacobian, as_jacobian

#: codes either side of the mean over which a sample's expected information is summed
#: is ceil(SPAN_SIGMAS·σ/q) + 1; beyond 7σ a code's probability is below 1e-11
SPAN_SIGMAS = 7.0
MAX_ITERATIONS = 60


@dataclass(frozen=True)
class CodeFit:
    """The maximum of the code likelihood: parameters, their covariance, and σ per noise group."""

    values: np.ndarray
    covariance: np.ndarray
    sigma: np.ndarray
    iterations: int
    converged: bool


def log_interval_probability(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """log[Φ(b) − Φ(a)] for a < b, accurate in both tails."""
    upper = a > 0  # both bounds in the upper tail: use Φ(−a) − Φ(−b)
    hi = np.where(upper, -a, b)
    lo = np.where(upper, -b, a)
    return _log_difference(log_ndtr(hi), log_ndtr(lo))


def _log_difference(log_hi: np.ndarray, log_lo: np.ndarray) -> np.ndarray:
    """log(e^log_hi − e^log_lo) for log_lo ≤ log_hi, without leaving log space."""
    return log_hi + np.log(-np.expm1(np.minimum(log_lo - log_hi, -1e-300)))


def _bounds(code, mean: np.ndarray, sigma: np.ndarray, step: "float | np.ndarray") -> tuple[np.ndarray, np.ndarray]:
    """The interval of ``code`` in units of σ about the sample's mean: (a, b)."""
    return (code - 0.5 * step - mean) / sigma, (code + 0.5 * step - mean) / sigma


def _log_phi(z: np.ndarray) -> np.ndarray:
    return -0.5 * z * z - 0.5 * math.log(2.0 * math.pi)


def log_likelihood(codes: np.ndarray, mean: np.ndarray, sigma: np.ndarray, step: "float | np.ndarray") -> float:
    """ℓ of the samples ``codes`` (analogue values on the grid) given their means and σ."""
    return float(np.sum(log_interval_probability(*_bounds(codes, mean, sigma, step))))


def scores(codes: np.ndarray, mean: np.ndarray, sigma: np.ndarray, step: "float | np.ndarray"
           ) -> tuple[np.ndarray, np.ndarray]:
    """∂ℓ_i/∂s_i and ∂ℓ_i/∂σ of each sample."""
    a, b = _bounds(codes, mean, sigma, step)
    log_p = log_interval_probability(a, b)
    pa, pb = np.exp(_log_phi(a) - log_p), np.exp(_log_phi(b) - log_p)
    return (pa - pb) / sigma, (a * pa - b * pb) / sigma


def standardised_scores(codes: np.ndarray, mean: np.ndarray, sigma: np.ndarray, step: "float | np.ndarray",
                        origin: "float | np.ndarray") -> tuple[np.ndarray, np.ndarray]:
    """Each sample's score ∂ℓ_i/∂s_i divided by its standard deviation √I_i, and whether the
    sample informs the fit at all (I_i·σ² above 1e-6; deep inside a code it does not).

    The score is the generalised residual of the censored model divided by σ²
    (E[ε_i | code_i]/σ²: C. Gouriéroux, A. Monfort, E. Renault and A. Trognon,
    J. Econometrics 34 (1987) 5–32, cited from memory); with independent noise before the
    converter the scores are independent, so their autocorrelation tests that assumption.
    """
    score = scores(codes, mean, sigma, step)[0]
    info = expected_information(mean, sigma, step, origin)[0]
    informative = info * sigma ** 2 > 1e-6
    return np.where(informative, score / np.sqrt(np.where(informative, info, 1.0)), 0.0), informative


def expected_information(mean: np.ndarray, sigma: np.ndarray, step: "float | np.ndarray",
                         origin: "float | np.ndarray") -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Per sample, the expected information about its mean, the mean–σ cross term and σ,
    summed over every code the sample could read (those within SPAN_SIGMAS·σ)."""
    reach = int(math.ceil(float(np.max(SPAN_SIGMAS * sigma / step)))) + 1
    centre = np.round((mean - origin) / step)
    i_mm = np.zeros(mean.size)
    i_ms = np.zeros(mean.size)
    i_ss = np.zeros(mean.size)
    # Neighbouring codes share a boundary: each boundary's standardised position, log φ and
    # the log Φ its intervals need are found once (:func:`log_interval_probability`'s tail choice: an
    # interval above zero takes log Φ(−z) of both its bounds, any other log Φ(z), so a boundary
    # above zero needs log Φ(−z) but for the one interval it closes that holds zero)
    a = _bounds(origin + (centre - reach) * step, mean, sigma, step)[0]
    log_phi_a = _log_phi(a)
    tail_a = log_ndtr(-np.abs(a))
    for k in range(-reach, reach + 1):
        b = _bounds(origin + (centre + k + 1) * step, mean, sigma, step)[0]
        log_phi_b = _log_phi(b)
        tail_b = log_ndtr(-np.abs(b))
        upper = a > 0
        log_hi = np.where(upper, tail_a, tail_b)
        log_lo = np.where(upper, tail_b, tail_a)
        straddles = np.flatnonzero(~upper & (b > 0))  # the interval that holds zero takes log Φ(b)
        log_hi[straddles] = log_ndtr(b[straddles])
        log_p = _log_difference(log_hi, log_lo)
        keep = log_p > -700.0
        pa = np.where(keep, np.exp(log_phi_a - 0.5 * log_p), 0.0)  # φ(a)/√P
        pb = np.where(keep, np.exp(log_phi_b - 0.5 * log_p), 0.0)
        dm = (pa - pb) / sigma  # (∂P/∂s)/√P
        ds = (a * pa - b * pb) / sigma  # (∂P/∂σ)/√P
        i_mm += dm * dm
        i_ms += dm * ds
        i_ss += ds * ds
        a, log_phi_a, tail_a = b, log_phi_b, tail_b
    return i_mm, i_ms, i_ss


def fit_codes(codes: np.ndarray, step: "float | np.ndarray", model: Callable[[np.ndarray], np.ndarray],
              jacobian: Callable[[np.ndarray], "np.ndarray | Jacobian"], x0: np.ndarray, groups: np.ndarray,
              sigma0: np.ndarray, sigma_known: bool = False, origin: "float | np.ndarray | None" = None) -> CodeFit:
    """Maximise ℓ over θ (model parameters) and one σ per noise group.

    ``codes`` are the samples' values (on a grid of step ``step`` through ``origin``, one
    grid or one per sample; by default through the lowest code), ``model(θ)`` their
    means and ``jacobian(θ)`` its derivative; ``groups`` gives each sample's group index
    into ``sigma0``, the starting noise levels, or the noise levels themselves when
    ``sigma_known`` (a settled level that reads one code or two cannot tell its σ).
    """
    origin = float(np.min(codes)) if origin is None else origin
    theta = np.asarray(x0, dtype=float).copy()
    sig = np.asarray(sigma0, dtype=float).copy()
    p, g = theta.size, sig.size
    members = [groups == k for k in range(g)]
    free = slice(0, p) if sigma_known else slice(0, p + g)

    def objective(th: np.ndarray, sg: np.ndarray) -> float:
        with np.errstate(all="ignore"):  # a long trial step may leave the model's domain: ℓ is then nan
            return log_likelihood(codes, model(th), sg[groups], step)

    current = objective(theta, sig)
    converged = False
    iterations = 0
    for iterations in range(1, MAX_ITERATIONS + 1):
        mean, jac = model(theta), as_jacobian(jacobian(theta))
        s_mean, s_sigma = scores(codes, mean, sig[groups], step)
        info = information(jac, mean, sig, groups, members, step, origin)
        grad = np.concatenate([jac.rmatvec(s_mean), [float(np.sum(s_sigma[m])) for m in members]])
        delta = np.zeros(p + g)
        try:
            delta[free] = np.linalg.solve(info[free, free], grad[free])
        except np.linalg.LinAlgError:
            break
        decrement = float(grad[free] @ delta[free])  # twice the gain a full step would make
        if decrement < 1e-10:
            converged = True
            break
        length = 1.0
        while length > 1e-4:
            trial_sigma = sig + length * delta[p:]
            if np.all(trial_sigma > 0):
                trial_theta = theta + length * delta[:p]
                value = objective(trial_theta, trial_sigma)
                if np.isfinite(value) and value >= current:
                    theta, sig, current = trial_theta, trial_sigma, value
                    break
            length *= 0.5
        else:  # no step improves ℓ: at the maximum to within rounding, or stuck
            converged = decrement < 1e-6
            break
    else:  # out of iterations: the last step moved θ after its information was computed
        info = information(as_jacobian(jacobian(theta)), model(theta), sig, groups, members, step, origin)
    try:
        covariance = np.linalg.inv(info[free, free])[:p, :p]
    except np.linalg.LinAlgError:  # a parameter the codes say nothing about (σ → 0 on a flat level)
        covariance, converged = np.full((p, p), np.nan), False
    converged = converged and bool(np.all(np.isfinite(covariance)) and np.all(np.diag(covariance) > 0))
    return CodeFit(theta, 0.5 * (covariance + covariance.T), sig, iterations, converged)


def information(jac: Jacobian, mean, sig, groups, members, step, origin) -> np.ndarray:
    """Expected Fisher information of (θ, σ_1 … σ_g)."""
    i_mm, i_ms, i_ss = expected_information(mean, sig[groups], step, origin)
    p, g = jac.params, len(members)
    info = np.zeros((p + g, p + g))
    info[:p, :p] = jac.weighted_gram(i_mm)
    for k, m in enumerate(members):
        cross = jac.rmatvec(i_ms, mask=m)
        info[:p, p + k] = cross
        info[p + k, :p] = cross
        info[p + k, p + k] = float(np.sum(i_ss[m]))
    return info
