"""Summary inputs a caller already holds: a correlation matrix with n, or moments.

Pass either to ``Client.assess`` as it is; :meth:`to_input` gives the service's JSON input.
Shapes are checked here so a typo fails before anything is sent; the service checks the
numbers themselves (symmetry, unit diagonal, positive semi-definiteness).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from ._exceptions import DataError

__all__ = ["Correlation", "Moments"]


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
