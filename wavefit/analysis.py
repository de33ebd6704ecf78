"""The library's front door: ``analyze(source, setup)``."""
from __future__ import annotations

import os
from typing import Any, Mapping, Sequence

import pandas as pd

from .errors import SetupError
from .io import capture_from_frame, read_capture
from .io.capture import Capture
from .methods import get_method
from .results import AnalysisResult
from .setup import Setup, load_setup

Source = "str | os.PathLike | pd.DataFrame | Capture"


def analyze(source: Any = None, setup: str | os.PathLike | Mapping[str, Any] | Setup | None = None,
            *, sample_interval: float | None = None) -> AnalysisResult:
    """Analyse one capture (path, DataFrame or Capture) with a setup (TOML path or dict).

    For methods that take several captures from the setup (``lc-sweep``),
    ``source`` may be ``None``, or a sequence of sources that replaces the
    setup's files in order. Returns a frozen
    :class:`~wavefit.results.AnalysisResult`; its ``to_dict()`` is what
    ``wavefit analyze --json`` prints.
    """
    if setup is None:
        raise SetupError("a setup is needed: pass a TOML path or a dict with at least 'method'")
    parsed = load_setup(setup)
    method = get_method(parsed.method)
    method.check_setup(parsed)
    interval = sample_interval if sample_interval is not None else parsed.sample_interval
    time_col = parsed.columns.get("time")
    if method.uses_setup_captures:
        if source is None:
            if not parsed.captures:
                raise SetupError(f"{parsed.source}: method {parsed.method!r} needs [[captures]] entries")
            sources: Sequence[Any] = [entry.file for entry in parsed.captures]
        else:
            sources = list(source) if isinstance(source, (list, tuple)) else [source]
        captures = [load_capture(s, interval, time_col) for s in sources]
    else:
        if source is None:
            raise SetupError(f"method {parsed.method!r} needs a capture to analyse")
        captures = [load_capture(source, interval, time_col)]
    return method.analyze(captures, parsed)


def load_capture(source: Any, sample_interval: float | None, time_column: Any = None) -> Capture:
    """Turn a path, DataFrame or Capture into a :class:`Capture`."""
    if isinstance(source, Capture):
        return source
    if isinstance(source, pd.DataFrame):
        name = None
        if time_column is not None:
            name = source.columns[time_column] if isinstance(time_column, int) else str(time_column)
        return capture_from_frame(source, sample_interval=sample_interval, time_column=name)
    return read_capture(source, sample_interval=sample_interval)
