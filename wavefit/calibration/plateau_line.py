"""Gain ratio and offset difference from the plateaus of a square wave seen by two channels.

Between two edges the node sits at (or settles towards) a state level. For every plateau the
mean of the reference channel over the later half of it, and the mean of the other channel
over the same instants (shifted by the skew, whole samples; the rest corrected by the
plateau's slope), are a point (x, y) on the line y = offset + ratio·x, since the model
other(t) = ratio·reference(t − skew) + offset holds sample by sample. Both coordinates are
noisy, so the line is York's errors-in-variables line through the points, weighted by the
uncertainty of each mean: σ·√(ρ/n) for n samples of noise of standard deviation σ and
long-run variance ratio ρ (an autoregressive model fitted to the plateaus' detrended samples,
so band-limited, correlated noise counts at its true weight). When the points scatter more
than their uncertainties allow, the covariance is scaled by the Birge ratio χ²/ν.

The plain mean of quantised, undithered samples is biased by up to half a code when the noise
is below a code. On a record that sits on a code grid each plateau's level is therefore the
maximum-likelihood level of the codes it hit (:mod:`wavefit.calibration.level_likelihood`),
which has no such bias, and York's weights are its own variances. What the levels of one
channel share — the error of its noise σ̂, which moves them all together, or, when the codes
cannot tell the noise (levels on one code), the half-code rectangular bound of the plain
means per state — is propagated to the ratio and the offset through the two-state formulas
(ratio = (H_o − L_o)/(H_r − L_r), offset = L_o − ratio·L_r).

References
----------
.. [1] D. York, N. M. Evensen, M. López Martínez and J. De Basabe Delgado, "Unified equations
   for the slope, intercept, and standard errors of the best straight line", Am. J. Phys.
   72(3), 367–375, 2004.
.. [2] IEEE Std 181-2011 (state levels of two-state waveforms).
.. [3] R. T. Birge, "The calculation of errors by the method of least squares", Phys. Rev.
   40, 207–227, 1932 (the ratio χ²/ν as a scale of stated uncertainties).
.. [4] JCGM 100:2008 (GUM), 5.1.2 (law of propagation), G.4 (Welch–Satterthwaite).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import AnalysisRefused
from ..fit.line_eiv import york_line
from ..fit.noise_model import ARNoise, fit_ar
from ..signal.codes import code_step
from ..signal.edges import Edge
from .edge_skew import EdgePair
from .level_likelihood import Levels, code_levels, plain_levels

#: Fewest samples in a plateau's averaging window: a mean of fewer says little and its
#: noise model (AR order up to n/20) cannot be fitted (common practice).
MIN_WINDOW_SAMPLES = 16
#: Polynomial degree removed from each window before its noise is estimated: the drive node of
#: a fixture still settles (an exponential), which a quadratic follows over half a plateau.
DETREND_DEGREE = 2


@dataclass(frozen=True)
class Plateau:
    """One plateau: the averaging window (reference samples ``start``..``stop``), the state
    (+1 high), and the two channels' levels over it (means, or fitted to the codes)."""

    start: int
    stop: int
    state: int
    reference_mean: float
    other_mean: float


@dataclass(frozen=True)
class ChannelNoise:
    """A channel's noise on the plateaus: its AR model, code step (None: not on a grid) and the
    plateaus' levels estimated on it."""

    model: ARNoise
    step: float | None
    levels: Levels

    @property
    def bias_bound(self) -> float:
        """Half-width of the rectangular bound of a level's remaining quantisation error."""
        return self.levels.bias_bound


@dataclass(frozen=True)
class LineEstimate:
    """Ratio and offset with their covariance, degrees of freedom and the noise behind them."""

    ratio: float
    offset: float
    covariance: np.ndarray  # of (ratio, offset)
    degrees_of_freedom: float
    birge_ratio: float
    plateaus: tuple[Plateau, ...]
    shift: int  # samples by which the other channel's windows follow the reference's
    reference_noise: ChannelNoise
    other_noise: ChannelNoise


def plateau_windows(pairs: list[EdgePair], t0: float, dt: float, shift: int, size: int) -> list[tuple[int, int, int]]:
    """(start, stop, state) of the later half of every plateau between consecutive edge pairs,
    in reference-channel samples, kept clear of the next edge's transition on both channels
    (the other's window is ``shift`` samples later)."""
    windows = []
    for here, after in zip(pairs, pairs[1:]):
        a = (here.reference.t50 - t0) / dt
        b = (after.reference.t50 - t0) / dt
        guard = 2.0 * max(transition_half(after.reference), transition_half(after.other)) / dt + 2.0
        start = int(math.ceil(0.5 * (a + b))) + max(-shift, 0)
        stop = int(math.floor(b - guard)) - max(shift, 0)
        stop = min(stop, size - 1 - max(shift, 0))
        if stop - start + 1 >= MIN_WINDOW_SAMPLES and start >= 0:
            windows.append((start, stop + 1, here.reference.direction))
    return windows


def transition_half(edge: Edge) -> float:
    """Time from an edge's mid-reference instant to the end of its transition (its 90 % instant
    when rising, 10 % when falling), s. The start is not used: on a node that overshoots and
    settles back (a fixture's drive node) the level before the edge may never leave the
    previous state's band, and the start instant found is then an earlier edge's."""
    return abs(edge.t90 - edge.t50)


def _detrended(y: np.ndarray) -> np.ndarray:
    x = np.linspace(-1.0, 1.0, y.size)
    return y - np.polyval(np.polyfit(x, y, DETREND_DEGREE), x)


def channel_noise(y: np.ndarray, windows: list[tuple[int, int]]) -> ChannelNoise:
    """AR noise model of a channel from its detrended plateau windows, with its code step and
    the windows' levels: from their codes on a grid, their plain means otherwise."""
    model = fit_ar([_detrended(y[a:b]) for a, b in windows])
    step = code_step(y)
    rho = model.long_run_ratio()
    if step is None or not model.sigma > 0:
        return ChannelNoise(model, step, plain_levels(y, windows, model.sigma, rho, 0.0))
    return ChannelNoise(model, step, code_levels(y, windows, step, model.sigma, rho))


def plateau_line(reference: np.ndarray, other: np.ndarray, pairs: list[EdgePair], t0: float, dt: float,
                 skew: float) -> LineEstimate:
    """York's line through the plateau means of the two channels (see the module's text).

    Raises
    ------
    AnalysisRefused
        With fewer than two usable plateaus of each state.
    """
    shift = int(round(skew / dt))
    rest = skew - shift * dt  # the other's window sees the waveform `rest` earlier than the reference's
    windows = plateau_windows(pairs, t0, dt, shift, reference.size)
    states = [w[2] for w in windows]
    if min(states.count(1), states.count(-1)) < 2:
        raise AnalysisRefused(f"only {states.count(1)} high and {states.count(-1)} low plateaus long enough to "
                              f"average ({MIN_WINDOW_SAMPLES} samples in their later half) on both channels; "
                              "the comparison needs two of each: record more periods or sample faster")
    ref_noise = channel_noise(reference, [(a, b) for a, b, _ in windows])
    oth_noise = channel_noise(other, [(a + shift, b + shift) for a, b, _ in windows])
    for name, noise in (("reference", ref_noise), ("other", oth_noise)):
        if not noise.model.sigma > 0:
            raise AnalysisRefused(f"the {name} channel shows no noise on its levels, so the uncertainty of their "
                                  "means cannot be judged; record the raw acquisition, not an averaged or "
                                  "computed waveform")
    plateaus = []
    for (a, b, state), x_level, y_level in zip(windows, ref_noise.levels.values, oth_noise.levels.values):
        x = reference[a:b]
        slope = float(np.polyfit(np.arange(x.size) * dt, x, 1)[0])
        plateaus.append(Plateau(a, b, state, float(x_level) - slope * rest, float(y_level)))
    n = np.array([p.stop - p.start for p in plateaus])
    u_x = np.sqrt(ref_noise.levels.variances)
    u_y = np.sqrt(oth_noise.levels.variances)
    line = york_line(np.array([p.reference_mean for p in plateaus]), np.array([p.other_mean for p in plateaus]),
                     u_x, u_y)
    birge = line.chi2 / line.dof if line.dof > 0 else 1.0
    covariance = line.covariance * max(birge, 1.0)
    dof = float(line.dof) if birge > 1.0 else _noise_dof(ref_noise, oth_noise, int(n.sum()))
    covariance = covariance + _quantisation_covariance(plateaus, line.slope, ref_noise, oth_noise)
    return LineEstimate(line.slope, line.intercept, covariance, dof, birge, tuple(plateaus), shift, ref_noise,
                        oth_noise)


def _noise_dof(reference: ChannelNoise, other: ChannelNoise, samples: int) -> float:
    """Degrees of freedom of a noise level estimated from ``samples`` samples worth n/ρ
    independent ones (the smaller of the two channels')."""
    rho = max(reference.model.long_run_ratio(), other.model.long_run_ratio(), 1.0)
    return max(samples / rho - 1.0, 1.0)


def _quantisation_covariance(plateaus: list[Plateau], ratio: float, reference: ChannelNoise,
                             other: ChannelNoise) -> np.ndarray:
    """Covariance of (ratio, offset) from what the levels share within a channel, through the
    two-state formulas' sensitivities: a rectangular bound of each state's level error on each
    channel (independent), and the error of the channel's σ̂, which moves every level i of it
    by g_i·δσ (fully correlated)."""
    low = np.array([p.state < 0 for p in plateaus])
    low_r = float(np.mean([p.reference_mean for p in plateaus if p.state < 0]))
    high_r = float(np.mean([p.reference_mean for p in plateaus if p.state > 0]))
    amplitude = high_r - low_r
    if amplitude == 0:
        return np.zeros((2, 2))
    # d(ratio, offset)/d(L_r, H_r, L_o, H_o)
    jacobian = np.array([
        [ratio / amplitude, -ratio / amplitude, -1.0 / amplitude, 1.0 / amplitude],
        [-ratio - low_r * ratio / amplitude, low_r * ratio / amplitude, 1.0 + low_r / amplitude,
         -low_r / amplitude],
    ])
    u = np.array([reference.bias_bound] * 2 + [other.bias_bound] * 2) / math.sqrt(3.0)
    covariance = jacobian @ np.diag(u ** 2) @ jacobian.T
    for place, noise in ((0, reference), (2, other)):
        g = noise.levels.sigma_sensitivity
        shift = np.zeros(4)
        shift[place:place + 2] = [float(np.mean(g[low])), float(np.mean(g[~low]))]
        column = jacobian @ shift
        covariance = covariance + noise.levels.sigma_variance * np.outer(column, column)
    return covariance
