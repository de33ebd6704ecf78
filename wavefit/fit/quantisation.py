"""Resolution-limited records: when the noise is too small to dither the converter.

With noise well below one code, the quantisation error of a sampled waveform is
a deterministic function of the waveform, not noise: it does not average out
in a fit, and the fit's covariance (built from the residual scatter) says
nothing about it (B. Widrow and I. Kollár, *Quantization Noise*, Cambridge
University Press 2008, ch. 4–5: the quantisation error is white and independent
of the signal only when the input's characteristic function vanishes at
multiples of 2π/q, which Gaussian noise of σ ≳ q/2 ensures). Its effect is
estimated by quantising the fitted model onto the record's own code grid and
passing the difference through the fit's linear influence, δθ = J⁺·(Q(m) − m),
as an rms over eight positions of the grid between codes (where the true
waveform sits between codes is not known); that shift is added to the
covariance as a fully correlated component.
"""
from __future__ import annotations

import numpy as np

from ..signal.codes import code_step

#: Below this residual rms, in codes, the error is treated as not dithered (residual
#: σ² = σ_noise² + q²/12, so 0.5 q means σ_noise ≈ 0.4 q; common practice after Widrow).
DITHER_LIMIT = 0.5


def quantisation_shift(y: np.ndarray, model: np.ndarray, jac_model: np.ndarray,
                       residual_rms: float) -> tuple[np.ndarray, float] | None:
    """Parameter shift δθ caused by undithered quantisation, and the noise in codes; or ``None``
    when the record is not on a code grid or its noise dithers it."""
    step = code_step(y)
    if step is None or residual_rms >= DITHER_LIMIT * step:
        return None
    origin = float(np.min(y))
    # the fitted model is not the true waveform, and where the true one sits between codes is
    # unknown: take the rms of the shift over eight sub-code positions of the grid
    shifts = []
    for phase in np.arange(8) / 8.0:
        quantised = origin + step * (np.round((model - origin) / step + phase) - phase)
        shifts.append(np.linalg.lstsq(jac_model, quantised - model, rcond=None)[0])
    shifts = np.array(shifts)
    return np.sqrt(np.mean(shifts ** 2, axis=0)) * np.sign(shifts[0] + 1e-300), residual_rms / step


#: How the warning begins, for callers that report it once per record.
RECORD_WIDE = "the record is resolution-limited"


WARNING = (f"{RECORD_WIDE} (its noise is below half a converter code): quantisation error does "
           "not average out, and an estimate of its effect is included in the type A uncertainty; "
           "more vertical sensitivity or averaging would help")


def include_quantisation(fit, y: np.ndarray, model: np.ndarray, jac_model: np.ndarray, blocks):
    """Return ``fit`` with the quantisation shift of every block added to its covariance.

    The shifts of the blocks are added linearly (a deterministic error need not
    average out between windows or channels) and enter as one fully correlated
    component, outer(δθ, δθ), with a warning.
    """
    import dataclasses

    total = np.zeros(len(fit.names))
    worst = None
    for b in blocks:
        rows = slice(b.start, b.stop)
        found = quantisation_shift(y[rows], model[rows], jac_model[rows], fit.noise_sigma[b.group])
        if found is not None:
            total += found[0]
            worst = found[1] if worst is None else min(worst, found[1])
    if worst is None:
        return fit
    diagnostics = dict(fit.diagnostics, quantisation_shift=dict(zip(fit.names, total.tolist())),
                       residual_rms_in_codes=worst)
    return dataclasses.replace(fit, covariance=fit.covariance + np.outer(total, total),
                               diagnostics=diagnostics, warnings=(*fit.warnings, WARNING))
