"""Every input error names its field and says how to fix it; the wording is pinned here."""

from __future__ import annotations

import numpy as np
import pytest
from error_checks import assert_names_field

from knotwork.core import (
    InputError,
    MatrixError,
    MissingValuesError,
    OptionError,
    Options,
    TooFewDataError,
    assess,
    from_correlation,
    from_moments,
    from_table,
    merge_moments,
)

A = [1.0, 2.0, 3.0, 4.0, 5.0]
B = [2.0, 1.0, 4.0, 3.0, 6.0]
C = [0.5, 0.1, 0.9, 0.3, 0.2]
R3 = [[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]]


def table(**kw):
    cols = kw.pop("columns", {"a": A, "b": B, "c": C})
    return assess(from_table(cols, **kw))


def corr(names=("a", "b", "c"), matrix=R3, n=50, **kw):
    return assess(from_correlation(list(names), matrix, n, **kw))


CASES = [
    # (build, exception class, pointer, message fragment)
    # The intercept's label is reserved, so a label never names two columns.
    (
        lambda: table(columns={"a": A, "<constant>": B, "c": C}),
        InputError,
        "/columns/<constant>",
        "the name '<constant>' is reserved for the intercept in the diagnostics; rename this "
        "variable",
    ),
    (
        lambda: table(columns={"a": A, "c": C}, categorical={"<constant>": list("xyxyx")}),
        InputError,
        "/categorical/<constant>",
        "the name '<constant>' is reserved for the intercept",
    ),
    (
        lambda: corr(names=("a", "<constant>", "c")),
        InputError,
        "/names/1",
        "the name '<constant>' is reserved for the intercept",
    ),
    (
        lambda: assess(from_moments(["<constant>", "b"], 10, [0, 0], [[1, 0.1], [0.1, 1]])),
        InputError,
        "/names/0",
        "the name '<constant>' is reserved for the intercept",
    ),
    (
        lambda: table(columns={"a": A}),
        TooFewDataError,
        "/columns",
        "at least two predictors are needed; got 1",
    ),
    (
        lambda: table(columns={"a": A[:2], "b": B[:2], "c": C[:2]}),
        TooFewDataError,
        "/columns",
        "2 rows for 3 predictors; collinearity diagnostics need more rows than predictors",
    ),
    (
        lambda: table(columns={"a": A, "b": [7.0] * 5}),
        InputError,
        "/columns/b",
        "'b' is constant, so it carries no information; drop it",
    ),
    (
        lambda: table(columns={"a": A, "b": [None] * 5, "c": C}),
        MissingValuesError,
        "/columns/b",
        "every value is missing",
    ),
    (
        lambda: table(columns={"a": A, "b": [1.0, None, 3.0, None, 2.0], "c": C}),
        MissingValuesError,
        "/columns/b",
        "2 of 5 values missing",
    ),
    (
        lambda: table(columns={"a": A, "b": [1.0, float("inf"), 3.0, 4.0, 2.0], "c": C}),
        InputError,
        "/columns/b",
        "values must be finite; row 1 is infinite",
    ),
    (
        lambda: table(columns={"a": A, "b": B[:4], "c": C}),
        InputError,
        "/columns/b",
        "has 4 values while the other columns have 5",
    ),
    (
        lambda: table(columns={"a": A, "b": ["x"] * 5}),
        InputError,
        "/columns/b",
        "values must be numbers or null",
    ),
    (
        lambda: table(columns={"a": A, "b": B, "w": [1, -1, 1, 1, 1]}, weights="w"),
        InputError,
        "/columns/w",
        "weights must be non-negative; row 1 is negative",
    ),
    (
        lambda: table(response="y"),
        InputError,
        "/response",
        "response names 'y', which is not a numeric column",
    ),
    (
        lambda: table(categorical={"g": ["u"] * 5}),
        InputError,
        "/categorical/g",
        "needs at least two levels",
    ),
    (lambda: table(missing="sometimes"), OptionError, "/missing", "must be one of 'reject'"),
    (lambda: corr(names=("a", "a", "c")), InputError, "/names/1", "duplicate name 'a'"),
    (
        lambda: corr(names=("a",), matrix=[[1]]),
        TooFewDataError,
        "/names",
        "at least two predictors are needed; got 1",
    ),
    (
        lambda: corr(matrix=[[1, 0.5], [0.5, 1]]),
        MatrixError,
        "/matrix",
        "must have 3 rows (one per name); got 2",
    ),
    (
        lambda: corr(matrix=[[1, 0.5, 0.2], [0.5, 1], [0.2, 0.3, 1]]),
        MatrixError,
        "/matrix/1",
        "each row must have 3 entries; got 2",
    ),
    (
        lambda: corr(matrix=[[1, 0.5, 0.2], [0.4, 1, 0.3], [0.2, 0.3, 1]]),
        MatrixError,
        "/matrix/0/1",
        "the matrix must be symmetric",
    ),
    (
        lambda: corr(matrix=[[1, 1.5, 0.2], [1.5, 1, 0.3], [0.2, 0.3, 1]]),
        MatrixError,
        "/matrix/0/1",
        "correlations must lie between -1 and 1",
    ),
    (
        lambda: corr(matrix=[[1, 0.5, 0.2], [0.5, 0.9, 0.3], [0.2, 0.3, 1]]),
        MatrixError,
        "/matrix/1/1",
        "diagonal entries of a correlation must be 1",
    ),
    (
        lambda: corr(matrix=[[1, 0.9, -0.9], [0.9, 1, 0.9], [-0.9, 0.9, 1]]),
        MatrixError,
        "/matrix",
        "not positive semi-definite (smallest eigenvalue -0.8)",
    ),
    (
        lambda: corr(matrix=[[1, float("nan"), 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]]),
        MatrixError,
        "/matrix/0/1",
        "entries must be finite numbers",
    ),
    (lambda: corr(n=3), TooFewDataError, "/n", "n must exceed the number of predictors (3)"),
    (lambda: corr(n="many"), InputError, "/n", "n must be a number"),
    (
        lambda: corr(terms={"t": ["a", "z"]}),
        InputError,
        "/terms/t/1",
        "term 't' names unknown column 'z'",
    ),
    (
        lambda: corr(terms={"t": ["a"], "u": ["a", "b"]}),
        InputError,
        "/terms/u/0",
        "column 'a' already belongs to term 't'",
    ),
    (
        lambda: corr(response=("y", [0.1, 0.2])),
        InputError,
        "/response/correlations",
        "expected 3 correlations (one per predictor); got 2",
    ),
    (lambda: corr(repair="sometimes"), OptionError, "/repair", "must be one of 'reject'"),
    (
        lambda: from_moments(["a", "b"], 10, [0, 0], [[1, 0], [0, 0]]),
        InputError,
        "/covariance/1/1",
        "'b' is constant",
    ),
    (
        lambda: from_moments(["a", "b", "c"], 10, [0, 0], np.eye(3)),
        InputError,
        "/means",
        "expected 3 means (one per name)",
    ),
    (
        lambda: from_moments(["a", "b"], 10, [0, 0], [[1, 0], [0, -1]]),
        MatrixError,
        "/covariance/1/1",
        "variances cannot be negative",
    ),
    (
        lambda: from_moments(["a", "b", "y"], 10, [0, 0, 0], np.eye(3), response="z"),
        InputError,
        "/response",
        "response names 'z', which is not in names",
    ),
    (
        lambda: merge_moments([(5, [0, 0], np.eye(2)), (0, [0, 0], np.eye(2))], ["a", "b"]),
        InputError,
        "/parts/1/n",
        "n must be a finite number of at least 1",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(threshold=0.5)),
        OptionError,
        "/threshold",
        # The contract's rule, in the same words the service answers with.
        "Expected `float` > 1.0",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(protect=("z",))),
        OptionError,
        "/protect/0",
        "protect names 'z', which is not a predictor",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(sections=["all"])),
        OptionError,
        "/sections/0",
        "Invalid enum value 'all'",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(intercept=False)),
        OptionError,
        "/intercept",
        "intercept=false (uncentred VIF) needs rows or moments",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(ridge_grid=(-1.0,))),
        OptionError,
        "/ridge/grid/0",
        "Expected `float` >= 0.0",
    ),
    (
        lambda: assess(
            from_correlation(["a", "b"], np.eye(2), 9),
            Options(components_rule="cumulative", components_limit=3.0),
        ),
        OptionError,
        "/components/limit",
        "a cumulative share must lie in (0, 1]",
    ),
    (
        lambda: assess(from_correlation(["a", "b"], np.eye(2), 9), Options(components_limit=10.0)),
        OptionError,
        "/components/limit",
        "the vif_threshold rule takes its limit from threshold; set threshold instead of "
        "components.limit, or choose rule condition_index or cumulative",
    ),
]


@pytest.mark.parametrize(("build", "cls", "pointer", "fragment"), CASES)
def test_error_names_field_and_reason(build, cls, pointer, fragment) -> None:
    assert_names_field(build, cls, pointer, fragment)


def test_missing_counts_every_column_at_once() -> None:
    with pytest.raises(MissingValuesError) as info:
        from_table({"a": [1.0, None, 3.0, 4.0], "b": [None, None, 1.0, 2.0], "c": C[:4]})
    assert [(p.pointer, p.reason) for p in info.value.problems] == [
        ("/columns/a", "1 of 4 values missing"),
        ("/columns/b", "2 of 4 values missing"),
    ]
    assert "set options.missing to 'drop_rows' or 'pairwise'" in info.value.message


def test_repair_nearest_accepts_an_inconsistent_matrix() -> None:
    bad = [[1, 0.9, -0.9], [0.9, 1, 0.9], [-0.9, 0.9, 1]]
    s = from_correlation(["a", "b", "c"], bad, 50, repair="nearest")
    assert s.repair is not None and s.repair.distance > 0
    assert np.linalg.eigvalsh(s.R).min() > -1e-12
    assert "matrix_repaired" in {n.code for n in s.notes}


def test_rounded_matrix_warns(longley_exog) -> None:
    # methods notes: rounding Longley's R to 2 decimals makes it indefinite.
    r = np.round(longley_exog.corr().to_numpy(), 2)
    s = from_correlation(list(longley_exog.columns), r, 16, repair="nearest")
    codes = {n.code for n in s.notes}
    assert {"rounded_matrix", "matrix_repaired"} <= codes
