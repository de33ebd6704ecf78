"""The waveform models of wavefit as :class:`lmfit.Model` classes, usable on their own.

Each class wraps the function that wavefit's own fits evaluate (the same arithmetic), gives
parameter hints (bounds that keep the model physical, the reference instant fixed) and a
``guess(data, t)`` built from the starting-value steps of those fits, so that
``model.fit(y, model.guess(y, t=t), t=t)`` works on a record with no further setup, and
:func:`wavefit.fit_model` fits it with wavefit's noise model and covariance.

- :class:`ExponentialStep`: final + coef·exp(−(t − t_ref)/tau), one state of a first-order
  step response (:mod:`wavefit.fit.exponential`).
- :class:`Relaxation`: a whole record of first-order relaxations between switching
  instants, continuous at each (:mod:`wavefit.fit.relaxation`).
- :class:`DampedSine`: offset + exp(−alpha·τ)·(a·cos w_d·τ + b·sin w_d·τ), τ = t − t_ref,
  the free response of a second-order system (:mod:`wavefit.fit.damped_sine`).
- :class:`Sine`: amplitude·cos(2π·frequency·τ + phase) + offset, τ = t − t_ref, the
  four-parameter sine of IEEE Std 1057 (:mod:`wavefit.fit.sine`), for a steady sinusoidal
  drive such as that of an impedance measurement.

References
----------
M. Newville et al., LMFIT: Non-Linear Least-Square Minimization and Curve-Fitting for
Python, https://lmfit.github.io/lmfit-py/ (``Model``, parameter hints, ``guess``).
IEEE Std 1057-2017, *IEEE Standard for Digitizing Waveform Recorders*, §4.1.4 (sine fits).
"""
from __future__ import annotations

import inspect
import math

import lmfit
import numpy as np
from lmfit.models import update_param_vals

from ..signal.edges import find_edges
from ..signal.levels import state_levels
from . import damped_sine as ring
from .exponential import WindowChannel, exponential_step, linear_part, projected_tau
from .relaxation import relaxation_model
from .sine import sine, sine_start

#: The fraction of a step's change reached one time constant after it starts, 1 − 1/e.
ONE_TAU = 1.0 - math.exp(-1.0)


class _WaveformModel(lmfit.Model):
    """An :class:`lmfit.Model` of time ``t`` whose parameter ``positive`` is kept above zero
    and, with ``fixed_reference``, whose reference instant ``t_ref`` is fixed (set by ``guess``)."""

    def __init__(self, func, positive: str, fixed_reference: bool, **kws):
        kws.setdefault("independent_vars", ["t"])
        super().__init__(func, **kws)
        self.set_param_hint(positive, min=0.0)
        if fixed_reference:
            self.set_param_hint("t_ref", value=0.0, vary=False)


class ExponentialStep(_WaveformModel):
    """final + coef·exp(−(t − t_ref)/tau): one state of a first-order step response.

    ``tau`` is kept positive; ``t_ref`` (the instant the coefficient refers to) is fixed,
    and :meth:`guess` sets it to the first sample. A step from zero, y = b1·(1 − exp(−x/tau)),
    is ``coef`` constrained to ``-final`` with ``t_ref`` = 0.
    """

    def __init__(self, **kws):
        super().__init__(exponential_step, "tau", True, **kws)

    def guess(self, data: np.ndarray, t: np.ndarray, **kws) -> lmfit.Parameters:
        """Starting values by variable projection over tau (:func:`~wavefit.fit.exponential.projected_tau`),
        from the instant the record has made 1 − 1/e of its change."""
        t = np.asarray(t, dtype=float)
        y = np.asarray(data, dtype=float)
        tail = max(2, y.size // 10)
        change = float(np.median(y[-tail:])) - float(y[0])
        reached = np.flatnonzero(np.abs(y - y[0]) >= ONE_TAU * abs(change)) if change else np.zeros(0, int)
        tau0 = float(t[reached[0]] - t[0]) if reached.size and reached[0] > 0 else float(t[-1] - t[0]) / 5.0
        tau = projected_tau([WindowChannel("y", t, y)], tau0)
        final, coef = linear_part(np.exp(-(t - t[0]) / tau), y)
        params = self.make_params(final=float(final), coef=float(coef), tau=tau, t_ref=float(t[0]))
        return update_param_vals(params, self.prefix, **kws)


def relaxation_names(n_edges: int) -> list[str]:
    """Parameter names of :class:`Relaxation`: tau, final_head, coef_head, then final_k, t0_k."""
    names = ["tau", "final_head", "coef_head"]
    for k in range(1, n_edges + 1):
        names += [f"final_{k}", f"t0_{k}"]
    return names


class Relaxation(_WaveformModel):
    """First-order relaxations between ``n_edges`` switching instants (:mod:`wavefit.fit.relaxation`).

    Before the first instant t0_1: final_head + coef_head·exp(−(t − t[0])/tau), referred to
    the first instant of the ``t`` given; after t0_k the record relaxes from the value it had
    toward final_k with the same tau. ``tau`` is kept positive.
    """

    def __init__(self, n_edges: int, **kws):
        self.n_edges = int(n_edges)
        names = relaxation_names(self.n_edges)

        def relaxation(t: np.ndarray, **values: float) -> np.ndarray:
            theta = np.array([values[n] for n in names], dtype=float)
            return relaxation_model(np.asarray(t, dtype=float), theta, self.n_edges)

        # lmfit reads a model's parameters from its function's signature: state them there
        relaxation.__signature__ = inspect.Signature(
            [inspect.Parameter("t", inspect.Parameter.POSITIONAL_OR_KEYWORD)]
            + [inspect.Parameter(n, inspect.Parameter.KEYWORD_ONLY) for n in names])

        super().__init__(relaxation, "tau", False, **kws)

    def guess(self, data: np.ndarray, t: np.ndarray, **kws) -> lmfit.Parameters:
        """Starting values from the record's first ``n_edges`` edges: IEEE Std 181 state levels
        and each edge's 10 %/90 % instants (:func:`~wavefit.signal.edges.find_edges`)."""
        t = np.asarray(t, dtype=float)
        y = np.asarray(data, dtype=float)
        edges = find_edges(t, y)[:self.n_edges]
        if len(edges) < self.n_edges:
            raise ValueError(f"the record shows {len(edges)} edges, not {self.n_edges}")
        levels = state_levels(y)
        values = {"tau": float(np.median([e.tau for e in edges])) if edges else float(t[-1] - t[0]) / 5.0,
                  "final_head": levels.low if edges and edges[0].direction > 0 else levels.high, "coef_head": 0.0}
        for k, e in enumerate(edges, start=1):
            values[f"final_{k}"] = levels.high if e.direction > 0 else levels.low
            values[f"t0_{k}"] = e.t0
        params = self.make_params(**{n: float(v) for n, v in values.items()})
        return update_param_vals(params, self.prefix, **kws)


def damped_sine(t: np.ndarray, offset: float, a: float, b: float, alpha: float, w_d: float,
                t_ref: float = 0.0) -> np.ndarray:
    """offset + exp(−alpha·τ)·(a·cos w_d·τ + b·sin w_d·τ), τ = t − t_ref (:func:`wavefit.fit.damped_sine.model`)."""
    return ring.model(np.array([offset, a, b, alpha, w_d], dtype=float), np.asarray(t, dtype=float) - t_ref)


class DampedSine(_WaveformModel):
    """offset + exp(−alpha·τ)·(a·cos w_d·τ + b·sin w_d·τ), τ = t − t_ref: a free ring.

    ``w_d`` (rad/s) is kept positive; ``t_ref`` is fixed, and :meth:`guess` sets it to the
    start of the ring it finds.
    """

    def __init__(self, **kws):
        super().__init__(damped_sine, "w_d", True, **kws)

    def guess(self, data: np.ndarray, t: np.ndarray, **kws) -> lmfit.Parameters:
        """Starting values as wavefit's ring fit finds them: the ring's window
        (:func:`~wavefit.fit.damped_sine.ring_window`), the matrix pencil, and Gauss–Newton
        refinement on windows of doubling length; on a uniform time axis."""
        t = np.asarray(t, dtype=float)
        y = np.asarray(data, dtype=float)
        dt = float((t[-1] - t[0]) / (t.size - 1))
        win = ring.ring_window(y)
        strong = min(win.strong, win.stop - win.start)
        alpha0, w0 = ring.initial_estimate(y[win.start:win.start + max(strong, 12)], win.samples_per_period)
        offset, a, b, alpha, w = ring.refine(y[win.start:win.stop], alpha0, w0)
        params = self.make_params(offset=float(offset), a=float(a), b=float(b), alpha=float(alpha) / dt,
                                  w_d=float(w) / dt, t_ref=float(t[win.start]))
        return update_param_vals(params, self.prefix, **kws)


class Sine(_WaveformModel):
    """amplitude·cos(2π·frequency·τ + phase) + offset, τ = t − t_ref: a steady sine.

    The four-parameter sine fit of IEEE Std 1057 (§4.1.4.4), in the standard's amplitude and
    phase form (its A0·cos ωτ + B0·sin ωτ has A0 = amplitude·cos phase, B0 = −amplitude·sin
    phase). ``frequency`` (Hz) and ``amplitude`` are kept positive; ``t_ref`` is fixed, and
    :meth:`guess` sets it to the first sample, so that the phase refers to the record's start.
    """

    def __init__(self, **kws):
        super().__init__(sine, "frequency", True, **kws)
        self.set_param_hint("amplitude", min=0.0)

    def guess(self, data: np.ndarray, t: np.ndarray, **kws) -> lmfit.Parameters:
        """Starting values as IEEE Std 1057 takes them: the frequency from the interpolated
        peak of the spectrum, then amplitude, phase and offset from the three-parameter
        least-squares fit at that frequency (:func:`~wavefit.fit.sine.sine_start`); on a
        uniform time axis."""
        t = np.asarray(t, dtype=float)
        start = sine_start(t, np.asarray(data, dtype=float), t_ref=float(t[0]))
        params = self.make_params(amplitude=start.amplitude, frequency=start.frequency, phase=start.phase,
                                  offset=start.offset, t_ref=float(t[0]))
        return update_param_vals(params, self.prefix, **kws)
