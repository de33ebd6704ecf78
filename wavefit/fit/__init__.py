"""Waveform models and estimators; each returns a frozen :class:`FitResult`."""
from .engine import Block, fit_least_squares, fit_parameters
from .result import FitResult

__all__ = ["Block", "FitResult", "fit_least_squares", "fit_parameters"]
