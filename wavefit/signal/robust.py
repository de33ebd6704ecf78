"""Robust scale: the median absolute deviation, made a normal standard deviation.

References
----------
F. R. Hampel, "The influence curve and its role in robust estimation", J. Amer. Statist.
Assoc. 69 (1974) 383–393 (the median absolute deviation as a robust scale);
P. J. Rousseeuw and C. Croux, "Alternatives to the median absolute deviation", J. Amer.
Statist. Assoc. 88 (1993) 1273–1283 (the factor 1.4826 that makes it a consistent estimate
of a normal standard deviation);
R. W. Floyd and R. L. Rivest, "Expected time bounds for selection", Comm. ACM 18 (1975)
165–172 (a median found among the values that a sample's order statistics bracket).
"""
from __future__ import annotations

import math

import numpy as np

#: The MAD of normal values times this is their standard deviation (Rousseeuw and Croux 1993).
MAD_TO_SIGMA = 1.4826


#: Records shorter than this have their median from ``np.median`` directly; from about this
#: length the bracket (:func:`median`) costs less than a selection among all the values.
BRACKET_FROM = 1 << 16
#: Evenly spaced values of the record whose order statistics bracket its median.
BRACKET_SAMPLE = 4096
#: Half-width of the bracket in standard deviations of the rank that the record's median has
#: in a random sample of BRACKET_SAMPLE values (√m/2): it falls outside about once in 16,000
#: records, and then the median is found among all the values.
BRACKET_SPREAD = 4.0


def mad_sigma(values: np.ndarray) -> float:
    """1.4826·MAD of ``values``, a float array the caller made for this and gives up: its
    medians may reorder it in place and its deviations overwrite it, so a long record's
    differences are not copied again."""
    values -= median(values)
    return float(MAD_TO_SIGMA * median(np.abs(values, out=values)))


def median(values: np.ndarray) -> float:
    """``np.median`` of a float array, the same number, found among the values between two order
    statistics of an evenly spaced sample of them when the array is long (Floyd and Rivest 1975):
    a few passes of comparisons and a selection among a few per cent of the values instead of
    among all. The array may be reordered, as by ``np.median(values, overwrite_input=True)``."""
    n = values.size
    if n < BRACKET_FROM:
        return np.median(values, overwrite_input=True)
    sample = np.sort(values[::n // BRACKET_SAMPLE])
    half_width = BRACKET_SPREAD * math.sqrt(sample.size) / 2.0
    low = sample[max(int(sample.size / 2.0 - half_width), 0)]
    high = sample[min(int(sample.size / 2.0 + half_width), sample.size - 1)]
    below = int(np.count_nonzero(values < low))
    inside = values[(values >= low) & (values <= high)]
    middle = [n // 2] if n % 2 else [n // 2 - 1, n // 2]  # the middle value's rank, or the two's
    if below > middle[0] or below + inside.size <= middle[-1] or np.isnan(values).any():
        return np.median(values, overwrite_input=True)  # outside the bracket, or a NaN to return
    ranks = [rank - below for rank in middle]
    inside.partition(ranks)
    return np.mean(inside[ranks])
