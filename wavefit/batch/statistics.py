"""Lot statistics: verdict counts, yield, and per limited quantity mean, s, range and Cpk.

Only values that a part could have enter the statistics: rows with verdict
``error`` are left out, and so are values that are not finite or, for a quantity
the method declares positive (L, tau, ...), not above zero. Yield counts every
row, so an ``error`` row counts as a part not passed.

References
----------
.. [1] NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6 "What is
   Process Capability?": Cp = (USL − LSL)/(6σ), Cpk = min(USL − μ, μ − LSL)/(3σ),
   with the one-sided indices Cpu = (USL − μ)/(3σ), Cpl = (μ − LSL)/(3σ);
   μ and σ estimated by the sample mean and standard deviation.
   https://www.itl.nist.gov/div898/handbook/pmc/section1/pmc16.htm
.. [2] ISO 22514-2:2017, Statistical methods in process management —
   Capability and performance, Part 2 (the same indices for a normal process).
.. [3] N. J. Higham, *Accuracy and Stability of Numerical Algorithms*, 2nd ed.,
   SIAM 2002, §4.2: pairwise summation of n terms errs by at most about
   log2(n) units in the last place of their magnitude.
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from .decision import CONDITIONAL_PASS, ERROR, PASS, VERDICTS, margin_to_limits
from .spec import Limit

#: A standard deviation at most this many units in the last place of the values is no spread:
#: the pairwise-summed mean (numpy) of up to 2**32 equal values misses them by at most ~32 ulp [3]_,
#: so equal values, whose s is then that rounding, always fall below it; Cp and Cpk are undefined.
ROUNDING_ULPS = 64


@dataclass(frozen=True)
class QuantityStatistics:
    """Summary of one limited quantity over the analysed parts of a lot (SI units).

    ``excluded`` counts values left out because no part could have them (not finite, or
    not positive for a quantity that must be).
    """

    name: str
    n: int
    mean: float
    std: float
    minimum: float
    maximum: float
    lower: float | None
    upper: float | None
    cp: float | None
    cpk: float | None
    excluded: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "excluded": self.excluded, "mean": _num(self.mean), "std": _num(self.std), "min": _num(self.minimum),
                "max": _num(self.maximum), "lower_limit": self.lower, "upper_limit": self.upper,
                "cp": _num(self.cp), "cpk": _num(self.cpk)}


@dataclass(frozen=True)
class LotSummary:
    """Counts per verdict, yield and statistics per limited quantity.

    ``yield_`` is pass / all rows: an ``error`` row is a part not shown to pass, so
    it counts as not passed. Conditional passes are not counted as passes (under
    the guard-band rule they lie within the guard band of a limit);
    ``yield_with_conditional`` counts them too.
    """

    total: int
    counts: Mapping[str, int]
    yield_: float | None
    yield_with_conditional: float | None
    quantities: Mapping[str, QuantityStatistics]
    #: Analysed rows with a limited quantity whose interval value ± U takes in a limit
    #: (:func:`within_uncertainty_of_a_limit`): under simple acceptance each of these verdicts
    #: may be wrong (ILAC-G8:09/2019 §4.2.1), under the guard-band rule they are conditional.
    near_limits: int = 0

    def to_dict(self) -> dict[str, Any]:
        return {"total": self.total, "counts": dict(self.counts), "yield": _num(self.yield_),
                "yield_with_conditional": _num(self.yield_with_conditional),
                "errors_counted_as_not_passed": self.counts.get(ERROR, 0),
                "decisions_within_U_of_a_limit": self.near_limits,
                "quantities": {k: q.to_dict() for k, q in self.quantities.items()}}


def capability(mean: float, std: float, lower: float | None, upper: float | None
               ) -> tuple[float | None, float | None]:
    """(Cp, Cpk) of a normal process with the given mean and standard deviation [1]_.

    Cp needs both limits; Cpk is the one-sided index (Cpu or Cpl) when only one
    limit is given. Both are ``None`` when σ is zero or not finite, or an index
    does not come out finite.
    """
    if not (math.isfinite(std) and std > 0 and math.isfinite(mean)):
        return None, None
    sides = []
    if upper is not None:
        sides.append((upper - mean) / (3.0 * std))
    if lower is not None:
        sides.append((mean - lower) / (3.0 * std))
    cp = (upper - lower) / (6.0 * std) if lower is not None and upper is not None else None
    return _finite_or_none(cp), _finite_or_none(min(sides) if sides else None)


def possible(value: Any, positive: bool) -> bool:
    """Whether a part could have ``value``: a finite number, above zero when ``positive``."""
    if not isinstance(value, (int, float)) or isinstance(value, bool) or not math.isfinite(value):
        return False
    return value > 0 or not positive


def usable(row: Mapping[str, Any], name: str, positive: bool) -> float | None:
    """The row's value of ``name`` when it enters the statistics (the row is no ``error`` and
    a part could have the value, :func:`possible`), else ``None``; the lot plot draws the same."""
    value = row.get(name)
    return value if row["verdict"] != ERROR and possible(value, positive) else None


#: Every measured value this many times beyond a quantity's limits (or that many times short
#: of them) suggests a unit prefix missing from the spec: prefixes step by 10³ (a limit of
#: ">= 297" for µH is read as 297 H, and the whole lot fails).
FAR_FROM_LIMITS = 1e3


def far_from_limits(values: Sequence[float | None], limit: Limit) -> float | None:
    """The smallest factor by which the values (``None`` skipped) lie beyond the limit's nearest
    bound, when every one of them does so by at least :data:`FAR_FROM_LIMITS` in the same
    direction (below a lower bound, or above an upper one); else ``None``. Only a lot of
    values above zero is judged: a missing prefix scales a positive bound, and values at or
    below zero beside it (parts far inside an upper bound, a quantity nil within its noise)
    say nothing of one."""
    present = [v for v in values if v is not None]
    if not present or min(present) <= 0:
        return None
    low, high = min(present), max(present)
    if limit.lower is not None and limit.lower > 0 and high * FAR_FROM_LIMITS <= limit.lower:
        return limit.lower / high
    if limit.upper is not None and limit.upper > 0 and low >= FAR_FROM_LIMITS * limit.upper:
        return low / limit.upper
    return None


def quantity_statistics(name: str, values: Sequence[float | None], limit: Limit,
                        positive: bool = False) -> QuantityStatistics:
    """Mean, sample standard deviation (n − 1), min, max, Cp and Cpk of ``values``.

    Missing values (``None``) are skipped; impossible ones (:func:`possible`) are
    skipped and counted in ``excluded``. A spread within rounding of the values
    (:data:`ROUNDING_ULPS`) is taken as zero, which leaves Cp and Cpk undefined.
    """
    present = [v for v in values if v is not None]
    x = np.asarray([v for v in present if possible(v, positive)], dtype=float)
    excluded = len(present) - int(x.size)
    if x.size == 0:
        return QuantityStatistics(name, 0, math.nan, math.nan, math.nan, math.nan,
                                  limit.lower, limit.upper, None, None, excluded)
    with np.errstate(over="ignore", invalid="ignore"):  # values near the float limit: undefined, not a warning
        mean = float(np.mean(x))
        std = float(np.std(x, ddof=1)) if x.size > 1 else math.nan
    if std <= ROUNDING_ULPS * float(np.spacing(np.max(np.abs(x)))):
        std = 0.0
    cp, cpk = capability(mean, std, limit.lower, limit.upper)
    return QuantityStatistics(name, int(x.size), mean, std, float(x.min()), float(x.max()),
                              limit.lower, limit.upper, cp, cpk, excluded)


def summarize(rows: Iterable[Mapping[str, Any]], limits: Mapping[str, Limit],
              positive: Iterable[str] = ()) -> LotSummary:
    """Summarise result rows (dicts with ``verdict`` and quantity values) against ``limits``.

    Statistics use the rows whose verdict is not ``error``, and of those only the
    values a part could have; ``positive`` names the quantities that must be above
    zero (the method's ``positive``). Yield divides by all rows.
    """
    rows = list(rows)
    counts = {v: 0 for v in VERDICTS}
    for row in rows:
        counts[row["verdict"]] += 1
    analysed = [row for row in rows if row["verdict"] != ERROR]
    total = len(rows)
    yield_ = counts[PASS] / total if total else None
    with_cond = (counts[PASS] + counts[CONDITIONAL_PASS]) / total if total else None
    must_be_positive = frozenset(positive)
    stats = {name: quantity_statistics(name, [row.get(name) for row in analysed], limit, name in must_be_positive)
             for name, limit in limits.items()}
    near = sum(within_uncertainty_of_a_limit(row, limits) for row in analysed)
    return LotSummary(total, counts, yield_, with_cond, stats, near)


def within_uncertainty_of_a_limit(row: Mapping[str, Any], limits: Mapping[str, Limit]) -> bool:
    """Whether a limited quantity's interval value ± U (the row's ``<name>_U``) takes in one of its
    limits: the verdict on it then rests on where in the interval the part lies (ILAC-G8:09/2019
    §4.2.1: up to a 50 % chance of a false verdict on the limit itself)."""
    for name, limit in limits.items():
        value, expanded = row.get(name), row.get(f"{name}_U")
        if not (possible(value, False) and possible(expanded, False)):
            continue
        if abs(margin_to_limits(value, limit)) < expanded:  # the nearest limit is within U
            return True
    return False


def _num(x: float | None) -> float | None:
    return float(x) if x is not None and math.isfinite(x) else None


def _finite_or_none(x: float | None) -> float | None:
    return x if x is not None and math.isfinite(x) else None
