"""Build a capture from a pandas DataFrame whose columns are already numeric."""
from __future__ import annotations

from collections.abc import Sequence

import numpy as np
import pandas as pd

from ..errors import CaptureError
from .assemble import Table, assemble
from .capture import Capture


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
    ``sample_interval`` is given.

    Parameters
    ----------
    frame
        One column per signal, numeric dtypes; column labels are the headers.
    sample_interval
        Seconds between samples; overrides a time column (kept as a channel).
    time_column
        Label of the time column, when its header does not say so.
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

    def where(rows: Sequence[int]) -> list[str]:
        return [f"row {row}" for row in rows]

    table = Table(source=source, headers=headers, columns=columns, where=where)
    return assemble(table, sample_interval=sample_interval, time_column=time_column)


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
