"""The one internal form: a summary of the predictors, and the three ways to build it.

Rows, a correlation matrix with its sample size, and summary moments are each reduced here to
a :class:`Summary`; every diagnostic is computed from a summary alone, so all inputs share one
code path and the answer for rows equals the answer for their summary.
"""

from __future__ import annotations

import contextlib
import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field, replace

import numpy as np

from knotwork_contract import RepairReport
from knotwork_contract import escape as esc

from ._errors import (
    InputError,
    MatrixError,
    MissingValuesError,
    OptionError,
    Problem,
    TooFewDataError,
)
from ._interrupt import checkpoint
from ._notices import Notice, notice

#: Row blocks are centred and multiplied this many bytes at a time: large enough for BLAS to
#: run at full speed, small enough that the centred copy stays in cache-friendly, bounded memory.
_BLOCK_BYTES = 4 << 20

#: Symmetry and unit-diagonal tolerance for a supplied matrix (absolute, on the correlation scale).
_MATRIX_ATOL = 1e-9

#: A supplied matrix is positive semi-definite when its smallest eigenvalue is at least
#: ``-_PSD_RTOL * largest``; smaller negatives are rounding noise and are clipped away.
_PSD_RTOL = 1e-10

#: A column whose standard deviation is below this fraction of its magnitude is constant for all
#: practical purposes in double precision.
_CONSTANT_RTOL = 1e-13

MISSING_POLICIES = ("reject", "drop_rows", "pairwise")
REPAIR_POLICIES = ("reject", "nearest")
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
        pairwise deletion, the smallest pairwise count.
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
        ``"table"``, ``"correlation"`` or ``"moments"``.
    notes
        Warnings gathered while summarizing (rows dropped, pairwise deletion, repair).
    rows
        Number of rows used, when rows were given.
    repair
        What the nearest-matrix repair did, when it was asked for and needed.
    sources
        For each of the q variables, the JSON pointer of the input field it came from (used to
        name the field in errors found after summarizing).
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
        k = g / np.outer(d, d)
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
            constant = var <= (_CONSTANT_RTOL * np.abs(self.means)) ** 2
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
        """Merge with the summary of another part of the same data (exact pairwise update).

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
        n, mean, com = _merge_moments(
            (self.n, self.means, self.comoments), (other.n, other.means, other.comoments)
        )
        rows = None if self.rows is None or other.rows is None else self.rows + other.rows
        return replace(
            self,
            n=n,
            means=mean,
            comoments=com,
            correlation=_correlation_from_comoments(com),
            rows=rows,
            notes=tuple(dict.fromkeys(self.notes + other.notes)),
        )


# ---------------------------------------------------------------------------------------------
# Moments


def _merge_moments(
    a: tuple[float, np.ndarray, np.ndarray], b: tuple[float, np.ndarray, np.ndarray]
) -> tuple[float, np.ndarray, np.ndarray]:
    """Pairwise update of (n, mean, co-moments) (Chan, Golub & LeVeque 1979/1983)."""
    na, ma, ca = a
    nb, mb, cb = b
    n = na + nb
    if na == 0:
        return nb, mb.copy(), cb.copy()
    if nb == 0:
        return na, ma.copy(), ca.copy()
    delta = mb - ma
    mean = ma + delta * (nb / n)
    com = ca + cb + np.outer(delta, delta) * (na * nb / n)
    return n, mean, com


class _NotFinite(Exception):
    """A value is missing or infinite (or a sum overflowed): summarize the checked way."""


def _gram(
    columns: Sequence[np.ndarray],
    w: np.ndarray | None,
    n: int,
    step: int,
    optimistic: bool,
) -> tuple[float, np.ndarray, np.ndarray]:
    """Total, shift and the shifted cross-products with a column of ones (or sqrt(w))
    appended: the row-block work of :func:`_comoments` (``optimistic`` needs ``w`` None)."""
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
        checkpoint()
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
            raise _NotFinite
    return total, mean, gram


def _comoments(
    columns: Sequence[np.ndarray],
    w: np.ndarray | None,
    keep: np.ndarray | None = None,
    *,
    optimistic: bool = False,
) -> tuple[float, np.ndarray, np.ndarray]:
    """Weighted total, mean and centred co-moments of equal-length columns.

    Rows where ``keep`` is False are left out. Row blocks are gathered from the columns,
    centred by a shift, and multiplied; the residual sums then correct the mean and the
    co-moments (the corrected two-pass algorithm of Chan, Golub & LeVeque 1983), so a column
    whose mean is large against its spread keeps its digits. Raw sums of squares never appear,
    and no copy of the whole table is made: memory beyond the columns is one block.

    The shift is the mean from a first pass over the columns, or, when ``optimistic`` (no
    weights, every row kept, the values not yet checked), the mean of the first row block:
    then the rows are read once, and a value that is not finite raises :class:`_NotFinite` at
    the end of the block that holds it, for the caller to check the columns and start again.
    """
    q = len(columns)
    if keep is not None and keep.all():
        keep = None
    if keep is not None:
        columns = [c[keep] for c in columns]
        w = None if w is None else w[keep]
    n = columns[0].shape[0] if q else 0
    step = max(1, _BLOCK_BYTES // (8 * (q + 1)))
    optimistic = optimistic and w is None
    # Unchecked values may hold NaN or infinities; _gram finds them, so numpy's
    # floating-point warnings would only be noise.
    with np.errstate(invalid="ignore", over="ignore") if optimistic else contextlib.nullcontext():
        total, mean, gram = _gram(columns, w, n, step, optimistic)
    com = gram[:q, :q]
    resid = gram[:q, q].copy()
    com -= np.outer(resid, resid) / total
    mean = mean + resid / total
    com = (com + com.T) * 0.5
    return total, mean, com


def _correlation_from_comoments(com: np.ndarray) -> np.ndarray:
    """Correlations from co-moments; a zero-variance variable gets zero correlations here and
    is rejected by :meth:`Summary.check` with its column named."""
    d = np.sqrt(np.diag(com))
    d = np.where(d > 0, d, 1.0)
    r = com / np.outer(d, d)
    r = (r + r.T) * 0.5
    np.clip(r, -1.0, 1.0, out=r)
    np.fill_diagonal(r, 1.0)
    return r


# ---------------------------------------------------------------------------------------------
# Validation helpers


def _check_policy(value: str, allowed: Sequence[str], pointer: str) -> None:
    if value not in allowed:
        raise OptionError.at(
            pointer, f"must be one of {', '.join(repr(a) for a in allowed)}; got {value!r}"
        )


_RESERVED_REASON = (
    f"the name {INTERCEPT_NAME!r} is reserved for the intercept in the diagnostics; "
    "rename this variable"
)


def _check_names(names: Sequence[str], pointer: str) -> tuple[str, ...]:
    problems = []
    seen: dict[str, int] = {}
    for i, name in enumerate(names):
        if not isinstance(name, str) or not name:
            problems.append(Problem(f"{pointer}/{i}", "names must be non-empty strings"))
        elif name == INTERCEPT_NAME:
            problems.append(Problem(f"{pointer}/{i}", _RESERVED_REASON))
        elif name in seen:
            problems.append(
                Problem(
                    f"{pointer}/{i}",
                    f"duplicate name {name!r} (also at position {seen[name]}); "
                    "names must be unique",
                )
            )
        else:
            seen[name] = i
    if problems:
        raise InputError(problems[0].reason, problems)
    return tuple(names)


def _square_matrix(matrix: object, size: int, pointer: str, what: str) -> np.ndarray:
    """Convert to a finite (size, size) float array, pointing at the first bad row or entry."""
    rows = matrix if isinstance(matrix, np.ndarray) else list(matrix)  # type: ignore[call-overload]
    if len(rows) != size:
        raise MatrixError.at(
            pointer, f"{what} must have {size} rows (one per name); got {len(rows)}"
        )
    if not isinstance(rows, np.ndarray):
        for i, row in enumerate(rows):
            if len(row) != size:
                raise MatrixError.at(
                    f"{pointer}/{i}", f"each row must have {size} entries; got {len(row)}"
                )
    a = np.asarray(rows, dtype=float)
    if a.shape != (size, size):
        raise MatrixError.at(pointer, f"{what} must be {size} x {size}; got shape {a.shape}")
    bad = np.argwhere(~np.isfinite(a))
    if bad.size:
        i, j = (int(v) for v in bad[0])
        raise MatrixError.at(f"{pointer}/{i}/{j}", "entries must be finite numbers")
    return a


def _check_symmetric(a: np.ndarray, pointer: str, scale: np.ndarray | None = None) -> np.ndarray:
    diff = np.abs(a - a.T)
    if scale is not None:
        diff = diff / np.outer(scale, scale)
    if diff.size and diff.max() > _MATRIX_ATOL:
        i, j = (int(v) for v in np.unravel_index(np.argmax(diff), diff.shape))
        i, j = min(i, j), max(i, j)
        raise MatrixError.at(
            f"{pointer}/{i}/{j}",
            f"the matrix must be symmetric: entry [{i}][{j}] differs from [{j}][{i}]",
        )
    return (a + a.T) * 0.5


def _check_correlation_entries(r: np.ndarray, pointer: str) -> None:
    diag = np.abs(np.diag(r) - 1.0)
    if diag.max() > _MATRIX_ATOL:
        i = int(np.argmax(diag))
        raise MatrixError.at(f"{pointer}/{i}/{i}", "diagonal entries of a correlation must be 1")
    off = np.abs(r) > 1.0 + _MATRIX_ATOL
    if off.any():
        i, j = (int(v) for v in np.argwhere(off)[0])
        raise MatrixError.at(
            f"{pointer}/{i}/{j}", "correlations must lie between -1 and 1 inclusive"
        )


def _n_value(n: object, p: int, pointer: str) -> float:
    if isinstance(n, bool) or not isinstance(n, int | float | np.integer | np.floating):
        raise InputError.at(pointer, "n must be a number (the number of observations)")
    value = float(n)
    if not math.isfinite(value):
        raise InputError.at(pointer, "n must be a finite number")
    if value <= p:
        raise TooFewDataError.at(
            pointer,
            f"n must exceed the number of predictors ({p}); got {value:g}. "
            "Collinearity diagnostics need more observations than predictors.",
        )
    return value


def _looks_rounded(r: np.ndarray, lam_min: float) -> Notice | None:
    """Warn when the entries carry few decimals and rounding could move the small eigenvalues.

    Rounding every off-diagonal entry by at most h moves each eigenvalue by at most
    ``(p - 1) h`` (Weyl's inequality with a Gershgorin bound on the perturbation).
    """
    p = r.shape[0]
    off = r[~np.eye(p, dtype=bool)]
    for decimals in range(1, 5):
        scaled = off * 10.0**decimals
        if np.all(np.abs(scaled - np.round(scaled)) <= 1e-9 * 10.0**decimals):
            bound = (p - 1) * 0.5 * 10.0**-decimals
            if bound >= 0.1 * max(lam_min, 0.0):
                return notice(
                    "rounded_matrix",
                    f"the correlations appear rounded to {decimals} decimal(s); that rounding "
                    f"can move the eigenvalues by up to {bound:.2g}, comparable to the smallest "
                    f"({lam_min:.2g}): send more digits for reliable results",
                )
            return None
    return None


def _validated_correlation(
    r: np.ndarray, pointer: str, repair: str
) -> tuple[np.ndarray, RepairReport | None, list[Notice]]:
    """Check positive semi-definiteness; repair to the nearest correlation matrix on request."""
    notes: list[Notice] = []
    values = np.linalg.eigvalsh(r)
    lam_min, lam_max = float(values[0]), float(values[-1])
    rounded = _looks_rounded(r, lam_min)
    if rounded is not None:
        notes.append(rounded)
    if lam_min >= -_PSD_RTOL * lam_max:
        return r, None, notes
    if repair != "nearest":
        raise MatrixError.at(
            pointer,
            f"the matrix is not positive semi-definite (smallest eigenvalue {lam_min:.3g}); "
            "it cannot come from data. Send a consistent matrix, or set options.repair to "
            "'nearest' to use the nearest valid correlation matrix.",
        )
    from ._repair import nearest_correlation

    fixed, rep = nearest_correlation(r)
    report = RepairReport(
        distance=float(rep.distance),
        iterations=int(rep.iterations),
        converged=bool(rep.converged),
        min_eigenvalue_before=lam_min,
        min_eigenvalue_after=float(rep.min_eigenvalue_after),
        singular=bool(rep.singular),
    )
    notes.append(
        notice(
            "matrix_repaired",
            f"the matrix was not positive semi-definite (smallest eigenvalue {lam_min:.3g}); "
            f"it was replaced by the nearest correlation matrix (Frobenius distance "
            f"{report.distance:.3g})"
            + ("; the repaired matrix is singular" if rep.singular else ""),
        )
    )
    if not rep.converged:
        notes.append(notice("repair_not_converged", "the repair stopped at its iteration limit"))
    return fixed, report, notes


def _check_terms(
    terms: Mapping[str, Sequence[str]] | None, names: tuple[str, ...]
) -> tuple[Term, ...]:
    if not terms:
        return ()
    known = set(names)
    used: dict[str, str] = {}
    out = []
    for tname, cols in terms.items():
        base = f"/terms/{esc(tname)}"
        if not cols:
            raise InputError.at(base, "a term must name at least one column")
        for i, c in enumerate(cols):
            if c not in known:
                raise InputError.at(f"{base}/{i}", f"term {tname!r} names unknown column {c!r}")
            if c in used:
                raise InputError.at(
                    f"{base}/{i}", f"column {c!r} already belongs to term {used[c]!r}"
                )
            used[c] = tname
        out.append(Term(tname, tuple(cols)))
    return tuple(out)


# ---------------------------------------------------------------------------------------------
# From rows


def _column_array(values: object, pointer: str, *, check: bool = True) -> tuple[np.ndarray, bool]:
    """The column as a float array, and whether it is complete (no missing value).

    With ``check`` False the values are not looked at (one pass fewer) and the column is taken
    as complete: the caller must then find out otherwise (see :func:`_comoments`).
    """
    try:
        a = np.asarray(values, dtype=float)
    except (TypeError, ValueError):
        raise InputError.at(pointer, "values must be numbers or null") from None
    if a.ndim != 1:
        raise InputError.at(pointer, "a column must be a flat list of numbers")
    if not check or np.isfinite(a).all():  # one pass for the common case
        return a, True
    if np.isinf(a).any():
        row = int(np.flatnonzero(np.isinf(a))[0])
        raise InputError.at(
            pointer, f"values must be finite; row {row} is infinite (null marks a missing value)"
        )
    return a, False


def from_table(
    columns: Mapping[str, object],
    *,
    categorical: Mapping[str, Sequence[str | None]] | None = None,
    response: str | None = None,
    weights: str | None = None,
    missing: str = "reject",
    repair: str = "reject",
) -> Summary:
    """Summarize rows given as columns.

    Parameters
    ----------
    columns
        Column name to numeric values (1-D); NaN (or None) marks a missing value.
    categorical
        Column name to string labels (None for missing). Each is expanded to indicator columns
        named ``name[level]`` against its first level in sorted order, kept together as one term.
    response
        Name of a numeric column to treat as the response (excluded from the predictors).
    weights
        Name of a numeric column of non-negative frequency or survey weights.
    missing
        ``"reject"`` (default: an error with per-column counts), ``"drop_rows"`` or
        ``"pairwise"`` (each correlation from the rows complete for that pair).
    repair
        ``"reject"`` (default) or ``"nearest"``: what to do when pairwise deletion gives a
        matrix that is not positive semi-definite.

    Returns
    -------
    Summary

    Raises
    ------
    InputError, MissingValuesError, MatrixError, TooFewDataError, OptionError
        With the offending column named (pointer ``/columns/<name>``).

    Notes
    -----
    Implementation: without weights the values are first taken as complete and read once, by
    the summary itself (:func:`_comoments`); only when a value turns out to be missing or
    infinite are the columns checked one by one and the summary made again the checked way,
    so a complete table costs one pass over its rows instead of two.
    """
    if weights is None:
        try:
            return _from_table(
                columns, categorical, response, weights, missing, repair, optimistic=True
            )
        except _NotFinite:
            pass
    return _from_table(columns, categorical, response, weights, missing, repair, optimistic=False)


def _from_table(
    columns: Mapping[str, object],
    categorical: Mapping[str, Sequence[str | None]] | None,
    response: str | None,
    weights: str | None,
    missing: str,
    repair: str,
    *,
    optimistic: bool,
) -> Summary:
    """:func:`from_table`; ``optimistic``: values not checked, :class:`_NotFinite` if needed."""
    _check_policy(missing, MISSING_POLICIES, "/missing")
    _check_policy(repair, REPAIR_POLICIES, "/repair")
    categorical = dict(categorical or {})
    if not isinstance(columns, Mapping):
        raise InputError.at("/columns", "columns must map names to lists of numbers")
    for where, named in (("columns", columns), ("categorical", categorical)):
        if INTERCEPT_NAME in named:
            raise InputError.at(f"/{where}/{esc(INTERCEPT_NAME)}", _RESERVED_REASON)
    for name in categorical:
        if name in columns:
            raise InputError.at(
                f"/categorical/{esc(name)}",
                f"{name!r} is given both as a numeric and as a categorical column",
            )
    for label, ref in (("response", response), ("weights", weights)):
        if ref is not None and ref not in columns:
            raise InputError.at(
                f"/{label}", f"{label} names {ref!r}, which is not a numeric column of the table"
            )
    if response is not None and response == weights:
        raise InputError.at("/weights", "the weights column cannot also be the response")

    arrays: dict[str, np.ndarray] = {}
    incomplete: set[str] = set()
    for name, v in columns.items():
        arrays[name], complete = _column_array(v, f"/columns/{esc(name)}", check=not optimistic)
        if not complete:
            incomplete.add(name)
    labels = {}
    for name, v in categorical.items():
        vals = list(v)
        if not all(s is None or isinstance(s, str) for s in vals):
            raise InputError.at(f"/categorical/{esc(name)}", "labels must be strings or null")
        labels[name] = vals
    lengths = {name: a.shape[0] for name, a in arrays.items()}
    lengths.update({name: len(v) for name, v in labels.items()})
    if not lengths:
        raise TooFewDataError.at("/columns", "the table has no columns")
    expected = max(set(lengths.values()), key=list(lengths.values()).count)
    for name, length in lengths.items():
        if length != expected:
            where = "categorical" if name in labels else "columns"
            raise InputError.at(
                f"/{where}/{esc(name)}",
                f"has {length} values while the other columns have {expected}; "
                "all columns must have the same length",
            )
    n_rows = expected

    miss = {name: np.isnan(a) for name, a in arrays.items() if name in incomplete}
    miss.update({name: np.array([s is None for s in v], dtype=bool) for name, v in labels.items()})
    problems = []
    for name, m in miss.items():
        if n_rows and m.all():
            where = "categorical" if name in labels else "columns"
            problems.append(Problem(f"/{where}/{esc(name)}", "every value is missing"))
    if problems:
        raise MissingValuesError(problems[0].reason, problems)
    counts = {name: int(m.sum()) for name, m in miss.items() if m.any()}
    if counts and optimistic:
        raise _NotFinite  # a missing label: every column's count belongs in the answer
    notes: list[Notice] = []
    keep = np.ones(n_rows, dtype=bool)
    if counts and missing == "reject":
        problems = [
            Problem(
                f"/{'categorical' if name in labels else 'columns'}/{esc(name)}",
                f"{c} of {n_rows} values missing",
            )
            for name, c in counts.items()
        ]
        raise MissingValuesError(
            f"{sum(counts.values())} missing values in {len(counts)} column(s); fill them, or "
            "set options.missing to 'drop_rows' or 'pairwise'",
            problems,
        )
    if counts and missing == "drop_rows":
        for m in miss.values():
            keep &= ~m
        dropped = int(n_rows - keep.sum())
        notes.append(
            notice(
                "rows_dropped", f"{dropped} of {n_rows} rows had missing values and were dropped"
            )
        )

    w = None
    if weights is not None:
        w = arrays.pop(weights)
        present = ~np.isnan(w)
        if (w[present] < 0).any():
            row = int(np.flatnonzero(present & (w < 0))[0])
            raise InputError.at(
                f"/columns/{esc(weights)}", f"weights must be non-negative; row {row} is negative"
            )
        if missing == "pairwise":
            keep &= present
    y = arrays.pop(response) if response is not None else None

    # Expand categoricals against their first sorted level.
    terms: list[Term] = []
    predictors = [(name, a, f"/columns/{esc(name)}") for name, a in arrays.items()]
    for name, vals in labels.items():
        kept_labels = [s for s, k in zip(vals, keep, strict=True) if k and s is not None]
        levels = sorted(set(kept_labels))
        if len(levels) < 2:
            raise InputError.at(
                f"/categorical/{esc(name)}",
                "a categorical column needs at least two levels; this one is constant",
            )
        codes = np.full(n_rows, np.nan)
        index = {lev: i for i, lev in enumerate(levels)}
        for row, s in enumerate(vals):
            if s is not None:
                codes[row] = index[s]
        cols = []
        for i, lev in enumerate(levels[1:], start=1):
            cname = f"{name}[{lev}]"
            if cname in arrays:
                raise InputError.at(
                    f"/categorical/{esc(name)}",
                    f"indicator column {cname!r} clashes with a numeric column of that name",
                )
            ind = (codes == i).astype(float)
            ind[np.isnan(codes)] = np.nan
            predictors.append((cname, ind, f"/categorical/{esc(name)}"))
            cols.append(cname)
        terms.append(Term(name, tuple(cols)))

    names = tuple(name for name, _, _ in predictors)
    if len(names) < 2:
        raise TooFewDataError.at(
            "/columns",
            f"at least two predictors are needed; got {len(names)}"
            + (" (the response and weights columns are not predictors)" if names else ""),
        )
    design = [a for _, a, _ in predictors] + ([y] if y is not None else [])
    pointers = [ptr for _, _, ptr in predictors]
    if response is not None:
        pointers.append(f"/columns/{esc(response)}")

    if missing == "pairwise" and counts:
        x = np.column_stack([c[keep] for c in design])
        wk = None if w is None else w[keep]
        return _pairwise_summary(x, wk, names, response, tuple(terms), pointers, repair, notes)

    total, mean, com = _comoments(design, w, keep, optimistic=optimistic)
    used = int(keep.sum()) if w is None else int(np.count_nonzero(w[keep] > 0))
    return Summary(
        names=names,
        n=total,
        correlation=_correlation_from_comoments(com),
        response=response,
        means=mean,
        comoments=com,
        terms=tuple(terms),
        input_kind="table",
        notes=tuple(notes),
        rows=used,
        sources=tuple(pointers),
    )


def _pairwise_summary(
    x: np.ndarray,
    w: np.ndarray | None,
    names: tuple[str, ...],
    response: str | None,
    terms: tuple[Term, ...],
    pointers: Sequence[str],
    repair: str,
    notes: list[Notice],
) -> Summary:
    """Correlations from pairwise-complete rows; no consistent moments exist then."""
    present = ~np.isnan(x)
    wt = np.ones(x.shape[0]) if w is None else np.where(np.isnan(w), 0.0, w)
    shift = np.array([np.average(x[present[:, j], j]) for j in range(x.shape[1])])
    x0 = np.where(present, x - shift, 0.0)
    pm = present.astype(float)
    pw = pm * wt[:, None]
    xw = x0 * wt[:, None]
    counts = pw.T @ pm  # n_ij: weight of rows where both i and j are present
    sums = xw.T @ pm  # sum of x_i over rows where j is present too
    squares = (x0 * xw).T @ pm  # sum of x_i^2 over rows where j is present too
    cross = xw.T @ x0  # sum of x_i x_j over joint rows
    with np.errstate(divide="ignore", invalid="ignore"):
        com = cross - sums * sums.T / counts
        var = squares - sums**2 / counts
        r = com / np.sqrt(var * var.T)
    rows_pairs = present.T.astype(np.int64) @ present.astype(np.int64)
    if (rows_pairs <= len(names)).any():
        i, j = (int(v) for v in np.argwhere(rows_pairs <= len(names))[0])
        raise TooFewDataError.at(
            pointers[j],
            f"only {int(rows_pairs[i, j])} rows have both {(*names, response)[i]!r} and "
            f"{(*names, response)[j]!r}; pairwise deletion needs more rows than predictors",
        )
    diag = np.diag(var)
    if (~np.isfinite(r)).any() or (diag <= 0).any():
        bad = np.flatnonzero(~(np.diag(var) > 0))
        j = int(bad[0]) if bad.size else int(np.argwhere(~np.isfinite(r))[0][1])
        raise InputError.at(pointers[j], "the column is constant over the rows where it is present")
    r = _check_symmetric(r, "/columns")
    np.clip(r, -1.0, 1.0, out=r)
    np.fill_diagonal(r, 1.0)
    n = float(counts.min())
    notes.append(
        notice(
            "pairwise_deletion",
            f"correlations come from pairwise-complete rows; n is the smallest pairwise count "
            f"({n:g}), and conditioning uses the correlation matrix",
        )
    )
    r, rep, more = _validated_correlation(r, "/columns", repair)
    notes.extend(more)
    return Summary(
        names=names,
        n=n,
        correlation=r,
        response=response,
        terms=terms,
        input_kind="table",
        notes=tuple(notes),
        rows=int(x.shape[0]),
        repair=rep,
        sources=tuple(pointers),
    )


def from_frame(
    frame: object,
    *,
    response: str | None = None,
    weights: str | None = None,
    missing: str = "reject",
    repair: str = "reject",
) -> Summary:
    """Summarize a pandas DataFrame: numeric columns as numbers, others as categorical."""
    import pandas as pd

    if not isinstance(frame, pd.DataFrame):
        raise InputError.at("", "expected a pandas DataFrame")
    columns: dict[str, np.ndarray] = {}
    categorical: dict[str, list[str | None]] = {}
    for name in frame.columns:
        s = frame[name]
        key = str(name)
        if pd.api.types.is_bool_dtype(s) or pd.api.types.is_numeric_dtype(s):
            columns[key] = s.to_numpy(dtype=float, na_value=np.nan)
        else:
            categorical[key] = [None if pd.isna(v) else str(v) for v in s.tolist()]
    return from_table(
        columns,
        categorical=categorical or None,
        response=response,
        weights=weights,
        missing=missing,
        repair=repair,
    )


# ---------------------------------------------------------------------------------------------
# From a correlation matrix


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
    _check_policy(repair, REPAIR_POLICIES, "/repair")
    names = _check_names(list(names), "/names")
    p = len(names)
    if p < 2:
        raise TooFewDataError.at("/names", f"at least two predictors are needed; got {p}")
    r = _square_matrix(matrix, p, "/matrix", "the correlation matrix")
    r = _check_symmetric(r, "/matrix")
    _check_correlation_entries(r, "/matrix")
    np.fill_diagonal(r, 1.0)
    nval = _n_value(n, p, "/n")
    term_list = _check_terms(terms, names)
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
        if (np.abs(c) > 1.0 + _MATRIX_ATOL).any():
            j = int(np.flatnonzero(np.abs(c) > 1.0 + _MATRIX_ATOL)[0])
            raise MatrixError.at(
                f"/response/correlations/{j}", "correlations must lie between -1 and 1 inclusive"
            )
        full = np.empty((p + 1, p + 1))
        full[:p, :p] = r
        full[:p, p] = full[p, :p] = np.clip(c, -1.0, 1.0)
        full[p, p] = 1.0
        r = full
    r, rep, notes = _validated_correlation(r, "/matrix", repair)
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


# ---------------------------------------------------------------------------------------------
# From moments


def _moment_part(
    q: int, n: object, means: object, covariance: object, base: str
) -> tuple[float, np.ndarray, np.ndarray]:
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
    cov = _square_matrix(covariance, q, f"{base}/covariance", "the covariance matrix")
    d = np.sqrt(np.abs(np.diag(cov)))
    cov = _check_symmetric(cov, f"{base}/covariance", np.where(d > 0, d, 1.0))
    neg = np.flatnonzero(np.diag(cov) < 0)
    if neg.size:
        j = int(neg[0])
        raise MatrixError.at(f"{base}/covariance/{j}/{j}", "variances cannot be negative")
    return nval, m, cov * (nval - 1.0)


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
    _n_value(total, len(predictors), "/n")
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
    r_checked, rep, notes = _validated_correlation(
        _correlation_from_comoments(com), pointer, repair
    )
    if rep is not None:
        d = np.sqrt(np.diag(com))
        com = r_checked * np.outer(d, d)
    return replace(
        unchecked,
        correlation=r_checked,
        comoments=com,
        terms=_check_terms(terms, predictors),
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
    _check_policy(repair, REPAIR_POLICIES, "/repair")
    names = _check_names(list(names), "/names")
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
    _check_policy(repair, REPAIR_POLICIES, "/repair")
    names = _check_names(list(names), "/names")
    if not parts:
        raise InputError.at("/parts", "at least one part is needed")
    level = [_moment_part(len(names), *part, f"/parts/{i}") for i, part in enumerate(parts)]
    while len(level) > 1:
        nxt = [_merge_moments(level[i], level[i + 1]) for i in range(0, len(level) - 1, 2)]
        if len(level) % 2:
            nxt.append(level[-1])
        level = nxt
    total, mean, com = level[0]
    return _summary_from_comoments(names, total, mean, com, response, terms, repair, "/parts")
