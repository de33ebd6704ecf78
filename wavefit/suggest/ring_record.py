"""A ringing decay in a first capture: the damped sinusoid of :mod:`wavefit.fit.damped_sine`,
accepted only when it is the record's shape (small residuals, several cycles, a real decay)."""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import WavefitError
from ..fit.damped_sine import DampedSineFit, fit_ring
from ..io import Capture, Channel
from .rules import RING_MAX_RESIDUAL, RING_MIN_CYCLES, RING_MIN_DECAY


@dataclass(frozen=True)
class RingRecord:
    """A ring found in a capture: its channel, the fit, and the checks' figures."""

    channel: Channel
    ring: DampedSineFit
    residual_fraction: float
    decay_factor: float

    @property
    def f0(self) -> float:
        """Undamped natural frequency w0/(2π), w0 = √(w_d² + alpha²) of the fitted pole pair."""
        return self.ring.w0 / (2 * math.pi)

    @property
    def alpha(self) -> float:
        """Decay rate of the envelope (1/s)."""
        return self.ring.alpha

    @property
    def quality_factor(self) -> float:
        """Q = w0/(2·alpha) of the ring as recorded (loaded by everything across the tank)."""
        return self.ring.w0 / (2 * self.ring.alpha)


def ring_in(capture: Capture, channel: Channel) -> RingRecord | None:
    """The ring in ``channel``, or None when a damped sinusoid is not the record's shape."""
    y = np.asarray(channel.values, dtype=float)
    if y.size < 16 or not np.all(np.isfinite(y)) or np.ptp(y) == 0:
        return None
    try:
        ring = fit_ring(capture.time, y, noise="white")
    except (ValueError, ArithmeticError, np.linalg.LinAlgError, WavefitError):
        return None
    t = capture.time[ring.start:ring.stop]
    amplitude = ring.amplitude
    if not (amplitude > 0 and ring.alpha > 0 and ring.cycles >= RING_MIN_CYCLES):
        return None
    residual = y[ring.start:ring.stop] - ring.on_window()
    fraction = float(np.sqrt(np.mean(residual ** 2)) / amplitude)
    decay = math.exp(ring.alpha * (t[-1] - t[0]))
    if fraction > RING_MAX_RESIDUAL or decay < RING_MIN_DECAY:
        return None
    return RingRecord(channel, ring, fraction, decay)


def find_ring_record(capture: Capture) -> RingRecord | None:
    """The ring of the capture's channel with the largest ring amplitude, or None."""
    rings = [r for r in (ring_in(capture, ch) for ch in capture.channels) if r is not None]
    return max(rings, key=lambda r: r.ring.amplitude, default=None)
