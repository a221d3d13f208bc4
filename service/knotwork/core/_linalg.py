"""Small dense linear-algebra helpers shared by the diagnostics."""

from __future__ import annotations

import numpy as np
import scipy.linalg


def inverse_spd(a: np.ndarray) -> np.ndarray:
    """Inverse of a symmetric positive-definite matrix through its Cholesky factor.

    Raises
    ------
    numpy.linalg.LinAlgError
        When the matrix is not (numerically) positive definite.

    Notes
    -----
    LAPACK ``dpotrf`` then ``dpotri``: half the work of a general inverse, and backward stable.
    """
    if a.shape[0] == 0:
        return np.zeros((0, 0))
    c, info = scipy.linalg.lapack.dpotrf(a, lower=False)
    if info != 0:
        raise np.linalg.LinAlgError("matrix is not positive definite")
    inv, info = scipy.linalg.lapack.dpotri(c, lower=False)
    if info != 0:  # pragma: no cover - dpotrf succeeded, so dpotri cannot fail
        raise np.linalg.LinAlgError("inversion failed")
    full: np.ndarray = np.triu(inv) + np.triu(inv, 1).T
    return full


def logdet_spd(a: np.ndarray) -> float:
    """Log-determinant of a symmetric positive-definite matrix, from its Cholesky factor.

    Never forms the determinant itself, which underflows for ill-conditioned matrices.
    """
    if a.shape[0] == 0:
        return 0.0
    c, info = scipy.linalg.lapack.dpotrf(a, lower=False)
    if info != 0:
        raise np.linalg.LinAlgError("matrix is not positive definite")
    return float(2.0 * np.sum(np.log(np.diag(c))))
