"""The inverse of a correlation matrix over a shrinking set of columns, kept by lazy downdates.

Dropping columns from a matrix updates the inverse of the rest by the partitioned-inverse formula
(the sweep operator run backwards, Goodnight 1979) instead of inverting again: O(p s) per drop
for s stored downdate rows instead of O(p^3). The engine re-inverts from the matrix when the
downdate's magnitudes say its accuracy is in doubt, and a final check compares what it gives
with a fresh inverse. The removal sequence (``_removal``) decides what to drop.

References
----------
.. [1] Goodnight, J. H. (1979). A tutorial on the SWEEP operator. The American Statistician
   33(3), 149-158.
"""

from __future__ import annotations

import math
from collections.abc import Callable

import numpy as np
import scipy.linalg

from ._linalg import inverse_spd

#: Accuracy test of the downdate. Every diagonal entry of the kept inverse is the difference
#: ``a_jj = a0_jj - sum_k u_kj^2`` of the entry at the last factorization and the downdates
#: since. Its rounding error is about ``eps * m_j`` with ``m_j = a0_jj + sum_k u_kj^2``, and it
#: inherits the error of the factorization, about ``eps * max_i a0_ii`` in every entry (the
#: scale of the largest VIF then). With ``e_j = max(m_j, max_i a0_ii)``, the remaining matrix
#: is inverted again from M when for some remaining j both ``e_j > GROWTH_LIMIT * a_jj`` (a
#: relative error that may exceed about 1e-10) and ``e_j > EXCESS_LIMIT * max_i a_ii`` (an error
#: well above the eps * max_i a_ii that a fresh inverse of the remaining matrix has anyway, so
#: a protected, ill-conditioned pair that stays does not force re-inversion at every step).
GROWTH_LIMIT = 1e6
EXCESS_LIMIT = 1e3

#: After the sequence, the inflations of the kept set are recomputed from a fresh inverse; if
#: they differ from the downdated ones by more than this (relative), the whole sequence is run
#: again with a fresh inverse after every drop (the naive method) and a note says so.
CHECK_RTOL = 1e-7

#: The stored downdates are folded into an explicit inverse of the remaining columns (one
#: matrix product giving the same numbers, so no change in accuracy) once the remaining
#: columns are this fraction of those stored: column fetches then touch a smaller matrix.
#: Tuned with bench/bench_removal.py.
COMPACT_AT = 0.75


class DowndatedInverse:
    """The inverse of M over the active columns, kept lazily as ``A0 - Ut' Ut``.

    ``A0`` is the inverse at the last factorization, held in a local index space (the columns
    active then); every drop of a set T appends the rows ``L^-1 A_{T,:}`` (L the Cholesky factor
    of ``A_TT``) to ``Ut``, which is the partitioned-inverse downdate
    ``A <- A - A_{:,T} A_TT^-1 A_{T,:}`` (the sweep operator run backwards). Only the diagonal is
    kept current; a column is fetched with one matrix-vector product over the stored rows.
    Dropped entries of the diagonal are set to infinity (and their magnitudes to 0) so that
    whole-vector operations need no mask.
    """

    def __init__(
        self,
        m: np.ndarray,
        active: np.ndarray,
        r: np.ndarray | None,
        inverse: np.ndarray | None = None,
    ) -> None:
        self.m = m
        self.r = r
        self.p = m.shape[0]
        self.refactorizations = 0
        self._factor(active, inverse)

    def _factor(self, active: np.ndarray, inverse: np.ndarray | None = None) -> None:
        idx = np.flatnonzero(active)
        if inverse is None:
            inverse = inverse_spd(self.m[np.ix_(idx, idx)])
        mag = np.diag(inverse).copy()
        self.scale0 = float(mag.max()) if mag.size else 1.0
        self._reset(idx, np.ascontiguousarray(inverse), mag)

    def _reset(self, idx: np.ndarray, a0: np.ndarray, mag: np.ndarray) -> None:
        q = idx.shape[0]
        self.idx = idx
        self.loc = np.full(self.p, -1, dtype=np.intp)
        self.loc[idx] = np.arange(q)
        self.on = np.ones(q, dtype=bool)
        self.remaining = q
        self.a0 = a0
        self.ut = np.empty((q, q))
        self.s = 0
        self.diag = np.diag(a0).copy()
        self.mag = mag
        self.r_loc = self.r[idx] if self.r is not None else None
        self.b = a0 @ self.r_loc if self.r_loc is not None else None

    @property
    def stored(self) -> int:
        """Dimension of the local index space (columns active at the last reset)."""
        return int(self.idx.shape[0])

    def refactor(self, active: np.ndarray) -> None:
        self._factor(active)
        self.refactorizations += 1

    def compact(self) -> None:
        """Form the current inverse over the active columns and restart the stored rows there.

        The same numbers as the lazy form (so no change in accuracy: the magnitudes are carried
        over), but later column fetches touch a smaller matrix.
        """
        lk = np.flatnonzero(self.on)
        u = self.ut[: self.s][:, lk]
        a = self.a0[np.ix_(lk, lk)] - u.T @ u
        self._reset(self.idx[lk], a, self.mag[lk])

    def vif(self, cols: np.ndarray) -> np.ndarray:
        vifs: np.ndarray = self.diag[self.loc[cols]]
        return vifs

    def columns(self, cols: np.ndarray) -> np.ndarray:
        """Current columns of the inverse for global ``cols``, shape (q, len(cols)), local rows."""
        lc = self.loc[cols]
        out: np.ndarray = self.a0[lc].T
        if self.s:
            top = self.ut[: self.s]
            out = out - top.T @ top[:, lc]
        return out

    def block(self, cols: np.ndarray) -> np.ndarray:
        lc = self.loc[cols]
        out = self.a0[np.ix_(lc, lc)]
        if self.s:
            top = self.ut[: self.s][:, lc]
            out = out - top.T @ top
        return out

    def drop(self, cols: np.ndarray) -> None:
        lc = self.loc[cols]
        d = lc.shape[0]
        if d == 1:
            lj = int(lc[0])
            w = self.a0[lj].copy()
            if self.s:
                top = self.ut[: self.s]
                w -= top.T @ top[:, lj]
            pivot = w[lj]
            if not pivot > 0.0:
                raise np.linalg.LinAlgError("non-positive pivot in the downdate")
            u = (w / math.sqrt(pivot))[None, :]
        else:
            w = self.columns(cols)
            chol = scipy.linalg.cholesky(w[lc], lower=True)
            u = scipy.linalg.solve_triangular(chol, w.T, lower=True)
        self.ut[self.s : self.s + d] = u
        self.s += d
        sq = np.einsum("ij,ij->j", u, u)
        self.diag -= sq
        self.mag += sq
        self.diag[lc] = np.inf
        self.mag[lc] = 0.0
        self.on[lc] = False
        self.remaining -= d
        if self.b is not None and self.r_loc is not None:
            self.b -= u.T @ (u @ self.r_loc)
            self.b[lc] = 0.0

    def remove(self, cols: np.ndarray, active: np.ndarray, growth_limit: float) -> None:
        """Drop global ``cols``, re-inverting when the downdate fails or its accuracy is in doubt.

        ``active`` is the mask of the columns that remain (``cols`` already cleared in it), the
        set a re-inversion starts from. Otherwise the stored downdates are folded into an
        explicit inverse once the remaining columns are ``COMPACT_AT`` of those stored.
        """
        try:
            self.drop(cols)
        except (np.linalg.LinAlgError, ValueError):
            self.refactor(active)
        if self.in_doubt(growth_limit):
            self.refactor(active)
        elif self.s and self.remaining <= COMPACT_AT * self.stored:
            self.compact()

    def in_doubt(self, growth_limit: float) -> bool:
        """Whether the downdated diagonal may have lost accuracy a fresh inverse would keep.

        The error scale of entry j is the larger of its magnitude ``m_j`` (rounding in the
        downdates) and the largest diagonal entry at the last factorization (errors of a
        computed inverse are about eps times its norm, in every entry). It is in doubt when
        that scale exceeds both ``growth_limit`` times the entry and ``EXCESS_LIMIT`` times the
        largest current entry (the error scale a fresh inverse of the remaining matrix has).
        """
        if growth_limit <= 1.0:
            return True
        smallest = float(self.diag.min())  # dropped entries are +inf
        if smallest <= 0.0:
            return True
        if max(float(self.mag.max()), self.scale0) <= growth_limit * smallest:
            return False  # the common case: no entry can be in doubt
        largest = float(np.max(self.diag, where=self.on, initial=0.0))
        scale = np.maximum(self.mag, self.scale0)
        bound = np.maximum(growth_limit * self.diag, EXCESS_LIMIT * largest)
        return bool(np.any(scale > bound))

    def r_squared(self) -> float | None:
        if self.b is None or self.r_loc is None:
            return None
        return float(self.r_loc @ self.b)


def agrees_with_fresh(
    m: np.ndarray,
    active: np.ndarray,
    downdated: np.ndarray,
    measure: Callable[[DowndatedInverse], np.ndarray],
    growth_limit: float,
) -> bool:
    """The final check: values from the downdated inverse against those from a fresh one.

    ``measure`` computes the values (for the removal sequence, the kept units' inflations) from
    an inverse; it is applied to a fresh inverse of the ``active`` columns of ``m`` and the
    result must agree with ``downdated`` to ``CHECK_RTOL`` (relative). The naive method
    (``growth_limit`` at most 1, a fresh inverse after every drop) passes by construction.
    """
    fresh = measure(DowndatedInverse(m, active, None))
    return bool(np.allclose(fresh, downdated, rtol=CHECK_RTOL, atol=0.0) or growth_limit <= 1.0)
