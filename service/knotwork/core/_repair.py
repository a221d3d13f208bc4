"""Nearest correlation matrix in the Frobenius norm (Higham 2002)."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from knotwork.core._dependencies import NULL_RTOL

from ._interrupt import checkpoint


@dataclass(frozen=True, slots=True)
class Repair:
    """How a matrix was moved to the nearest correlation matrix.

    Attributes
    ----------
    distance
        Frobenius norm of the change, :math:`\\lVert \\hat C - A \\rVert_F`, with A the symmetric
        part of the given matrix.
    iterations
        Alternating-projection sweeps made (0 when the matrix was already a valid correlation
        matrix and was returned unchanged).
    min_eigenvalue_before
        Smallest eigenvalue of the given matrix (negative when it was indefinite).
    min_eigenvalue_after
        Smallest eigenvalue of the repaired matrix (zero up to rounding, as a rule).
    singular
        True when the repaired matrix has a numerically zero eigenvalue (at or below
        ``NULL_RTOL`` times the largest), which is the usual outcome: the nearest correlation
        matrix lies on the boundary of the cone.
    converged
        True when the iteration met ``tol`` within ``max_iterations``; when False the result is
        still a valid correlation matrix, but not necessarily the nearest one.
    """

    distance: float
    iterations: int
    min_eigenvalue_before: float
    min_eigenvalue_after: float
    singular: bool
    converged: bool


def _project_psd(matrix: np.ndarray) -> np.ndarray:
    """Nearest positive semi-definite matrix: negative eigenvalues set to zero."""
    values, vectors = np.linalg.eigh(matrix)
    kept = np.maximum(values, 0.0)
    projected = (vectors * kept) @ vectors.T
    symmetric: np.ndarray = 0.5 * (projected + projected.T)
    return symmetric


def _unit_diagonal_congruence(matrix: np.ndarray) -> np.ndarray:
    """Scale a PSD matrix to unit diagonal, :math:`D^{-1/2} X D^{-1/2}`, keeping it PSD."""
    scale = 1.0 / np.sqrt(np.diag(matrix))
    scaled = matrix * np.outer(scale, scale)
    scaled = 0.5 * (scaled + scaled.T)
    np.fill_diagonal(scaled, 1.0)
    return scaled


def nearest_correlation(
    matrix: np.ndarray, *, tol: float = 1e-12, max_iterations: int = 10_000
) -> tuple[np.ndarray, Repair]:
    """The nearest correlation matrix to a symmetric matrix, in the Frobenius norm.

    Parameters
    ----------
    matrix
        Symmetric matrix, shape (p, p), usually an indefinite "correlation" matrix (from
        pairwise deletion or rounding). Only its symmetric part is used.
    tol
        Stop when the relative changes of both iterates between sweeps, and their relative
        difference, are all at or below ``tol``.
    max_iterations
        Upper bound on the sweeps; the function never raises on non-convergence but reports
        ``converged=False``.

    Returns
    -------
    repaired : numpy.ndarray
        Exactly symmetric, exactly unit-diagonal, positive semi-definite (up to rounding).
    repair : Repair
        The distance moved, the iterations and the smallest eigenvalues before and after.

    Raises
    ------
    ValueError
        When the matrix is not square or not finite (a programming error: the input was
        validated before it got here).

    Notes
    -----
    Solves :math:`\\min \\lVert A - X \\rVert_F` over :math:`X \\succeq 0` with
    :math:`\\operatorname{diag}(X) = 1`, the intersection of the PSD cone :math:`S` and the
    affine set :math:`U` of unit-diagonal matrices, by alternating projections with Dykstra's
    correction :math:`\\Delta S`:

    .. math::

        R_k = Y_{k-1} - \\Delta S_{k-1}, \\quad X_k = P_S(R_k), \\quad
        \\Delta S_k = X_k - R_k, \\quad Y_k = P_U(X_k),

    from :math:`Y_0 = A`, :math:`\\Delta S_0 = 0`. :math:`P_S` sets negative eigenvalues to
    zero; :math:`P_U` sets the diagonal to one. The iterates converge to the unique nearest
    correlation matrix, linearly. The last :math:`X_k` is PSD but has a diagonal within
    ``tol`` of one; it is scaled to an exact unit diagonal by the congruence
    :math:`D^{-1/2} X_k D^{-1/2}` (which keeps it PSD), moving it by about ``tol``.

    The nearest correlation matrix of an indefinite matrix is usually singular: report the
    distance moved and treat the repaired matrix as having an exact dependency.

    A matrix that is already symmetric with unit diagonal and no negative eigenvalue is
    returned unchanged, with distance 0 and no iterations. Distances are measured from the
    symmetric part :math:`(A + A^\top)/2` of the input.

    Verification: Higham's worked 3 x 3 example; the optimum is also checked independently by
    ``scipy.optimize`` minimisation of the Frobenius distance over correlation matrices
    parametrised by Cholesky factors with unit-norm rows (to 1e-6); a valid matrix comes back
    unchanged; Longley's correlation matrix rounded to two decimals (indefinite) comes back
    PSD with smallest eigenvalue at or above -1e-12.

    Implementation: Higham's Algorithm 3.3 with unit weights (W = I), eigen-decomposition by
    LAPACK ``syevd`` (``numpy.linalg.eigh``), one per sweep: :math:`O(p^3)` per sweep.

    References
    ----------
    .. [1] Higham, N. J. (2002). Computing the nearest correlation matrix: a problem from
       finance. *IMA Journal of Numerical Analysis* 22(3), 329-343.
    .. [2] Boyle, J. P. and Dykstra, R. L. (1986). A method for finding projections onto the
       intersection of convex sets in Hilbert spaces. In *Advances in Order Restricted
       Statistical Inference*, Springer, 28-47 (details from memory).
    """
    a = np.asarray(matrix, dtype=float)
    if a.ndim != 2 or a.shape[0] != a.shape[1]:
        raise ValueError(f"matrix must be square, got shape {a.shape}")
    if not np.all(np.isfinite(a)):
        raise ValueError("matrix must be finite")
    a = 0.5 * (a + a.T)
    before = float(np.linalg.eigvalsh(a)[0])

    if before >= 0.0 and np.all(np.diag(a) == 1.0):
        after_values = np.linalg.eigvalsh(a)
        return a.copy(), Repair(
            distance=0.0,
            iterations=0,
            min_eigenvalue_before=before,
            min_eigenvalue_after=before,
            singular=bool(after_values[0] <= NULL_RTOL * after_values[-1]),
            converged=True,
        )

    y = a.copy()
    x = a.copy()
    correction = np.zeros_like(a)
    converged = False
    iterations = 0
    while iterations < max_iterations:
        checkpoint()
        iterations += 1
        x_old, y_old = x, y
        r = y - correction
        x = _project_psd(r)
        correction = x - r
        y = x.copy()
        np.fill_diagonal(y, 1.0)
        # ||Y||_F >= sqrt(p) > 0 (unit diagonal), so it is a safe scale for all three changes.
        y_norm = np.linalg.norm(y)
        change = max(
            np.linalg.norm(x - x_old) / y_norm,
            np.linalg.norm(y - y_old) / y_norm,
            np.linalg.norm(y - x) / y_norm,
        )
        if change <= tol:
            converged = True
            break

    # x is PSD with a diagonal close to one; a congruence makes the diagonal exact and keeps
    # it PSD. A diagonal entry can only vanish if the input row was degenerate beyond repair;
    # then the unit-diagonal iterate (within tol of PSD after convergence) is the answer.
    repaired = _unit_diagonal_congruence(x) if np.all(np.diag(x) > 0.0) else y
    after_values = np.linalg.eigvalsh(repaired)
    return repaired, Repair(
        distance=float(np.linalg.norm(repaired - a)),
        iterations=iterations,
        min_eigenvalue_before=before,
        min_eigenvalue_after=float(after_values[0]),
        singular=bool(after_values[0] <= NULL_RTOL * after_values[-1]),
        converged=converged,
    )
