"""Estimates input on random designs and random matrices (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from knotwork.core import KnotworkError, Options, assess, from_estimates, from_table

OPTS = Options(sections=["variables", "terms", "conditioning", "removal"])


@st.composite
def fits(draw):
    """A random design with an intercept and the covariance of its least-squares estimates."""
    seed = draw(st.integers(0, 2**32 - 1))
    n = draw(st.integers(12, 60))
    p = draw(st.integers(2, 6))
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(p, p)) * draw(st.floats(0.0, 2.0)) + np.eye(p)
    x = rng.normal(size=(n, p)) @ mix + rng.normal(size=p) * 5
    design = np.column_stack([np.ones(n), x])
    sigma2 = draw(st.floats(1e-3, 1e3))
    return x, sigma2 * np.linalg.inv(design.T @ design)


@settings(max_examples=40, deadline=None)
@given(fits())
def test_estimates_of_least_squares_give_the_rows_vifs(fit) -> None:
    # Another route to the same quantity: the estimates' correlation inverted twice against a
    # Cholesky inverse of the rows' correlation; rounding grows with the largest VIF.
    x, cov = fit
    names = [f"x{j}" for j in range(x.shape[1])]
    rows = assess(from_table(dict(zip(names, x.T, strict=True))), OPTS)
    ests = assess(from_estimates(["c", *names], cov, "c"), OPTS)
    expected = np.array([v.vif for v in rows.variables])
    got = np.array([v.vif for v in ests.variables])
    assert_allclose(got, expected, rtol=1e-9 + 1e-12 * float(np.max(expected)) ** 2)


@st.composite
def matrices(draw):
    """Arbitrary symmetric-or-not finite matrices of any scale, with an optional intercept."""
    q = draw(st.integers(1, 5))
    values = draw(
        st.lists(
            st.floats(-1e300, 1e300, allow_nan=False, allow_infinity=False),
            min_size=q * q,
            max_size=q * q,
        )
    )
    a = np.array(values).reshape(q, q)
    shape = draw(st.sampled_from(["any", "symmetric", "scaled_gram"]))
    if shape == "symmetric" and np.isfinite((a + a.T) / 2).all():
        a = (a + a.T) / 2
    elif shape == "scaled_gram":
        # A valid covariance whose variances span up to 300 orders of magnitude.
        rng = np.random.default_rng(draw(st.integers(0, 2**32 - 1)))
        b = rng.normal(size=(q, q + draw(st.integers(-1, 2))))
        scale = 10.0 ** rng.uniform(-150, 150, size=q)
        a = (b @ b.T) * np.outer(scale, scale)
    intercept = draw(st.sampled_from([None, "v0", "zz"]))
    n = draw(st.one_of(st.none(), st.floats(0.5, 1e6)))
    return [f"v{i}" for i in range(q)], a, intercept, n


@settings(max_examples=150, deadline=None)
@given(matrices())
def test_any_matrix_is_answered_or_refused_by_name(case) -> None:
    # Whatever the numbers, the core answers or raises its own error naming a field; never a
    # numpy or Python error (which the service would answer with a 500).
    names, a, intercept, n = case
    error: KnotworkError | None = None
    try:
        assess(from_estimates(names, a, intercept, n=n))
    except KnotworkError as exc:
        error = exc
    assert error is None or (error.problems and error.problems[0].reason)
