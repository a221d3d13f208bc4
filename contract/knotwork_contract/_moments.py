"""The moments kernel: centred co-moments of rows, their exact merge, pairwise deletion, and
the names of indicator columns.

The service summarizes the rows it receives with these functions, and the client summarizes
rows where they live with the same ones, so a summary sent by the client and the rows sent
whole meet the same arithmetic. numpy only.

References
----------
1. Chan, T. F., Golub, G. H., LeVeque, R. J. (1979). Updating formulae and a pairwise
   algorithm for computing sample variances. Stanford report STAN-CS-79-773.
2. Chan, T. F., Golub, G. H., LeVeque, R. J. (1983). Algorithms for computing the sample
   variance: analysis and recommendations. The American Statistician 37(3), 242-247.
"""

from __future__ import annotations

import contextlib
from collections.abc import Callable, Iterable, Sequence
from typing import NamedTuple, Protocol, Self, TypeVar

import numpy as np

__all__ = [
    "Moments",
    "NotFinite",
    "PairwiseMoments",
    "comoments",
    "correlation_from_comoments",
    "indicator_columns",
    "indicator_name",
    "merge_all",
    "pairwise_comoments",
    "sorted_levels",
]

#: Row blocks are centred and multiplied this many bytes at a time: large enough for BLAS to
#: run at full speed, small enough that the centred copy stays in cache-friendly, bounded memory.
_BLOCK_BYTES = 4 << 20


class NotFinite(ArithmeticError):
    """A value is missing or infinite (or a sum overflowed): summarize the checked way.

    Raised by :func:`comoments` with ``optimistic=True`` at the end of the row block holding
    the value; the caller checks its columns and calls again without ``optimistic``.
    """


class Moments(NamedTuple):
    """Moments of complete rows.

    Attributes
    ----------
    n
        Number of rows, or the sum of their frequency weights.
    mean
        Means, (q,).
    comoments
        Centred cross-products :math:`\\sum_i w_i (x_i - m)(x_i - m)^\\top`, (q, q).
    """

    n: float
    mean: np.ndarray
    comoments: np.ndarray

    @classmethod
    def empty(cls, q: int) -> Moments:
        """The moments of no rows over ``q`` columns (the identity of :meth:`merge`)."""
        return cls(0.0, np.zeros(q), np.zeros((q, q)))

    def merge(self, other: Moments) -> Moments:
        """The moments of both parts' rows together, exactly (no raw sums of squares).

        Notes
        -----
        For parts A and B with weights :math:`n_A, n_B`, means :math:`m_A, m_B` and centred
        co-moments :math:`C_A, C_B`, with :math:`\\delta = m_B - m_A`:

        .. math::

            n = n_A + n_B, \\quad m = m_A + \\delta \\, n_B / n, \\quad
            C = C_A + C_B + \\delta \\delta^\\top \\, n_A n_B / n

        Implementation: the pairwise update of Chan, Golub & LeVeque (1979). A part with
        ``n == 0`` leaves the other unchanged (a copy of it is returned).
        """
        na, ma, ca = self
        nb, mb, cb = other
        n = na + nb
        if na == 0:
            return Moments(nb, mb.copy(), cb.copy())
        if nb == 0:
            return Moments(na, ma.copy(), ca.copy())
        delta = mb - ma
        mean = ma + delta * (nb / n)
        com = ca + cb + np.outer(delta, delta) * (na * nb / n)
        return Moments(n, mean, com)


class PairwiseMoments(NamedTuple):
    """Moments of every pair of columns, each pair on the rows where both are observed.

    Attributes
    ----------
    n
        ``n[i, j]``: weight (or count) of the rows where columns i and j are both observed.
    mean
        ``mean[i, j]``: mean of column i over those rows.
    comoments
        ``comoments[i, j]``: centred co-moment of columns i and j over those rows.
    squares
        ``squares[i, j]``: centred sum of squares of column i over those rows.

    Entries of a pair observed on no row (``n[i, j] == 0``) are zero.
    """

    n: np.ndarray
    mean: np.ndarray
    comoments: np.ndarray
    squares: np.ndarray

    @classmethod
    def empty(cls, q: int) -> PairwiseMoments:
        """The moments of no rows over ``q`` columns (the identity of :meth:`merge`)."""
        z = np.zeros((q, q))
        return cls(z, z.copy(), z.copy(), z.copy())

    @property
    def complete(self) -> bool:
        """Whether every pair was seen on the same rows (no value was missing)."""
        return bool(np.all(self.n == self.n.flat[0])) if self.n.size else True

    def merge(self, other: PairwiseMoments) -> PairwiseMoments:
        """The moments of both parts' rows together: the update of :meth:`Moments.merge`,
        run for every pair of columns on that pair's own weights and means."""
        n = self.n + other.n
        has = n > 0
        share = np.divide(other.n, n, out=np.zeros_like(n), where=has)
        cross = np.divide(self.n * other.n, n, out=np.zeros_like(n), where=has)
        delta = other.mean - self.mean
        mean = self.mean + delta * share
        com = self.comoments + other.comoments + delta * delta.T * cross
        sq = self.squares + other.squares + delta * delta * cross
        return PairwiseMoments(n, mean, com, sq)

    def correlation(self) -> np.ndarray:
        """Pearson correlations, each from its pair's rows: ``C_ij / sqrt(S_ij S_ji)``.

        Not clipped and not checked: a pair with no spread gives NaN or an infinity, and the
        matrix need not be positive semi-definite.
        """
        with np.errstate(divide="ignore", invalid="ignore"):
            # The square roots first: the product of two large sums of squares can overflow.
            root = np.sqrt(self.squares)
            corr: np.ndarray = self.comoments / (root * root.T)
            return corr


def _gram(
    columns: Sequence[np.ndarray],
    w: np.ndarray | None,
    n: int,
    step: int,
    optimistic: bool,
    between_blocks: Callable[[], object] | None,
) -> tuple[float, np.ndarray, np.ndarray]:
    """Total, shift and the shifted cross-products with a column of ones (or sqrt(w))
    appended: the row-block work of :func:`comoments` (``optimistic`` needs ``w`` None)."""
    q = len(columns)
    if optimistic:
        total = float(n)
        # Any shift gives the same co-moments in exact arithmetic; rounding grows with
        # ((mean - shift) / sd)^2, which for the mean of b of n rows is at most n / b - 1
        # (Cauchy-Schwarz), so about 100 eps at a million rows even when the rows are sorted.
        mean = np.array([np.add.reduce(c[:step]) / max(1, min(step, n)) for c in columns])
    elif w is None:
        total = float(n)
        mean = np.array([np.mean(c) for c in columns])
    else:
        total = float(np.sum(w))
        mean = np.array([np.dot(w, c) for c in columns]) / total
    gram = np.zeros((q + 1, q + 1))
    # Fortran order: gathering a column into the block is one contiguous copy (measured
    # 1.6x faster than a C-order block at n = 100k, p = 50), and BLAS takes either layout.
    # The extra last column holds 1 (or sqrt(w)), so one symmetric product yields the
    # co-moments, the residual sums of the centred values and the total at once.
    block = np.empty((min(step, n), q + 1), order="F")
    block[:, q] = 1.0
    for start in range(0, n, step):
        if between_blocks is not None:
            between_blocks()
        stop = min(start + step, n)
        b = block[: stop - start]
        for j, c in enumerate(columns):
            np.subtract(c[start:stop], mean[j], out=b[:, j])
        if w is not None:
            root = np.sqrt(w[start:stop])
            b[:, :q] *= root[:, None]
            b[:, q] = root
        gram += b.T @ b
        # A NaN or an infinity in a column makes its diagonal entry NaN or infinite.
        if optimistic and not np.isfinite(np.diagonal(gram)).all():
            raise NotFinite
    return total, mean, gram


def comoments(
    columns: Sequence[np.ndarray],
    weights: np.ndarray | None = None,
    keep: np.ndarray | None = None,
    *,
    optimistic: bool = False,
    block_bytes: int | None = None,
    between_blocks: Callable[[], object] | None = None,
) -> Moments:
    """Weighted total, means and centred co-moments of equal-length columns.

    Parameters
    ----------
    columns
        The q columns, 1-D float arrays of equal length, with no missing value among the rows
        kept (unless ``optimistic``).
    weights
        Non-negative frequency weights, one per row, or None (every row counts once).
    keep
        Boolean mask of the rows to use, or None for every row.
    optimistic
        Without weights only: take the values as finite without looking at them, and raise
        :class:`NotFinite` when one is not (ignored with weights).
    block_bytes
        Size of a row block in bytes (default 4 MiB).
    between_blocks
        Called before each row block (a cooperative stop may raise from it).

    Returns
    -------
    Moments
        With ``n`` the number of rows kept or the sum of their weights.

    Raises
    ------
    NotFinite
        With ``optimistic``, when a value (or a sum) is not finite.

    Notes
    -----
    With a shift :math:`s`, :math:`y_i = x_i - s`, :math:`W = \\sum_i w_i` and the residual
    sums :math:`r = \\sum_i w_i y_i`:

    .. math::

        m = s + r / W, \\qquad C = \\sum_i w_i y_i y_i^\\top - r r^\\top / W

    exact for any shift; the rounding grows with :math:`((m - s) / sd)^2`. One symmetric
    product of the block :math:`[\\sqrt{w} \\circ y, \\sqrt{w}]` gives both sums and
    :math:`W` at once.

    Verification: against numpy's covariance, and against exact rational arithmetic on
    Longley shifted by 1e6 (tests/core, tests/client).

    Implementation: row blocks are gathered from the columns (Fortran order), centred by the
    shift and multiplied; the residual sums then correct the mean and the co-moments (the
    corrected two-pass algorithm of Chan, Golub & LeVeque 1983), so a column whose mean is
    large against its spread keeps its digits. Raw sums of squares never appear, and no copy
    of the whole table is made: memory beyond the columns is one block. The shift is the mean
    from a first pass over the columns, or, when ``optimistic`` (no weights, every row kept,
    the values not yet checked), the mean of the first row block: then the rows are read once,
    and a value that is not finite raises :class:`NotFinite` at the end of the block that
    holds it, for the caller to check the columns and start again.

    References
    ----------
    1. Chan, T. F., Golub, G. H., LeVeque, R. J. (1983). Algorithms for computing the sample
       variance: analysis and recommendations. The American Statistician 37(3), 242-247.
    """
    q = len(columns)
    w = weights
    if keep is not None and keep.all():
        keep = None
    if keep is not None:
        columns = [c[keep] for c in columns]
        w = None if w is None else w[keep]
    n = columns[0].shape[0] if q else 0
    size = _BLOCK_BYTES if block_bytes is None else block_bytes
    step = max(1, size // (8 * (q + 1)))
    optimistic = optimistic and w is None
    # Unchecked values may hold NaN or infinities; _gram finds them, so numpy's
    # floating-point warnings would only be noise.
    with np.errstate(invalid="ignore", over="ignore") if optimistic else contextlib.nullcontext():
        total, mean, gram = _gram(columns, w, n, step, optimistic, between_blocks)
    com = gram[:q, :q]
    resid = gram[:q, q].copy()
    com -= np.outer(resid, resid) / total
    mean = mean + resid / total
    com = (com + com.T) * 0.5
    return Moments(total, mean, com)


def correlation_from_comoments(com: np.ndarray) -> np.ndarray:
    """Correlations from centred co-moments, clipped to [-1, 1] with a unit diagonal.

    A variable with no spread gets zero correlations here (its caller decides whether that
    is an error).
    """
    d = np.sqrt(np.diag(com))
    d = np.where(d > 0, d, 1.0)
    r: np.ndarray = com / np.outer(d, d)
    r = (r + r.T) * 0.5
    np.clip(r, -1.0, 1.0, out=r)
    np.fill_diagonal(r, 1.0)
    return r


def pairwise_comoments(x: np.ndarray, weights: np.ndarray | None = None) -> PairwiseMoments:
    """Pairwise-deletion moments: every pair of columns on the rows where both are observed.

    Parameters
    ----------
    x
        Rows by columns, (n, q); NaN marks a missing value.
    weights
        Non-negative frequency weights, one per row (NaN counts as 0), or None.

    Returns
    -------
    PairwiseMoments

    Notes
    -----
    With :math:`o_{ki}` = 1 when column i is observed in row k, and :math:`y_{ki} = x_{ki} -
    s_i` (0 where not observed), per pair: :math:`n_{ij} = \\sum_k w_k o_{ki} o_{kj}`, the
    sums :math:`a_{ij} = \\sum_k w_k y_{ki} o_{kj}`, and

    .. math::

        C_{ij} = \\sum_k w_k y_{ki} y_{kj} - a_{ij} a_{ji} / n_{ij}, \\qquad
        S_{ij} = \\sum_k w_k y_{ki}^2 o_{kj} - a_{ij}^2 / n_{ij}, \\qquad
        m_{ij} = s_i + a_{ij} / n_{ij}

    Implementation: the shift :math:`s_i` is column i's mean over its observed rows, so the
    sums work on values of the order of the spread, not of the mean; four matrix products
    give every pair at once. A column observed on no row is shifted by 0.
    """
    present = ~np.isnan(x)
    wt = np.ones(x.shape[0]) if weights is None else np.where(np.isnan(weights), 0.0, weights)
    shift = np.array(
        [np.average(x[present[:, j], j]) if present[:, j].any() else 0.0 for j in range(x.shape[1])]
    )
    x0 = np.where(present, x - shift, 0.0)
    pm = present.astype(float)
    pw = pm * wt[:, None]
    xw = x0 * wt[:, None]
    counts = pw.T @ pm  # n_ij: weight of rows where both i and j are present
    sums = xw.T @ pm  # sum of x_i over rows where j is present too
    squares = (x0 * xw).T @ pm  # sum of x_i^2 over rows where j is present too
    cross = xw.T @ x0  # sum of x_i x_j over joint rows
    has = counts > 0
    with np.errstate(divide="ignore", invalid="ignore"):
        com = np.where(has, cross - sums * sums.T / counts, 0.0)
        sq = np.where(has, squares - sums**2 / counts, 0.0)
        mean = np.where(has, shift[:, None] + sums / counts, 0.0)
    return PairwiseMoments(counts, mean, com, sq)


class _Mergeable(Protocol):
    def merge(self, other: Self, /) -> Self: ...


_M = TypeVar("_M", bound=_Mergeable)


def merge_all(parts: Sequence[_M]) -> _M:
    """Merge parts by a balanced tree of pairwise merges: ``(0, 1), (2, 3), ...``, then the
    results the same way, an odd last part carried up a level. ``parts`` must not be empty.

    A balanced tree keeps each part's weight in the rounding to O(log k) merges of k parts.
    """
    level = list(parts)
    while len(level) > 1:
        nxt = [level[i].merge(level[i + 1]) for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    return level[0]


def indicator_name(variable: str, level: str) -> str:
    """The name of the indicator column of one level of a categorical variable:
    ``variable[level]``."""
    return f"{variable}[{level}]"


def sorted_levels(labels: Iterable[str | None]) -> tuple[str, ...]:
    """The distinct labels, sorted; missing labels (None) left out. The first is the
    reference level."""
    return tuple(sorted({s for s in labels if s is not None}))


def indicator_columns(variable: str, levels: Sequence[str]) -> tuple[str, ...]:
    """The indicator columns of a categorical variable with these sorted ``levels``: one per
    level after the first (the reference, which has none)."""
    return tuple(indicator_name(variable, level) for level in levels[1:])
