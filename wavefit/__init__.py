"""wavefit: inductor measurements (L, DCR, Q, self-capacitance) from oscilloscope captures.

>>> import wavefit
>>> result = wavefit.analyze("capture.csv", "setup.toml")   # doctest: +SKIP
>>> result.quantities["L"].value                              # doctest: +SKIP

Importing the package loads neither numpy's companions (scipy, pandas, lmfit) nor
matplotlib: ``analyze`` and ``fit_model`` are loaded on first use (PEP 562 module
``__getattr__``), so that ``wavefit --version`` and ``--help`` start at once.
"""
from __future__ import annotations

from importlib import import_module
from importlib.metadata import PackageNotFoundError, version
from typing import TYPE_CHECKING, Any

from .blas_threads import default_to_one_thread
from .errors import AnalysisRefused, CaptureError, SetupError, WavefitError

default_to_one_thread()

if TYPE_CHECKING:
    from .analysis import analyze
    from .fit.model_fit import fit_model

try:
    __version__ = version("wavefit")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"

#: The public functions loaded on first use, by the module that defines each.
_LAZY = {"analyze": ".analysis", "fit_model": ".fit.model_fit"}


def __getattr__(name: str) -> Any:
    """``wavefit.analyze`` and ``wavefit.fit_model``, imported when first asked for."""
    if name in _LAZY:
        value = getattr(import_module(_LAZY[name], __name__), name)
        globals()[name] = value
        return value
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted({*globals(), *_LAZY})


__all__ = ["analyze", "fit_model", "WavefitError", "CaptureError", "SetupError", "AnalysisRefused", "__version__"]
