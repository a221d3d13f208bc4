"""The shared eigen-decomposition of a correlation matrix and exact linear dependencies."""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import numpy as np
import scipy.linalg

from knotwork_contract import Dependency

from ._linalg import inverse_spd

#: Eigenvalues at or below ``NULL_RTOL * largest eigenvalue`` span the null space: the design has
#: an exact linear dependency there. A Gram matrix computed in double precision carries errors of
#: about ``p * eps * lambda_max`` (1e-14 for p = 50), so the cut sits four orders above that and
#: two below a "near" dependency with VIF 1e8 (smallest eigenvalue about 1e-8).
NULL_RTOL = 1e-10

#: A matrix whose smallest eigenvalue is below ``NEAR_SINGULAR_RTOL`` times its largest is
#: near-singular (VIFs of order 1e8 and more): the answer warns that it is sensitive to the data.
NEAR_SINGULAR_RTOL = 1e-8

#: A variable takes part in an exact dependency when its row of an orthonormal null-space basis
#: has at least this Euclidean norm (a basis-free test: the norm is the same for every basis).
INVOLVED_TOL = 1e-6


@dataclass(frozen=True, slots=True, eq=False)
class Spectrum:
    """Eigen-decomposition of a symmetric unit-diagonal matrix, largest eigenvalue first.

    Attributes
    ----------
    values
        Eigenvalues in decreasing order, shape (p,).
    vectors
        Orthonormal eigenvectors as columns, in the same order, shape (p, p).
    null_dim
        How many eigenvalues are at or below ``NULL_RTOL * values[0]`` (exact dependencies).
    """

    values: np.ndarray
    vectors: np.ndarray
    null_dim: int

    @classmethod
    def of(cls, matrix: np.ndarray) -> Spectrum:
        values, vectors = np.linalg.eigh(matrix)
        values = values[::-1].copy()
        vectors = vectors[:, ::-1].copy()
        null_dim = int(np.count_nonzero(values <= NULL_RTOL * values[0]))
        return cls(values=values, vectors=vectors, null_dim=null_dim)

    @property
    def null_basis(self) -> np.ndarray:
        """Orthonormal basis of the (numerical) null space as columns, shape (p, null_dim)."""
        p = self.values.shape[0]
        return self.vectors[:, p - self.null_dim :]


def clearly_regular_inverse(matrix: np.ndarray) -> np.ndarray | None:
    """The inverse of a unit-diagonal matrix that is provably neither singular nor near it.

    Returns None when the Cholesky factorization fails or the bound below cannot rule out an
    eigenvalue under ``NEAR_SINGULAR_RTOL`` times the largest; the caller then computes the
    spectrum. A small request that asks for VIFs alone is answered without an
    eigen-decomposition this way, which for p = 20 is most of its numerical work.

    Notes
    -----
    For a symmetric positive-definite M with unit diagonal, the largest eigenvalue is at most
    trace(M) = p and the smallest is 1 / lambda_max(M^-1) >= 1 / trace(M^-1) = 1 / sum(VIF).
    So ``p * sum(VIF) * NEAR_SINGULAR_RTOL < 1/2`` places the smallest eigenvalue above twice
    both cuts (``NULL_RTOL`` and ``NEAR_SINGULAR_RTOL`` times the largest); the factor 2 covers
    the rounding of the computed trace, which is relatively of order p * eps * cond(M).
    """
    p = matrix.shape[0]
    if p == 0:
        return None
    try:
        inverse = inverse_spd(matrix)
    except np.linalg.LinAlgError:
        return None
    total = float(np.trace(inverse))
    if not math.isfinite(total) or p * total * NEAR_SINGULAR_RTOL >= 0.5:
        return None
    return inverse


@dataclass(frozen=True, slots=True, eq=False)
class DependencyReport:
    """Exact dependencies of a design, as found from the null space of its correlation matrix.

    Attributes
    ----------
    involved
        Boolean mask over the predictors: True where the variable takes part in a relation.
    redundant
        Indices of one variable per relation (the relation's first variable); dropping them
        leaves a set of predictors with no exact dependency and the same span.
    relations
        The relations, one per dimension of the null space.
    """

    involved: np.ndarray
    redundant: tuple[int, ...]
    relations: tuple[Dependency, ...]

    @classmethod
    def none(cls, p: int) -> DependencyReport:
        """The report of a design with no exact dependency among its ``p`` predictors."""
        return cls(involved=np.zeros(p, dtype=bool), redundant=(), relations=())

    @property
    def independent(self) -> np.ndarray:
        """Indices of the predictors kept when the redundant ones are dropped."""
        keep = np.ones(self.involved.shape[0], dtype=bool)
        keep[list(self.redundant)] = False
        return np.flatnonzero(keep)


def _clean(x: float) -> float:
    """Round values within 1e-12 of an integer to it; relations are often integral."""
    r = round(x)
    return float(r) if abs(x - r) <= 1e-12 * max(1.0, abs(x)) else float(x)


def find_dependencies(
    spectrum: Spectrum,
    names: Sequence[str],
    *,
    sds: np.ndarray | None = None,
    means: np.ndarray | None = None,
) -> DependencyReport:
    """Name the exact linear dependencies among predictors.

    Parameters
    ----------
    spectrum
        Eigen-decomposition of the predictors' correlation (or cosine) matrix.
    names
        Predictor names, in matrix order.
    sds, means
        Standard deviations and means of the predictors, when known, to state each relation
        in original units as well.

    Returns
    -------
    DependencyReport

    Notes
    -----
    Let :math:`N` be an orthonormal basis of the null space (eigenvectors with eigenvalues at or
    below ``NULL_RTOL`` times the largest). Variable *j* is involved when
    :math:`\\lVert N^\\top e_j \\rVert \\ge` ``INVOLVED_TOL``; this does not depend on the basis.
    Individual relations come from a column-pivoted QR of :math:`N^\\top`: the pivot columns
    :math:`P` are the best-conditioned choice of variables to express through the others, and
    :math:`N_P^{-\\top} N^\\top` has the identity on them, one relation per row. On the
    standardized scale a relation :math:`\\sum_j w_j z_j = 0` becomes
    :math:`\\sum_j (w_j / s_j) x_j - \\sum_j w_j m_j / s_j = 0` in original units.

    Verification: tests build designs with known relations (``x3 = x1 + 2 x2``, several
    independent relations at once, a relation broken in one row only) and check the sets, the
    weights (to 1e-9) and that near-dependencies are not reported.

    Implementation: eigen-decomposition via LAPACK ``syevd`` (numpy), pivoted QR via
    ``scipy.linalg.qr(pivoting=True)``.
    """
    p = len(names)
    d = spectrum.null_dim
    if d == 0:
        return DependencyReport(np.zeros(p, dtype=bool), (), ())
    basis = spectrum.null_basis  # (p, d)
    involved = np.linalg.norm(basis, axis=1) >= INVOLVED_TOL
    _, _, piv = scipy.linalg.qr(basis.T, mode="economic", pivoting=True)
    pivots = np.sort(piv[:d])
    coeffs = np.linalg.solve(basis[pivots, :].T, basis.T)  # (d, p): identity on pivot columns
    relations = []
    for row, pivot in zip(coeffs, pivots, strict=True):
        members = [int(pivot)] + [
            j
            for j in range(p)
            if j != pivot and involved[j] and abs(row[j]) >= INVOLVED_TOL and j not in pivots
        ]
        weights = tuple(_clean(row[j] / row[pivot]) for j in members)
        raw_w: tuple[float, ...] | None = None
        raw_c: float | None = None
        if sds is not None:
            scaled = np.array([row[j] / sds[j] for j in members])
            scaled = scaled / scaled[0]
            raw_w = tuple(_clean(v) for v in scaled)
            if means is not None:
                raw_c = _clean(-float(np.dot(scaled, means[members])))
        relations.append(
            Dependency(
                variables=tuple(names[j] for j in members),
                weights=weights,
                raw_weights=raw_w,
                raw_constant=raw_c,
            )
        )
    return DependencyReport(
        involved=involved, redundant=tuple(int(i) for i in pivots), relations=tuple(relations)
    )
