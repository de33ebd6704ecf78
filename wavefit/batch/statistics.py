"""Lot statistics: verdict counts, yield, and per limited quantity mean, s, range and Cpk.

References
----------
.. [1] NIST/SEMATECH e-Handbook of Statistical Methods, §6.1.6 "What is
   Process Capability?": Cp = (USL − LSL)/(6σ), Cpk = min(USL − μ, μ − LSL)/(3σ),
   with the one-sided indices Cpu = (USL − μ)/(3σ), Cpl = (μ − LSL)/(3σ);
   μ and σ estimated by the sample mean and standard deviation.
   https://www.itl.nist.gov/div898/handbook/pmc/section1/pmc16.htm
.. [2] ISO 22514-2:2017, Statistical methods in process management —
   Capability and performance, Part 2 (the same indices for a normal process).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Iterable, Mapping, Sequence

import numpy as np

from .decision import ERROR, PASS, VERDICTS
from .spec import Limit


@dataclass(frozen=True)
class QuantityStatistics:
    """Summary of one limited quantity over the analysed parts of a lot (SI units)."""

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

    def to_dict(self) -> dict[str, Any]:
        return {"n": self.n, "mean": _num(self.mean), "std": _num(self.std), "min": _num(self.minimum),
                "max": _num(self.maximum), "lower_limit": self.lower, "upper_limit": self.upper,
                "cp": _num(self.cp), "cpk": _num(self.cpk)}


@dataclass(frozen=True)
class LotSummary:
    """Counts per verdict, yield and statistics per limited quantity.

    ``yield_`` is pass / analysed, where analysed counts the rows whose verdict
    is not ``error``; conditional passes are not counted as passes (under the
    guard-band rule they lie within the guard band of a limit).
    ``yield_with_conditional`` counts them too.
    """

    total: int
    counts: Mapping[str, int]
    yield_: float | None
    yield_with_conditional: float | None
    quantities: Mapping[str, QuantityStatistics]

    def to_dict(self) -> dict[str, Any]:
        return {"total": self.total, "counts": dict(self.counts), "yield": _num(self.yield_),
                "yield_with_conditional": _num(self.yield_with_conditional),
                "quantities": {k: q.to_dict() for k, q in self.quantities.items()}}


def capability(mean: float, std: float, lower: float | None, upper: float | None
               ) -> tuple[float | None, float | None]:
    """(Cp, Cpk) of a normal process with the given mean and standard deviation [1]_.

    Cp needs both limits; Cpk is the one-sided index (Cpu or Cpl) when only one
    limit is given. Both are ``None`` when σ is zero or not finite.
    """
    if not (math.isfinite(std) and std > 0 and math.isfinite(mean)):
        return None, None
    sides = []
    if upper is not None:
        sides.append((upper - mean) / (3.0 * std))
    if lower is not None:
        sides.append((mean - lower) / (3.0 * std))
    cp = (upper - lower) / (6.0 * std) if lower is not None and upper is not None else None
    return cp, (min(sides) if sides else None)


def quantity_statistics(name: str, values: Sequence[float], limit: Limit) -> QuantityStatistics:
    """Mean, sample standard deviation (n − 1), min, max, Cp and Cpk of ``values``."""
    x = np.asarray([v for v in values if v is not None and math.isfinite(v)], dtype=float)
    if x.size == 0:
        return QuantityStatistics(name, 0, math.nan, math.nan, math.nan, math.nan,
                                  limit.lower, limit.upper, None, None)
    mean = float(np.mean(x))
    std = float(np.std(x, ddof=1)) if x.size > 1 else math.nan
    cp, cpk = capability(mean, std, limit.lower, limit.upper)
    return QuantityStatistics(name, int(x.size), mean, std, float(x.min()), float(x.max()),
                              limit.lower, limit.upper, cp, cpk)


def summarize(rows: Iterable[Mapping[str, Any]], limits: Mapping[str, Limit]) -> LotSummary:
    """Summarise result rows (dicts with ``verdict`` and quantity values) against ``limits``.

    Statistics use the rows whose verdict is not ``error``.
    """
    rows = list(rows)
    counts = {v: 0 for v in VERDICTS}
    for row in rows:
        counts[row["verdict"]] = counts.get(row["verdict"], 0) + 1
    analysed = [row for row in rows if row["verdict"] != ERROR]
    n = len(analysed)
    yield_ = counts[PASS] / n if n else None
    with_cond = (counts[PASS] + counts["conditional pass"]) / n if n else None
    stats = {name: quantity_statistics(name, [row.get(name) for row in analysed], limit)
             for name, limit in limits.items()}
    return LotSummary(len(rows), counts, yield_, with_cond, stats)


def _num(x: float | None) -> float | None:
    return float(x) if x is not None and math.isfinite(x) else None
