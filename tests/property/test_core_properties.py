"""Invariants of the diagnostics, checked on random designs (hypothesis)."""

from __future__ import annotations

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose

from knotwork.core import Options, assess, from_table

OPTS = Options(sections=["variables", "conditioning", "tests", "dependencies"])


@st.composite
def designs(draw):
    """Random designs with some built-in collinearity, well away from exact singularity."""
    seed = draw(st.integers(0, 2**32 - 1))
    n = draw(st.integers(12, 80))
    p = draw(st.integers(2, 6))
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(p, p)) * draw(st.floats(0.0, 2.0)) + np.eye(p)
    x = rng.normal(size=(n, p)) @ mix
    return x, rng


def _rtol(vifs) -> float:
    """Rounding in R is amplified by about the largest VIF; allow for it."""
    return 1e-10 + 1e-13 * float(np.max(vifs))


def _vifs(x: np.ndarray, names=None) -> np.ndarray:
    names = names or [f"x{j}" for j in range(x.shape[1])]
    result = assess(from_table(dict(zip(names, x.T, strict=True))), OPTS)
    return np.array([v.vif for v in result.variables])


@settings(max_examples=40, deadline=None)
@given(designs())
def test_vif_at_least_one(design) -> None:
    x, _ = design
    assert np.all(_vifs(x) >= 1.0)


@settings(max_examples=40, deadline=None)
@given(designs(), st.floats(-1e4, 1e4), st.floats(1e-3, 1e3))
def test_invariant_to_affine_rescaling(design, shift, scale) -> None:
    x, rng = design
    j = int(rng.integers(x.shape[1]))
    y = x.copy()
    y[:, j] = y[:, j] * scale + shift
    base = _vifs(x)
    assert_allclose(_vifs(y), base, rtol=1e-7 + 1e-12 * float(np.max(base)))


@settings(max_examples=40, deadline=None)
@given(designs())
def test_invariant_to_row_order(design) -> None:
    x, rng = design
    base = _vifs(x)
    assert_allclose(_vifs(x[rng.permutation(x.shape[0])]), base, rtol=_rtol(base))


@settings(max_examples=40, deadline=None)
@given(designs())
def test_permuting_columns_permutes_results(design) -> None:
    x, rng = design
    perm = rng.permutation(x.shape[1])
    names = [f"x{j}" for j in range(x.shape[1])]
    base = dict(zip(names, _vifs(x, names), strict=True))
    permuted = _vifs(x[:, perm], [names[j] for j in perm])
    expected = [base[names[j]] for j in perm]
    assert_allclose(permuted, expected, rtol=_rtol(expected))


@settings(max_examples=40, deadline=None)
@given(designs(), st.integers(1, 11))
def test_merged_partial_summaries_equal_the_whole(design, cut) -> None:
    x, _ = design
    cols = [f"x{j}" for j in range(x.shape[1])]
    whole = from_table(dict(zip(cols, x.T, strict=True)))
    a = from_table(dict(zip(cols, x[:cut].T, strict=True)))
    b = from_table(dict(zip(cols, x[cut:].T, strict=True)))
    merged = a.merge(b)
    # Exact: n counts rows, a whole number, exact in floating point in any order.
    assert merged.n == whole.n
    assert_allclose(merged.comoments, whole.comoments, rtol=1e-9, atol=1e-9)
    expected = [v.vif for v in assess(whole, OPTS).variables]
    got = [v.vif for v in assess(merged, OPTS).variables]
    assert_allclose(got, expected, rtol=_rtol(expected))


@settings(max_examples=30, deadline=None)
@given(designs())
def test_an_exact_combination_is_always_caught(design) -> None:
    x, rng = design
    w = rng.normal(size=x.shape[1])
    w[np.abs(w) < 0.1] = 0.5
    y = np.column_stack([x, x @ w + 2.0])
    result = assess(from_table({f"c{j}": y[:, j] for j in range(y.shape[1])}), OPTS)
    assert result.dependencies, "the combination must be reported as a dependency"
    assert result.variables[-1].aliased and result.variables[-1].vif is None
