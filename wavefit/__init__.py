"""wavefit: inductor measurements (L, DCR, Q, self-capacitance) from oscilloscope captures.

>>> import wavefit
>>> result = wavefit.analyze("capture.csv", "setup.toml")   # doctest: +SKIP
>>> result.quantities["L"].value                              # doctest: +SKIP
"""
from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

from .analysis import analyze
from .errors import AnalysisRefused, CaptureError, SetupError, WavefitError

try:
    __version__ = version("wavefit")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"


__all__ = ["analyze", "WavefitError", "CaptureError", "SetupError", "AnalysisRefused", "__version__"]
