"""Jacobians of long records, stored by pieces and evaluated a chunk of rows at a time.

A least-squares Jacobian J (one row per residual, one column per parameter) of a long
record is mostly structure. The rows of an exponential window depend on its three
parameters only; a segment of a square-wave relaxation depends on every parameter
before it, but only through three functions of time. So J is stored as pieces,

    J[start:stop] = B(start, stop) · C,   B: rows × r, evaluated on demand;  C: r × p,

and every product the fit needs (JᵀJ, Jᵀv, the triangular factor, a block of rows for
the covariance sandwich) is accumulated over chunks of a few megabytes. Memory then
grows with the record's length only through the residual vectors, whatever the number
of parameters, and the work with r rather than p columns per row where the pieces
allow it. This is the block-angular structure of least-squares problems whose
observations fall into groups that share few parameters (Å. Björck, *Numerical Methods
for Least Squares Problems*, SIAM 1996, §6.3), with each group factored first.

A Jacobian of at most DENSE_VALUES values is also used as one dense array, its products
taken in the order the fits used before long records were handled (there the dense rows
are the faster). The solvers stop where a step no longer lowers the sum of squares by more
than its rounding (for an exponential window typically within 1e-10 of tau), so any other
order of the same arithmetic moves a result by that much (:func:`is_small`).
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Callable, Iterator

import numpy as np

#: A chunk holds about this many values (4 MB of float64), whatever its number of columns.
CHUNK_ELEMENTS = 1 << 19
#: A Jacobian of at most this many values (512 kB) is handled as one dense array (module
#: doc). Above it the solver's own work on the dense rows (an SVD of the whole Jacobian and
#: its column norms at every step, lmfit's scaled copy of it) costs more than reducing the
#: rows to their triangular factor (fit/compressed.py), even though every residual
#: evaluation then builds the factor: an exponential window of 10⁴ samples on two channels
#: (10⁵ values) is fitted 1.7x faster, of 10⁵ samples 1.9x, one channel of 3·10⁴ samples
#: 1.6x; below about 3·10⁴ values the dense rows are the faster (measured with one BLAS
#: thread: ``benchmarks/dense_threshold_time.py``).
#: Until 2026-12 the bound was 2²⁰ values; the fits between the two bounds moved by the
#: rounding of the other order of arithmetic (at most 8e-11 relative on the bundled samples).
DENSE_VALUES = 1 << 16


def is_small(rows: int, columns: int) -> bool:
    """Whether a rows × columns least-squares problem is solved on its dense rows (module doc)."""
    return rows * columns <= DENSE_VALUES


def chunk_rows(columns: int) -> int:
    """Rows per chunk for a matrix of ``columns`` columns."""
    return max(64, CHUNK_ELEMENTS // max(columns, 1))


def row_chunks(start: int, stop: int, columns: int) -> Iterator[tuple[int, int]]:
    """Consecutive (a, b) ranges covering start..stop, each of :func:`chunk_rows` rows at most."""
    step = chunk_rows(columns)
    for a in range(start, stop, step):
        yield a, min(a + step, stop)


@dataclass(frozen=True)
class Piece:
    """Rows ``start:stop`` of a Jacobian: ``basis(a, b) @ coefficients`` for any a..b inside.

    ``basis(a, b)`` returns the values of r functions on rows a..b (absolute row numbers),
    shape (b − a, r); ``coefficients`` (r × p) maps them onto the parameters."""

    start: int
    stop: int
    basis: Callable[[int, int], np.ndarray]
    coefficients: np.ndarray

    @property
    def support(self) -> np.ndarray:
        """The parameters these rows depend on (columns of ``coefficients`` not all zero)."""
        return np.flatnonzero(np.any(self.coefficients != 0, axis=0))


class Jacobian:
    """A Jacobian of ``rows`` rows as consecutive :class:`Piece` objects that cover them."""

    def __init__(self, rows: int, pieces: list[Piece] | tuple[Piece, ...], array: np.ndarray | None = None,
                 negated: bool = False):
        self.rows = int(rows)
        self.pieces = tuple(pieces)
        self.params = int(self.pieces[0].coefficients.shape[1]) if self.pieces else 0
        self._array = array
        self._negated = negated  # dense values are the negated sums of the un-negated pieces
        edges = [0] + [x for pc in self.pieces for x in (pc.start, pc.stop)] + [self.rows]
        if any(a != b for a, b in zip(edges[::2], edges[1::2])):
            raise ValueError("the pieces of a Jacobian must cover its rows in order, without gaps")

    @classmethod
    def from_array(cls, array: np.ndarray) -> "Jacobian":
        """One piece holding a dense array (rows × parameters)."""
        array = np.asarray(array, dtype=float)
        return cls(array.shape[0], [Piece(0, array.shape[0], lambda a, b: array[a:b], np.eye(array.shape[1]))],
                   array)

    @property
    def small(self) -> bool:
        """Whether its products are taken on the dense array (:func:`is_small`)."""
        return is_small(self.rows, self.params)

    def toarray(self) -> np.ndarray:
        """The whole Jacobian as a dense array."""
        return self._array if self._array is not None else self.dense(0, self.rows)

    def negated(self) -> "Jacobian":
        """−J (the Jacobian of the residual data − model from the model's); its dense values
        are those of J negated, zeros included."""
        return Jacobian(self.rows, [Piece(pc.start, pc.stop, pc.basis, -pc.coefficients) for pc in self.pieces],
                        None if self._array is None else -self._array, not self._negated)

    def mapped(self, matrix: np.ndarray) -> "Jacobian":
        """J·matrix (``matrix``: parameters × new parameters), the Jacobian in new parameters
        of which the old are functions (the chain rule), kept in pieces."""
        matrix = np.asarray(matrix, dtype=float)
        return Jacobian(self.rows, [Piece(pc.start, pc.stop, pc.basis, pc.coefficients @ matrix) for pc in self.pieces],
                        None if self._array is None else self._array @ matrix, self._negated)

    def restricted(self, start: int, stop: int) -> "Jacobian":
        """Rows start..stop as a Jacobian of their own (row 0 is row ``start``)."""
        return Jacobian(stop - start, [
            Piece(a - start, b - start, lambda u, v, pc=pc: pc.basis(u + start, v + start), pc.coefficients)
            for pc, a, b in self.overlapping(start, stop)], None, self._negated)

    def overlapping(self, start: int, stop: int) -> Iterator[tuple[Piece, int, int]]:
        """The pieces that hold rows of start..stop, each with the rows (a, b) it holds there."""
        for pc in self.pieces:
            a, b = max(pc.start, start), min(pc.stop, stop)
            if a < b:
                yield pc, a, b

    def support(self, start: int, stop: int) -> np.ndarray:
        """The parameters that rows start..stop depend on."""
        cols = [pc.support for pc, _, _ in self.overlapping(start, stop)]
        return np.unique(np.concatenate(cols)) if cols else np.zeros(0, dtype=int)

    def dense(self, start: int, stop: int, columns: np.ndarray | None = None) -> np.ndarray:
        """Rows start..stop as a dense array, restricted to ``columns`` when given.

        Each value is the sum of its nonzero terms basis_r·coefficient_r in the order of r
        (not a matrix product, whose order of summation is the library's), and a parameter
        that a piece does not depend on is an exact +0: a piece whose basis holds a fit's
        own terms gives the values, and the signs of their zeros, that the fit computed
        before (LAPACK's Householder reflections take the sign of a leading zero)."""
        width = self.params if columns is None else len(columns)
        out = np.zeros((stop - start, width))
        for pc, a, b in self.overlapping(start, stop):
            coef = pc.coefficients if columns is None else pc.coefficients[:, columns]
            if self._negated:
                coef = -coef
            x = pc.basis(a, b)
            rows = out[a - start:b - start]
            seen = np.zeros(width, dtype=bool)
            for r in range(coef.shape[0]):
                nz = np.flatnonzero(coef[r])
                first, later = nz[~seen[nz]], nz[seen[nz]]
                rows[:, first] = x[:, r:r + 1] * coef[r, first]
                rows[:, later] += x[:, r:r + 1] * coef[r, later]
                seen[nz] = True
        return -out if self._negated else out

    def rmatvec(self, v: np.ndarray, mask: np.ndarray | None = None) -> np.ndarray:
        """Jᵀ·v, over the rows where ``mask`` is true when it is given."""
        v = np.asarray(v, dtype=float)
        if self.small:
            j = self.toarray()
            return j.T @ v if mask is None else j[mask].T @ v[mask]
        if mask is not None:
            v = np.where(mask, v, 0.0)
        out = np.zeros(self.params)
        for pc in self.pieces:
            acc = 0.0
            for a, b in row_chunks(pc.start, pc.stop, pc.coefficients.shape[0]):
                acc = acc + pc.basis(a, b).T @ v[a:b]
            out += pc.coefficients.T @ acc
        return out

    def weighted_gram(self, weights: np.ndarray) -> np.ndarray:
        """Jᵀ·diag(weights)·J."""
        if self.small:
            j = self.toarray()
            return j.T @ (weights[:, None] * j)
        out = np.zeros((self.params, self.params))
        for pc in self.pieces:
            r = pc.coefficients.shape[0]
            acc = np.zeros((r, r))
            for a, b in row_chunks(pc.start, pc.stop, r):
                x = pc.basis(a, b)
                acc += x.T @ (weights[a:b, None] * x)
            out += pc.coefficients.T @ acc @ pc.coefficients
        return out


def as_jacobian(jac: "np.ndarray | Jacobian") -> Jacobian:
    """``jac`` as a :class:`Jacobian` (a dense array becomes one piece)."""
    return jac if isinstance(jac, Jacobian) else Jacobian.from_array(jac)
