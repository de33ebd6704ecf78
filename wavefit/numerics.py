"""Keep the numerical libraries' own messages out of the user's output.

numpy and scipy report overflow and invalid operations as ``RuntimeWarning``
lines on stderr, and a LAPACK routine given NaN may print to the process's
standard output directly (below Python), which corrupts ``--json``. While an
analysis runs, both are collected here; the front door turns them into one
warning of the result (or the result is refused by the physical checks). A
numerical exception becomes a one-line refusal.
"""
from __future__ import annotations

import contextlib
import os
import sys
import tempfile
import warnings
from collections.abc import Iterator, Sequence
from dataclasses import dataclass, field

import numpy as np

from .errors import AnalysisRefused
from .io.capture import Capture

#: At most this many distinct messages are quoted in the result's warning.
_QUOTED = 3


@dataclass
class Collected:
    """What the numerical code said while it ran: warning texts and raw standard output."""

    runtime_warnings: list[str] = field(default_factory=list)
    printed: str = ""

    def remark(self) -> str | None:
        """One warning for the result, or None when nothing was said."""
        said = list(dict.fromkeys(self.runtime_warnings))
        if self.printed.strip():
            said.append(" ".join(self.printed.split())[:200])
        if not said:
            return None
        quoted = "; ".join(said[:_QUOTED]) + ("; ..." if len(said) > _QUOTED else "")
        return (f"numerical trouble during the analysis ({quoted}): the fit met overflowing or undefined "
                "values; check the result against the other warnings and the plot")


@contextlib.contextmanager
def collected() -> Iterator[Collected]:
    """Collect ``RuntimeWarning`` texts and whatever is written to file descriptor 1 meanwhile."""
    out = Collected()
    with warnings.catch_warnings(record=True) as caught, _captured_stdout(out):
        warnings.simplefilter("always", RuntimeWarning)
        yield out
    for item in caught:
        if issubclass(item.category, RuntimeWarning):
            out.runtime_warnings.append(str(item.message))
        else:
            warnings.warn_explicit(item.message, item.category, item.filename, item.lineno)


@contextlib.contextmanager
def numerical_failures_refused(captures: Sequence[Capture]) -> Iterator[None]:
    """Turn a numerical failure inside an analysis into a one-line refusal.

    Data far from what a method expects can drive its arithmetic out of range
    (an overflow in the measurement function, a singular matrix, NaN reaching
    a solver, an array too large for memory). That is a refusal of the data,
    said in one line; the original error stays chained for ``--debug``.

    Parameters
    ----------
    captures
        The captures being analysed, for the message.

    Raises
    ------
    AnalysisRefused
        In place of an ArithmeticError, a LinAlgError, a ValueError or a MemoryError.
    """
    try:
        yield
    except MemoryError:
        samples = sum(c.rows * (1 + len(c.channels)) for c in captures)
        raise AnalysisRefused(f"{_sources(captures)}: not enough memory to analyse {samples} values; "
                              "shorten or decimate the record") from None
    except (ArithmeticError, np.linalg.LinAlgError, ValueError) as exc:
        reason = str(exc).splitlines()[0] if str(exc) else type(exc).__name__
        raise AnalysisRefused(
            f"{_sources(captures)}: the analysis failed numerically ({type(exc).__name__}: {reason[:120]}): the "
            "capture is probably not what the method expects; check [columns], the parts and the plot of the "
            "capture") from exc


def _sources(captures: Sequence[Capture]) -> str:
    return ", ".join(c.source for c in captures)


@contextlib.contextmanager
def _captured_stdout(out: Collected) -> Iterator[None]:
    """Send file descriptor 1 to a temporary file while the block runs, and keep what arrived."""
    try:
        fd = sys.stdout.fileno()
    except (AttributeError, OSError, ValueError):  # no real stdout (a notebook, a test runner)
        yield
        return
    sys.stdout.flush()
    saved = os.dup(fd)
    with tempfile.TemporaryFile() as sink:
        os.dup2(sink.fileno(), fd)
        try:
            yield
        finally:
            sys.stdout.flush()
            os.dup2(saved, fd)
            os.close(saved)
            sink.seek(0)
            out.printed = sink.read().decode("utf-8", "replace")
