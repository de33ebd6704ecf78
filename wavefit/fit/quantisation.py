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

When every block of a fit is resolution-limited on a code grid (one for all blocks, or one
per channel), and the noise is not far below a code (σ ≥ CODE_FIT_FLOOR·q), the fit is
instead carried to the maximum of the likelihood of the codes themselves
(:mod:`wavefit.fit.code_likelihood`), which removes that error rather than widening the
interval for it. Its covariance is the inverse expected information when the noise is
independent from sample to sample, and the composite-likelihood sandwich
(:mod:`wavefit.fit.code_sandwich`) when the samples' scores show it correlated.
"""
from __future__ import annotations

import math
from typing import Callable

import numpy as np

from ..signal.codes import code_grid, code_step, has_gap_below
from .code_likelihood import fit_codes, standardised_scores
from .code_sandwich import godambe_covariance
from .compressed import triangle
from .engine import Block
from .jacobian import Jacobian, as_jacobian
from .noise_model import white
from .portmanteau import standardised_portmanteau
from .result import CodeFit, QuantisationWidening

#: Below this residual rms, in codes, the error is treated as not dithered (residual
#: σ² = σ_noise² + q²/12, so 0.5 q means σ_noise ≈ 0.4 q; common practice after Widrow).
DITHER_LIMIT = 0.5


def quantisation_shift(y: np.ndarray, model: np.ndarray, jac_model: "np.ndarray | Jacobian",
                       residual_rms: float, step: float | None = None) -> tuple[np.ndarray, float] | None:
    """Parameter shift δθ caused by undithered quantisation, and the noise in codes; or ``None``
    when the record is not on a code grid or its noise dithers it. ``step`` is the code step
    when known from elsewhere in the record (a settled level may read one or two codes only,
    too few to find the grid from)."""
    step = limiting_step(y, residual_rms, step)
    if step is None:
        return None
    return shift_on_grid(y, model, jac_model, residual_rms, step)


def shift_on_grid(y: np.ndarray, model: np.ndarray, jac_model: "np.ndarray | Jacobian", residual_rms: float,
                  step: float) -> tuple[np.ndarray, float]:
    """:func:`quantisation_shift` of a record whose limiting code ``step`` is already known."""
    origin = float(np.min(y))
    # the fitted model is not the true waveform, and where the true one sits between codes is
    # unknown: take the rms of the shift over eight sub-code positions of the grid
    phases = np.arange(8) / 8.0

    def errors(a: int, b: int) -> np.ndarray:
        fitted = model[a:b, None]
        return origin + step * (np.round((fitted - origin) / step + phases) - phases) - fitted

    # least squares J·δ = error for each phase: on J itself when it is small, else through the
    # triangular factor of [J | errors] (the same minimum-norm solution: R has J's singular values)
    jac = as_jacobian(jac_model)
    n, p = y.size, jac.params
    if jac.small:
        dense = jac.toarray()
        shifts = np.array([np.linalg.lstsq(dense, errors(0, n)[:, k], rcond=None)[0] for k in range(phases.size)])
    else:
        factor = triangle(jac, errors, [Block(0, n)], {Block(0, n).group: white(1.0)})
        shifts = np.linalg.lstsq(factor[:p, :p], factor[:p, p:], rcond=np.finfo(float).eps * max(n, p))[0].T
    return np.sqrt(np.mean(shifts ** 2, axis=0)) * np.sign(shifts[0] + 1e-300), residual_rms / step


def limiting_step(y: np.ndarray, residual_rms: float, step: float | None = None) -> float | None:
    """The code step of a record whose noise does not dither it (below DITHER_LIMIT codes),
    else None; ``step`` as in :func:`quantisation_shift`."""
    if step is None and has_gap_below(y, residual_rms / DITHER_LIMIT):
        return None  # any grid of its values is fine enough for the noise to dither it
    step = code_step(y) or step
    if step is None or residual_rms >= DITHER_LIMIT * step:
        return None
    return step


#: Below this noise, in codes, the code likelihood is not used: its maximum is then set by a few
#: samples at code transitions and the expected information is a poor guide to the scatter
#: (measured: see docs/estimator-quality.md, "Records finer than the noise").
CODE_FIT_FLOOR = 0.01

#: The code fit's covariance is the sandwich, not the inverse information, when the standardised
#: scores' portmanteau p-value is below this. No
#: floor on the size of the correlation as for least-squares residuals: below a code the
#: scores' correlation is much weaker than the noise's (AR(1) noise with φ = 0.3 at 0.1 code
#: passed a 0.1 floor and its intervals were 1.3 times too narrow).
INDEPENDENCE_P = 1e-3

#: A code fit whose variance exceeds the widened least-squares fit's by this factor learned
#: little from the codes (see :func:`include_quantisation`).
UNINFORMED = 10.0

#: How the warnings about a resolution-limited record begin.
RECORD_WIDE = "the record is resolution-limited"


WARNING = (f"{RECORD_WIDE} (its noise is below half a converter code): quantisation error does "
           "not average out, and an estimate of its effect is included in the type A uncertainty; "
           "more vertical sensitivity or averaging would help")


CODE_FIT_WARNING = (f"{RECORD_WIDE} (its noise is below half a converter code): it was fitted by the "
                    "likelihood of its codes (Gaussian noise before an ideal converter), which removes the "
                    "bias quantisation gives least squares; more vertical sensitivity would help")

CORRELATED_CODE_FIT_WARNING = (
    f"{RECORD_WIDE} (its noise is below half a converter code): it was fitted by the likelihood of its "
    "codes (Gaussian noise before an ideal converter), which removes the bias quantisation gives least "
    "squares; its noise is correlated, so the uncertainty comes from the scores' scatter (a sandwich); "
    "more vertical sensitivity would help")

#: The warnings that concern the whole record (its converter), not one fit window: a method
#: that fits several windows of a record says them once.
RECORD_WARNINGS = (WARNING, CODE_FIT_WARNING, CORRELATED_CODE_FIT_WARNING)


def include_quantisation(fit, y: np.ndarray, model: Callable[[np.ndarray], np.ndarray],
                         jac_model: Callable[[np.ndarray], "np.ndarray | Jacobian"], blocks,
                         steps: dict[str, float | None] | None = None,
                         noise: dict[str, float] | None = None):
    """Return ``fit`` corrected for undithered quantisation, or unchanged when its noise dithers it.

    ``model(θ)`` and ``jac_model(θ)`` are the fitted waveform and its derivative in the
    fit's parameters; ``steps`` the code step of each noise group's channel when known
    from the whole record, and ``noise`` its noise before the converter when another fit
    of the channel found it (for all groups, or it is estimated here). When any block is
    resolution-limited and every channel's samples lie on a code grid, the fit is moved to the
    maximum of the code likelihood of all blocks (:func:`fit_on_codes`; for a channel whose
    noise dithers its converter that likelihood is the Gaussian one to within its code
    grid's effect, so a resolution-limited drive channel beside a well-dithered sense channel
    is fitted by it too: on an ngspice 22 mH record it took u(tau) from 660 ns, a worst-case
    widening, to 31 ns, the scatter of the 21 edges' estimates) if that is trustworthy;
    otherwise the shifts of a channel's blocks are added linearly (a deterministic error need
    not average out between windows) and enter as one fully correlated component per channel,
    outer(δθ, δθ), with a warning.
    """
    import dataclasses

    totals: dict[str, np.ndarray] = {}
    worst = None
    limited = 0
    steps = steps or {}
    fitted = jac = None
    for b in blocks:
        rows = slice(b.start, b.stop)
        step = limiting_step(y[rows], fit.noise_sigma[b.group], steps.get(b.group))
        if step is None:
            continue  # no shift: the model is then not evaluated (a long record's copy saved)
        if fitted is None:
            fitted, jac = model(fit.values), as_jacobian(jac_model(fit.values))
        shift, codes = shift_on_grid(y[rows], fitted[rows], jac.restricted(b.start, b.stop),
                                     fit.noise_sigma[b.group], step)
        totals[b.group] = totals.get(b.group, np.zeros(len(fit.names))) + shift
        worst = codes if worst is None else min(worst, codes)
        limited += 1
    if worst is None:
        return fit
    # the blocks of one channel share its converter (shifts add linearly); different channels'
    # converters err independently of each other
    widening = sum(np.outer(v, v) for v in totals.values())
    effect = QuantisationWidening(dict(zip(fit.names, sum(totals.values()).tolist())), worst)
    widened = dataclasses.replace(fit, covariance=fit.covariance + widening, quantisation_widening=effect,
                                  warnings=(*fit.warnings, WARNING))
    if limited:
        refined = fit_on_codes(fit, y, model, jac_model, blocks, steps, noise)
        # a level that reads one code with few excursions says little to the code likelihood
        # (its maximum is flat across the code and σ is barely determined): keep the widened fit
        # when the code fit's variance is far above it (quantisation costs a factor 1.3–3 where
        # the codes do inform the fit; such a level reads 10⁸)
        if refined is not None and np.all(np.diag(refined.covariance) <= UNINFORMED * np.diag(widened.covariance)):
            return refined
    return widened


def fit_on_codes(fit, y: np.ndarray, model: Callable[[np.ndarray], np.ndarray],
                 jac_model: Callable[[np.ndarray], np.ndarray], blocks, steps: dict[str, float | None],
                 noise: dict[str, float] | None = None):
    """``fit`` moved to the maximum of the code likelihood, with its covariance; or ``None``
    when a noise group's blocks do not sit on one code grid, the maximum is not found, or the
    noise is below CODE_FIT_FLOOR codes. ``noise`` (σ per group before the converter) is used
    as known when given for every group.

    When all blocks share one grid it is fitted to all of them; otherwise each noise group
    (a channel) has its own. When the samples' standardised scores show the noise to be
    independent the covariance is the inverse expected information; when they show it to be
    correlated the maximum is kept (a composite likelihood's maximum is still consistent)
    and its covariance is the sandwich of :func:`wavefit.fit.code_sandwich.godambe_covariance`.
    """
    import dataclasses

    names = sorted({b.group for b in blocks})
    grids = _grids(y, blocks, steps, names)
    if grids is None:
        return None
    groups = np.empty(y.size, dtype=int)
    for b in blocks:
        groups[b.start:b.stop] = names.index(b.group)
    one_grid = len(set(grids.values())) == 1
    if one_grid:
        origin, step = grids[names[0]]
    else:
        origin = np.array([grids[g][0] for g in names])[groups]
        step = np.array([grids[g][1] for g in names])[groups]
    group_steps = np.array([grids[g][1] for g in names])
    known = noise is not None and all(g in noise for g in names)
    if known:
        start = np.array([noise[g] for g in names])
    else:
        # residual variance ≈ σ² + q²/12, which undershoots below half a code; start no lower
        # than a quarter code, where every sample still informs the fit (scoring moves down)
        start = np.array([math.sqrt(max(fit.noise_sigma[g] ** 2 - q ** 2 / 12.0, (0.25 * q) ** 2))
                          for g, q in zip(names, group_steps)])
    codes = origin + step * np.round((y - origin) / step)  # printed values snapped to the grid
    # where each sample's sum over codes is centred: on one grid from its lowest code
    centring = float(np.min(codes)) if one_grid else origin
    found = fit_codes(codes, step, model, jac_model, fit.values, groups, start, sigma_known=known,
                      origin=centring)
    if not found.converged or np.any(found.sigma < CODE_FIT_FLOOR * group_steps):
        return None
    # the likelihood takes the noise before the converter as independent; correlated noise
    # (a band-limited front end) makes its information overstate what the record holds.
    # (The least-squares fit's own noise model cannot tell: the quantisation error of a slow
    # waveform is correlated even when the noise is not.) The samples' standardised scores
    # are independent when the noise is.
    fitted = model(found.values)
    z, informative = standardised_scores(codes, fitted, found.sigma[groups], step, origin)
    ends = np.cumsum([b.stop - b.start for b in blocks])[:-1]
    independent = all(standardised_portmanteau(part, used)[0] >= INDEPENDENCE_P
                      for part, used in zip(np.split(z, ends), np.split(informative, ends)))
    covariance = found.covariance
    if not independent:
        covariance = godambe_covariance(codes, step, centring, fitted, as_jacobian(jac_model(found.values)),
                                        found.sigma, groups, [(b.start, b.stop) for b in blocks], known)
        if covariance is None:
            return None
    residuals = y - fitted
    summary = CodeFit(code_step=dict(zip(names, group_steps.tolist())), iterations=found.iterations,
                      noise_sigma_in_codes=dict(zip(names, (found.sigma / group_steps).tolist())),
                      least_squares_values=dict(zip(fit.names, fit.values.tolist())), independent_noise=independent)
    warning = CODE_FIT_WARNING if independent else CORRELATED_CODE_FIT_WARNING
    return dataclasses.replace(fit, values=found.values, covariance=covariance, residuals=residuals,
                               code_fit=summary, warnings=(*fit.warnings, warning))


def _grids(y: np.ndarray, blocks, steps: dict[str, float | None], names: list[str]
           ) -> dict[str, tuple[float, float]] | None:
    """(origin, step) of each noise group's code grid: the one grid all blocks share when
    there is one (:func:`_common_grid`), else one per group; None when a group has none."""
    parts = [y[b.start:b.stop] for b in blocks]
    known = [steps.get(b.group) for b in blocks]
    common = _common_grid(parts, known)
    if common is not None:
        return {g: common for g in names}
    grids = {}
    for g in names:
        mine = [i for i, b in enumerate(blocks) if b.group == g]
        grid = _common_grid([parts[i] for i in mine], [known[i] for i in mine])
        if grid is None:
            return None
        grids[g] = grid
    return grids


def _common_grid(parts: list[np.ndarray], known: list[float | None]) -> tuple[float, float] | None:
    """(origin, step) of the code grid all ``parts`` share (fitted to all their levels, with
    the ``known`` steps as the guess for parts too flat to show one), or None."""
    guesses = [code_step(v) or k for v, k in zip(parts, known)]
    if any(g is None for g in guesses):
        return None
    grid = code_grid(np.concatenate(parts), guesses[0])
    if grid is None or max(abs(g / grid[1] - 1) for g in guesses) > 0.05:
        return None
    return grid


def noise_before_converter(fits) -> dict[str, float]:
    """Per noise group, the median noise before the converter that code fits among ``fits`` found."""
    found: dict[str, list[float]] = {}
    for f in fits:
        for g, sigma in (f.code_fit.noise_before_converter if f.code_fit is not None else {}).items():
            found.setdefault(g, []).append(sigma)
    return {g: float(np.median(v)) for g, v in found.items()}
