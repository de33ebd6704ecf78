"""Robust scale: the median absolute deviation, made a normal standard deviation.

References
----------
F. R. Hampel, "The influence curve and its role in robust estimation", J. Amer. Statist.
Assoc. 69 (1974) 383–393 (the median absolute deviation as a robust scale);
P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute deviation", J. Amer.
Statist. Assoc. 88 (1993) 1273–1283 (the factor 1.4826 that makes it a consistent estimate
of a normal standard deviation).
"""
from __future__ import annotations

import numpy as np

#: The MAD of normal values times this is their standard deviation (Rousseeuw and Croux 1993).
MAD_TO_SIGMA = 1.4826


def mad_sigma(values: np.ndarray) -> float:
    """1.4826·MAD of ``values``, a float array the caller made for this and gives up: its
    medians reorder it in place and its deviations overwrite it, so a long record's
    differences are not copied again."""
    values -= np.median(values, overwrite_input=True)
    return float(MAD_TO_SIGMA * np.median(np.abs(values, out=values), overwrite_input=True))
