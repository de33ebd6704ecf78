"""Matrix pencil: the poles of a sum of damped exponentials from uniform samples.

A record y[n] = Σ_k h_k z_kⁿ + noise is a linear combination of M exponentials
with poles z_k. The matrix pencil method builds the Hankel matrix of the
record, keeps its M dominant right singular vectors (a total-least-squares
noise filter) and reads the poles as the eigenvalues of the pencil formed by
that subspace shifted by one sample. It needs no starting values, which is why
it serves as the linear initial estimate for the nonlinear damped-sine fit.
"""
from __future__ import annotations

import numpy as np


def matrix_pencil(y: np.ndarray, order: int, pencil: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Poles and complex amplitudes of ``order`` damped exponentials in ``y``.

    Parameters
    ----------
    y : array_like
        Uniformly sampled record (real or complex), at least ``3*order`` samples.
    order : int
        Number of exponentials M (a real damped sine with an offset is M = 3:
        one pole at z = 1 and a conjugate pair).
    pencil : int, optional
        Pencil parameter L, between M and N − M; N/3 (the default) is close to
        the noise-optimal choice given in the reference.

    Returns
    -------
    poles : ndarray of complex
        z_k, so that the k-th component is h_k·z_kⁿ.
    amplitudes : ndarray of complex
        h_k, least-squares amplitudes for the poles.

    References
    ----------
    Y. Hua and T. K. Sarkar, "Matrix pencil method for estimating parameters of
    exponentially damped/undamped sinusoids in noise", IEEE Trans. Acoust.,
    Speech, Signal Process. 38(5), 814–824, 1990.
    """
    y = np.asarray(y)
    n = y.size
    if n < 3 * order:
        raise ValueError("matrix pencil needs at least 3*order samples")
    l_par = pencil or max(order, n // 3)
    l_par = int(min(max(l_par, order), n - order))
    rows = n - l_par
    idx = np.arange(rows)[:, None] + np.arange(l_par + 1)[None, :]
    hankel = y[idx]
    _, _, vh = np.linalg.svd(hankel, full_matrices=False)
    v = vh[:order].conj().T                      # (L+1) x M dominant right singular vectors
    v1, v2 = v[:-1], v[1:]
    poles = np.linalg.eigvals(np.linalg.pinv(v1) @ v2)
    vander = poles[None, :] ** np.arange(n)[:, None]
    amplitudes, *_ = np.linalg.lstsq(vander, y.astype(complex), rcond=None)
    return poles, amplitudes
