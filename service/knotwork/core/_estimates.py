"""Summaries of a fitted model's estimates: the covariance of its coefficients.

A model fitted elsewhere (least squares, a GLM, a survival or mixed model, with model-based,
robust or clustered standard errors) is described by the covariance of its estimates alone;
no rows or moments of the data need to leave where the model was fitted.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence

import numpy as np

from knotwork_contract import escape as esc

from ._dependencies import INVOLVED_TOL, NULL_RTOL
from ._errors import InputError, MatrixError, Problem, TooFewDataError
from ._linalg import inverse_spd
from ._summary import INTERCEPT_NAME, Summary
from ._validation import (
    MATRIX_ATOL,
    REPAIR_POLICIES,
    check_names,
    check_policy,
    check_symmetric,
    check_terms,
    n_value,
    square_matrix,
    validated_correlation,
)

__all__ = ["from_estimates"]


def _unit_diagonal(a: np.ndarray) -> np.ndarray:
    """``a`` scaled to unit diagonal, :math:`D^{-1/2} A D^{-1/2}` (exact ones on the diagonal)."""
    d = np.sqrt(np.diag(a))
    scaled: np.ndarray = a / np.outer(d, d)
    scaled = 0.5 * (scaled + scaled.T)
    np.fill_diagonal(scaled, 1.0)
    return scaled


def _singular(c: np.ndarray, names: tuple[str, ...], repaired: bool) -> MatrixError | None:
    """An error naming the coefficients of a (numerically) singular correlation of estimates."""
    # Eigenvalues alone (a fraction of the work) settle the usual case; vectors only to name
    # the coefficients of a singular matrix.
    values = np.linalg.eigvalsh(c)
    if values[0] > NULL_RTOL * values[-1]:
        return None
    values, vectors = np.linalg.eigh(c)
    null = values <= NULL_RTOL * values[-1]
    involved = np.linalg.norm(vectors[:, null], axis=1) >= INVOLVED_TOL
    which = ", ".join(repr(names[j]) for j in np.flatnonzero(involved))
    start = "after the repair, the" if repaired else "the"
    reason = (
        f"{start} covariance of the estimates is singular: a combination of {which} has no "
        "variance, so the estimates' correlation cannot be inverted. Aliased coefficients (an "
        "exact dependency in the design) or a clustered covariance with fewer clusters than "
        "coefficients give such a matrix; refit without the aliased coefficients, or send the "
        "design itself (rows or moments)"
    )
    return MatrixError(reason, [Problem("/covariance", reason)])


def from_estimates(
    names: Sequence[str],
    covariance: object,
    intercept: str | None,
    *,
    terms: Mapping[str, Sequence[str]] | None = None,
    n: float | None = None,
    repair: str = "reject",
) -> Summary:
    """Summarize from the covariance of a fitted model's estimates (Fox & Monette 1992).

    Parameters
    ----------
    names
        Coefficient names, one per row and column of ``covariance`` (the intercept included
        when the model has one).
    covariance
        Covariance matrix of the estimates: square, symmetric, positive definite.
    intercept
        The intercept's name (one of ``names``), left out of the diagnostics; None when the
        model has no intercept.
    terms
        Optional term name to its columns (coefficient names), for generalized VIFs.
    n
        Optional number of observations behind the fit (must exceed the predictors); without
        it the sections that need it are skipped.
    repair
        ``"reject"`` (default) or ``"nearest"`` for a matrix that is not positive
        semi-definite; a repaired matrix that is singular is still refused.

    Returns
    -------
    Summary
        ``correlation`` is the predictors' correlation the estimates imply,
        :math:`R = \\operatorname{normalize}(C^{-1})`, and ``implied_design`` the implied
        cross-products with the intercept (the conditioning basis ``"estimates"``).

    Raises
    ------
    InputError, MatrixError, TooFewDataError, OptionError

    Notes
    -----
    With :math:`V` the covariance of the estimates, :math:`D = \\operatorname{diag}(V)^{-1/2}`
    and :math:`C = D V D` their correlation with the intercept's row and column left out, Fox
    & Monette (1992) give

    .. math::

        \\mathrm{VIF}_j = [C^{-1}]_{jj}, \\qquad
        \\mathrm{GVIF}_J = \\det C_{JJ} \\, \\det C_{-J,-J} / \\det C.

    The core's diagnostics work on the design's correlation :math:`R` and compute
    :math:`\\mathrm{VIF}_j = [R^{-1}]_{jj}`. With :math:`R = \\operatorname{normalize}(C^{-1})
    = E C^{-1} E`, :math:`E = \\operatorname{diag}(C^{-1})^{-1/2}`, one has
    :math:`R^{-1} = E^{-1} C E^{-1}`, so :math:`[R^{-1}]_{jj} = [C^{-1}]_{jj}`; the GVIF is
    the same from :math:`R` as from :math:`C`, since :math:`\\det (R^{-1})_{JJ} = \\det
    R_{-J,-J} / \\det R` and the scalings cancel. For least squares,
    :math:`V = \\sigma^2 (X^\\top X)^{-1}`, and the slopes' block of it is
    :math:`\\sigma^2 (X_c^\\top X_c)^{-1}` (partitioned inverse, :math:`X_c` the centred
    design), so :math:`R` is exactly the centred design's correlation, and the inverse of the
    whole :math:`V` scaled to unit diagonal is the design's cross-products with every column
    (the constant included) scaled to unit length, the matrix Belsley, Kuh & Welsch decompose.
    For a GLM fitted by IRLS, the same holds for the design weighted at the fit. Without an
    intercept the matrix is the cosine matrix of the uncentred design.

    Verification: tests against statsmodels: OLS ``cov_params()`` on Longley's data gives
    the centred design's correlation (1e-10) and VIFs; a logit fit's ``cov_params()`` on the
    Spector & Mazzeo data gives VIFs computed in the test from :math:`C^{-1}`.

    Implementation: the correlation of all estimates is checked like a correlation matrix
    (symmetry relative to the variances, positive semi-definiteness or the nearest-matrix
    repair), then refused when singular (eigenvalues at or below 1e-10 of the largest); both
    inverses are Cholesky inverses.

    References
    ----------
    .. [1] Fox, J. and Monette, G. (1992). Generalized collinearity diagnostics. *Journal of
       the American Statistical Association* 87(417), 178-183.
    .. [2] Belsley, D. A., Kuh, E. and Welsch, R. E. (1980). *Regression Diagnostics*. Wiley,
       chapter 3.
    """
    check_policy(repair, REPAIR_POLICIES, "/repair")
    all_names = check_names(list(names), "/names")
    q = len(all_names)
    if intercept is not None:
        if not isinstance(intercept, str) or intercept not in all_names:
            raise InputError.at(
                "/intercept",
                f"intercept names {intercept!r}, which is not in names; give the name of the "
                "intercept coefficient, or null when the model has none",
            )
        const = all_names.index(intercept)
        slopes = [i for i in range(q) if i != const]
    else:
        slopes = list(range(q))
    predictors = tuple(all_names[i] for i in slopes)
    if len(predictors) < 2:
        raise TooFewDataError.at(
            "/names",
            f"at least two coefficients besides the intercept are needed; got {len(predictors)}",
        )
    v = square_matrix(covariance, q, "/covariance", "the covariance matrix")
    variances = np.diag(v)
    bad = np.flatnonzero(variances <= 0)
    if bad.size:
        problems = [
            Problem(
                f"/covariance/{j}/{j}",
                f"the variance of {all_names[j]!r} must be positive; a coefficient with no "
                "variance was not estimated (drop it, or send the covariance of the estimated "
                "ones)",
            )
            for j in bad
        ]
        raise MatrixError(problems[0].reason, problems)
    # Scaled one side at a time, so that tiny variances cannot underflow a product d_i d_j to
    # zero; an entry far above its variances overflows to infinity and is refused below.
    d = np.sqrt(variances)
    with np.errstate(over="ignore", under="ignore"):
        c = (v / d[:, None]) / d[None, :]
    outside = np.argwhere(~np.isfinite(c))
    if not outside.size:
        c = check_symmetric(c, "/covariance")
        np.fill_diagonal(c, 1.0)
        outside = np.argwhere(np.abs(c) > 1.0 + MATRIX_ATOL)
    if outside.size:
        i, j = sorted(int(k) for k in outside[0])
        raise MatrixError.at(
            f"/covariance/{i}/{j}",
            f"the covariance of {all_names[i]!r} and {all_names[j]!r} exceeds the square root "
            f"of the product of their variances (a correlation of {c[i, j]:.6g}); the matrix "
            "cannot be a covariance",
        )
    c, rep, notes = validated_correlation(c, "/covariance", repair)
    error = _singular(c, all_names, rep is not None)
    if error is not None:
        raise error
    nval = math.nan if n is None else n_value(n, len(predictors), "/n")
    if terms and intercept is not None:
        for tname, cols in terms.items():
            for i, col in enumerate(cols):
                if col == intercept:
                    raise InputError.at(
                        f"/terms/{esc(tname)}/{i}",
                        f"term {tname!r} names the intercept {intercept!r}, which is left out "
                        "of the diagnostics",
                    )
    term_list = check_terms(terms, predictors)
    # Both inverses exist: c passed the singularity test (smallest eigenvalue above 1e-10 of
    # the largest), so its Cholesky factor and that of any principal block exist.
    order = ([const] if intercept is not None else []) + slopes
    cross = _unit_diagonal(inverse_spd(c[np.ix_(order, order)]))
    r = _unit_diagonal(inverse_spd(c[np.ix_(slopes, slopes)]))
    cross_names = ((INTERCEPT_NAME,) if intercept is not None else ()) + predictors
    return Summary(
        names=predictors,
        n=nval,
        correlation=r,
        terms=term_list,
        input_kind="estimates",
        notes=tuple(notes),
        repair=rep,
        sources=tuple(f"/covariance/{i}/{i}" for i in slopes),
        implied_design=(cross, cross_names),
    )
