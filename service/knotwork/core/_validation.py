"""Checks of the inputs every summary is built from: names, matrices, policies and terms.

Each check raises a :class:`KnotworkError` subclass whose problem names the offending field by
its JSON pointer, or returns the value in the form the summaries use.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Collection, Mapping, Sequence

import numpy as np
import scipy.linalg

from knotwork_contract import RepairReport
from knotwork_contract import escape as esc

from ._errors import InputError, MatrixError, OptionError, Problem, TooFewDataError
from ._notices import Notice, notice
from ._summary import INTERCEPT_NAME, Term

#: Symmetry and unit-diagonal tolerance for a supplied matrix (absolute, on the correlation scale).
MATRIX_ATOL = 1e-9

#: A supplied matrix is positive semi-definite when its smallest eigenvalue is at least
#: ``-PSD_RTOL * largest``; smaller negatives are rounding noise and are clipped away.
PSD_RTOL = 1e-10

MISSING_POLICIES = ("reject", "drop_rows", "pairwise")
REPAIR_POLICIES = ("reject", "nearest")


def check_policy(value: str, allowed: Sequence[str], pointer: str) -> None:
    """Raise :class:`OptionError` at ``pointer`` unless ``value`` is one of ``allowed``."""
    if value not in allowed:
        raise OptionError.at(
            pointer, f"must be one of {', '.join(repr(a) for a in allowed)}; got {value!r}"
        )


RESERVED_REASON = (
    f"the name {INTERCEPT_NAME!r} is reserved for the intercept in the diagnostics; "
    "rename this variable"
)


def check_names(names: Sequence[str], pointer: str) -> tuple[str, ...]:
    """The names as a tuple; every empty, reserved or duplicate name is a problem."""
    problems = []
    seen: dict[str, int] = {}
    for i, name in enumerate(names):
        if not isinstance(name, str) or not name:
            problems.append(Problem(f"{pointer}/{i}", "names must be non-empty strings"))
        elif name == INTERCEPT_NAME:
            problems.append(Problem(f"{pointer}/{i}", RESERVED_REASON))
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


def square_matrix(matrix: object, size: int, pointer: str, what: str) -> np.ndarray:
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


def check_symmetric(a: np.ndarray, pointer: str, scale: np.ndarray | None = None) -> np.ndarray:
    """The symmetric part of ``a``, once ``a`` is symmetric within :data:`MATRIX_ATOL`
    (relative to ``scale_i * scale_j`` when given)."""
    diff = np.abs(a - a.T)
    if scale is not None:
        diff = diff / np.outer(scale, scale)
    if diff.size and diff.max() > MATRIX_ATOL:
        i, j = (int(v) for v in np.unravel_index(np.argmax(diff), diff.shape))
        i, j = min(i, j), max(i, j)
        raise MatrixError.at(
            f"{pointer}/{i}/{j}",
            f"the matrix must be symmetric: entry [{i}][{j}] differs from [{j}][{i}]",
        )
    symmetric: np.ndarray = a * 0.5 + a.T * 0.5  # halves first: a sum near 1e308 overflows
    return symmetric


def check_correlation_entries(r: np.ndarray, pointer: str) -> None:
    """Raise unless the diagonal is 1 and every entry lies in [-1, 1] (within tolerance)."""
    diag = np.abs(np.diag(r) - 1.0)
    if diag.max() > MATRIX_ATOL:
        i = int(np.argmax(diag))
        raise MatrixError.at(f"{pointer}/{i}/{i}", "diagonal entries of a correlation must be 1")
    off = np.abs(r) > 1.0 + MATRIX_ATOL
    if off.any():
        i, j = (int(v) for v in np.argwhere(off)[0])
        raise MatrixError.at(
            f"{pointer}/{i}/{j}", "correlations must lie between -1 and 1 inclusive"
        )


def n_value(n: object, p: int, pointer: str) -> float:
    """``n`` as a float, once it is a finite number above ``p`` (the predictors)."""
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


def _looks_rounded(r: np.ndarray, smallest: Callable[[], float]) -> Notice | None:
    """Warn when the entries carry few decimals and rounding could move the small eigenvalues.

    Rounding every off-diagonal entry by at most h moves each eigenvalue by at most
    ``(p - 1) h`` (Weyl's inequality with a Gershgorin bound on the perturbation).
    ``smallest`` gives the smallest eigenvalue; it is called only for rounded-looking entries.
    """
    p = r.shape[0]
    off = r[~np.eye(p, dtype=bool)]

    def rounded_to(decimals: int) -> bool:
        scaled = off * 10.0**decimals
        return bool(np.all(np.abs(scaled - np.round(scaled)) <= 1e-9 * 10.0**decimals))

    # Entries rounded to d decimals are rounded to d + 1 as well: one look at the finest
    # settles the usual case, a matrix of full-precision correlations.
    if not rounded_to(4):
        return None
    lam_min = smallest()
    for decimals in range(1, 5):
        if rounded_to(decimals):
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


def validated_correlation(
    r: np.ndarray, pointer: str, repair: str
) -> tuple[np.ndarray, RepairReport | None, list[Notice]]:
    """Check positive semi-definiteness; repair to the nearest correlation matrix on request.

    A matrix whose Cholesky factorization succeeds is positive definite and passes without its
    eigenvalues, which are then computed only to judge rounded-looking entries.
    """
    notes: list[Notice] = []
    if r.shape[0] and scipy.linalg.lapack.dpotrf(r, lower=False)[1] == 0:
        rounded = _looks_rounded(r, lambda: float(np.linalg.eigvalsh(r)[0]))
        return r, None, [rounded] if rounded is not None else notes
    values = np.linalg.eigvalsh(r)
    lam_min, lam_max = float(values[0]), float(values[-1])
    rounded = _looks_rounded(r, lambda: lam_min)
    if rounded is not None:
        notes.append(rounded)
    if lam_min >= -PSD_RTOL * lam_max:
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


def check_terms(
    terms: Mapping[str, Sequence[str]] | None, names: tuple[str, ...]
) -> tuple[Term, ...]:
    """The terms, once each names known columns, none of them in two terms."""
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


def common_length(lengths: Mapping[str, int], categorical: Collection[str]) -> int:
    """The length most columns have; an error naming the first column of another length."""
    expected = max(set(lengths.values()), key=list(lengths.values()).count)
    for name, length in lengths.items():
        if length != expected:
            where = "categorical" if name in categorical else "columns"
            raise InputError.at(
                f"/{where}/{esc(name)}",
                f"has {length} values while the other columns have {expected}; "
                "all columns must have the same length",
            )
    return expected
