"""Propagation of distributions by Monte Carlo, after JCGM 101:2008 (GUM Supplement 1).

Used where the first-order law of propagation is poor (strongly nonlinear
measurement functions, or an input uncertainty comparable to its value). Each
input is drawn from the distribution its origin implies (JCGM 101 6.4):
rectangular for a tolerance band (6.4.2), Gaussian for a stated standard
uncertainty or expanded uncertainty with k (6.4.7), a scaled and shifted
t-distribution for a type A input with finite degrees of freedom (6.4.9), and a
multivariate Gaussian for a correlated block such as a fit's parameters (6.4.8).
The model is evaluated on all draws at once (numpy), and the result is the
mean, the standard deviation and the probabilistically symmetric coverage
interval (7.7.1) or the shortest one (7.7.2).
"""
from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable, Mapping

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
        sample = rng.multivariate_normal(mean, cov, size=draws, method="eigh")
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
