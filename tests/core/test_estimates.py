"""Estimates input in the core: what is computed, what is skipped and why, and every bad input
with its pointer and wording pinned."""

from __future__ import annotations

import numpy as np
import pytest
from error_checks import assert_names_field
from numpy.testing import assert_allclose

from knotwork.core import (
    CODES,
    InputError,
    MatrixError,
    OptionError,
    Options,
    TooFewDataError,
    assess,
    from_correlation,
    from_estimates,
)

NAMES = ["const", "a", "b", "c"]
# The covariance of least-squares estimates for a design whose predictors have correlation R
# below: V = s^2 (X'X)^-1 built here from an explicit small design, so it is exactly
# consistent (positive definite).
_X = np.array(
    [
        [1, 2.0, 1.0, 0.3],
        [1, 3.0, 2.5, 0.1],
        [1, 5.0, 3.9, 0.8],
        [1, 4.0, 4.2, 0.5],
        [1, 6.0, 5.1, 0.2],
        [1, 8.0, 6.8, 0.9],
        [1, 7.0, 6.1, 0.4],
        [1, 9.0, 8.4, 0.7],
    ]
)
COV = 0.7 * np.linalg.inv(_X.T @ _X)


def ests(names=NAMES, cov=COV, intercept="const", **kw):
    return from_estimates(list(names), cov, intercept, **kw)


def test_vifs_equal_those_of_the_design_correlation() -> None:
    # Outside reference: numpy's correlation of the design's predictors (least squares:
    # normalize(inverse of the slopes' covariance) is that correlation). A 3 x 3 correlation
    # with cond about 1e2, inverted twice: 1e-12.
    r = np.corrcoef(_X[:, 1:], rowvar=False)
    summary = ests()
    assert_allclose(summary.R, r, atol=1e-12)
    ours = assess(summary, Options(sections=["variables"]))
    theirs = assess(from_correlation(["a", "b", "c"], r, 8), Options(sections=["variables"]))
    assert_allclose([v.vif for v in ours.variables], [v.vif for v in theirs.variables], rtol=1e-10)


def test_answer_without_n_skips_the_tests_and_the_remedies_that_need_a_response() -> None:
    result = assess(ests())
    assert result.input_kind == "estimates"
    assert result.n is None
    assert result.intercept is True
    assert result.tests is None
    assert result.ridge is None and result.components is None and result.comparison is None
    assert result.removal is not None and result.conditioning is not None
    codes = [w.code for w in result.warnings]
    assert "skipped_without_n" in codes and "skipped_without_response" in codes
    assert {"skipped_without_n", "skipped_without_response"} <= set(CODES)
    skipped = next(w for w in result.warnings if w.code == "skipped_without_response")
    assert skipped.message.startswith("ridge, components, comparison skipped: they need a ")


def test_with_n_the_tests_run() -> None:
    result = assess(ests(n=8))
    assert result.n == 8.0
    assert result.tests is not None
    assert "skipped_without_n" not in [w.code for w in result.warnings]


def test_no_skip_warning_when_the_skipped_sections_were_not_asked_for() -> None:
    result = assess(ests(), Options(sections=["variables", "removal"]))
    assert [w.code for w in result.warnings if w.code.startswith("skipped")] == []


def test_conditioning_basis_is_named_and_includes_the_constant() -> None:
    result = assess(ests(), Options(sections=["conditioning"]))
    assert result.conditioning is not None
    assert result.conditioning.basis == "estimates"
    assert result.conditioning.names == ("<constant>", "a", "b", "c")
    # Outside reference: numpy's SVD of the design with every column scaled to unit length
    # (Belsley, Kuh & Welsch). Cross-product route, cond about 1e2: 1e-10.
    z = _X / np.linalg.norm(_X, axis=0)
    s = np.linalg.svd(z, compute_uv=False)
    assert_allclose(result.conditioning.indices, s[0] / s, rtol=1e-10)


def test_intercept_anywhere_in_the_order() -> None:
    # The intercept need not come first; the same estimates permuted answer the same.
    # Permuting rows and columns changes only the order of the same floating-point
    # operations: 1e-12.
    order = [1, 2, 0, 3]
    permuted = COV[np.ix_(order, order)]
    a = assess(ests(), Options(sections=["variables", "conditioning"]))
    b = assess(
        ests([NAMES[i] for i in order], permuted), Options(sections=["variables", "conditioning"])
    )
    assert [v.name for v in b.variables] == ["a", "b", "c"]
    assert_allclose([v.vif for v in a.variables], [v.vif for v in b.variables], rtol=1e-12)
    assert b.conditioning is not None and b.conditioning.names[0] == "<constant>"


def test_without_intercept_the_answer_says_so() -> None:
    result = assess(ests(["a", "b", "c"], COV[1:, 1:], None))
    assert result.intercept is False
    assert result.conditioning is not None
    assert result.conditioning.names == ("a", "b", "c")
    # Without an intercept the model's diagnostics are uncentred whatever options.intercept says.
    again = assess(ests(["a", "b", "c"], COV[1:, 1:], None), Options(intercept=False))
    # The same matrix through the same code either way: identical bits.
    assert [v.vif for v in again.variables] == [v.vif for v in result.variables]


def test_gvif_of_a_term() -> None:
    # Outside reference: Fox & Monette's determinant formula on the estimates' correlation,
    # evaluated here with numpy. Determinants of a 3 x 3 matrix against Cholesky
    # log-determinants of its implied inverse: 1e-10.
    slopes = COV[1:, 1:]
    d = np.sqrt(np.diag(slopes))
    c = slopes / np.outer(d, d)
    det = np.linalg.det
    expected = det(c[:2, :2]) * c[2, 2] / det(c)
    result = assess(ests(terms={"ab": ["a", "b"]}), Options(sections=["variables", "terms"]))
    assert_allclose(result.terms[0].gvif, expected, rtol=1e-10)


def test_repair_of_an_indefinite_matrix_is_reported() -> None:
    # Four coefficients whose pairwise correlations cannot hold together; nearest repair makes
    # them consistent but singular, so the answer is still a clear refusal.
    bad = np.array(
        [[1.0, 0.9, 0.9, 0.0], [0.9, 1.0, -0.9, 0.0], [0.9, -0.9, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]]
    )
    with pytest.raises(MatrixError) as info:
        ests(["a", "b", "c", "d"], bad, None, repair="nearest")
    assert info.value.problems[0].pointer == "/covariance"
    assert info.value.problems[0].reason.startswith("after the repair, the covariance")


S = COV.copy()
ASYM = COV.copy()
ASYM[1, 2] *= 1.01
BIG = COV.copy()
BIG[1, 2] = BIG[2, 1] = 2 * np.sqrt(COV[1, 1] * COV[2, 2])
NAN = COV.copy()
NAN[2, 1] = np.nan
ZERO_VAR = COV.copy()
ZERO_VAR[2, 2] = 0.0
NEG_VAR = COV.copy()
NEG_VAR[3, 3] = -1.0
# A covariance far beyond its tiny variances: the scaled entry overflows; still refused by name.
HUGE = np.diag([1e-300, 1e-300, 1e300, 1.0])
HUGE[0, 2] = HUGE[2, 0] = 1e300
INDEFINITE = np.array(
    [[1.0, 0.9, 0.9, 0.0], [0.9, 1.0, -0.9, 0.0], [0.9, -0.9, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]]
)
# An aliased coefficient: c = a + b exactly, so the covariance of the estimates (from a
# pseudo-inverse, as a fitting program reports it) is singular.
_ALIASED_X = np.column_stack([_X[:, :3], _X[:, 1] + _X[:, 2]])
SINGULAR = np.linalg.pinv(_ALIASED_X.T @ _ALIASED_X)

CASES = [
    # (build, exception class, pointer, message fragment)
    (
        lambda: ests(intercept="Intercept"),
        InputError,
        "/intercept",
        "intercept names 'Intercept', which is not in names; give the name of the intercept "
        "coefficient, or null when the model has none",
    ),
    (
        lambda: ests(["const", "a", "a", "c"]),
        InputError,
        "/names/2",
        "duplicate name 'a' (also at position 1); names must be unique",
    ),
    (
        lambda: ests(["const", "a", "b", "<constant>"]),
        InputError,
        "/names/3",
        "the name '<constant>' is reserved for the intercept in the diagnostics",
    ),
    (
        lambda: ests(["const", "a"], COV[:2, :2]),
        TooFewDataError,
        "/names",
        "at least two coefficients besides the intercept are needed; got 1",
    ),
    (
        lambda: ests(cov=COV[:3]),
        MatrixError,
        "/covariance",
        "the covariance matrix must have 4 rows (one per name); got 3",
    ),
    (
        lambda: ests(cov=[list(r) for r in COV[:, :3]]),
        MatrixError,
        "/covariance/0",
        "each row must have 4 entries; got 3",
    ),
    (lambda: ests(cov=NAN), MatrixError, "/covariance/2/1", "entries must be finite numbers"),
    (
        lambda: ests(cov=ZERO_VAR),
        MatrixError,
        "/covariance/2/2",
        "the variance of 'b' must be positive; a coefficient with no variance was not estimated "
        "(drop it, or send the covariance of the estimated ones)",
    ),
    (
        lambda: ests(cov=NEG_VAR),
        MatrixError,
        "/covariance/3/3",
        "the variance of 'c' must be positive",
    ),
    (
        lambda: ests(cov=ASYM),
        MatrixError,
        "/covariance/1/2",
        "the matrix must be symmetric: entry [1][2] differs from [2][1]",
    ),
    (
        lambda: ests(cov=BIG),
        MatrixError,
        "/covariance/1/2",
        "the covariance of 'a' and 'b' exceeds the square root of the product of their "
        "variances (a correlation of 2); the matrix cannot be a covariance",
    ),
    (
        lambda: ests(["a", "b", "c", "d"], HUGE, None),
        MatrixError,
        "/covariance/0/2",
        "the covariance of 'a' and 'c' exceeds the square root of the product of their "
        "variances (a correlation of inf)",
    ),
    (
        lambda: ests(["a", "b", "c", "d"], INDEFINITE, None),
        MatrixError,
        "/covariance",
        "the matrix is not positive semi-definite (smallest eigenvalue -0.8); it cannot come "
        "from data. Send a consistent matrix, or set options.repair to 'nearest'",
    ),
    (
        lambda: ests(["const", "a", "b", "c"], SINGULAR),
        MatrixError,
        "/covariance",
        "the covariance of the estimates is singular: a combination of 'a', 'b', 'c' has no "
        "variance, so the estimates' correlation cannot be inverted. Aliased coefficients (an "
        "exact dependency in the design) or a clustered covariance with fewer clusters than "
        "coefficients give such a matrix; refit without the aliased coefficients, or send the "
        "design itself (rows or moments)",
    ),
    (
        lambda: ests(n=3),
        TooFewDataError,
        "/n",
        "n must exceed the number of predictors (3); got 3",
    ),
    (
        lambda: ests(terms={"t": ["a", "const"]}),
        InputError,
        "/terms/t/1",
        "term 't' names the intercept 'const', which is left out of the diagnostics",
    ),
    (
        lambda: ests(terms={"t": ["a", "z"]}),
        InputError,
        "/terms/t/1",
        "term 't' names unknown column 'z'",
    ),
    (
        lambda: ests(repair="fix"),
        OptionError,
        "/repair",
        "must be one of 'reject', 'nearest'; got 'fix'",
    ),
    (
        lambda: assess(ests(), Options(intercept=False)),
        OptionError,
        "/intercept",
        "the fitted model has an intercept (input.intercept names it), so its estimates give "
        "centred diagnostics; leave intercept at true",
    ),
]


@pytest.mark.parametrize(("build", "cls", "pointer", "fragment"), CASES)
def test_bad_estimates_name_the_field(build, cls, pointer, fragment) -> None:
    assert_names_field(build, cls, pointer, fragment)
