"""What a digital scope does to a clean waveform: noise, offset, gain, quantisation.

Used for sample data, demos and tests. Band-limited noise is white Gaussian
noise through a low-pass filter (a second-order Butterworth section run forward
only, as an analogue front end would), rescaled to the requested rms, so its
correlation length is set by the cut-off.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from scipy import signal


@dataclass(frozen=True)
class ScopeModel:
    """Acquisition imperfections of one channel.

    ``noise_rms`` in signal units; ``correlation_samples`` > 1 makes the noise
    band-limited with about that many samples of correlation (0 or 1: white);
    ``bits`` quantises to 2**bits codes over ``full_scale`` = (low, high), or
    over the waveform's own span widened by 10 % when ``full_scale`` is None;
    values beyond full scale clip, as an ADC does.
    """

    noise_rms: float = 0.0
    correlation_samples: float = 0.0
    offset: float = 0.0
    gain: float = 1.0
    bits: int | None = None
    full_scale: tuple[float, float] | None = None

    def apply(self, y: np.ndarray, rng: np.random.Generator) -> np.ndarray:
        """Return the recorded version of the clean waveform ``y``."""
        out = self.gain * np.asarray(y, dtype=float) + self.offset
        if self.noise_rms > 0:
            out = out + band_limited_noise(out.size, self.noise_rms, self.correlation_samples, rng)
        if self.bits:
            out = quantise(out, self.bits, self.full_scale or _span(y, self.gain, self.offset))
        return out


def band_limit_filter(correlation_samples: float) -> tuple[np.ndarray, np.ndarray]:
    """(b, a) of the second-order Butterworth low-pass that gives about ``correlation_samples``
    samples of correlation."""
    cutoff = 1.0 / (np.pi * correlation_samples)  # of Nyquist-normalised frequency, fraction of 1
    return signal.butter(2, min(cutoff * 2.0, 0.99))


def band_limited_autocovariance(rms: float, correlation_samples: float, lags: int) -> np.ndarray:
    """Exact autocovariance at lags 0 … ``lags`` of :func:`band_limited_noise` (from the
    filter's impulse response)."""
    b, a = band_limit_filter(correlation_samples)
    h = signal.lfilter(b, a, np.r_[1.0, np.zeros(lags + int(200 * correlation_samples))])
    acov = np.array([float(h[: h.size - k] @ h[k:]) for k in range(lags + 1)])
    return rms ** 2 * acov / acov[0]


def band_limited_noise(n: int, rms: float, correlation_samples: float, rng: np.random.Generator) -> np.ndarray:
    """Gaussian noise of the given rms; low-pass filtered when ``correlation_samples`` > 1."""
    w = rng.standard_normal(n + (0 if correlation_samples <= 1 else int(20 * correlation_samples)))
    if correlation_samples > 1:
        b, a = band_limit_filter(correlation_samples)
        w = signal.lfilter(b, a, w)[-n:]
        w = w / np.sqrt(np.mean(w ** 2))
    return rms * w[:n]


def quantise(y: np.ndarray, bits: int, full_scale: tuple[float, float]) -> np.ndarray:
    """Round to the nearest of 2**bits codes spanning ``full_scale``; clip outside it."""
    lo, hi = full_scale
    lsb = (hi - lo) / (2 ** bits - 1)
    codes = np.clip(np.round((y - lo) / lsb), 0, 2 ** bits - 1)
    return lo + codes * lsb


def _span(y: np.ndarray, gain: float, offset: float) -> tuple[float, float]:
    lo, hi = gain * float(np.min(y)) + offset, gain * float(np.max(y)) + offset
    pad = 0.1 * (hi - lo if hi > lo else 1.0)
    return lo - pad, hi + pad
