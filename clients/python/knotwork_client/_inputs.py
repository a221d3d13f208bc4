"""Summary inputs a caller already holds: a correlation matrix with n, moments, or the
estimates of a model fitted elsewhere.

Pass any of them to ``Client.assess`` as it is; :meth:`to_input` gives the service's JSON
input. Shapes are checked here so a typo fails before anything is sent; the service checks the
numbers themselves (symmetry, unit diagonal, positive semi-definiteness).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ._exceptions import DataError

__all__ = ["Correlation", "Estimates", "Moments", "estimates", "from_fitted", "is_fitted"]


def _square(name: str, matrix: Any, p: int) -> list[list[float]]:
    a = np.asarray(matrix, dtype=np.float64)
    if a.shape != (p, p):
        raise DataError(
            f"{name} must be {p} x {p} (one row and column per name), got shape {a.shape}",
            [(f"/{name}", "wrong shape")],
        )
    rows: list[list[float]] = a.tolist()
    return rows


def _vector(name: str, values: Any, p: int) -> list[float]:
    a = np.asarray(values, dtype=np.float64)
    if a.shape != (p,):
        raise DataError(
            f"{name} must hold {p} numbers (one per name), got shape {a.shape}",
            [(f"/{name}", "wrong length")],
        )
    listed: list[float] = a.tolist()
    return listed


def _terms(terms: Mapping[str, Sequence[str]] | None) -> dict[str, list[str]] | None:
    return None if terms is None else {str(k): [str(c) for c in v] for k, v in terms.items()}


@dataclass(frozen=True)
class Correlation:
    """A correlation matrix of the predictors with the number of observations.

    Attributes
    ----------
    names
        Predictor names, in the order of the matrix.
    matrix
        Square, symmetric, unit-diagonal correlation matrix.
    n
        Number of observations the correlations come from.
    response
        Optional ``(name, correlations with each predictor)``.
    terms
        Optional term name -> its columns, for generalized VIFs.
    """

    names: Sequence[str]
    matrix: Any
    n: float
    response: tuple[str, Sequence[float]] | None = None
    terms: Mapping[str, Sequence[str]] | None = field(default=None)

    def to_input(self) -> dict[str, Any]:
        """The service's ``correlation`` input document."""
        names = [str(n) for n in self.names]
        doc: dict[str, Any] = {
            "kind": "correlation",
            "names": names,
            "matrix": _square("matrix", self.matrix, len(names)),
            "n": float(self.n),
        }
        if self.response is not None:
            name, corr = self.response
            doc["response"] = {
                "name": str(name),
                "correlations": _vector("response/correlations", corr, len(names)),
            }
        if self.terms is not None:
            doc["terms"] = _terms(self.terms)
        return doc


@dataclass(frozen=True)
class Moments:
    """Means and sample covariance (denominator n - 1) with the number of observations.

    Attributes
    ----------
    names
        Variable names, in the order of ``means`` and ``covariance``.
    n
        Number of observations (or the sum of frequency weights).
    means
        Mean of each variable.
    covariance
        Sample covariance matrix, denominator n - 1.
    response
        Optional name (among ``names``) of the response, excluded from the predictors.
    terms
        Optional term name -> its columns, for generalized VIFs.
    """

    names: Sequence[str]
    n: float
    means: Any
    covariance: Any
    response: str | None = None
    terms: Mapping[str, Sequence[str]] | None = field(default=None)

    def to_input(self) -> dict[str, Any]:
        """The service's ``moments`` input document."""
        names = [str(n) for n in self.names]
        doc: dict[str, Any] = {
            "kind": "moments",
            "names": names,
            "n": float(self.n),
            "means": _vector("means", self.means, len(names)),
            "covariance": _square("covariance", self.covariance, len(names)),
        }
        if self.response is not None:
            if self.response not in names:
                raise DataError(
                    f"response {self.response!r} is not among names {names}",
                    [("/response", "not among names")],
                )
            doc["response"] = self.response
        if self.terms is not None:
            doc["terms"] = _terms(self.terms)
        return doc


@dataclass(frozen=True)
class Estimates:
    """The estimates of a fitted model: the covariance of its coefficients and their names.

    Attributes
    ----------
    names
        Coefficient names, in the order of the covariance (the intercept included).
    covariance
        Covariance matrix of the estimates (model-based, robust or clustered).
    intercept
        The intercept's name (one of ``names``), or None when the model has none.
    terms
        Optional term name -> its coefficients, for generalized VIFs.
    n
        Optional number of observations behind the fit; without it the service skips the
        tests (with a warning).
    """

    names: Sequence[str]
    covariance: Any
    intercept: str | None = None
    terms: Mapping[str, Sequence[str]] | None = field(default=None)
    n: float | None = None

    def to_input(self) -> dict[str, Any]:
        """The service's ``estimates`` input document."""
        names = [str(n) for n in self.names]
        if self.intercept is not None and self.intercept not in names:
            raise DataError(
                f"intercept {self.intercept!r} is not among names {names}",
                [("/intercept", "not among names")],
            )
        doc: dict[str, Any] = {
            "kind": "estimates",
            "names": names,
            "covariance": _square("covariance", self.covariance, len(names)),
            "intercept": self.intercept,
        }
        if self.terms is not None:
            doc["terms"] = _terms(self.terms)
        if self.n is not None:
            doc["n"] = float(self.n)
        return doc


def estimates(
    names: Sequence[str],
    covariance: Any,
    intercept: str | None = None,
    terms: Mapping[str, Sequence[str]] | None = None,
    n: float | None = None,
) -> Estimates:
    """The estimates of a model fitted elsewhere, ready for ``Client.assess``.

    Parameters
    ----------
    names
        Coefficient names, in the order of ``covariance``'s rows.
    covariance
        Covariance matrix of the estimates (a nested list, numpy array or DataFrame).
    intercept
        The intercept coefficient's name, left out of the diagnostics; None (the default)
        when the model has no intercept. Name it whenever the model has one: without it the
        diagnostics are those of a model through the origin.
    terms
        Optional term name -> its coefficients (for example the indicator columns of one
        categorical variable), judged together by their GVIF.
    n
        Optional number of observations behind the fit (for the tests).
    """
    return Estimates(list(names), covariance, intercept, terms, n)


#: The names statsmodels gives the constant column (``add_constant`` and formulas).
_CONSTANT_NAMES = ("const", "Intercept")


def is_fitted(data: Any) -> bool:
    """Whether ``data`` looks like a fitted model's results (it has ``cov_params()``)."""
    return callable(getattr(data, "cov_params", None)) and hasattr(data, "params")


def _detect_intercept(results: Any, names: list[str]) -> str | None:
    model = getattr(results, "model", None)
    index = getattr(getattr(model, "data", None), "const_idx", None)
    if isinstance(index, int | np.integer) and 0 <= int(index) < len(names):
        return names[int(index)]
    for name in _CONSTANT_NAMES:
        if name in names:
            return name
    return None


_DETECT: Any = object()


def from_fitted(
    results: Any,
    terms: Mapping[str, Sequence[str]] | None = None,
    *,
    intercept: str | None = _DETECT,
) -> Estimates:
    """The estimates of a fitted statsmodels model (or anything with the same attributes).

    Reads ``results.cov_params()`` (whatever covariance the model was fitted with: model-based,
    robust, clustered), the coefficient names (the covariance's index, ``params.index`` or
    ``model.exog_names``) and ``results.nobs``. Only the regression coefficients are kept: a
    mixed model's fixed effects (``fe_params``), or else the first as many parameters as the
    design (``model.exog``) has columns, so that variance parameters and extra parameters
    such as a negative binomial's ``alpha`` are left out. statsmodels is never imported here.

    Parameters
    ----------
    results
        The fitted model's results object.
    terms
        Optional term name -> its coefficients, for generalized VIFs.
    intercept
        The intercept's name; by default detected: the model's constant column
        (``model.data.const_idx``), else a coefficient named ``const`` or ``Intercept``, else
        None (no intercept). Pass it, or None, to override.

    Raises
    ------
    DataError
        When the object has no usable covariance or coefficient names.
    """
    if not is_fitted(results):
        raise DataError(
            f"a {type(results).__name__} is not a fitted model's results: it needs "
            "cov_params() and params",
            [("", "not a fitted model")],
        )
    cov = results.cov_params()
    matrix = np.asarray(cov, dtype=np.float64)
    index = getattr(cov, "index", None)
    if index is None:
        index = getattr(results.params, "index", None)
    model = getattr(results, "model", None)
    exog_names = getattr(model, "exog_names", None)
    names = [str(n) for n in index] if index is not None else None
    if names is None and exog_names is not None:
        names = [str(n) for n in exog_names]
    if names is None or matrix.ndim != 2 or matrix.shape[0] != matrix.shape[1]:
        raise DataError(
            "cannot read the coefficients' names and square covariance from the results",
            [("", "no coefficient names or covariance")],
        )
    if index is None and matrix.shape[0] > len(names):
        # Unnamed extra parameters come after the coefficients.
        matrix = matrix[: len(names), : len(names)]
    # The regression coefficients: a mixed model's fixed effects (fe_params), else the first
    # as many parameters as the design has columns (statsmodels puts extra parameters, such as
    # a negative binomial's alpha or a mixed model's variances, after them).
    fixed = getattr(getattr(results, "fe_params", None), "index", None)
    columns = getattr(getattr(model, "exog", None), "shape", None)
    keep = None
    if fixed is not None:
        keep = [str(n) for n in fixed]
    elif columns is not None and len(columns) == 2 and int(columns[1]) < len(names):
        keep = names[: int(columns[1])]
    if keep is not None and keep != names and set(keep) <= set(names):
        where = [names.index(n) for n in keep]
        matrix = matrix[np.ix_(where, where)]
        names = keep
    if matrix.shape != (len(names), len(names)):
        raise DataError(
            f"the covariance is {matrix.shape[0]} x {matrix.shape[1]} for {len(names)} names",
            [("/covariance", "wrong shape")],
        )
    if intercept is _DETECT:
        intercept = _detect_intercept(results, names)
    nobs = getattr(results, "nobs", None)
    n = float(nobs) if isinstance(nobs, int | float | np.integer | np.floating) else None
    return Estimates(names, matrix, intercept, terms, n)
