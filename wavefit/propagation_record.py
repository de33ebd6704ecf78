"""Keeping the propagations made during one analysis, for the views that need their inputs.

A method builds its result from :func:`wavefit.uncertainty.propagate`, whose return
keeps the input set and the measurement function. The front door
(:func:`wavefit.analyze`) opens :func:`recording` around the method and afterwards
finds the propagation that gave the result's quantities: from it come the fitted
parameters with their covariance (``result.params``) and the Monte Carlo run
(JCGM 101:2008) on the same measurement function.
"""
from __future__ import annotations

import contextlib
from contextvars import ContextVar
from typing import TYPE_CHECKING, Iterator

if TYPE_CHECKING:
    from .results import AnalysisResult
    from .uncertainty import Propagation

_active: ContextVar[list[Propagation] | None] = ContextVar("wavefit_propagations", default=None)


def keep(propagation: Propagation) -> None:
    """Add ``propagation`` to the list of the innermost :func:`recording`, if one is open."""
    kept = _active.get()
    if kept is not None:
        kept.append(propagation)


@contextlib.contextmanager
def recording() -> Iterator[list[Propagation]]:
    """Collect every propagation made inside the block, in order."""
    kept: list[Propagation] = []
    token = _active.set(kept)
    try:
        yield kept
    finally:
        _active.reset(token)


def propagation_of(result: AnalysisResult, kept: list[Propagation]) -> Propagation | None:
    """The kept propagation whose quantities the result reports (the same object, else the
    last one with the same names and values), or None when the method used none."""
    for propagation in reversed(kept):
        if propagation.quantities is result.quantities:
            return propagation
    for propagation in reversed(kept):
        same_names = list(propagation.quantities) == list(result.quantities)
        if same_names and all(propagation.quantities[n].value == q.value for n, q in result.quantities.items()):
            return propagation
    return None
