"""How far the mean of quantised samples can lie from the mean of the signal that was quantised.

A uniform quantiser of step Δ fed a constant level plus Gaussian noise of standard deviation
σ returns samples whose mean differs from the level by the periodic function

    Σ_k (−1)^k (Δ/(π k)) exp(−2π² k² σ²/Δ²) sin(2π k μ/Δ),

whose size depends on where the level μ sits between two codes. Without noise (σ → 0) it
reaches Δ/2; with σ ≥ Δ/2 it is below 0.003 Δ. The level's place between codes is unknown,
so the bound of that sum is taken as the half-width of a rectangular distribution
(JCGM 100:2008, 4.3.7), the same for every plateau of one state (a systematic effect).

References
----------
.. [1] B. Widrow and I. Kollár, *Quantization Noise*, Cambridge University Press, 2008,
   ch. 11 (moments of the quantiser output for a Gaussian input).
.. [2] JCGM 100:2008 (GUM), 4.3.7 and F.2.2.1 (resolution of a digital indication).
"""
from __future__ import annotations

import math

#: Terms of the series summed for the bound; the fourth is below 1e-6 Δ once σ ≥ Δ/4, and
#: with less noise the bound is capped at Δ/2 anyway.
SERIES_TERMS = 4


def mean_bias_bound(step: float | None, sigma: float) -> float:
    """Largest offset of the mean of quantised samples from the mean of the input, for codes
    ``step`` apart and input noise ``sigma`` (Gaussian); 0 when the record is not on a code grid.

    ``sigma`` is the noise of the input before quantisation: the recorded scatter less the
    quantisation's own Δ²/12 in variance.
    """
    if not step or step <= 0:
        return 0.0
    ratio = max(sigma, 0.0) / step
    total = sum(step / (math.pi * k) * math.exp(-2.0 * math.pi ** 2 * k ** 2 * ratio ** 2)
                for k in range(1, SERIES_TERMS + 1))
    return min(total, 0.5 * step)


def input_noise(recorded_sigma: float, step: float | None) -> float:
    """Noise of the input before quantisation: √(σ² − Δ²/12), 0 when the scatter is the code's own."""
    if not step:
        return recorded_sigma
    return math.sqrt(max(recorded_sigma ** 2 - step ** 2 / 12.0, 0.0))
