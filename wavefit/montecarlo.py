"""Propagation of distributions by Monte Carlo, after JCGM 101:2008 (GUM Supplement 1).

Used where the first-order law of propagation is poor (strongly nonlinear
measurement functions, or an input uncertainty comparable to its value). Each
input is drawn from the distribution its origin implies (JCGM 101 6.4):
rectangular for a tolerance band (6.4.2), Gaussian for a stated standard
uncertainty or expanded uncertainty with k (6.4.7), a scaled and shifted
t-distribution for a type A input with finite degrees of freedom (6.4.9), and a
multivariate Gaussian for a correlated block such as a fit's parameters (6.4.8),
multivariate t when the block has finite degrees of freedom (JCGM 102:2011, 6.5.3).
The model is evaluated on all draws at once (numpy), and the result is the
mean, the standard deviation and the probabilistically symmetric coverage
interval (7.7.1) or the shortest one (7.7.2).
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Mapping, Sequence

import numpy as np

from .uncertainty import COVERAGE_PROBABILITY, InputSet


@dataclass(frozen=True)
class MonteCarloResult:
    """Summary of the output distribution of one quantity (JCGM 101 7.6–7.7)."""

    value: float
    standard_uncertainty: float
    interval: tuple[float, float]
    shortest_interval: tuple[float, float]
    draws: int


def draw_inputs(inputs: InputSet, draws: int, rng: np.random.Generator) -> dict[str, np.ndarray]:
    """Draw every input ``draws`` times from its distribution."""
    items = inputs.inputs
    out: dict[str, np.ndarray] = {}
    in_block: set[int] = set()
    for idx, cov in inputs.blocks():
        mean = np.array([items[k].value for k in idx])
        dof = items[idx[0]].dof
        sample = rng.multivariate_normal(np.zeros(len(idx)), cov, size=draws, method="eigh")
        if math.isfinite(dof):
            # multivariate t with scale matrix cov, as the block's finite dof implies (JCGM 102:2011,
            # 6.5.3; clause from memory): the Gaussian draw divided by sqrt(chi²_ν/ν)
            sample *= np.sqrt(max(dof, 1.0) / rng.chisquare(max(dof, 1.0), draws))[:, None]
        sample += mean
        for col, k in enumerate(idx):
            out[items[k].name] = sample[:, col]
        in_block.update(idx)
    for k, item in enumerate(items):
        if k in in_block:
            continue
        u = item.standard_uncertainty
        if u == 0.0 or item.distribution == "exact":
            out[item.name] = np.full(draws, item.value)
        elif item.distribution == "rectangular":
            half = math.sqrt(3.0) * u
            out[item.name] = rng.uniform(item.value - half, item.value + half, draws)
        elif math.isfinite(item.dof) and item.kind == "A":
            out[item.name] = item.value + u * rng.standard_t(max(item.dof, 1.0), draws)
        else:
            out[item.name] = rng.normal(item.value, u, draws)
    return out


def propagate_distributions(inputs: InputSet, model: Callable[[Mapping[str, np.ndarray]], Mapping[str, np.ndarray]],
                            draws: int = 200_000, probability: float = COVERAGE_PROBABILITY,
                            seed: int | None = 12345) -> dict[str, MonteCarloResult]:
    """Evaluate the vectorised ``model`` on ``draws`` input draws; summarise each output."""
    rng = np.random.default_rng(seed)
    outputs = model(draw_inputs(inputs, draws, rng))
    return {name: summarise(np.asarray(values, dtype=float), probability) for name, values in outputs.items()}


def summarise(y: np.ndarray, probability: float = COVERAGE_PROBABILITY) -> MonteCarloResult:
    """Mean, standard deviation and coverage intervals of Monte Carlo values (JCGM 101 7.6, 7.7)."""
    y = np.sort(y[np.isfinite(y)])
    m = y.size
    if m < 2:
        raise ValueError("too few finite model values")
    q = int(round(probability * m))
    lo_k = int(round((m - q) / 2))
    symmetric = (float(y[lo_k]), float(y[min(lo_k + q, m - 1)]))
    widths = y[q:] - y[: m - q]
    r = int(np.argmin(widths))
    shortest = (float(y[r]), float(y[r + q]))
    return MonteCarloResult(float(np.mean(y)), float(np.std(y, ddof=1)), symmetric, shortest, m)


#: Draws of a Monte Carlo run on a method's measurement function: JCGM 101:2008, 7.2.2, says
#: M = 10⁶ can be expected to give a 95 % coverage interval correct to one or two significant
#: decimal digits.
MEASUREMENT_DRAWS = 1_000_000
#: Draws evaluated at once: bounds the memory of a run (a few arrays of this length per input).
CHUNK_DRAWS = 100_000
#: Output values (draws × points) evaluated at once: a long curve's function holds a few dozen
#: intermediate arrays of that size, so a chunk of 4·10⁶ values keeps it under about 1 GiB.
#: (Functions with up to 40 output values keep chunks of :data:`CHUNK_DRAWS`.)
CHUNK_VALUES = 4_000_000
#: Most output values a run stores (draws × points, 8 bytes each: 1 GiB); beyond, the run is
#: refused naming the draws that fit.
MAX_STORED_VALUES = 2 ** 27
#: The seed of the default run, so that the same analysis gives the same interval.
DEFAULT_SEED = 12345


def _binary(op: np.ufunc, reflected: bool = False) -> Callable[[Sampled, object], Sampled]:
    """The operator method of :class:`Sampled` for ``op`` (``reflected``: ``other op self``)."""

    def method(self: Sampled, other: object) -> Sampled:
        return self._apply(op, other, reflected)

    return method


class Sampled:
    """Draws of one quantity, with its value at the input estimates, for a measurement function
    written for ``uncertainties`` numbers.

    Arithmetic and numpy ufuncs act on both the draws and ``nominal_value``; a function that
    picks a branch from ``nominal_value`` (as the methods' functions do, to fix a sign) picks it
    at the estimates, as the law of propagation does. Anything that needs one float (``float()``,
    ``math`` and ``uncertainties.umath`` functions, comparisons, ``if``) raises TypeError, so a
    function that cannot be evaluated on draws is refused, never evaluated at one point.

    A curve is a Sampled whose ``nominal_value`` is an array: combined with an array of the
    curve's axis, a quantity's draws (first axis) spread over the points, so ``draws`` has
    shape (number of draws,) followed by the shape of ``nominal_value``.
    """

    __slots__ = ("nominal_value", "draws")
    __array_priority__ = 1000  # numpy arrays and scalars hand their operators to this class

    def __init__(self, nominal_value: float | np.ndarray, draws: np.ndarray) -> None:
        self.nominal_value = float(nominal_value) if np.ndim(nominal_value) == 0 else np.asarray(nominal_value,
                                                                                                  dtype=float)
        self.draws = draws

    @staticmethod
    def _combine(op: Callable[..., object], operands: tuple[object, ...]) -> Sampled:
        """``op`` on the operands' nominal values and on their draws, the draws of a scalar
        spread over the points of a curve operand (numpy broadcasting behind the draws axis)."""
        nominal = op(*(x.nominal_value if isinstance(x, Sampled) else x for x in operands))
        ndim = np.ndim(nominal)
        draws = []
        for x in operands:
            if isinstance(x, Sampled):
                missing = ndim - np.ndim(x.nominal_value)
                x = x.draws.reshape(x.draws.shape[:1] + (1,) * missing + x.draws.shape[1:]) if missing > 0 else x.draws
            draws.append(x)
        return Sampled(nominal, op(*draws))

    def _apply(self, op: Callable[[object, object], object], other: object, reflected: bool = False) -> Sampled:
        return self._combine(op, (other, self) if reflected else (self, other))

    __add__, __radd__ = _binary(np.add), _binary(np.add, True)
    __sub__, __rsub__ = _binary(np.subtract), _binary(np.subtract, True)
    __mul__, __rmul__ = _binary(np.multiply), _binary(np.multiply, True)
    __truediv__, __rtruediv__ = _binary(np.divide), _binary(np.divide, True)
    __pow__, __rpow__ = _binary(np.power), _binary(np.power, True)

    def __neg__(self) -> Sampled:
        return Sampled(-self.nominal_value, -self.draws)

    def __pos__(self) -> Sampled:
        return self

    def __abs__(self) -> Sampled:
        return Sampled(abs(self.nominal_value), np.abs(self.draws))

    def __array_ufunc__(self, ufunc: np.ufunc, method: str, *args: object, **kwargs: object) -> Sampled:
        if method != "__call__" or kwargs or ufunc.nout != 1:
            return NotImplemented
        return self._combine(ufunc, args)

    def __getitem__(self, index: object) -> Sampled:
        """Points of a curve (an index or an index array on its axis), with their draws."""
        return Sampled(np.asarray(self.nominal_value)[index], self.draws[:, index])

    def _no_single_value(self, *_: object) -> bool:
        raise TypeError("the measurement function needs one number where Monte Carlo has draws "
                        "(a comparison, float() or a math/umath function)")

    __float__ = __bool__ = __lt__ = __le__ = __gt__ = __ge__ = _no_single_value


def linear_combination(rows: np.ndarray, coefficients: Sequence[object]) -> object:
    """``rows @ coefficients`` for coefficients that are floats, ``uncertainties`` numbers or
    :class:`Sampled` draws (then one Sampled curve, draws times rows at once, rather than an
    array of Sampled points that Monte Carlo could not hold)."""
    rows = np.asarray(rows, dtype=float)
    if any(isinstance(c, Sampled) for c in coefficients):
        nominal = rows @ np.array([c.nominal_value if isinstance(c, Sampled) else c for c in coefficients])
        size = next(c.draws.shape[0] for c in coefficients if isinstance(c, Sampled))
        draws = np.column_stack([c.draws if isinstance(c, Sampled) else np.full(size, float(c))
                                 for c in coefficients])
        return Sampled(nominal, draws @ rows.T)
    if all(isinstance(c, (float, int)) for c in coefficients):
        return rows @ np.asarray(coefficients, dtype=float)
    # ``uncertainties`` numbers: each row summed over its non-zero weights only (a B-spline row
    # has at most degree + 1), so that a point depends on the coefficients it uses and no
    # other; a dense product would give every point a zero derivative with respect to every
    # coefficient, which each later operation carries along
    coefficients = np.array(coefficients, dtype=object)

    def combined(row: np.ndarray) -> object:
        used = np.flatnonzero(row)
        return np.dot(row[used], coefficients[used]) if used.size else 0.0

    if rows.ndim == 1:
        return combined(rows)
    out = np.empty(rows.shape[0], dtype=object)
    out[:] = [combined(row) for row in rows]
    return out


@dataclass(frozen=True)
class MonteCarloReport:
    """A Monte Carlo run on a result's measurement function (JCGM 101:2008).

    ``quantities`` holds each scalar output's summary, ``curves`` each curve output's summary
    point by point (one :class:`MonteCarloResult` per point of its axis); ``invalid`` how many
    draws of an output were not finite (for a curve: draws with any point not finite), left out
    of its summaries and said in a warning by the front door.
    """

    draws: int
    seed: int | None
    probability: float
    quantities: dict[str, MonteCarloResult]
    invalid: dict[str, int]
    curves: dict[str, tuple[MonteCarloResult, ...]] = field(default_factory=dict)

    def to_dict(self, linear: Mapping[str, object], linear_curves: Mapping[str, object] | None = None
                ) -> dict[str, object]:
        """The JSON form; ``linear`` (the result's quantities) and ``linear_curves`` (its curves)
        give each linear interval y ± U. ``curves`` is written only when the run had curves."""
        out: dict[str, object] = {}
        for name, mc in self.quantities.items():
            entry = {"mean": mc.value, "standard_uncertainty": mc.standard_uncertainty,
                     "interval": list(mc.interval), "shortest_interval": list(mc.shortest_interval),
                     "invalid_draws": self.invalid.get(name, 0)}
            q = linear.get(name)
            if q is not None:
                entry["linear_interval"] = [q.value - q.expanded_uncertainty, q.value + q.expanded_uncertainty]
            out[name] = entry
        report: dict[str, object] = {"reference": "JCGM 101:2008", "draws": self.draws, "seed": self.seed,
                                     "coverage_probability": self.probability, "quantities": out}
        if self.curves:
            report["curves"] = {name: self._curve_dict(name, points, (linear_curves or {}).get(name))
                                for name, points in self.curves.items()}
        return report

    def _curve_dict(self, name: str, points: tuple[MonteCarloResult, ...], curve: object) -> dict[str, object]:
        entry: dict[str, object] = {
            "mean": [p.value for p in points], "standard_uncertainty": [p.standard_uncertainty for p in points],
            "interval": [list(p.interval) for p in points],
            "shortest_interval": [list(p.shortest_interval) for p in points],
            "invalid_draws": self.invalid.get(name, 0)}
        if curve is not None:
            entry["linear_interval"] = [[float(y - u), float(y + u)]
                                        for y, u in zip(curve.values, curve.expanded_uncertainty)]
        return entry


def propagate_measurement(inputs: InputSet, model: Callable[[Mapping[str, object]], Mapping[str, object]],
                          draws: int = MEASUREMENT_DRAWS, probability: float = COVERAGE_PROBABILITY,
                          seed: int | None = DEFAULT_SEED) -> MonteCarloReport:
    """Monte Carlo on a measurement function written for ``uncertainties`` numbers.

    The same ``(inputs, model)`` that :func:`wavefit.uncertainty.propagate` evaluated once
    to first order is evaluated on ``draws`` draws of the inputs (JCGM 101:2008, 7.2-7.4),
    in chunks of :data:`CHUNK_DRAWS`, each input a :class:`Sampled`. An output whose value
    is an array is a curve: each of its points is summarised on its own (JCGM 101 7.6, 7.7
    per component; the draws of all points are held at once, ``draws`` × points floats).

    Parameters
    ----------
    inputs
        The inputs and their distributions (:func:`draw_inputs`).
    model
        The measurement function; arithmetic and numpy ufuncs only on its inputs.
    draws
        Number of draws M (JCGM 101 7.2).
    probability
        Coverage probability of the intervals.
    seed
        Seed of the random generator (None: a fresh one).

    Returns
    -------
    MonteCarloReport

    Raises
    ------
    TypeError
        When the function needs one number where it gets draws (see :class:`Sampled`).
    ValueError
        When fewer than two draws of an output (or of a curve's point) are finite, or the
        draws of all output values would exceed :data:`MAX_STORED_VALUES`.

    References
    ----------
    .. [1] JCGM 101:2008, Evaluation of measurement data - Supplement 1 to the "Guide to the
       expression of uncertainty in measurement" - Propagation of distributions using a
       Monte Carlo method, 7.2 (number of trials), 7.6, 7.7 (summaries, coverage intervals).
    """
    rng = np.random.default_rng(seed)
    nominal = {i.name: i.value for i in inputs.inputs}
    # the outputs' sizes, from one evaluation at the estimates: they bound the chunk (a long
    # curve's intermediate arrays are draws × points) and the draws that can be held
    points = sum(max(int(np.size(out)), 1) for out in model(nominal).values())
    if draws * points > MAX_STORED_VALUES:
        raise ValueError(f"{draws} draws of {points} output values would hold "
                         f"{draws * points * 8 / 2 ** 30:.1f} GiB; give at most "
                         f"{MAX_STORED_VALUES // points} draws (--draws)")
    per_chunk = min(CHUNK_DRAWS, max(1, CHUNK_VALUES // points))
    values: dict[str, np.ndarray] = {}
    done = 0
    with np.errstate(all="ignore"):
        while done < draws:
            size = min(per_chunk, draws - done)
            drawn = draw_inputs(inputs, size, rng)
            outputs = model({name: Sampled(nominal[name], sample) for name, sample in drawn.items()})
            for name, out in outputs.items():
                shape = np.shape(out.nominal_value if isinstance(out, Sampled) else out)
                chunk = np.broadcast_to(np.asarray(out.draws if isinstance(out, Sampled) else out, dtype=float),
                                        (size, *shape))
                if name not in values:
                    values[name] = np.empty((draws, *shape))
                values[name][done:done + size] = chunk
            done += size
    summaries, curves, invalid = {}, {}, {}
    for name, y in values.items():
        finite = np.isfinite(y).reshape(draws, -1).all(axis=1)
        invalid[name] = int(draws - np.count_nonzero(finite))
        if y.ndim == 1:
            summaries[name] = summarise(y, probability)
        else:
            curves[name] = tuple(summarise(point, probability) for point in y.reshape(draws, -1).T)
    return MonteCarloReport(draws, seed, probability, summaries, invalid, curves)
