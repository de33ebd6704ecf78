"""Damped sinusoid with an offset: the free response of a second-order system.

Model, from the reference instant t_ref (the first sample of the fit window)::

    y(t) = offset + exp(−alpha·τ)·(a·cos(w_d·τ) + b·sin(w_d·τ)),   τ = t − t_ref

with amplitude A = √(a² + b²) and phase phi = atan2(−b, a), so that the same
curve is offset + A·exp(−alpha·τ)·cos(w_d·τ + phi). The (a, b) form keeps the
model linear in three of its five parameters and free of phase wrapping.

Estimation runs in three steps:

1. Where the ring is. :func:`ring_window` finds the excitation (the first
   large departure from the pre-trigger baseline), a second excitation that
   would end the free response, and a rough noise floor.
2. A linear initial estimate. The matrix pencil (:mod:`wavefit.fit.pencil`) on
   a decimated copy of the strong part of the ring gives alpha and w_d with no
   starting values; decimation keeps the pencil small for records with
   thousands of samples per period, and the decimated record keeps at least 8
   samples per period so that the pencil cannot alias.
3. Nonlinear least squares. Gauss–Newton refinement on windows of doubling
   length (each one starts from the previous, so the phase error at the end of
   the window never exceeds a fraction of a cycle, however many cycles there
   are), then the final fit on the whole window with
   :func:`wavefit.fit.engine.fit_least_squares`: analytic Jacobian, noise model
   chosen from the residuals (white, or autoregressive for band-limited noise,
   with feasible GLS), covariance of the whitened problem.

The window ends where the fitted envelope has fallen to a quarter of the noise
rms: the samples beyond carry a negligible share of the Fisher information on
frequency and damping, which grows as τ²·exp(−2·alpha·τ).

Internally time is counted in samples, so that all five parameters are of
order one; the returned :class:`~wavefit.fit.result.FitResult` is in SI units.
"""
from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize

from .compressed import TriangularProblem, triangle
from .engine import NEGLIGIBLE_CHANGE, Block, fit_least_squares
from .gauss_newton import descend
from .jacobian import CHUNK_ELEMENTS, Jacobian, Piece, is_small
from .noise_model import white
from .quantisation import include_quantisation
from .pencil import matrix_pencil
from .result import FitResult

NAMES = ("offset", "a", "b", "alpha", "w_d")
#: Bounds of the parameters in sample units: a frequency between zero and the Nyquist frequency.
_LOWER = np.array([-np.inf, -np.inf, -np.inf, -np.inf, 0.0])
_UPPER = np.array([np.inf, np.inf, np.inf, np.inf, math.pi])
#: The envelope level, in noise rms, at which the fit window ends.
END_ENVELOPE_SIGMAS = 0.25
#: Decimated samples per period kept for the pencil (at least), and most samples it sees.
PENCIL_MIN_SPP = 8.0
PENCIL_MAX_SAMPLES = 900


@dataclass(frozen=True)
class RingWindow:
    """Sample indices of a ring in a record: ``onset`` of the excitation, fit window
    ``start:stop``; ``strong`` is the length from ``start`` over which the ring stands
    well above the noise; ``samples_per_period`` a first estimate; ``second_excitation``
    tells whether the free response was cut short by a new excitation."""

    onset: int
    start: int
    stop: int
    strong: int
    samples_per_period: float
    second_excitation: bool


@dataclass(frozen=True)
class DampedSineFit:
    """A fitted ring: the fit (SI units, parameters :data:`NAMES`), its reference instant and
    window (indices ``start:stop`` of the arrays that were given)."""

    fit: FitResult
    t_ref: float
    start: int
    stop: int
    sample_interval: float

    @property
    def alpha(self) -> float:
        return self.fit["alpha"]

    @property
    def w_d(self) -> float:
        return self.fit["w_d"]

    @property
    def w0(self) -> float:
        """Undamped natural angular frequency √(w_d² + alpha²), exact for a pole pair."""
        return math.hypot(self.w_d, self.alpha)

    @property
    def amplitude(self) -> float:
        return math.hypot(self.fit["a"], self.fit["b"])

    @property
    def cycles(self) -> float:
        """Cycles in the fit window."""
        return self.w_d / (2 * math.pi) * (self.stop - self.start) * self.sample_interval

    def on_window(self, count: int | None = None, out: np.ndarray | None = None) -> np.ndarray:
        """The fitted curve at the window's first ``count`` samples (all of them by default),
        into ``out`` when given: at the sample numbers the fit used (:func:`grid_model`), which
        costs a twentieth of :func:`model` on their time stamps."""
        x = np.array([self.fit["offset"], self.fit["a"], self.fit["b"], self.alpha * self.sample_interval,
                      self.w_d * self.sample_interval])
        return grid_model(x, self.stop - self.start if count is None else count, out=out)


def model(x: np.ndarray, tau: np.ndarray) -> np.ndarray:
    """offset + exp(−alpha·τ)·(a cos w_d τ + b sin w_d τ) for x = (offset, a, b, alpha, w_d) at any
    times τ (the fits themselves evaluate it at sample numbers: :func:`grid_model`); a chunk of
    samples at a time, so that a long record's temporaries stay small."""
    tau = np.asarray(tau, dtype=float)
    flat = tau.reshape(-1)
    result = np.empty(flat.shape)
    for lo in range(0, flat.size, CHUNK_ELEMENTS):
        part = flat[lo:lo + CHUNK_ELEMENTS]
        result[lo:lo + CHUNK_ELEMENTS] = x[0] + np.exp(-x[3] * part) * (x[1] * np.cos(x[4] * part)
                                                                         + x[2] * np.sin(x[4] * part))
    return result.reshape(tau.shape) if tau.ndim else result[0]


def phasor(alpha: float, w: float, start: int, count: int) -> np.ndarray:
    """exp((−alpha + i·w)·τ) for the sample numbers τ = start, start + 1, … (``count`` values).

    Computed as the outer product of a row of exponentials at multiples of a stride of about
    √count samples and a column of exponentials over one stride: 2·√count complex
    exponentials and one complex product per sample, in place of a real exponential, a cosine
    and a sine per sample (about twenty times faster). Each value carries two roundings
    more than the direct exp(−alpha·τ)·cos(w·τ), a few units of 1e-16 of the envelope; the
    direct form's own error from rounding w·τ is larger wherever w·τ exceeds 10 radians.
    """
    if count <= 0:
        return np.empty(0, dtype=complex)
    stride = math.isqrt(count - 1) + 1
    rows = -(-count // stride)
    s = complex(-alpha, w)
    # a solver's far-off trial step (a ring growing e-fold many times over the window)
    # overflows to non-finite values, which the solvers reject, as they did the direct form's
    with np.errstate(over="ignore", invalid="ignore"):
        over_stride = np.exp(s * np.arange(stride, dtype=float))
        at_strides = np.exp(s * (start + stride * np.arange(rows, dtype=float)))
        return np.multiply.outer(at_strides, over_stride).reshape(-1)[:count]


def grid_model(x: np.ndarray, count: int, out: np.ndarray | None = None) -> np.ndarray:
    """:func:`model` at the sample numbers τ = 0, 1, …, count − 1, by :func:`phasor` (a chunk of
    samples at a time), into ``out`` (one-dimensional, ``count`` long) when given."""
    result = np.empty(count) if out is None else out
    weights = complex(x[1], -x[2])  # a·cos + b·sin = Re(e^{iwτ}·(a − i·b))
    for lo in range(0, count, CHUNK_ELEMENTS):
        z = phasor(x[3], x[4], lo, min(CHUNK_ELEMENTS, count - lo))
        with np.errstate(over="ignore", invalid="ignore"):  # a far-off trial step (phasor)
            z *= weights
            np.add(z.real, x[0], out=result[lo:lo + z.size])
    return result


def grid_jacobian(x: np.ndarray, start: int, stop: int) -> np.ndarray:
    """∂model/∂x at the sample numbers start … stop − 1 (columns in the order of :data:`NAMES`),
    by :func:`phasor`."""
    z = phasor(x[3], x[4], start, stop - start)
    tau = np.arange(start, stop, dtype=float)
    j = np.empty((tau.size, 5), order="F")  # column by column: each written in one sweep
    j[:, 0] = 1.0
    j[:, 1] = z.real
    j[:, 2] = z.imag
    with np.errstate(over="ignore", invalid="ignore"):  # a far-off trial step (phasor)
        z *= complex(x[1], -x[2])
        # ∂/∂alpha = −τ·(a·ec + b·es) = −τ·Re(z·(a − ib)); ∂/∂w_d = τ·(b·ec − a·es) = −τ·Im(z·(a − ib))
        np.multiply(tau, z.real, out=j[:, 3])
        np.multiply(tau, z.imag, out=j[:, 4])
        j[:, 3:] *= -1.0
    return j


def pieced_jacobian(x: np.ndarray, count: int) -> Jacobian:
    """:func:`grid_jacobian` over the sample numbers 0 … count − 1 as one piece, evaluated a
    chunk of rows at a time."""
    return Jacobian(count, [Piece(0, count, lambda a, b: grid_jacobian(x, a, b), np.eye(len(NAMES)))])


def fit_ring(t: np.ndarray, y: np.ndarray, *, start: int | None = None, stop: int | None = None,
             noise: str = "auto", window: RingWindow | None = None) -> DampedSineFit:
    """Find the ring in a record and fit a damped sinusoid to it.

    Parameters
    ----------
    t, y : ndarray
        Uniform time axis (s) and the recorded tank voltage.
    start, stop : int, optional
        Fit window in samples; found automatically when omitted (see :func:`ring_window`).
    noise : {"auto", "white"}
        Noise model of :func:`wavefit.fit.engine.fit_least_squares`.
    window : RingWindow, optional
        :func:`ring_window` of ``y``, when the caller has it already.

    Raises
    ------
    ValueError
        When no ring can be found; the caller turns it into a user-facing error.

    References
    ----------
    Y. Hua and T. K. Sarkar, IEEE Trans. ASSP 38(5), 814–824, 1990 (initial estimate);
    G. A. F. Seber and C. J. Wild, *Nonlinear Regression*, Wiley 1989 (least squares).
    """
    t = np.asarray(t, dtype=float)
    y = np.asarray(y, dtype=float)
    dt = float((t[-1] - t[0]) / (t.size - 1))
    win = ring_window(y) if window is None else window
    lo = win.start if start is None else int(start)
    hi = win.stop if stop is None else int(stop)
    if hi - lo < 12:
        raise ValueError("the fit window holds fewer than 12 samples")
    strong = min(win.strong, hi - lo)
    alpha0, w0 = initial_estimate(y[lo:lo + max(strong, 12)], win.samples_per_period)
    x, converged, factor = refined(y[lo:hi], alpha0, w0)
    solved = converged
    if stop is None:
        sigma = _rms(y[lo:hi] - grid_model(x, hi - lo))
        end = _envelope_end(x, sigma, lo, hi, strong)
        solved, hi = solved and end == hi, end
    # (a solution on a longer window is close to this one's)
    ring = fit_damped_sine(t[lo:hi], y[lo:hi], x, dt, noise=noise, offset_index=lo, solved=solved,
                           factor=factor if solved else None, close=converged)
    lags = ring.fit.noise_correlation_extent_samples.get("tank", 0)
    decay = float(ring.fit["alpha"]) * dt  # nepers per sample
    # a later start scales the variances by about exp(2·alpha·shift): allow 10 % at most
    shift = int(min(lags, 0.05 / decay if decay > 0 else lags))
    if start is None and 0 < shift < (hi - lo) // 8:
        # correlated noise: the automatic start was found from the samples around it, so its
        # noise is correlated with theirs, and the exact whitening weights the first samples
        # heavily; start up to one correlation extent later
        lo += shift
        ring = fit_damped_sine(t[lo:hi], y[lo:hi], ring_parameters_at(ring, shift), dt, noise=noise,
                               offset_index=lo, close=True)
    return ring


def ring_parameters_at(ring: DampedSineFit, shift: int) -> np.ndarray:
    """The fitted ring's parameters in sample units, referred ``shift`` samples later."""
    offset, a, b, alpha, w = ring.fit.values
    alpha, w = alpha * ring.sample_interval, w * ring.sample_interval
    decay = math.exp(-alpha * shift)
    c, s = math.cos(w * shift), math.sin(w * shift)
    # a·cos(w(τ'+k)) + b·sin(w(τ'+k)) = (a·c + b·s)·cos(wτ') + (b·c − a·s)·sin(wτ')
    return np.array([offset, decay * (a * c + b * s), decay * (b * c - a * s), alpha, w])


def fit_damped_sine(t: np.ndarray, y: np.ndarray, x0: np.ndarray, sample_interval: float, *,
                    noise: str = "auto", offset_index: int = 0, solved: bool = False,
                    factor: np.ndarray | None = None, close: bool = False) -> DampedSineFit:
    """Final weighted least-squares fit on one window, starting from ``x0`` in sample units.

    ``x0`` = (offset, a, b, alpha, w_d) with alpha in nepers per sample and w_d in
    radians per sample, referred to the first sample of ``y``: a point near the minimum
    (:func:`refine`'s, or another fit's carried to this window). The solve's first,
    unweighted pass is the unweighted least squares :func:`refine` would give, so it is not
    refined first (that took a sixth of a 10⁶-sample analysis; docs/performance.md, "Third
    round", says how far results moved). ``solved`` says that ``x0`` is that least squares'
    converged solution on this same window (:func:`refined`'s): the pass is then skipped, and
    ``factor``, when given, is that solve's triangular factor of [J | f] at ``x0``, which the
    covariance reuses when the noise is white. ``close`` says that ``x0`` is within a few
    standard errors of the solution (a fit of a longer window carried to this one): the pass
    starts with Gauss–Newton steps (:func:`wavefit.fit.engine.fit_least_squares`'s
    ``close_start``).
    """
    n = y.size
    x0 = np.asarray(x0, dtype=float)

    def fun(x: np.ndarray) -> np.ndarray:
        r = grid_model(x, n)
        return np.subtract(y, r, out=r)

    def jac(x: np.ndarray) -> Jacobian:
        return pieced_jacobian(x, n).negated()

    blocks = [Block(0, n, "tank")]
    fit = fit_least_squares(fun, jac, x0, NAMES, blocks, model="damped sinusoid",
                            noise=noise, bounds=(_LOWER, _UPPER), x_scale=_x_scale(x0), solved_start=solved,
                            close_start=close, start_factor=factor)
    fit = include_quantisation(fit, y, lambda x: grid_model(x, n), lambda x: pieced_jacobian(x, n), blocks)
    scale = np.array([1.0, 1.0, 1.0, 1.0 / sample_interval, 1.0 / sample_interval])
    physical = dataclasses.replace(fit, values=fit.values * scale,
                                   covariance=fit.covariance * np.outer(scale, scale))
    return DampedSineFit(physical, float(t[0]), offset_index, offset_index + n, sample_interval)


#: A block of the ring's envelope at this share of its largest or more is at the ring's peak: the
#: largest block is the first or second of the ring (its envelope falls from block to block, by
#: 27 % a period at a Q of 10), or the first of a second ring as strong (a square wave's next
#: edge), whose rise from the decayed first ring is a jump of 1.5 times or more.
NEAR_PEAK = 0.8


def ring_window(y: np.ndarray) -> RingWindow:
    """Locate the free response of a ring in a record.

    The excitation is where the record first leaves its pre-trigger baseline
    on the way to the largest excursion; the fit starts a few samples later
    (2 % of a period, at least 2 samples) so that the finite edge of the
    excitation stays out. One-period blocks of the excursion then show where
    the ring stands above the noise and whether a second excitation (a block
    much larger than the one before) ends the free response early.
    """
    y = np.asarray(y, dtype=float)
    n = y.size
    final = float(np.median(y[-max(16, n // 20):]))
    dev = np.abs(y - final)
    peak = float(dev.max())
    if not peak > 0:
        raise ValueError("the record is flat: no ring to fit")
    head = y[:8]
    initial = float(np.median(head))
    dev0 = np.abs(y - initial)
    if np.ptp(head) < 0.5 * float(dev0.max()):
        # a pre-trigger baseline: the excitation leaves it (the final level may differ from it)
        k1 = _leaves_baseline(y, dev0, final)
        onset = _onset(y, k1, float(dev0.max()))
    else:
        k1, onset = 0, 0  # the record starts inside the ring
    spp = _samples_per_period(y[onset:onset + SPECTRUM_SAMPLES] - final)
    skip = 0 if onset == 0 and k1 < 2 else max(2, int(math.ceil(0.02 * spp)))
    block = max(4, int(round(spp)))
    m = (n - onset) // block
    if m < 2:
        return RingWindow(onset, min(onset + skip, n - 1), n, n - onset - skip, spp, False)
    env = dev[onset:onset + m * block].reshape(m, block).max(axis=1)
    floor = float(np.median(env[-max(1, m // 4):]))
    # the noise floor from the pre-trigger baseline where it holds a block: the record's tail is
    # no floor when a second excitation rings there (a square wave's next edge), which then hid
    # that excitation and the whole record was fitted as one ring
    before = onset // block
    quiet = min(floor, float(np.median(dev[:before * block].reshape(before, block).max(axis=1)))) if before else floor
    stop, second = n, False
    # the search starts after the first block near the ring's peak, not after the largest: a
    # second ring as strong as the first (a square wave's next edge) holds the largest block
    first = int(np.argmax(env >= NEAR_PEAK * float(env.max()))) + 1
    for k in range(max(first, 1), m):
        if env[k] > 1.5 * env[k - 1] + 2.0 * quiet and env[k] > 0.2 * peak:
            stop, second = onset + (k - 1) * block, True  # the block before may hold the edge
            env = env[:k - 1] if k > 1 else env[:1]
            floor = quiet  # (the record's tail holds the second ring)
            break
    above = np.flatnonzero(env > max(3.0 * floor, 0.02 * peak)) if floor < env[0] else np.arange(1)
    strong = (int(above[-1]) + 1) * block if above.size else block
    start = onset + skip
    return RingWindow(onset, start, stop, max(min(strong, stop - start), 12), spp, second)


def initial_estimate(y: np.ndarray, samples_per_period: float) -> tuple[float, float]:
    """alpha (Np/sample) and w_d (rad/sample) from the matrix pencil on a decimated copy.

    The decimation factor keeps at least :data:`PENCIL_MIN_SPP` samples per period
    (from the spectral peak) and the pencil at most :data:`PENCIL_MAX_SAMPLES` long.
    """
    d = max(1, int(samples_per_period // PENCIL_MIN_SPP))
    seg = y[::d][:PENCIL_MAX_SAMPLES]
    if seg.size < 9:
        d, seg = 1, y[:PENCIL_MAX_SAMPLES]
    poles, amps = matrix_pencil(seg - np.median(seg), 3)
    pair = np.flatnonzero(poles.imag > 1e-9)
    if not pair.size:
        raise ValueError("no oscillation found in the record")
    k = pair[np.argmax(np.abs(amps[pair]))]
    z = poles[k]
    alpha = -math.log(max(abs(z), 1e-12)) / d
    w = math.atan2(z.imag, z.real) / d
    return max(alpha, 0.0), w


def refine(y: np.ndarray, alpha: float, w: float) -> np.ndarray:
    """Unweighted Gauss–Newton (Levenberg–Marquardt) refinement in sample units.

    The window doubles from about 3 periods to the whole record, each fit starting from the
    previous one.
    """
    return refined(y, alpha, w)[0]


#: The refinement's windows of a ring sampled more finely than this many samples per period,
#: and of at least :data:`REFINE_MIN_SAMPLES` samples, hold every k-th sample but the last:
#: the solution on every k-th sample of the whole window is within a few of the final
#: standard errors (k samples carry 1/k of the information), from where Gauss–Newton steps on
#: every sample reach the solution in as many steps as from the window of half the length,
#: and the shorter windows on every sample cost a fifth of a 10⁵-sample analysis.
REFINE_SAMPLES_PER_PERIOD = 16
#: See :data:`REFINE_SAMPLES_PER_PERIOD`: the strided solution's standard errors are then at
#: most √(n/2048) times those on every sample (7 at 10⁵ samples).
REFINE_MIN_SAMPLES = 2048


def refine_stride(w: float, n: int) -> int:
    """The stride of :func:`refined`'s windows before the last, for ``n`` samples of a ring of
    ``w`` radians per sample (:data:`REFINE_SAMPLES_PER_PERIOD`)."""
    per_period = 2 * math.pi / max(w, 1e-9)
    return max(1, min(int(per_period // REFINE_SAMPLES_PER_PERIOD), n // REFINE_MIN_SAMPLES))


def refined(y: np.ndarray, alpha: float, w: float) -> tuple[np.ndarray, bool, np.ndarray | None]:
    """:func:`refine`'s parameters, whether they are the converged solution on the whole of
    ``y`` (its last window's solve was kept and ended by its tolerances), and the triangular
    factor of [J | f] there when the solve ended on one (else None).

    The windows double from about 3 periods to the whole record, each starting from the one
    before's solution with its amplitudes solved again; a finely sampled ring's windows hold
    every k-th sample (:func:`refine_stride`) but the last, which holds every sample. After
    the first window, Gauss–Newton steps (:func:`~wavefit.fit.gauss_newton.descend`) are tried
    first, the Levenberg–Marquardt solver where they do not settle."""
    stride = refine_stride(w, y.size)
    if stride == 1:
        return _doubled(y, alpha, w)
    coarse, _, _ = _doubled(y[::stride], alpha * stride, w * stride)
    return _solved(y, np.append(coarse[:3], coarse[3:] / stride), close=True)


def _doubled(y: np.ndarray, alpha: float, w: float) -> tuple[np.ndarray, bool, np.ndarray | None]:
    """:func:`refined`'s windows on every sample of ``y``."""
    n = y.size
    length = int(min(n, max(24, 3 * 2 * math.pi / max(w, 1e-9))))
    # the amplitudes are solved on each shorter window below; on the whole record only when
    # the first window is the whole record
    x = _linear_start(y, alpha, w) if length >= n else np.array([0.0, 0.0, 0.0, alpha, w])
    first = length
    while True:
        seg = y[:length]
        if length < n:
            x = _linear_start(seg, x[3], x[4])
        x, converged, factor = _solved(seg, x, close=length > first)
        if length >= n:
            return x, converged, factor
        length = min(n, 2 * length)


def _solved(seg: np.ndarray, x: np.ndarray, close: bool) -> tuple[np.ndarray, bool, np.ndarray | None]:
    """The unweighted least squares on ``seg`` from ``x`` (Gauss–Newton steps first when
    ``close``), whether it converged, and the factor of [J | f] there when the solve ended on
    one; ``x`` itself, not converged, where the solution is rejected."""
    residuals, jac, factor, kept_factor = _start_problem(seg)
    found = descend(factor, x, _LOWER, _UPPER, NEGLIGIBLE_CHANGE) if close else None
    if found is not None:
        (solution, at_solution), converged = found, True
    else:
        res = optimize.least_squares(residuals, x, jac=jac, method="lm", x_scale=_x_scale(x),
                                     xtol=1e-12, ftol=1e-12)
        solution, converged = res.x, res.status > 0  # (0: stopped by the count of evaluations)
        at_solution = kept_factor(solution)
    # (a free ring decays: a fit that grows e-fold many times over is rejected)
    if not (np.all(np.isfinite(solution)) and 0 < solution[4] < math.pi and solution[3] * seg.size > -20.0):
        return x, False, None
    return solution, converged, at_solution


def _start_problem(seg: np.ndarray) -> tuple[Callable, Callable, Callable, Callable]:
    """Residual and Jacobian functions of the unweighted refinement of ``seg`` (a short segment's
    held whole), the function giving the triangular factor of [J | f] at a point, and the one
    giving the factor kept from the solve at a point (None where there is none).

    A long segment is handed to the solver as the triangular factor of [J | f]
    (:class:`~wavefit.fit.compressed.TriangularProblem`: the same Levenberg–Marquardt steps
    on p + 1 rows), since MINPACK copies its dense n × p Jacobian several times over."""
    def residuals(v: np.ndarray) -> np.ndarray:
        r = grid_model(v, seg.size)
        r -= seg
        return r

    problem = TriangularProblem(residuals, lambda v: pieced_jacobian(v, seg.size), [Block(0, seg.size, "tank")],
                                {"tank": white(1.0)})
    if is_small(seg.size, len(NAMES)):  # (the solver on the dense rows; the steps on the factor)
        return residuals, lambda v: grid_jacobian(v, 0, seg.size), problem.factor, lambda v: None
    return problem.residuals, problem.jacobian, problem.factor, problem.kept


def _linear_start(y: np.ndarray, alpha: float, w: float) -> np.ndarray:
    """Offset and the two quadrature amplitudes for a given decay and frequency (linear least
    squares); a long record through the triangular factor of its rows, never held whole."""
    def basis(a: int, b: int) -> np.ndarray:
        z = phasor(alpha, w, a, b - a)
        return np.column_stack([np.ones(b - a), z.real, z.imag])

    if is_small(y.size, 3):
        rows = basis(0, y.size)
        if not np.all(np.isfinite(rows)):
            raise ValueError("the ring's decay rate could not be estimated")
        coef, *_ = np.linalg.lstsq(rows, y, rcond=None)
    else:
        factor = triangle(Jacobian(y.size, [Piece(0, y.size, basis, np.eye(3))]), y, [Block(0, y.size, "tank")],
                          {"tank": white(1.0)})
        if not np.all(np.isfinite(factor)):
            raise ValueError("the ring's decay rate could not be estimated")
        coef, *_ = np.linalg.lstsq(factor[:3, :3], factor[:3, 3], rcond=None)
    return np.array([coef[0], coef[1], coef[2], alpha, w])


def _x_scale(x: np.ndarray) -> np.ndarray:
    amp = max(math.hypot(x[1], x[2]), 1e-300)
    return np.array([amp, amp, amp, max(abs(x[3]), 1e-3 * x[4], 1e-12), max(x[4], 1e-12) * 1e-2])


def _envelope_end(x: np.ndarray, sigma: float, lo: int, hi: int, strong: int) -> int:
    """Index where the envelope falls to END_ENVELOPE_SIGMAS·σ (never before the strong part)."""
    amp = math.hypot(x[1], x[2])
    if not (sigma > 0 and x[3] > 0 and amp > END_ENVELOPE_SIGMAS * sigma):
        return hi
    n_end = math.log(amp / (END_ENVELOPE_SIGMAS * sigma)) / x[3]
    return int(min(hi, max(lo + strong, lo + math.ceil(n_end))))


def _leaves_baseline(y: np.ndarray, dev0: np.ndarray, final: float) -> int:
    """The first sample past half the largest excursion ``dev0`` from the baseline in the
    first stretch of such samples, no two more than :data:`ONSET_GAP_PERIODS` periods apart
    (the period from the spectrum after the largest excursion), that lasts half a period or
    is the stretch of the largest excursion. A noise sample past half of a weak ring's excursion in a long pre-trigger
    stretch is no onset (a ring 7.5 times its noise was fitted from 263 µs before its step,
    and refused as "0.2 times the noise rms", in 3 of 60 draws)."""
    peak_at = int(np.argmax(dev0))
    past = np.flatnonzero(dev0[:peak_at + 1] > 0.5 * float(dev0[peak_at]))
    gaps = np.diff(past)
    if not gaps.size or int(gaps.max()) <= MIN_ONSET_GAP:
        return int(past[0])
    period = _samples_per_period(y[peak_at:peak_at + SPECTRUM_SAMPLES] - final)
    bounds = [0, *(np.flatnonzero(gaps > ONSET_GAP_PERIODS * period) + 1).tolist(), past.size]
    for a, b in zip(bounds[:-2], bounds[1:-1]):
        # an earlier stretch that lasts half a period or more is a ring (a square wave's first
        # edge, as strong as the next), not a noise sample
        if past[b - 1] - past[a] >= 0.5 * period:
            return int(past[a])
    return int(past[bounds[-2]])


#: Samples past half the largest excursion that lie at most this many periods apart belong to
#: the ring's first cycles (its largest excursion comes in its first periods after a step).
ONSET_GAP_PERIODS = 2.0
#: Gaps up to this many samples between them are not looked at (no spectrum is taken): they
#: are within two periods of any ring that is fitted at all (fewer than 4 samples a period is
#: refused).
MIN_ONSET_GAP = 8


def _onset(y: np.ndarray, k1: int, peak: float) -> int:
    """Last sample before ``k1`` that still sits on the pre-trigger baseline, plus one."""
    if k1 < 2:
        return 0
    head = y[:max(2, k1 // 2)]
    base = float(np.median(head))
    sigma = 1.4826 * float(np.median(np.abs(head - base)))
    tol = min(max(4.0 * sigma, 0.02 * peak), 0.25 * peak)
    off = np.flatnonzero(np.abs(y[:k1] - base) <= tol)
    return int(off[-1]) + 1 if off.size else 0


#: The ring's period is found from the spectrum of at most this many samples after the onset
#: (2 M, a 4 M-point transform): the ring is strongest there, and a record longer than that
#: would need a transform of hundreds of megabytes; a ring whose period exceeds it fills
#: fewer than five periods of even a 10-million-sample record.
SPECTRUM_SAMPLES = 1 << 21


def _samples_per_period(y: np.ndarray) -> float:
    """Samples per period from the peak of the zero-padded spectrum (DC bins left out)."""
    n = y.size
    nfft = 1 << int(math.ceil(math.log2(max(2 * n, 64))))
    spec = np.abs(np.fft.rfft(y - y.mean(), nfft))
    lowest = max(2, nfft // max(n, 1))
    k = lowest + int(np.argmax(spec[lowest:]))
    return float(nfft / max(k, 1))


def _rms(r: np.ndarray) -> float:
    return float(np.sqrt(np.mean(r * r))) if r.size else 0.0
