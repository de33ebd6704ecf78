"""Build a capture from a pandas DataFrame whose columns are already numeric."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..errors import CaptureError
from .assemble import Table, assemble
from .capture import Capture
from .column_units import is_time_name, parse_header


def capture_from_frame(
    frame: pd.DataFrame,
    *,
    sample_interval: float | None = None,
    time_column: str | None = None,
    source: str = "<DataFrame>",
) -> Capture:
    """Check a DataFrame and turn it into a capture, as :func:`~wavefit.io.read_capture` does for files.

    Headers are parsed for units (``"Time (us)"``, ``"CH1 (mV)"``) and scaled to
    SI; a column whose header looks like time is the time axis unless
    ``sample_interval`` is given. Without such a column, an index that holds
    time is the axis: a ``DatetimeIndex`` (seconds from its first stamp), a
    ``TimedeltaIndex``, or a numeric index whose name looks like time
    (``"t"``, ``"Time (us)"``).

    Parameters
    ----------
    frame
        One column per signal, numeric dtypes; column labels are the headers.
    sample_interval
        Seconds between samples; overrides a time column (kept as a channel).
    time_column
        Label (or 0-based position) of the time column, when its header does not say so.
    source
        Name used in messages and in ``Capture.source``.

    Returns
    -------
    Capture
        The checked capture.

    Raises
    ------
    wavefit.errors.CaptureError
        When a column is not numeric, or any check of the file reader fails;
        places are given as 0-based row positions.
    """
    if not isinstance(frame, pd.DataFrame):
        raise CaptureError(f"{source} is a {type(frame).__name__}, not a pandas DataFrame")
    if frame.shape[1] == 0:
        raise CaptureError(f"{source} has no columns")
    headers = tuple(str(label) for label in frame.columns)
    columns = [_as_float(frame.iloc[:, i], headers[i], source) for i in range(frame.shape[1])]
    if isinstance(time_column, int) and not isinstance(time_column, bool):
        if not 0 <= time_column < len(headers):
            raise CaptureError(f"{source} has no column {time_column}; it has {len(headers)} columns")
        time_column = headers[time_column]
    index_time = None
    if time_column is None and sample_interval is None and not _has_time_column(headers):
        index_time = _index_as_time(frame.index, source)
    positions: tuple[int | None, ...] = tuple(range(len(headers)))
    if index_time is not None:  # the index is no column: it has no position
        name, values = index_time
        headers, columns, time_column = (name, *headers), [values, *columns], name
        positions = (None, *positions)

    def where(rows: Sequence[int]) -> list[str]:
        return [f"row {row}" for row in rows]

    table = Table(source=source, headers=headers, columns=columns, where=where, positions=positions)
    return assemble(table, sample_interval=sample_interval, time_column=time_column)


def _has_time_column(headers: Sequence[str]) -> bool:
    """True when a column header names time or is in seconds."""
    return any(is_time_name(parse_header(h).name) or parse_header(h).unit == "s" for h in headers)


def _index_as_time(index: pd.Index, source: str) -> tuple[str, np.ndarray] | None:
    """The index as a time column ``(header, seconds)`` when it holds time, else None."""
    if isinstance(index, pd.DatetimeIndex) and index.size:
        index = index - index[0]
    if isinstance(index, pd.TimedeltaIndex):
        return "time (s)", np.asarray((index / pd.Timedelta(seconds=1)), dtype=np.float64)
    name = "" if index.name is None else str(index.name)
    if name and pd.api.types.is_numeric_dtype(index.dtype) and _has_time_column([name]):
        return name, index.to_numpy(dtype=np.float64)
    return None


def _as_float(column: pd.Series, header: str, source: str) -> np.ndarray:
    """The column as a float64 copy (later edits of the frame do not reach the capture); text refused."""
    if pd.api.types.is_numeric_dtype(column.dtype) and not pd.api.types.is_complex_dtype(column.dtype):
        return column.to_numpy(dtype=np.float64, na_value=np.nan, copy=True)
    converted = pd.to_numeric(column, errors="coerce")
    bad = np.flatnonzero(converted.isna().to_numpy() & column.notna().to_numpy())
    where = f"; first non-number {column.iloc[bad[0]]!r} at row {bad[0]}" if bad.size else ""
    raise CaptureError(
        f"{source}: column {header!r} is not numeric (dtype {column.dtype}{where}); "
        "convert it with pandas.to_numeric first"
    )
