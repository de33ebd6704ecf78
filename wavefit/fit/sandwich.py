"""Covariance of a (whitened) least-squares estimate under stationary correlated noise.

The feasible-GLS estimate solves min ‖W r(θ)‖² with W the whitening filter of
the fitted AR noise model. Linearised, θ̂ − θ = G ε with
G = (J_wᵀJ_w)⁻¹ J_wᵀ W and ε the raw noise, so cov(θ̂) = G Σ Gᵀ exactly, whatever
the noise, where Σ is the noise covariance. When the AR model describes the
noise, this equals the usual (J_wᵀJ_w)⁻¹; when it does not (for example noise
whose spectrum has a zero that no finite AR model whitens), the product still
holds. Σ is estimated from the residuals' autocovariance truncated at the lag
where the correlation has died out, i.e. a heteroskedasticity-and-autocorrelation
consistent (HAC) sandwich with a truncated kernel (L. P. Hansen, Econometrica 50
(1982) 1029–1054; W. K. Newey and K. D. West, Econometrica 55 (1987) 703–708),
applied to the GLS influence function rather than to OLS scores, and corrected for
the noise the fit absorbed; from the whitened residuals when the raw ones do not
give a positive definite result.

Every product over the record is taken a chunk of rows at a time from the structured
Jacobian (:mod:`wavefit.fit.jacobian`, :mod:`wavefit.fit.lagged`), each noise block on the
parameters its rows depend on, so memory does not grow with the record beyond its residuals.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np
from numpy.lib.stride_tricks import as_strided, sliding_window_view

from .jacobian import Jacobian, as_jacobian, is_small
from .lagged import Rows, array_rows, cross_products, lag_grams, lag_sums
from .noise_model import autocovariance

#: The lagged Gram matrices of every parameter pair are held for all lags at once when they
#: number at most this many values (8 MB), else taken one lag at a time.
ALL_LAGS_VALUES = 1 << 20

#: Spectra of a block's columns held at once by :func:`positive_gram` (bytes): the columns
#: are taken in groups of this size, each group's spectra computed once per pair of groups.
SPECTRA_BYTES = 64 * 2 ** 20

#: A block's influence rows H = WᵀW·J are computed once and held when they number at most
#: this many values (16 MB): the sandwich reads them four to six times (their cross products
#: with J, their lag products for the fit correction, for the other group's term and for the
#: meat), each time a whitening and its adjoint when taken a chunk at a time. Longer blocks
#: keep the chunks, so memory does not grow with the record.
HELD_VALUES = 1 << 21


@dataclass(frozen=True)
class Tall:
    """A tall matrix of ``n`` rows given by ``rows(a, b)``, whose columns are the parameters
    ``columns`` of the fit (the others are zero in these rows)."""

    rows: Rows
    n: int
    columns: np.ndarray
    #: lag Gram matrices already computed, by number of lags (:meth:`lag_grams`)
    _grams: dict = field(default_factory=dict, init=False, compare=False, repr=False)

    @classmethod
    def of(cls, array: np.ndarray) -> "Tall":
        array = np.asarray(array, dtype=float)
        return cls(array_rows(array), array.shape[0], np.arange(array.shape[1]))

    def times(self, matrix: np.ndarray) -> "Tall":
        """This matrix times ``matrix`` (square, on the same columns)."""
        return Tall(lambda a, b: self.rows(a, b) @ matrix, self.n, self.columns)

    def gather(self) -> np.ndarray:
        return self.rows(0, self.n)

    def held(self) -> "Tall":
        """The same matrix, its rows computed once and held as an array."""
        return Tall(array_rows(self.gather()), self.n, self.columns)

    def lag_grams(self, lags: int) -> np.ndarray:
        """:func:`wavefit.fit.lagged.lag_grams` of this matrix for lags 0 … ``lags``, computed
        once (the sandwich asks for a block's several times); read-only."""
        if lags not in self._grams:
            grams = lag_grams(self.rows, self.n, self.columns.size, lags)
            grams.flags.writeable = False
            self._grams[lags] = grams
        return self._grams[lags]


def correlation_extent(acov: np.ndarray, n: int, run: int = 10) -> int:
    """Smallest lag K after which ``run`` consecutive autocorrelations are within ±2/√n."""
    rho = acov / acov[0] if acov[0] > 0 else np.zeros_like(acov)
    band = 2.0 / math.sqrt(max(n, 1))
    inside = np.abs(rho[1:]) < band
    for k in range(inside.size - run + 1):
        if inside[k : k + run].all():
            return k
    return int(acov.size - 1)


def lagged_gram(h: "np.ndarray | Tall", acov: np.ndarray) -> np.ndarray:
    """Σ_k γ_k Σ_n h_n h_{n+k}ᵀ over k = −K..K: hᵀ Σ h for Toeplitz Σ with autocovariance γ."""
    h = h if isinstance(h, Tall) else Tall.of(h)
    lags = min(acov.size - 1, h.n - 1)
    return np.tensordot(acov[: lags + 1], h.lag_grams(lags), axes=1)


def sandwich_covariance(r: np.ndarray, blocks: Sequence, models: dict, jac: "np.ndarray | Jacobian",
                        bread: np.ndarray, max_lag: int) -> tuple[np.ndarray, dict[str, int]] | None:
    """G Σ Gᵀ with Σ from each noise group's residual autocovariance (see module doc).

    Returns the covariance and, per noise group, the number of lags used; the
    estimate of Σ then carries about n/(2·lags + 1) degrees of freedom
    (M. B. Priestley, *Spectral Analysis and Time Series*, Academic Press 1981,
    §6.2.4, for the truncated lag window). The autocovariance is corrected for
    what the fit absorbed (:func:`fit_corrected_autocovariance`).

    The truncated autocovariance of the raw residuals is tried first. Its spectrum is
    accurate where the noise is strong and leaks into frequencies where the noise is weak;
    when the parameters' information lies there (a ring above the cut-off of smooth
    noise) the estimate can fail to be positive definite. Then the sandwich is formed
    from the whitened residuals instead, whose spectrum is nearly flat (prewhitening:
    D. W. K. Andrews and J. C. Monahan, Econometrica 60 (1992) 953–966), with the negative
    part of the estimated spectrum removed (:func:`positive_gram`). None when neither
    is positive definite.

    ``jac`` is the Jacobian of the residuals (rows as ``blocks`` in order) and
    ``bread`` = (J_wᵀJ_w)⁻¹ of its whitened form J_w.
    """
    jac = as_jacobian(jac)
    views = [_block_views(jac, b, models[b.group]) for b in blocks]
    cov, extents = _sandwich(r, [v[0] for v in views], [v[2] for v in views], blocks, bread, max_lag,
                             lagged_gram)
    if positive_definite(cov):
        return cov, extents
    white_r = np.concatenate([models[b.group].whiten(r[b.start:b.stop]) for b in blocks])
    cov, extents = _sandwich(white_r, [v[1] for v in views], [v[1] for v in views], blocks, bread, max_lag,
                             positive_gram)
    return (cov, extents) if positive_definite(cov) else None


def _block_views(jac: Jacobian, block, model) -> tuple[Tall, Tall, Tall]:
    """The block's rows of J, of W·J and of the influence Wᵀ·W·J: computed whole, on every
    parameter, for a small Jacobian (:func:`wavefit.fit.jacobian.is_small`); otherwise a chunk
    at a time when asked, on the parameters the block depends on."""
    n = block.stop - block.start
    if jac.small:
        rows = jac.toarray()[block.start:block.stop]
        white_rows = model.whiten(rows)
        return Tall.of(rows), Tall.of(white_rows), Tall.of(model.whiten_adjoint(white_rows))
    cols = jac.support(block.start, block.stop)

    def raw(a: int, b: int) -> np.ndarray:
        return jac.dense(block.start + a, block.start + b, cols)

    def white(a: int, b: int) -> np.ndarray:
        return model.whiten_rows(raw, n, a, b)

    def influence(a: int, b: int) -> np.ndarray:
        return model.adjoint_rows(white, n, a, b)

    influence_rows = Tall(influence, n, cols)
    if n * cols.size <= HELD_VALUES:
        influence_rows = influence_rows.held()
    return Tall(raw, n, cols), Tall(white, n, cols), influence_rows


def positive_definite(cov: np.ndarray) -> bool:
    """Positive definite, judged on the correlation matrix (free of the parameters' units)."""
    scale = np.sqrt(np.abs(np.diag(cov)))
    if not np.all(np.isfinite(cov)) or np.any(scale == 0):
        return False
    eig = np.linalg.eigvalsh(cov / np.outer(scale, scale))
    return bool(eig[0] > 1e-12 * eig[-1] and np.all(np.diag(cov) > 0))


def _embed(small: np.ndarray, columns: np.ndarray, p: int) -> np.ndarray:
    out = np.zeros((p, p))
    out[np.ix_(columns, columns)] = small
    return out


def _sandwich(r: np.ndarray, jacs: list[Tall], influence: list[Tall], blocks: Sequence, bread: np.ndarray,
              max_lag: int, gram: Callable) -> tuple[np.ndarray, dict[str, int]]:
    """bread·Σ_b gram(h_b, γ_group(b))·bread for residuals ``r`` whose linearised form is
    r = (I − J·bread·Hᵀ)·noise (J = ``jacs``, H the ``influence`` rows per block)."""
    p = bread.shape[0]
    extents: dict[str, int] = {}
    plain: dict[str, np.ndarray] = {}
    for g in sorted({b.group for b in blocks}):
        segs = [r[b.start:b.stop] for b in blocks if b.group == g]
        acov, n = autocovariance(segs, max_lag)
        k = correlation_extent(acov, n)
        lags = min(int(math.ceil(1.5 * k)) + 1, acov.size - 1)
        extents[g] = lags
        # lag products divided by the number of pairs (the pooled estimate divides by n)
        plain[g] = acov[: lags + 1] * n / np.maximum(n - np.arange(lags + 1) * len(segs), 1)
    acovs: dict[str, np.ndarray] = {}
    for g in plain:
        mine = [i for i, b in enumerate(blocks) if b.group == g]
        others = sum((_embed(lagged_gram(influence[i], plain[b.group]), influence[i].columns, p)
                      for i, b in enumerate(blocks) if b.group != g), np.zeros_like(bread))
        acovs[g] = fit_corrected_autocovariance(
            [r[blocks[i].start:blocks[i].stop] for i in mine], [jacs[i] for i in mine],
            [influence[i] for i in mine], bread, extents[g], plain[g], bread @ others @ bread)
    meat = sum((_embed(gram(h, acovs[b.group]), h.columns, p) for h, b in zip(influence, blocks)),
               np.zeros_like(bread))
    cov = bread @ meat @ bread
    return 0.5 * (cov + cov.T), extents


def positive_gram(h: "np.ndarray | Tall", acov: np.ndarray) -> np.ndarray:
    """hᵀ Σ h for the Toeplitz Σ of ``acov`` with the negative part of its spectrum removed.

    A truncated autocovariance estimate need not be positive semi-definite; where its
    spectrum S(ω) = γ_0 + 2·Σ γ_k cos(kω) dips below zero the sandwich can give a negative
    variance. Computed in the frequency domain on a grid of N ≥ n + lags points, where the
    circulant embedding makes Σ_k γ_k Σ_i h_i h_{i+k}ᵀ = (1/N)·Σ_l S(ω_l)·Re(ĥ_lᴴ ĥ_l) exact,
    with S replaced by max(S, 0): equal to :func:`lagged_gram` when the spectrum is nowhere
    negative, positive semi-definite always. (The positive-part correction of a lag-window
    spectral estimate: D. N. Politis, Econometric Theory 27 (2011) 703–744, cited from memory.)
    The columns' spectra are taken in groups of at most SPECTRA_BYTES.
    """
    h = h if isinstance(h, Tall) else Tall.of(h)
    n, lags, q = h.n, acov.size - 1, h.columns.size
    size = 1 << int(math.ceil(math.log2(n + lags + 1)))
    circular = np.zeros(size)
    circular[: lags + 1] = acov
    if lags:
        circular[-lags:] = acov[1:][::-1]
    spectrum = np.maximum(np.fft.rfft(circular).real, 0.0)
    weights = np.full(spectrum.size, 2.0)
    weights[0] = 1.0
    if size % 2 == 0:
        weights[-1] = 1.0
    weighted = weights * spectrum
    del circular, spectrum, weights
    per_group = max(1, SPECTRA_BYTES // (16 * weighted.size))
    groups = [np.arange(a, min(a + per_group, q)) for a in range(0, q, per_group)]
    out = np.zeros((q, q))
    for i, first in enumerate(groups):
        fa = _column_spectra(h, first, size)
        for second in groups[i:]:
            fb = fa if second is first else _column_spectra(h, second, size)
            block = ((fa.conj().T * weighted) @ fb).real / size
            out[np.ix_(first, second)] = block
            out[np.ix_(second, first)] = block.T
    return out


def _column_spectra(h: Tall, columns: np.ndarray, size: int) -> np.ndarray:
    """rfft over the rows of the given columns of h, zero-padded to ``size``."""
    values = np.empty((h.n, columns.size))
    for a in range(0, h.n, 1 << 16):
        values[a:a + (1 << 16)] = h.rows(a, min(a + (1 << 16), h.n))[:, columns]
    return np.fft.rfft(values, size, axis=0)


def fit_corrected_autocovariance(res: list[np.ndarray], jacs: list, infl: list, bread: np.ndarray, lags: int,
                                 fallback: np.ndarray, other_cov: np.ndarray) -> np.ndarray:
    """Noise autocovariance γ_0 … γ_lags from fit residuals, corrected for what the fit absorbed.

    Linearised, the residuals are r = (I − N)ε with N = J·(J_wᵀJ_w)⁻¹·Hᵀ (J the residual
    Jacobian, H = WᵀJ_w the influence rows), so the lag products P_k = Σ r_i r_{i+k} have
    expectation E[P_k] = Σ_j B_kj γ_j with
    B_kj = (n − k·blocks)·δ_kj − tr(U_k N T_j) + tr(½JᵀU_kJ · (J_wᵀJ_w)⁻¹HᵀT_jH(J_wᵀJ_w)⁻¹),
    T_j and U_k the symmetric lag-j and lag-k shift matrices (T_0 = I, U_0 = 2I). Solving
    B γ = P gives the unbiased estimate. The plain lag products fall short by the noise
    the fitted waveform absorbed, which for correlated noise is concentrated at the low
    frequencies that carry the parameters, so the plain sandwich read about 0.8 of the
    true standard error on a single exponential window in smooth band-limited noise.
    This is the regression-residual correction of the variance components (as in
    restricted maximum likelihood: H. D. Patterson and R. Thompson, Biometrika 58 (1971)
    545–554), applied to a truncated autocovariance. The blocks ``res``, ``jacs``, ``infl``
    (arrays, or :class:`Tall` matrices on the parameters they depend on) are one noise
    group's; ``other_cov`` is the part of the estimate's covariance due to the other
    groups' noise, whose lag products it also adds. ``fallback`` (the plain estimate) is
    returned when the system cannot be solved or gives a non-positive variance.
    """
    k_all = np.arange(lags + 1)
    products = np.zeros(lags + 1)
    system = np.zeros((lags + 1, lags + 1))
    # per block: its parameters, the lag Gram matrices of J (weighted ½ off lag 0) and of H
    grams: list[tuple[np.ndarray, np.ndarray, np.ndarray]] = []
    for r, jb, hb in zip(res, jacs, infl):
        jb, hb = _on_own_columns(jb, hb)
        cols = jb.columns
        n = r.size
        m = min(lags, n - 1)
        products[: m + 1] += lag_sums(r, 0.0, m)
        system[k_all[: m + 1], k_all[: m + 1]] += n - k_all[: m + 1]
        system[: m + 1, : m + 1] -= _shifted_traces(hb, jb.times(bread[np.ix_(cols, cols)]), m)
        a_k = jb.lag_grams(m) * np.where(k_all[: m + 1] == 0, 1.0, 0.5)[:, None, None]
        grams.append((cols, a_k, hb.lag_grams(m)))
    p = bread.shape[0]
    if (lags + 1) * p * p <= ALL_LAGS_VALUES:
        # all lags at once on every parameter (the order of summation the fits always had)
        a_all, g_all = np.zeros((lags + 1, p, p)), np.zeros((lags + 1, p, p))
        for cols, a_k, g in grams:
            block = np.ix_(np.arange(a_k.shape[0]), cols, cols)
            a_all[block] += a_k
            g_all[block] += g
        # Σ_ab A_k[a, b]·V_j[b, a] as one matrix product (einsum's loop took 30 ms at 1,000 lags)
        v_all = bread @ g_all @ bread
        system += a_all.reshape(lags + 1, -1) @ np.transpose(v_all, (0, 2, 1)).reshape(lags + 1, -1).T
        products -= np.einsum("kab,ba->k", a_all, other_cov)
    else:
        # the lags of H a chunk at a time (at most ALL_LAGS_VALUES values), each block's J on its
        # own parameters, the sums over parameter pairs as matrix products (one lag at a time,
        # an einsum per lag, took minutes at 1,000 lags on a spline of a few hundred coefficients)
        chunk = max(1, ALL_LAGS_VALUES // (p * p))
        for first in range(0, lags + 1, chunk):
            js = k_all[first:first + chunk]
            g_js = np.zeros((js.size, p, p))
            for cols, _, g in grams:
                held = js[js < g.shape[0]]
                g_js[np.ix_(held - first, cols, cols)] += g[held]
            v_js = bread @ g_js @ bread
            for cols, a_k, _ in grams:
                v_own = v_js[np.ix_(np.arange(js.size), cols, cols)]
                system[: a_k.shape[0], first:first + js.size] += (
                    a_k.reshape(a_k.shape[0], -1) @ np.transpose(v_own, (0, 2, 1)).reshape(js.size, -1).T)
        for cols, a_k, _ in grams:
            products[: a_k.shape[0]] -= np.einsum("kab,ba->k", a_k, other_cov[np.ix_(cols, cols)])
    try:
        gamma = np.linalg.solve(system, products)
    except np.linalg.LinAlgError:
        return fallback
    if not (np.all(np.isfinite(gamma)) and gamma[0] > 0):
        return fallback
    return gamma


def _on_own_columns(jb: "np.ndarray | Tall", hb: "np.ndarray | Tall") -> tuple[Tall, Tall]:
    """J and H of a block as :class:`Tall` matrices on the parameters either depends on
    (arrays, and matrices small enough to hold, are cut to their columns not all zero)."""
    if isinstance(jb, Tall) and isinstance(hb, Tall) and not is_small(jb.n, jb.columns.size):
        return jb, hb
    # a Tall matrix gathers only its own columns: keep their parameter numbers
    params = jb.columns if isinstance(jb, Tall) else np.arange(np.shape(jb)[1])
    if isinstance(hb, Tall) and not np.array_equal(hb.columns, params):
        raise ValueError("J and H of a block must be on the same parameters")
    jb = jb.gather() if isinstance(jb, Tall) else np.asarray(jb, dtype=float)
    hb = hb.gather() if isinstance(hb, Tall) else np.asarray(hb, dtype=float)
    keep = np.flatnonzero(np.any(jb != 0, axis=0) | np.any(hb != 0, axis=0))
    cols = params[keep]
    return (Tall(array_rows(jb[:, keep]), jb.shape[0], cols), Tall(array_rows(hb[:, keep]), hb.shape[0], cols))


def _shifted_traces(h: "np.ndarray | Tall", x: "np.ndarray | Tall", lags: int) -> np.ndarray:
    """⟨h, T_j U_k x⟩ (Frobenius) for j, k = 0 … lags (< len), as a (lags+1)² array [k, j].

    (T_j U_k x)_i is a sum of rows x_{i±j±k}, each present only where the intermediate
    index i±j lies inside the record. Each term is a whole-record cross product
    c(d) = Σ_i h_i·x_{i+d} (all offsets at once by FFT, a chunk of rows at a time) less,
    for x_{i+j−k} and x_{i−j+k}, the few products at the record's end or start that the
    intermediate index excludes."""
    h = h if isinstance(h, Tall) else Tall.of(h)
    x = x if isinstance(x, Tall) else Tall.of(x)
    n, m = h.n, lags
    cross = cross_products(h.rows, x.rows, n, h.columns.size, -2 * m, 2 * m)

    def whole(d):  # c(d) for |d| ≤ 2m
        return cross[d + 2 * m]

    def partial(first, descending):
        """Σ over rows i of first … first+m−1 of h_i·x_{i+d} for d = −m … m (rows [d + m]),
        running along the rows: ascending, or from the last row down when ``descending``.

        The products of the m rows of h with the 3m rows of x within reach come from one
        matrix product; the pairs i, i + d lie on its diagonals (rows of x outside the record
        are zeros, so their products are zero)."""
        hr = h.rows(first, first + m)
        lo = first - m                                    # the row of x of column 0
        xr = np.zeros((3 * m, hr.shape[1]))
        a, b = max(lo, 0), min(lo + 3 * m, n)
        xr[a - lo:b - lo] = x.rows(a, b)
        c = hr @ xr.T                                     # c[t, s] = h_{first+t}·x_{lo+s}
        step, size = c.strides[1], c.strides[0]
        # prod[t, d + m] = c[t, t + d + m]
        prod = as_strided(c, shape=(m, 2 * m + 1), strides=(size + step, step), writeable=False)
        if descending:
            prod = prod[::-1]
        running = np.zeros((m + 1, 2 * m + 1))
        for t in range(m):  # a row of offsets at a time (np.cumsum along this axis took 5x longer)
            np.add(running[t], prod[t], out=running[t + 1])
        return running.T

    head = partial(0, False)         # head[d, j] = Σ_{i<j}
    tail = partial(n - m, True)      # tail[d, j] = Σ_{i ≥ n−j}
    # the terms as (m+1)² views [k, j] of c and of head and tail (no index arrays)
    by_sum = sliding_window_view(cross[2 * m:], m + 1)               # c(j + k)
    by_sum_negative = sliding_window_view(cross[2 * m::-1], m + 1)   # c(−(j + k))
    by_difference = sliding_window_view(cross[m:3 * m + 1], m + 1)   # [a, b]: c(a + b − m)
    out = (by_sum + by_sum_negative
           + by_difference[::-1] - _diagonal_rows(tail)[::-1]       # x_{i+j−k}: i + j inside
           + by_difference[:, ::-1] - _diagonal_rows(head[::-1])[::-1])  # x_{i−j+k}: i − j inside
    # T_0 = I and U_0 = 2I: a lag of zero counts its one row once per side
    kk, jj = np.arange(m + 1), np.arange(1, m + 1)
    out[:, 0] = np.where(kk == 0, 2.0 * whole(0 * kk), whole(kk) + whole(-kk))
    out[0, 1:] = 2.0 * (whole(jj) + whole(-jj))
    return out


def _diagonal_rows(a: np.ndarray) -> np.ndarray:
    """The view v[r, j] = a[r + j, j] of a rows × cols array, for r = 0 … rows − cols: each row
    of v a diagonal of a, read down from a's row r."""
    rows, cols = a.shape
    return as_strided(a, shape=(rows - cols + 1, cols), strides=(a.strides[0], a.strides[0] + a.strides[1]),
                      writeable=False)
