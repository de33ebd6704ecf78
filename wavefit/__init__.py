"""wavefit: inductor measurements (L, DCR, Q, self-capacitance) from oscilloscope captures.

>>> import wavefit
>>> result = wavefit.analyze("capture.csv", "setup.toml")   # doctest: +SKIP
>>> result.quantities["L"].value                              # doctest: +SKIP
"""
from __future__ import annotations

import os

# Our least-squares problems are tall and narrow: one BLAS thread is fastest, and
# several threads per process (batch workers, a busy machine) slow them down by
# orders of magnitude. Only a default: a value the user set is kept. It takes effect
# when wavefit is imported before numpy (as the command line does).
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

from importlib.metadata import PackageNotFoundError, version

from .analysis import analyze
from .errors import AnalysisRefused, CaptureError, SetupError, WavefitError
from .fit.model_fit import fit_model

try:
    __version__ = version("wavefit")
except PackageNotFoundError:  # running from a source tree that is not installed
    __version__ = "0.0.0+unknown"


__all__ = ["analyze", "fit_model", "WavefitError", "CaptureError", "SetupError", "AnalysisRefused", "__version__"]
