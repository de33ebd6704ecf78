"""Starting values of a sine wave, the four-parameter model of IEEE Std 1057.

The model is y = amplitude·cos(2π·frequency·(t − t_ref) + phase) + offset. Its start comes
in two steps, both from IEEE Std 1057:

1. the frequency from the peak of the record's spectrum (Hann window), between bins by the
   ratio of the peak to its larger neighbour (Grandke's interpolation for that window);
2. at that frequency the model is linear in A0 = amplitude·cos(phase), B0 =
   −amplitude·sin(phase) and the offset: the three-parameter least-squares fit of the
   standard, whose closed form is the normal equations of [cos ωτ, sin ωτ, 1].

The four-parameter fit itself (the frequency refined with the rest) is the nonlinear least
squares of :class:`wavefit.fit.models.Sine`.

References
----------
IEEE Std 1057-2017, *IEEE Standard for Digitizing Waveform Recorders*, §4.1.4.3 (three-
parameter sine fit, known frequency) and §4.1.4.4 (four-parameter sine fit).
T. Grandke, "Interpolation algorithms for discrete Fourier transforms of weighted signals",
IEEE Trans. Instrum. Meas. 32 (1983) 350–355 (interpolation of a Hann-windowed peak).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

#: Fewest samples a start is taken from: four parameters and one degree of freedom.
FEWEST_SAMPLES = 5


@dataclass(frozen=True)
class SineStart:
    """A sine's parameters: amplitude·cos(2π·frequency·(t − t_ref) + phase) + offset."""

    amplitude: float
    frequency: float
    phase: float
    offset: float


def sine(t: np.ndarray, amplitude: float, frequency: float, phase: float, offset: float,
         t_ref: float = 0.0) -> np.ndarray:
    """amplitude·cos(2π·frequency·(t − t_ref) + phase) + offset (IEEE Std 1057, §4.1.4)."""
    tau = np.asarray(t, dtype=float) - t_ref
    return amplitude * np.cos(2.0 * math.pi * frequency * tau + phase) + offset


def spectral_frequency(y: np.ndarray, dt: float) -> float:
    """The frequency (Hz) of the strongest tone of a record sampled every ``dt``: the peak
    bin of its Hann-windowed spectrum (DC left out), moved toward its larger neighbour by
    δ = (2a − 1)/(a + 1), a the ratio of the neighbour's magnitude to the peak's (Grandke 1983).

    Raises
    ------
    ValueError
        A record of fewer than :data:`FEWEST_SAMPLES` samples, or one with no tone (constant).
    """
    y = np.asarray(y, dtype=float)
    if y.size < FEWEST_SAMPLES:
        raise ValueError(f"a sine needs at least {FEWEST_SAMPLES} samples, not {y.size}")
    spectrum = np.abs(np.fft.rfft((y - y.mean()) * np.hanning(y.size)))
    if not np.any(spectrum[1:] > 0):
        raise ValueError("the record is constant: it shows no sine")
    k = 1 + int(np.argmax(spectrum[1:]))
    left = spectrum[k - 1] if k > 1 else 0.0  # the DC bin holds the offset's leakage, not the tone's
    right = spectrum[k + 1] if k + 1 < spectrum.size else 0.0
    ratio = max(left, right) / spectrum[k]
    shift = (2.0 * ratio - 1.0) / (ratio + 1.0)
    shift = max(shift, 0.0)  # a neighbour under half the peak: the tone sits on the bin
    bin_position = k + shift if right >= left else k - shift
    return float(bin_position / (y.size * dt))


def three_parameter_fit(t: np.ndarray, y: np.ndarray, frequency: float, t_ref: float = 0.0) -> SineStart:
    """The least-squares sine of known ``frequency`` (IEEE Std 1057, §4.1.4.3): linear in
    A0, B0 and the offset of y = A0·cos ωτ + B0·sin ωτ + offset, τ = t − t_ref; amplitude =
    √(A0² + B0²) and phase = atan2(−B0, A0) give the cosine form."""
    tau = np.asarray(t, dtype=float) - t_ref
    w = 2.0 * math.pi * frequency
    design = np.column_stack((np.cos(w * tau), np.sin(w * tau), np.ones_like(tau)))
    (a0, b0, offset), *_ = np.linalg.lstsq(design, np.asarray(y, dtype=float), rcond=None)
    return SineStart(amplitude=float(math.hypot(a0, b0)), frequency=float(frequency),
                     phase=float(math.atan2(-b0, a0)), offset=float(offset))


def sine_start(t: np.ndarray, y: np.ndarray, t_ref: float = 0.0) -> SineStart:
    """Start of the four-parameter fit (module doc) on a uniformly sampled record."""
    t = np.asarray(t, dtype=float)
    if t.size < FEWEST_SAMPLES:
        raise ValueError(f"a sine needs at least {FEWEST_SAMPLES} samples, not {t.size}")
    dt = float((t[-1] - t[0]) / (t.size - 1))
    return three_parameter_fit(t, y, spectral_frequency(y, dt), t_ref)
