"""Summaries of rows: a table of columns (and categorical labels), or a pandas DataFrame.

The moments come from the shared kernel (:func:`knotwork_contract.comoments`: one pass over
the rows, with the checked pass when a value is missing or infinite) and, under pairwise
deletion, :func:`knotwork_contract.pairwise_comoments`; this module checks the columns, applies
the missing-value policy, expands categorical columns, and names the offending column in every
error.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping, Sequence
from dataclasses import dataclass

import numpy as np

from knotwork_contract import (
    NotFinite,
    comoments,
    correlation_from_comoments,
    indicator_columns,
    pairwise_comoments,
    sorted_levels,
)
from knotwork_contract import escape as esc

from ._errors import InputError, MissingValuesError, Problem, TooFewDataError
from ._interrupt import checkpoint
from ._notices import Notice, notice
from ._summary import INTERCEPT_NAME, Summary, Term
from ._validation import (
    MISSING_POLICIES,
    REPAIR_POLICIES,
    RESERVED_REASON,
    check_policy,
    check_symmetric,
    common_length,
    validated_correlation,
)


def column_array(values: object, pointer: str, *, check: bool = True) -> tuple[np.ndarray, bool]:
    """The column as a float array, and whether it is complete (no missing value).

    With ``check`` False the values are not looked at (one pass fewer) and the column is taken
    as complete: the caller must then find out otherwise (see
    :func:`knotwork_contract.comoments`).
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


@dataclass(frozen=True, slots=True, eq=False)
class DesignRows:
    """The rows of a design, for the row bootstrap: predictors after categorical expansion and
    the missing-value policy, in the summary's order.

    Attributes
    ----------
    x
        (rows, p) float64, C order; every value finite.
    names
        The predictors (the summary's ``names``).
    weights
        The prior (frequency or survey) weight of each row, or None.
    """

    x: np.ndarray
    names: tuple[str, ...]
    weights: np.ndarray | None = None


def design_from_table(
    columns: Mapping[str, object],
    *,
    categorical: Mapping[str, Sequence[str | None]] | None = None,
    response: str | None = None,
    weights: str | None = None,
    missing: str = "reject",
    repair: str = "reject",
) -> tuple[Summary, DesignRows | None]:
    """:func:`from_table`, and the design's rows for the bootstrap.

    The rows are those the summary used (``drop_rows`` leaves out incomplete ones), with
    categorical columns expanded to their indicator columns. Under ``pairwise`` deletion with
    missing values no complete design exists, and the rows are None.

    Memory: one (rows, p) float64 array beside the columns, 8 bytes a cell of the design.
    """
    if weights is None:
        try:
            return _from_table(
                columns, categorical, response, weights, missing, repair, optimistic=True, rows=True
            )
        except NotFinite:
            pass
    return _from_table(
        columns, categorical, response, weights, missing, repair, optimistic=False, rows=True
    )


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
    the summary itself (:func:`knotwork_contract.comoments`); only when a value turns out to
    be missing or infinite are the columns checked one by one and the summary made again the
    checked way, so a complete table costs one pass over its rows instead of two.
    """
    if weights is None:
        try:
            return _from_table(
                columns, categorical, response, weights, missing, repair, optimistic=True
            )[0]
        except NotFinite:
            pass
    return _from_table(columns, categorical, response, weights, missing, repair, optimistic=False)[
        0
    ]


# One pass of checks in the order a caller needs their errors (names, lengths, missing values
# by policy, categorical levels, weights), each a branch; split, they would re-walk the columns.
def _from_table(  # noqa: C901
    columns: Mapping[str, object],
    categorical: Mapping[str, Sequence[str | None]] | None,
    response: str | None,
    weights: str | None,
    missing: str,
    repair: str,
    *,
    optimistic: bool,
    rows: bool = False,
) -> tuple[Summary, DesignRows | None]:
    """:func:`from_table`; ``optimistic``: values not checked, :class:`NotFinite` if needed;
    ``rows``: also the design's rows (:func:`design_from_table`)."""
    check_policy(missing, MISSING_POLICIES, "/missing")
    check_policy(repair, REPAIR_POLICIES, "/repair")
    categorical = dict(categorical or {})
    if not isinstance(columns, Mapping):
        raise InputError.at("/columns", "columns must map names to lists of numbers")
    for where, named in (("columns", columns), ("categorical", categorical)):
        if INTERCEPT_NAME in named:
            raise InputError.at(f"/{where}/{esc(INTERCEPT_NAME)}", RESERVED_REASON)
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
        arrays[name], complete = column_array(v, f"/columns/{esc(name)}", check=not optimistic)
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
    expected = common_length(lengths, labels)
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
        raise NotFinite  # a missing label: every column's count belongs in the answer
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
        levels = sorted_levels(s for s, k in zip(vals, keep, strict=True) if k)
        if len(levels) < 2:
            raise InputError.at(
                f"/categorical/{esc(name)}",
                "a categorical column needs at least two levels; this one is constant",
            )
        codes = np.full(n_rows, np.nan)
        index = {lev: i for i, lev in enumerate(levels)}
        for row, s in enumerate(vals):
            # A level seen only in rows left out (drop_rows) has no column: those rows are
            # not used, so their code stays missing.
            if s is not None and s in index:
                codes[row] = index[s]
        cols = indicator_columns(name, levels)
        for i, cname in enumerate(cols, start=1):
            if cname in arrays:
                raise InputError.at(
                    f"/categorical/{esc(name)}",
                    f"indicator column {cname!r} clashes with a numeric column of that name",
                )
            ind = (codes == i).astype(float)
            ind[np.isnan(codes)] = np.nan
            predictors.append((cname, ind, f"/categorical/{esc(name)}"))
        terms.append(Term(name, cols))

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
        summary = _pairwise_summary(x, wk, names, response, tuple(terms), pointers, repair, notes)
        return summary, None

    with np.errstate(over="ignore", invalid="ignore"):  # refused just below, by column
        total, mean, com = comoments(
            design, w, keep, optimistic=optimistic, between_blocks=checkpoint
        )
    _refuse_unsquarable(
        np.diag(com), pointers, lambda j: design[j][keep if w is None else keep & (w > 0)]
    )
    used = int(keep.sum()) if w is None else int(np.count_nonzero(w[keep] > 0))
    design_rows = None
    if rows:
        # The values are finite here: comoments found every kept value so (or the checked
        # pass refused them).
        every = bool(keep.all())
        x = np.empty((int(keep.sum()), len(names)))
        for j, (_, a, _) in enumerate(predictors):
            x[:, j] = a if every else a[keep]
        design_rows = DesignRows(
            x=x, names=names, weights=None if w is None else (w if every else w[keep])
        )
    summary = Summary(
        names=names,
        n=total,
        correlation=correlation_from_comoments(com),
        response=response,
        means=mean,
        comoments=com,
        terms=tuple(terms),
        input_kind="table",
        notes=tuple(notes),
        rows=used,
        sources=tuple(pointers),
    )
    return summary, design_rows


#: Below this sum of squared deviations (about 1e-292) the squares are subnormal numbers,
#: which carry fewer digits: the correlations and the eigenvalues after them are unreliable.
_SMALLEST_SQUARES = float(np.finfo(float).tiny / np.finfo(float).eps)


def _refuse_unsquarable(
    squares: np.ndarray, pointers: Sequence[str], column: Callable[[int], np.ndarray]
) -> None:
    """Refuse columns whose sum of squared deviations leaves double precision's range, naming
    each: beyond it (values above about 1e154) every other co-moment of the column is refused
    with it (Cauchy-Schwarz); below it (deviations of about 1e-147 and less, though not zero)
    the squares lose their digits. ``column(j)`` gives column j's values as used (NaN allowed),
    looked at only for columns whose sum is that small, to tell them from constant ones.
    """
    problems = [
        Problem(
            pointers[int(j)],
            "values this large overflow double precision when squared (about 1e154 and "
            "beyond); rescale the column, for example to other units",
        )
        for j in np.flatnonzero(~np.isfinite(squares))
    ]
    for j in np.flatnonzero(squares < _SMALLEST_SQUARES):
        values = column(int(j))
        values = values[~np.isnan(values)]
        if values.size and values.max() > values.min():
            problems.append(
                Problem(
                    pointers[int(j)],
                    "the values differ by so little that their squared deviations underflow "
                    "double precision (a sum of squares below 1e-292); rescale the column, for "
                    "example to other units",
                )
            )
    if problems:
        raise InputError(
            f"{len(problems)} column(s) whose values cannot be squared in double precision; "
            "rescale them",
            problems,
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
    with np.errstate(over="ignore", invalid="ignore"):  # refused just below, by column
        moments = pairwise_comoments(x, w)
    _refuse_unsquarable(np.diag(moments.squares), pointers, lambda j: x[:, j])
    var = moments.squares
    r = moments.correlation()
    # Row counts per pair. A float product runs in BLAS (an integer one does not: 100x slower
    # at 100k rows and 50 columns) and is exact for counts below 2**53.
    observed = present.astype(float)
    rows_pairs = observed.T @ observed
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
    r = check_symmetric(r, "/columns")
    np.clip(r, -1.0, 1.0, out=r)
    np.fill_diagonal(r, 1.0)
    n = float(moments.n.min())
    notes.append(
        notice(
            "pairwise_deletion",
            f"correlations come from pairwise-complete rows; n is the smallest pairwise count "
            f"({n:g}), and conditioning uses the correlation matrix",
        )
    )
    r, rep, more = validated_correlation(r, "/columns", repair)
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
