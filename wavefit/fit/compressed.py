"""Least squares through the triangular factor of the whitened Jacobian.

A trust-region or Levenberg–Marquardt step depends on the residual f and its Jacobian J
only through JᵀJ, Jᵀf and ‖f‖ (J. J. Moré, "The Levenberg–Marquardt algorithm:
implementation and theory", in G. A. Watson (ed.), *Numerical Analysis*, Springer 1978,
105–116). With
the QR factorisation [J | f] = Q·[[R, a], [0, ρ]], the problem of p + 1 residuals
g = (a, ρ) with Jacobian (R; 0) has the same three, so a solver given it takes the same
steps as on the record itself while holding p + 1 rows instead of one per sample.

The factor is accumulated by sequential Householder QR (C. L. Lawson and R. J. Hanson,
*Solving Least Squares Problems*, Prentice-Hall 1974, ch. 27): the rows of each
:class:`~wavefit.fit.jacobian.Piece` of the Jacobian, whitened by the noise model of their
block, are reduced a chunk at a time to the triangle of the piece's r basis columns, which
its coefficient matrix then maps onto the parameters; the rows within an AR model's order
after a piece starts mix it with the piece before (or are the block's first rows, which the
Prais–Winsten transform mixes) and enter as dense rows. The pieces' triangles and those rows
are reduced together at the end.
"""
from __future__ import annotations

from typing import Callable, Sequence

import numpy as np
from scipy.linalg import lapack

from .jacobian import CHUNK_ELEMENTS, Jacobian, as_jacobian, row_chunks
from .noise_model import ARNoise


#: Rows are reduced this many values at a time (512 kB, within a core's cache): Householder
#: QR of a tall, narrow matrix sweeps every column once per reflection, so a block that stays
#: in cache is reduced several times faster than one that does not (10⁵ × 4 values: 1.0 ms
#: in blocks of 2¹⁶ values against 4.2 ms whole, one BLAS thread). Reducing block by block
#: (the factor so far stacked on the next block: the sequential QR of Lawson and Hanson)
#: gives the same factor to rounding.
BLOCK_VALUES = 1 << 16


class _Reducer:
    """Rows of a fixed width reduced to their upper triangular factor as they come.

    Rows come as a list of side-by-side column groups (the whitened Jacobian and right-hand
    side), which are copied once, straight into the column-major buffer that LAPACK reduces in
    place: stacking them first (numpy's hstack and vstack) and then letting numpy's qr copy
    them again into column-major order took a third of the time of a long fit's factor."""

    def __init__(self, width: int):
        self.width = width
        self.factor = np.zeros((0, width))
        self.pending: list[tuple[list[np.ndarray], float]] = []
        self.count = 0

    def add(self, groups: list[np.ndarray], divisor: float = 1.0) -> None:
        """Rows given as column groups of equal length whose widths add up to the width, each
        value divided by ``divisor`` as it is copied (a white noise model's whitening, which
        then costs no pass of its own over the rows)."""
        self.pending.append((groups, divisor))
        self.count += groups[0].shape[0]
        if self.count * self.width > CHUNK_ELEMENTS:
            self._reduce()

    def _reduce(self) -> None:
        if not self.pending:
            return
        block = max(self.width, BLOCK_VALUES // self.width)
        stacked = np.empty((self.width + block, self.width), order="F")
        entries = iter(self.pending)
        (groups, divisor), used = next(entries), 0  # the entry rows are taken from, and rows taken from it
        for a in range(0, self.count, block):
            k = self.factor.shape[0]
            m = k + min(block, self.count - a)
            # (a first or last block shorter than the buffer gets one of its own size: a slice
            # of the buffer is not contiguous, and LAPACK's wrapper would copy it)
            target = stacked if m == stacked.shape[0] else np.empty((m, self.width), order="F")
            target[:k] = self.factor
            row = k
            while row < m:
                take = min(m - row, groups[0].shape[0] - used)
                column = 0
                for g in groups:
                    if divisor == 1.0:
                        target[row:row + take, column:column + g.shape[1]] = g[used:used + take]
                    else:
                        np.divide(g[used:used + take], divisor, out=target[row:row + take, column:column + g.shape[1]])
                    column += g.shape[1]
                row += take
                used += take
                if used == groups[0].shape[0] and row < m:
                    (groups, divisor), used = next(entries), 0
            reduced, *_ = lapack.dgeqrf(target, overwrite_a=True)
            self.factor = np.triu(reduced[:min(self.width, m)])
        self.pending, self.count = [], 0

    def result(self) -> np.ndarray:
        """The square triangular factor (zero rows added when there were fewer rows than columns)."""
        self._reduce()
        out = np.zeros((self.width, self.width))
        out[: self.factor.shape[0]] = self.factor
        return out


def triangle(jac: "np.ndarray | Jacobian", rhs: "np.ndarray | Callable[[int, int], np.ndarray] | None",
             blocks: Sequence, models: dict[str, ARNoise]) -> np.ndarray:
    """Upper triangular T with TᵀT = [W·J | W·rhs]ᵀ[W·J | W·rhs], W each block's whitening.

    ``rhs`` (optional) has one row per row of ``jac`` and one or more columns, as an array
    or as a function giving its rows a..b; T is square of side p + (columns of ``rhs``).
    The blocks (``wavefit.fit.engine.Block``) must cover the rows."""
    jac = as_jacobian(jac)
    if rhs is not None and not callable(rhs):
        values = np.asarray(rhs, dtype=float).reshape(rhs.shape[0], -1)
        rhs = lambda a, b: values[a:b]  # noqa: E731 (rows of the array, as for a callable rhs)
    p, k = jac.params, 0 if rhs is None else rhs(0, 0).shape[1]
    total = _Reducer(p + k)
    for block in blocks:
        model = models[block.group]
        q, n = model.order, block.stop - block.start

        def both(rows, u, v):
            """Rows u..v of the block's J (through ``rows``) and of rhs, as column groups, and the
            divisor that whitens them: a white model's scale, else whitened already and 1."""
            if model.order == 0:
                parts = [rows(block.start + u, block.start + v)]
                if rhs is not None:
                    parts.append(rhs(block.start + u, block.start + v))
                return parts, model.sigma_e
            parts = [model.whiten_rows(lambda a, b: rows(block.start + a, block.start + b), n, u, v)]
            if rhs is not None:
                parts.append(model.whiten_rows(lambda a, b: rhs(block.start + a, block.start + b), n, u, v))
            return parts, 1.0

        pieces = list(jac.overlapping(block.start, block.stop))
        for pc, a, b in pieces:
            # rows of the piece at least q after its start see only its own rows through the filter
            r = pc.coefficients.shape[0]
            own = _Reducer(r + k)
            for lo, hi in row_chunks(a + q, b, r + k):
                own.add(*both(pc.basis, lo - block.start, hi - block.start))
            t = own.result()
            total.add([t[:, :r] @ pc.coefficients, t[:, r:]])
        # the first q rows after each piece starts: dense, through the whole whitening
        for lo, hi in _merged([(a, min(a + q, block.stop)) for _, a, _ in pieces]):
            for u, v in row_chunks(lo, hi, p + k):
                total.add(*both(jac.dense, u - block.start, v - block.start))
    return total.result()


def _merged(ranges: list[tuple[int, int]]) -> list[tuple[int, int]]:
    """Overlapping or touching (start, stop) ranges joined."""
    out: list[list[int]] = []
    for lo, hi in sorted(r for r in ranges if r[0] < r[1]):
        if out and lo <= out[-1][1]:
            out[-1][1] = max(out[-1][1], hi)
        else:
            out.append([lo, hi])
    return [(lo, hi) for lo, hi in out]


class TriangularProblem:
    """A least-squares problem handed to a solver as its triangular factor (module doc).

    ``fun(x)`` is the residual vector, ``jac(x)`` its Jacobian (an array or a
    :class:`~wavefit.fit.jacobian.Jacobian`); :meth:`residuals` and :meth:`jacobian` are
    what ``scipy.optimize.least_squares`` is given. The factor of the last point asked for
    is kept, since a solver asks for both at each accepted point."""

    def __init__(self, fun: Callable[[np.ndarray], np.ndarray], jac: Callable, blocks: Sequence,
                 models: dict[str, ARNoise]):
        self.fun, self.jac, self.blocks, self.models = fun, jac, blocks, models
        self._key: bytes | None = None
        self._factor = np.zeros((0, 0))

    def factor(self, x: np.ndarray) -> np.ndarray:
        """T of [W·J | W·f] at ``x``, (p + 1) square."""
        key = np.asarray(x, dtype=float).tobytes()
        if key != self._key:
            self._factor = triangle(self.jac(x), self.fun(x), self.blocks, self.models)
            self._key = key
        return self._factor

    def kept(self, x: np.ndarray) -> np.ndarray | None:
        """The factor at ``x`` when it is the one kept (the last point asked for), else None."""
        return self._factor if np.asarray(x, dtype=float).tobytes() == self._key else None

    def residuals(self, x: np.ndarray) -> np.ndarray:
        t = self.factor(x)
        p = t.shape[0] - 1
        return np.append(t[:p, p], abs(t[p, p]))

    def jacobian(self, x: np.ndarray) -> np.ndarray:
        t = self.factor(x)
        p = t.shape[0] - 1
        return np.vstack([t[:p, :p], np.zeros((1, p))])
