"""Summaries of matrices: a correlation matrix with its sample size, moments (n, means and a
covariance matrix), and partial moments of disjoint parts of the data, merged exactly.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import replace

import numpy as np

from knotwork_contract import Moments, correlation_from_comoments, merge_all

from ._errors import InputError, MatrixError, TooFewDataError
from ._summary import Summary
from ._validation import (
    MATRIX_ATOL,
    REPAIR_POLICIES,
    check_correlation_entries,
    check_names,
    check_policy,
    check_symmetric,
    check_terms,
    n_value,
    square_matrix,
    validated_correlation,
)


def from_correlation(
    names: Sequence[str],
    matrix: object,
    n: float,
    *,
    response: tuple[str, Sequence[float]] | None = None,
    terms: Mapping[str, Sequence[str]] | None = None,
    repair: str = "reject",
) -> Summary:
    """Summarize from a correlation matrix and its sample size.

    Parameters
    ----------
    names
        Predictor names, one per row and column of ``matrix``.
    matrix
        Square, symmetric, unit-diagonal correlation matrix of the predictors.
    n
        Number of observations behind the matrix (must exceed the number of predictors).
    response
        Optional ``(name, correlations with each predictor)``.
    terms
        Optional term name to its columns, for generalized VIFs.
    repair
        ``"reject"`` (default) or ``"nearest"`` for a matrix that is not positive semi-definite.

    Raises
    ------
    InputError, MatrixError, TooFewDataError, OptionError
    """
    check_policy(repair, REPAIR_POLICIES, "/repair")
    names = check_names(list(names), "/names")
    p = len(names)
    if p < 2:
        raise TooFewDataError.at("/names", f"at least two predictors are needed; got {p}")
    r = square_matrix(matrix, p, "/matrix", "the correlation matrix")
    r = check_symmetric(r, "/matrix")
    check_correlation_entries(r, "/matrix")
    np.fill_diagonal(r, 1.0)
    nval = n_value(n, p, "/n")
    term_list = check_terms(terms, names)
    resp_name = None
    if response is not None:
        resp_name, corr = response
        if resp_name in names:
            raise InputError.at("/response/name", "the response cannot also be a predictor")
        c = np.asarray(list(corr), dtype=float)
        if c.shape != (p,):
            raise InputError.at(
                "/response/correlations",
                f"expected {p} correlations (one per predictor); got {c.shape[0] if c.ndim else 1}",
            )
        if not np.isfinite(c).all():
            j = int(np.flatnonzero(~np.isfinite(c))[0])
            raise InputError.at(f"/response/correlations/{j}", "must be a finite number")
        if (np.abs(c) > 1.0 + MATRIX_ATOL).any():
            j = int(np.flatnonzero(np.abs(c) > 1.0 + MATRIX_ATOL)[0])
            raise MatrixError.at(
                f"/response/correlations/{j}", "correlations must lie between -1 and 1 inclusive"
            )
        full = np.empty((p + 1, p + 1))
        full[:p, :p] = r
        full[:p, p] = full[p, :p] = np.clip(c, -1.0, 1.0)
        full[p, p] = 1.0
        r = full
    r, rep, notes = validated_correlation(r, "/matrix", repair)
    return Summary(
        names=names,
        n=nval,
        correlation=r,
        response=resp_name,
        terms=term_list,
        input_kind="correlation",
        notes=tuple(notes),
        repair=rep,
    )


def _moment_part(q: int, n: object, means: object, covariance: object, base: str) -> Moments:
    """One part's (n, means, covariance), checked, as moments (co-moments: covariance x (n - 1))."""
    if isinstance(n, bool) or not isinstance(n, int | float | np.integer | np.floating):
        raise InputError.at(f"{base}/n", "n must be a number (observations or sum of weights)")
    nval = float(n)
    if not math.isfinite(nval) or nval < 1:
        raise InputError.at(f"{base}/n", "n must be a finite number of at least 1")
    m = np.asarray(list(means) if not isinstance(means, np.ndarray) else means, dtype=float)  # type: ignore[call-overload]
    if m.shape != (q,):
        raise InputError.at(f"{base}/means", f"expected {q} means (one per name)")
    if not np.isfinite(m).all():
        j = int(np.flatnonzero(~np.isfinite(m))[0])
        raise InputError.at(f"{base}/means/{j}", "means must be finite numbers")
    cov = square_matrix(covariance, q, f"{base}/covariance", "the covariance matrix")
    d = np.sqrt(np.abs(np.diag(cov)))
    cov = check_symmetric(cov, f"{base}/covariance", np.where(d > 0, d, 1.0))
    neg = np.flatnonzero(np.diag(cov) < 0)
    if neg.size:
        j = int(neg[0])
        raise MatrixError.at(f"{base}/covariance/{j}/{j}", "variances cannot be negative")
    with np.errstate(over="ignore"):
        com = cov * (nval - 1.0)
    if not np.isfinite(com).all():
        j = int(np.argmax(np.diag(cov)))
        raise InputError.at(
            f"{base}/covariance/{j}/{j}",
            "this variance times n - 1 overflows double precision; rescale the variable, for "
            "example to other units",
        )
    return Moments(nval, m, com)


def _summary_from_comoments(
    names: tuple[str, ...],
    total: float,
    mean: np.ndarray,
    com: np.ndarray,
    response: str | None,
    terms: Mapping[str, Sequence[str]] | None,
    repair: str,
    pointer: str,
) -> Summary:
    order = list(range(len(names)))
    if response is not None:
        if response not in names:
            raise InputError.at("/response", f"response names {response!r}, which is not in names")
        order = [i for i, nm in enumerate(names) if nm != response] + [names.index(response)]
        mean = mean[order]
        com = com[np.ix_(order, order)]
    predictors = tuple(names[i] for i in order if names[i] != response)
    if len(predictors) < 2:
        raise TooFewDataError.at(
            "/names", f"at least two predictors are needed; got {len(predictors)}"
        )
    n_value(total, len(predictors), "/n")
    diagonal_pointer = "/covariance" if pointer == "/covariance" else "/parts/0/covariance"
    unchecked = Summary(
        names=predictors,
        n=total,
        correlation=np.eye(len(order)),
        response=response,
        means=mean,
        comoments=com,
        input_kind="moments",
        sources=tuple(f"{diagonal_pointer}/{i}/{i}" for i in order),
    ).check()
    r_checked, rep, notes = validated_correlation(correlation_from_comoments(com), pointer, repair)
    if rep is not None:
        d = np.sqrt(np.diag(com))
        com = r_checked * np.outer(d, d)
    return replace(
        unchecked,
        correlation=r_checked,
        comoments=com,
        terms=check_terms(terms, predictors),
        notes=tuple(notes),
        repair=rep,
    )


def from_moments(
    names: Sequence[str],
    n: float,
    means: Sequence[float],
    covariance: object,
    *,
    response: str | None = None,
    terms: Mapping[str, Sequence[str]] | None = None,
    repair: str = "reject",
) -> Summary:
    """Summarize from moments: n (or the sum of weights), means and the sample covariance.

    Parameters
    ----------
    names
        Variable names (predictors and, optionally, the response).
    n
        Number of observations, or the sum of frequency weights.
    means
        Means, one per name.
    covariance
        Sample covariance matrix with denominator ``n - 1``.
    response
        Optional name among ``names`` to treat as the response.
    terms
        Optional term name to its columns, for generalized VIFs.
    repair
        ``"reject"`` (default) or ``"nearest"`` for an inconsistent matrix.
    """
    check_policy(repair, REPAIR_POLICIES, "/repair")
    names = check_names(list(names), "/names")
    total, mean, com = _moment_part(len(names), n, means, covariance, "")
    return _summary_from_comoments(names, total, mean, com, response, terms, repair, "/covariance")


def merge_moments(
    parts: Sequence[tuple[float, Sequence[float], object]],
    names: Sequence[str],
    *,
    response: str | None = None,
    terms: Mapping[str, Sequence[str]] | None = None,
    repair: str = "reject",
) -> Summary:
    """Summarize from partial moments of disjoint parts of the data, merged exactly.

    Each part is ``(n, means, covariance)`` over the same names. Parts are merged pairwise in a
    balanced tree with the update of Chan, Golub & LeVeque (1979), which adds centred
    co-moments and a correction for the difference of means; raw sums of squares never appear.
    """
    check_policy(repair, REPAIR_POLICIES, "/repair")
    names = check_names(list(names), "/names")
    if not parts:
        raise InputError.at("/parts", "at least one part is needed")
    level = [_moment_part(len(names), *part, f"/parts/{i}") for i, part in enumerate(parts)]
    total, mean, com = merge_all(level)
    return _summary_from_comoments(names, total, mean, com, response, terms, repair, "/parts")
