"""Reading oscilloscope captures: generic CSV-like text files and pandas DataFrames.

``read_capture(path)`` and ``capture_from_frame(frame)`` both return a checked
:class:`Capture` with time in seconds and channels scaled to SI units; any
problem is a :class:`wavefit.errors.CaptureError` with a one-line message.
"""
from __future__ import annotations

from .capture import Capture, Channel
from .frame import capture_from_frame
from .reader import read_capture

__all__ = ["Capture", "Channel", "capture_from_frame", "read_capture"]
