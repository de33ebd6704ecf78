"""Lag products of long records, summed a chunk of rows at a time.

The noise models and the covariance sandwich need sums over a record of products of
samples a few lags apart: the autocovariance Σ x_i·x_{i+k}, the lagged Gram matrices
Σ h_i·h_{i+k}ᵀ of a tall matrix, and the cross products Σ h_i·x_{i+d} of two. Each is
accumulated over chunks of rows, each chunk with the rows within reach of it, so that
memory stays at a chunk however long the record; cross products go through the FFT
(the correlation theorem) with zero padding that keeps the circular sums linear.

A tall matrix is passed as ``rows``, a function giving its rows a..b as an array, with
its row count ``n``; :func:`array_rows` wraps an array.
"""
from __future__ import annotations

from typing import Callable

import numpy as np
from scipy.fft import next_fast_len

from .jacobian import chunk_rows

Rows = Callable[[int, int], np.ndarray]

#: Up to this many lags the lagged Gram matrices of a matrix of up to FEW_COLUMNS columns are
#: summed directly (a matrix product per lag); beyond, through the FFT, whose cost does not
#: grow with the lags. Measured by benchmarks/lag_grams_time.py: equal at 64–128 lags for 3
#: and 7 columns (1e5 rows), the FFT 9–12x faster at 1,000 lags; the two agree to 1e-15.
#: Since the FFT takes a length of small primes and one inverse per pair of columns (2026-12)
#: it is equal at 32–64 lags and 19–25x faster at 1,000; the switch stays where it was, so
#: that the fits with 33–96 lags keep their numbers (the direct sums cost them at most 20 ms).
DIRECT_LAGS = 96
FEW_COLUMNS = 8
#: The same for wider matrices (the splines' design matrices, up to about a hundred columns):
#: the FFT takes one inverse transform per pair of columns while the matrix products grow
#: more efficient, so the two were equal near 200–320 lags for 25, 50 and 100 columns
#: (2e4 rows), the FFT 3.5–4x faster at 1,000 lags (since 2026-12: equal below 100 lags for 25
#: columns and near 150 for 100, 5–10x faster at 1,000; the switch kept, as above).
DIRECT_LAGS_WIDE = 256


def array_rows(x: np.ndarray) -> Rows:
    """The rows of an array, as :mod:`wavefit.fit.lagged` functions take them."""
    return lambda a, b: x[a:b]


def cross_products(h: Rows, x: Rows, n: int, columns: int, low: int, high: int) -> np.ndarray:
    """c(d) = Σ_i h_i·x_{i+d} (summed over columns too) for d = low … high, over the n rows.

    Rows beyond the record count as zero. One FFT of a zero-padded chunk of h against
    the rows of x within reach of it per chunk (the correlation theorem)."""
    out = np.zeros(high - low + 1)
    lo, hi = max(low, 1 - n), min(high, n - 1)  # beyond, no pair of rows exists
    if lo > hi:
        return out
    for a, b in _chunks(n, columns, max(abs(lo), abs(hi))):
        xlo, xhi = max(0, a + lo), min(n, b + hi)
        if xlo >= xhi:
            continue
        # corr[s] = Σ_t h_{a+t}·x_{xlo+(t+s) mod size}, and x_{i+d} is at t + s = i − a + d − (xlo − a):
        # the padding keeps every index that falls outside x's rows on a zero. The length is the
        # least product of small primes that holds them (a power of two, and twice the chunk for
        # a chunk with itself, until 2026-12: up to three times the work, the same sums to 1e-16).
        if h is x and (xlo, xhi) == (a, b):  # lag products of a chunk with itself: one transform
            size = next_fast_len((b - a) + max(hi, -lo) + 1, real=True)
            own = np.fft.rfft(h(a, b), size, axis=0)
            spectrum = own * np.conj(own)
        else:
            size = next_fast_len(max(b + hi - xlo, xhi - a - lo) + 1, real=True)
            spectrum = np.conj(np.fft.rfft(h(a, b), size, axis=0)) * np.fft.rfft(x(xlo, xhi), size, axis=0)
        corr = np.fft.irfft(spectrum if spectrum.ndim == 1 else np.sum(spectrum, axis=1), size)
        out[lo - low:hi - low + 1] += corr[np.mod(np.arange(lo, hi + 1) + (a - xlo), size)]
    return out


def lag_sums(x: np.ndarray, offset: float, lags: int) -> np.ndarray:
    """Σ_i (x_i − offset)·(x_{i+k} − offset) for k = 0 … ``lags`` over a one-dimensional record.

    Up to :data:`DIRECT_LAGS` lags each sum is a dot product of the record with itself shifted,
    a chunk of samples at a time (31 lags of 3·10⁵ samples: a few milliseconds, where the FFT
    of :func:`cross_products` took tens when its transform was twice the record long); beyond,
    :func:`cross_products`."""
    n = x.size
    if lags > DIRECT_LAGS:
        def centred(a: int, b: int) -> np.ndarray:
            return x[a:b] - offset

        return cross_products(centred, centred, n, 1, 0, lags)
    out = np.zeros(lags + 1)
    for a, b in _chunks(n, 1, lags):
        ext = x[a:min(n, b + lags)] - offset
        for k in range(min(lags, ext.size - 1) + 1):
            pairs = min(b - a, ext.size - k)
            out[k] += float(np.dot(ext[:pairs], ext[k:k + pairs]))
    return out


def lag_grams(x: Rows, n: int, columns: int, lags: int) -> np.ndarray:
    """xᵀ·T_k·x for k = 0 … lags (T_0 = I; T_k the symmetric lag-k shift), shape (lags+1, q, q).

    Beyond :data:`DIRECT_LAGS` lags (:data:`DIRECT_LAGS_WIDE` for more than
    :data:`FEW_COLUMNS` columns), each chunk's lag products come from the FFT (the
    correlation theorem: one transform of the chunk and one of it with the rows within reach,
    then one inverse per pair of columns), O(n·log n) instead of O(n·lags)."""
    out = np.zeros((lags + 1, columns, columns))
    if lags > (DIRECT_LAGS if columns <= FEW_COLUMNS else DIRECT_LAGS_WIDE):
        for a, b in _chunks(n, columns, lags):
            ext = x(a, min(n, b + lags))
            out += _chunk_lag_grams(ext[: b - a], ext, lags)
        return out
    for a, b in _chunks(n, columns, lags):
        ext = x(a, min(n, b + lags))
        own = ext[: b - a]
        out[0] += own.T @ own
        for k in range(1, lags + 1):
            pairs = min(b - a, ext.shape[0] - k)
            if pairs <= 0:
                break
            out[k] += ext[:pairs].T @ ext[k:k + pairs]
    out[1:] += np.transpose(out[1:], (0, 2, 1))
    return out


def _chunk_lag_grams(own: np.ndarray, ext: np.ndarray, lags: int) -> np.ndarray:
    """The chunk's part of :func:`lag_grams`: Σ_t own_tᵀ·ext_{t+k} for k = 0 … lags, plus its
    transpose for k ≥ 1 (shape (lags+1, q, q)), rows of ``ext`` beyond its end counting as
    zero. The transform length, a product of small primes, holds every t + k without wrapping
    round; columns i and j take one inverse transform for both orders (the transform is linear),
    lag 0 half of it."""
    size = next_fast_len(own.shape[0] + lags + 1, real=True)
    left = np.conj(np.fft.rfft(own, size, axis=0))
    # the chunk that reaches the record's end is its own reach: the same transform, conjugated
    right = np.conj(left) if ext.shape[0] == own.shape[0] else np.fft.rfft(ext, size, axis=0)
    q = own.shape[1]
    out = np.empty((lags + 1, q, q))
    for i in range(q):
        for j in range(i, q):
            if i == j:
                lagged = np.fft.irfft(left[:, i] * right[:, i], size)[: lags + 1]
                out[:, i, i] = lagged
                out[1:, i, i] += lagged[1:]
            else:
                both = np.fft.irfft(left[:, i] * right[:, j] + left[:, j] * right[:, i], size)[: lags + 1]
                both[0] *= 0.5
                out[:, i, j] = out[:, j, i] = both
    return out


def _chunks(n: int, columns: int, reach: int):
    """Chunks of rows, each at least as long as the reach of the lags summed over it."""
    step = max(chunk_rows(columns), 4 * reach)
    for a in range(0, n, step):
        yield a, min(a + step, n)
