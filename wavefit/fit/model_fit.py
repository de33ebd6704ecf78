"""Any :class:`lmfit.Model` fitted to a capture with wavefit's noise model and covariance.

:func:`fit_model` states the model's parameters as the fit engine's problem
(:func:`wavefit.fit.engine.fit_free`): the residual is data − model on the chosen channel,
whitened by the noise model the engine fits (white, or autoregressive per channel for
band-limited scope noise, with feasible GLS), the covariance is that of the whitened
problem or, when the AR model whitens only approximately, the sandwich estimate, and a
record too coarse for its converter is handled by the code likelihood
(:mod:`wavefit.fit.quantisation`). The model's derivatives are taken by central
differences (an arbitrary model gives no analytic Jacobian), which leaves about 1e-10
relative error in them.

On request, profile-likelihood intervals (:func:`profile_intervals`) go with the linear
ones: ``lmfit.conf_interval`` on the whitened residual, with the fitted noise model held.

References
----------
G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989, §2.1 (linearised
covariance), ch. 5 (profile intervals) and ch. 6 (autocorrelated errors).
M. Newville et al., LMFIT, https://lmfit.github.io/lmfit-py/ (``Model``, ``conf_interval``).
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from typing import Any, Sequence

import lmfit
import numpy as np

from ..blas_threads import one_blas_thread
from .constraints import DIFFERENCE_STEP, ParameterMap
from .engine import Block, fit_free, whiten
from .quantisation import include_quantisation
from .result import FitResult

#: Largest relative spread of the sample intervals of a record that is taken as uniformly
#: sampled (a time axis printed to a few digits spreads that much); an AR noise model needs it.
UNIFORM_SPREAD = 1e-3


@dataclass(frozen=True)
class ModelFit:
    """A model fitted by :func:`fit_model`.

    ``params`` are lmfit Parameters with values, ``stderr`` and ``correl`` from wavefit's
    covariance; ``fit`` is wavefit's :class:`~wavefit.fit.result.FitResult` over the same
    parameters (covariance, noise model, degrees of freedom, diagnostics, warnings);
    ``intervals`` the profile-likelihood intervals when asked for (name → list of
    (probability, value) pairs, as ``lmfit.conf_interval`` gives them).
    """

    model: lmfit.Model
    params: lmfit.Parameters
    fit: FitResult
    t: np.ndarray
    data: np.ndarray
    channel: str
    intervals: dict[str, list[tuple[float, float]]] | None = None
    independent: dict[str, Any] = field(default_factory=dict, repr=False)

    @property
    def best_fit(self) -> np.ndarray:
        """The fitted model at the record's instants."""
        return self.model.eval(self.params, **self.independent)

    @property
    def warnings(self) -> tuple[str, ...]:
        return self.fit.warnings

    def fit_report(self) -> str:
        """lmfit's report of the parameters, with the noise model and degrees of freedom."""
        lines = [f"[[wavefit]] channel {self.channel}: {self.fit.n_samples} samples, "
                 f"{self.fit.n_effective:.1f} effective, {self.fit.dof:.1f} degrees of freedom",
                 f"    noise model: {self.fit.noise_model}"]
        lines += [f"    warning: {w}" for w in self.fit.warnings]
        report = lmfit.fit_report(self.params)
        if self.intervals:
            report += "\n[[Profile-likelihood intervals]]\n" + lmfit.ci_report(self.intervals)
        return "\n".join(lines) + "\n" + report


@one_blas_thread()
def fit_model(model: lmfit.Model, capture: Any, params: lmfit.Parameters | None = None, *,
              channel: str | int | None = None, noise: str = "auto", sigma: float | None = None,
              intervals: str = "linear", sigmas: Sequence[float] = (1.0, 2.0)) -> ModelFit:
    """Fit any lmfit model to one channel of a capture with wavefit's noise-aware least squares.

    Parameters
    ----------
    model
        An :class:`lmfit.Model` (composite models too) with one independent variable, the time.
    capture
        A :class:`~wavefit.io.capture.Capture`, a path to a capture file, a pandas DataFrame,
        or a pair (t, y) of arrays.
    params
        Start values, bounds, fixed parameters and expressions; by default ``model.guess``
        when the model has one, else ``model.make_params()``.
    channel
        The channel's name or column index; may be left out when the capture has one channel.
    noise
        ``"auto"`` (white or autoregressive, chosen from the residuals; needs uniform
        sampling), ``"white"`` (independent samples, scatter estimated) or ``"known"``
        (independent samples of standard deviation ``sigma``).
    intervals
        ``"linear"`` (standard errors from the covariance) or ``"profile"`` (those and the
        profile-likelihood intervals of :func:`profile_intervals` at ``sigmas``).

    Returns
    -------
    ModelFit
    """
    if intervals not in ("linear", "profile"):
        raise ValueError("intervals must be 'linear' or 'profile'")
    t, y, name = _record(capture, channel)
    if noise == "auto" and t.size > 2:
        steps = np.diff(t)
        if np.ptp(steps) > UNIFORM_SPREAD * abs(float(np.mean(steps))):
            raise ValueError("noise='auto' needs a uniformly sampled record; use noise='white' or 'known'")
    if len(model.independent_vars) != 1:
        raise ValueError("the model must have exactly one independent variable, the time")
    independent = {model.independent_vars[0]: t}
    if params is None:
        try:
            params = model.guess(y, **independent)
        except NotImplementedError:
            params = model.make_params()
    problem = _Problem(model, params, independent, y)
    mapping = ParameterMap(params)
    blocks = [Block(0, y.size, name)]
    known = None if sigma is None else {name: float(sigma)}
    free = fit_free(problem.residuals, problem.jacobian, mapping, blocks, model=model.name, noise=noise,
                    sigma=known)
    free = include_quantisation(free, y, lambda x: problem.values(mapping.full(x)),
                                mapping.jacobian_function(problem.model_jacobian), blocks)
    fit = mapping.expanded(free)
    found = ModelFit(model, _with_uncertainties(params, fit), fit, t, y, name, None, independent)
    if intervals == "profile":
        found = dataclasses.replace(found, intervals=profile_intervals(found, sigmas=sigmas))
    return found


def profile_intervals(found: ModelFit, names: Sequence[str] | None = None,
                      sigmas: Sequence[float] = (1.0, 2.0)) -> dict[str, list[tuple[float, float]]]:
    """Profile-likelihood intervals of the free parameters of a :class:`ModelFit`.

    ``lmfit.conf_interval`` refits with each parameter held at trial values and finds where
    the F-test of the residual sums of squares reaches the probability of each sigma.
    The residuals are whitened by the noise model the fit found, held fixed, so the
    sums are those of independent samples. A profile interval follows the curvature of a
    nonlinear model that the linear interval ignores (few cycles, low SNR); it takes one
    fit per trial value.

    Returns
    -------
    dict
        Parameter name → list of (probability, value) pairs, from −sigmas through the
        best value to +sigmas, as ``lmfit.conf_interval`` returns it.

    References
    ----------
    D. M. Bates and D. G. Watts, *Nonlinear Regression Analysis and its Applications*,
    Wiley 1988, ch. 6 (profile t); lmfit ``conf_interval``.
    """
    blocks = [Block(0, found.data.size, found.channel)]
    problem = _Problem(found.model, found.params, found.independent, found.data)
    params = found.params.copy()

    def whitened(p: lmfit.Parameters) -> np.ndarray:
        return whiten(problem.residuals(np.array([p[n].value for n in params])), blocks, found.fit.whitening)

    minimizer = lmfit.Minimizer(whitened, params)
    best = minimizer.leastsq(params)
    free = [n for n, p in params.items() if p.vary and p.expr is None]
    return lmfit.conf_interval(minimizer, best, p_names=list(names) if names else free, sigmas=list(sigmas))


class _Problem:
    """The model's values, its Jacobian by central differences and the residual, as functions
    of the values of all parameters of ``params`` in their order."""

    def __init__(self, model: lmfit.Model, params: lmfit.Parameters, independent: dict, y: np.ndarray):
        self.model, self.independent, self.y = model, independent, y
        self.names = tuple(params)
        # plain copies (no bounds, no expressions): the values given are the values used
        self.plain = lmfit.Parameters()
        for n in self.names:
            self.plain.add(n, value=params[n].value)
        self.differentiated = np.array([bool(params[n].vary) or params[n].expr is not None for n in self.names])

    def values(self, x: np.ndarray) -> np.ndarray:
        for n, v in zip(self.names, x):
            self.plain[n].value = float(v)
        return np.asarray(self.model.eval(self.plain, **self.independent), dtype=float)

    def residuals(self, x: np.ndarray) -> np.ndarray:
        return self.y - self.values(x)

    def model_jacobian(self, x: np.ndarray) -> np.ndarray:
        """∂model/∂x by central differences (zero columns for fixed parameters)."""
        x = np.asarray(x, dtype=float)
        out = np.zeros((self.y.size, x.size))
        for j in np.flatnonzero(self.differentiated):
            h = DIFFERENCE_STEP * (abs(x[j]) if x[j] != 0 else 1.0)
            up, down = x.copy(), x.copy()
            up[j] += h
            down[j] -= h
            out[:, j] = (self.values(up) - self.values(down)) / (up[j] - down[j])
        return out

    def jacobian(self, x: np.ndarray) -> np.ndarray:
        return -self.model_jacobian(x)


def _record(capture: Any, channel: str | int | None) -> tuple[np.ndarray, np.ndarray, str]:
    """Time axis, samples and name of the chosen channel."""
    if isinstance(capture, tuple) and len(capture) == 2:
        t, y = (np.asarray(a, dtype=float) for a in capture)
        if t.shape != y.shape or t.ndim != 1:
            raise ValueError("t and y must be one-dimensional arrays of one length")
        return t, y, "signal" if channel is None else str(channel)
    from ..analysis import load_capture  # the front door's reading of paths, frames and captures

    cap = load_capture(capture, None)
    if channel is None:
        if len(cap.channels) != 1:
            raise ValueError(f"{cap.source} has {len(cap.channels)} channels: name one with channel=")
        chosen = cap.channels[0]
    else:
        chosen = cap.channel(channel)
    return np.asarray(cap.time, dtype=float), np.asarray(chosen.values, dtype=float), chosen.name


def _with_uncertainties(params: lmfit.Parameters, fit: FitResult) -> lmfit.Parameters:
    """``params`` at the fitted values, with standard errors and correlations from ``fit``."""
    out = params.copy()
    sd = np.sqrt(np.maximum(np.diag(fit.covariance), 0.0))
    for k, n in enumerate(fit.names):
        par = out[n]
        par.value = float(fit.values[k])
        if not par.vary and par.expr is None:
            par.stderr, par.correl = None, None
            continue
        par.stderr = float(sd[k])
        par.correl = {m: float(fit.covariance[k, i] / (sd[k] * sd[i]))
                      for i, m in enumerate(fit.names) if i != k and sd[i] > 0 and sd[k] > 0 and
                      (out[m].vary or out[m].expr is not None)}
    out.update_constraints()
    return out
