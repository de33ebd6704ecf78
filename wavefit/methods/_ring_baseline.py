"""A ring's baseline that moves during the ring: drift or hum much slower than the window.

The damped sinusoid has a constant offset. A baseline that drifts, or a mains hum whose
period is longer than the fit window, leaves a slow trend in the residuals; the fit then
tilts its decay and frequency toward it, and the trend's large, slow correlation is beyond an
AR noise model (its Yule–Walker fit is not stationary and the engine falls back to white
noise), so the uncertainties are too small as well. A ring 11 mV high over 1.5 mV of 50 Hz hum
and 1 mV of drift in 1 ms read the loaded Q and the decay 1.2–1.3 expanded uncertainties off,
with only the Ljung–Box warning.

The trend is sought as Legendre polynomials of degree 1 to :data:`TREND_DEGREE` over the window,
fitted to block means of the residuals (a slow trend survives the averaging; the blocks keep
a long record's work small); it is significant when its sum of squares, over the block means'
noise variance (the fit's noise rms, times its long-run variance ratio, over the block
length), exceeds the χ² quantile at the portmanteau screen's level. Its effect is the fit's
own: the ring is fitted again with the trend taken out, and the change of alpha and w_d is
given in their standard uncertainties.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.polynomial import legendre
from scipy import stats

from ..fit.damped_sine import DampedSineFit, fit_damped_sine, ring_parameters_at
from ..fit.portmanteau import SIGNIFICANCE

#: Highest degree of the Legendre polynomials that stand for the baseline's motion over the
#: window: a drift (1), a bow (2) and the part of a hum whose period is a few windows (3).
TREND_DEGREE = 3
#: The residuals are averaged over blocks so that at most this many block means are fitted.
TREND_BLOCKS = 4096
#: A trend is reported when taking it out moves alpha or w_d by more than this many of their
#: standard uncertainties: a bias below one is within the reach of the stated uncertainty.
TREND_EFFECT = 1.0


@dataclass(frozen=True)
class BaselineTrend:
    """The slow trend left in a ring's residuals and what it does to the fit."""

    span: float      # the trend's extent over the window, in the channel's unit
    alpha_shift: float  # change of alpha with the trend taken out, in standard uncertainties
    w_d_shift: float    # the same for w_d

    def warning(self, unit: str) -> str:
        return (f"the baseline moves during the ring (a slow trend of {self.span:.3g} {unit} across the fit "
                "window in the residuals: drift or hum slower than the window): the fit's constant offset does "
                f"not follow it, and taking it out moves the decay by {self.alpha_shift:+.2g} and the frequency "
                f"by {self.w_d_shift:+.2g} standard uncertainties, so the decay, Q_loaded and Q are biased and "
                "their uncertainties too small; remove the source of the drift or hum, or let the tank settle "
                "before the excitation")


def baseline_trend(ring: DampedSineFit, y: np.ndarray, noise: str) -> BaselineTrend | None:
    """The ring's baseline trend when it is significant and moves alpha or w_d by more than
    :data:`TREND_EFFECT` standard uncertainties, else None. ``y`` is the whole record."""
    r = np.asarray(ring.fit.residuals, dtype=float)
    n = r.size
    block = max(1, n // TREND_BLOCKS)
    m = n // block
    if m <= 2 * (TREND_DEGREE + 1):
        return None
    means = r[:m * block].reshape(m, block).mean(axis=1)
    # the window's samples on [−1, 1], and each block's centre there
    centres = -1.0 + 2.0 * (np.arange(m) * block + 0.5 * (block - 1)) / (n - 1)
    basis = legendre.legvander(centres, TREND_DEGREE)
    coef, *_ = np.linalg.lstsq(basis, means, rcond=None)
    coef[0] = 0.0  # (the fit's offset holds the constant)
    explained = basis @ coef
    sigma = float(ring.fit.noise_sigma["tank"])
    ratio = n / ring.fit.n_effective if ring.fit.n_effective > 0 else 1.0
    variance = sigma * sigma * ratio / block
    if not variance > 0:
        return None
    chi2 = float(explained @ explained) / variance
    if not stats.chi2.sf(chi2, TREND_DEGREE) < SIGNIFICANCE:
        return None
    trend = legendre.legval(np.linspace(-1.0, 1.0, n), coef)
    seg = y[ring.start:ring.stop] - trend
    dt = ring.sample_interval
    try:
        again = fit_damped_sine(np.arange(n) * dt, seg, ring_parameters_at(ring, 0), dt, noise=noise, close=True)
    except (ValueError, FloatingPointError, np.linalg.LinAlgError):
        return None
    errors = [ring.fit.stderr(name) for name in ("alpha", "w_d")]
    if not all(e > 0 for e in errors):
        return None
    shifts = [(again.fit[name] - ring.fit[name]) / e for name, e in zip(("alpha", "w_d"), errors)]
    if not max(abs(s) for s in shifts) > TREND_EFFECT:
        return None
    return BaselineTrend(float(trend.max() - trend.min()), *(float(s) for s in shifts))
