"""The one internal form: a summary of the predictors, and the merge of two summaries.

Rows, a correlation matrix with its sample size, and summary moments are each reduced to a
:class:`Summary` (by :mod:`._rows` and :mod:`._matrices`, after the checks of
:mod:`._validation`); every diagnostic is computed from a summary alone, so all inputs share one
code path and the answer for rows equals the answer for their summary.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace

import numpy as np

from knotwork_contract import Moments, RepairReport, correlation_from_comoments

from ._errors import InputError, Problem, TooFewDataError
from ._notices import Notice

#: A column whose standard deviation is below this fraction of its magnitude is constant for all
#: practical purposes in double precision.
_CONSTANT_RTOL = 1e-13

#: The intercept's label where it takes part in a diagnostic (the conditioning basis). Reserved:
#: no input variable may carry it, so a label never stands for two columns.
INTERCEPT_NAME = "<constant>"


@dataclass(frozen=True, slots=True)
class Term:
    """A group of columns treated as one term (a categorical variable's indicator columns).

    Attributes
    ----------
    name
        The term's name (the categorical variable's name).
    columns
        The names of its columns, in design order.
    """

    name: str
    columns: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class Summary:
    """Everything the diagnostics need about a design, and nothing about its rows.

    Attributes
    ----------
    names
        Predictor names in design order (categorical variables expanded to indicator columns).
    n
        Number of observations, or the sum of the weights (frequency-weight convention); with
        pairwise deletion, the smallest pairwise count; NaN for estimates sent without n.
    correlation
        Correlation matrix over the predictors, then the response if there is one, (q, q).
    response
        The response's name, or None.
    means
        Means over the same q variables, or None when only correlations are known.
    comoments
        Centred cross-products :math:`\\sum_i w_i (x_i - m)(x_i - m)^\\top`, (q, q), or None.
    terms
        Multi-column terms (categorical variables), each naming its columns.
    input_kind
        ``"table"``, ``"correlation"``, ``"moments"`` or ``"estimates"``.
    notes
        Warnings gathered while summarizing (rows dropped, pairwise deletion, repair).
    rows
        Number of rows used, when rows were given.
    repair
        What the nearest-matrix repair did, when it was asked for and needed.
    sources
        For each of the q variables, the JSON pointer of the input field it came from (used to
        name the field in errors found after summarizing).
    implied_design
        For estimates only: the cross-product matrix the estimates' covariance implies (its
        inverse, on the correlation scale) with its column names, the constant first and
        named ``"<constant>"`` when the model has an intercept; the conditioning basis
        ``"estimates"``. None for every other input.
    """

    names: tuple[str, ...]
    n: float
    correlation: np.ndarray
    response: str | None = None
    means: np.ndarray | None = None
    comoments: np.ndarray | None = None
    terms: tuple[Term, ...] = ()
    input_kind: str = "moments"
    notes: tuple[Notice, ...] = field(default=())
    rows: int | None = None
    repair: RepairReport | None = None
    sources: tuple[str, ...] = ()
    implied_design: tuple[np.ndarray, tuple[str, ...]] | None = None

    @property
    def p(self) -> int:
        """Number of predictors."""
        return len(self.names)

    @property
    def R(self) -> np.ndarray:
        """Correlation matrix of the predictors, (p, p)."""
        p = self.p
        return self.correlation[:p, :p]

    @property
    def r_xy(self) -> np.ndarray | None:
        """Correlations of the predictors with the response, (p,), or None."""
        if self.response is None:
            return None
        return self.correlation[: self.p, self.p]

    @property
    def has_moments(self) -> bool:
        """Whether means and co-moments are known (rows or moments were given)."""
        return self.means is not None and self.comoments is not None

    @property
    def all_sds(self) -> np.ndarray | None:
        """Standard deviations (denominator n - 1) of predictors then response, or None."""
        if self.comoments is None:
            return None
        return np.sqrt(np.diag(self.comoments) / (self.n - 1.0))

    @property
    def sds(self) -> np.ndarray | None:
        """Standard deviations of the predictors, or None."""
        s = self.all_sds
        return None if s is None else s[: self.p]

    @property
    def predictor_means(self) -> np.ndarray | None:
        """Means of the predictors, or None."""
        return None if self.means is None else self.means[: self.p]

    @property
    def response_mean(self) -> float | None:
        """Mean of the response, or None."""
        if self.means is None or self.response is None:
            return None
        return float(self.means[self.p])

    @property
    def response_sd(self) -> float | None:
        """Standard deviation of the response, or None."""
        s = self.all_sds
        if s is None or self.response is None:
            return None
        return float(s[self.p])

    def term_indices(self) -> list[tuple[str, tuple[int, ...]]]:
        """Terms as (name, column indices into the predictors)."""
        index = {name: i for i, name in enumerate(self.names)}
        return [(t.name, tuple(index[c] for c in t.columns)) for t in self.terms]

    def design_crossproducts(self, intercept: bool) -> tuple[np.ndarray, tuple[str, ...]] | None:
        """Uncentred cross-products of the design, for conditioning; None without moments.

        With ``intercept`` the matrix is :math:`[1, X]^\\top W [1, X]` with the constant first
        (named ``"<constant>"``); without it :math:`X^\\top W X`. Built from the centred
        co-moments as :math:`C + n m m^\\top`, which keeps every digit of the centred part.
        """
        if not self.has_moments:
            return None
        assert self.means is not None and self.comoments is not None
        p = self.p
        m = self.means[:p]
        xtx = self.comoments[:p, :p] + self.n * np.outer(m, m)
        if not intercept:
            return xtx, self.names
        g = np.empty((p + 1, p + 1))
        g[0, 0] = self.n
        g[0, 1:] = g[1:, 0] = self.n * m
        g[1:, 1:] = xtx
        return g, (INTERCEPT_NAME, *self.names)

    def cosine(self) -> np.ndarray | None:
        """Cosine matrix of the uncentred predictors (regression through the origin), or None.

        Includes the response as the last row and column when there is one.
        """
        if not self.has_moments:
            return None
        assert self.means is not None and self.comoments is not None
        g = self.comoments + self.n * np.outer(self.means, self.means)
        d = np.sqrt(np.diag(g))
        k: np.ndarray = g / np.outer(d, d)
        np.fill_diagonal(k, 1.0)
        return k

    def check(self) -> Summary:
        """Raise unless the summary supports the diagnostics: more observations than
        predictors, and no constant variable. Partial summaries (for merging) need not pass.

        Raises
        ------
        TooFewDataError, InputError
        """
        p = self.p
        if self.comoments is not None and self.means is not None:
            var = np.diag(self.comoments) / max(self.n, 1.0)
            # Compared as a standard deviation: the square of a mean near 1e300 overflows.
            constant = np.sqrt(var) <= _CONSTANT_RTOL * np.abs(self.means)
            if constant.any():
                names = (*self.names, self.response) if self.response else self.names
                problems = [
                    Problem(
                        self.sources[j] if self.sources else f"/names/{j}",
                        f"{names[j]!r} is constant, so it carries no information; drop it",
                    )
                    for j in np.flatnonzero(constant)
                ]
                raise InputError(problems[0].reason, problems)
        if self.input_kind == "estimates" and math.isnan(self.n):
            return self  # n is optional for estimates; the sections that need it are skipped
        count = self.rows if self.rows is not None else self.n
        if count <= p or self.n <= p:
            where = "/columns" if self.input_kind == "table" else "/n"
            what = "rows" if self.input_kind == "table" else "observations"
            raise TooFewDataError.at(
                where,
                f"{count:g} {what} for {p} predictors; collinearity diagnostics need more "
                f"{what} than predictors",
            )
        return self

    def merge(self, other: Summary) -> Summary:
        """Merge with the summary of another part of the same data (exact pairwise update,
        :meth:`knotwork_contract.Moments.merge`).

        Raises
        ------
        InputError
            When either summary has no moments, or the variables differ.
        """
        if not (self.has_moments and other.has_moments):
            raise InputError.at("", "only summaries with moments (rows or moments) can be merged")
        if (self.names, self.response) != (other.names, other.response):
            raise InputError.at("/names", "summaries to merge must have the same variables")
        assert self.means is not None and self.comoments is not None
        assert other.means is not None and other.comoments is not None
        n, mean, com = Moments(self.n, self.means, self.comoments).merge(
            Moments(other.n, other.means, other.comoments)
        )
        rows = None if self.rows is None or other.rows is None else self.rows + other.rows
        return replace(
            self,
            n=n,
            means=mean,
            comoments=com,
            correlation=correlation_from_comoments(com),
            rows=rows,
            notes=tuple(dict.fromkeys(self.notes + other.notes)),
        )
