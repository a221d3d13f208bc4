"""Ridge trace and choices of k against published values, scikit-learn and direct formulas."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from nist_longley import NIST_B, longley_rows, original_units, shipped_rows, standardize, summary
from numpy.testing import assert_allclose
from sklearn.linear_model import Ridge as SkRidge

from knotwork.core import Regression
from knotwork.core._errors import OptionError
from knotwork.core._ridge import (
    GCV,
    HKB,
    LAWLESS_WANG,
    VIF_THRESHOLD,
    default_grid,
    ridge_analysis,
)


@pytest.fixture(scope="module")
def longley():
    return longley_rows()


def choices(result):
    return {c.rule: c for c in result.choices}


def test_longley_published_choices_and_ridge_vifs(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)
    result = ridge_analysis(
        r, names, regression=Regression(len(y), r_xy=r_xy), threshold=10, grid=[0.01]
    )
    ch = choices(result)
    # docs/numerics.md check values (correlation scale): k_HKB 0.000400815, k_LW 0.00302769.
    assert ch[HKB].k == pytest.approx(0.000400815, rel=5e-6)
    assert ch[LAWLESS_WANG].k == pytest.approx(0.00302769, rel=5e-6)
    # docs/numerics.md: ridge VIFs at k = 0.01 (Marquardt 1970 formula).
    assert_allclose(
        result.trace[0].vif, [17.1640, 3.45422, 2.73104, 2.10435, 13.7889, 9.99575], rtol=5e-6
    )
    assert result.k_scale == "correlation"
    assert result.unit_variance_factor == len(y) - 1
    assert [c.rule for c in result.choices] == [VIF_THRESHOLD, GCV, HKB, LAWLESS_WANG]


@pytest.mark.parametrize("dataset", ["diabetes", "longley"])
def test_coefficients_equal_scikit_learn_ridge_on_standardized_data(dataset):
    x, y = shipped_rows(dataset)
    n, p = x.shape
    r, r_xy = summary(x, y)
    ks = [0.0, 1e-4, 0.003, 0.05, 0.7]
    result = ridge_analysis(
        r, [f"x{j}" for j in range(p)], regression=Regression(n, r_xy=r_xy), threshold=5, grid=ks
    )
    z, zy = standardize(x), standardize(y)
    for point in result.trace:
        # With unit-variance columns Z'Z = (n - 1) R and Z'y = (n - 1) r_xy, so scikit-learn's
        # alpha (penalty alpha ||w||^2 on ||y - Zw||^2) equals (n - 1) k.
        sk = SkRidge(alpha=(n - 1) * point.k, fit_intercept=True, solver="cholesky").fit(z, zy)
        assert_allclose(point.coefficients, sk.coef_, rtol=1e-8, atol=1e-10)
        resid = zy - sk.predict(z)
        assert point.r_squared == pytest.approx(1 - resid @ resid / (zy @ zy), rel=1e-9)


def test_original_scale_at_k_zero_is_the_nist_fit(longley):
    x, y, names = longley
    r, _ = summary(x, y)
    result = ridge_analysis(r, names, regression=original_units(x, y), threshold=10, grid=[0.0])
    point = result.trace[0]
    assert_allclose(point.original_coefficients, NIST_B[1:], rtol=1e-7)  # NIST StRD certified
    assert point.original_intercept == pytest.approx(NIST_B[0], rel=1e-7)
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    # At k = 0 the residual variance share is 1 - adjusted R^2 (statsmodels OLS).
    assert point.residual_variance == pytest.approx(1 - fit.rsquared_adj, rel=1e-8)
    assert point.effective_df == pytest.approx(6.0)


def test_trace_matches_direct_matrix_formulas(rng):
    n, p = 90, 8
    x = rng.standard_normal((n, 3)) @ rng.standard_normal((3, p)) + 0.3 * rng.standard_normal(
        (n, p)
    )
    y = x @ rng.standard_normal(p) + rng.standard_normal(n)
    r, r_xy = summary(x, y)
    result = ridge_analysis(
        r, [f"x{j}" for j in range(p)], regression=Regression(n, r_xy=r_xy), threshold=5
    )
    assert len(result.trace) == 100 and result.trace[0].k == 0.0
    for point in result.trace[::7]:
        inv = np.linalg.inv(r + point.k * np.eye(p))
        assert_allclose(point.vif, np.diag(inv @ r @ inv), rtol=1e-9)
        assert point.effective_df == pytest.approx(np.trace(r @ inv), rel=1e-10)
        b = inv @ r_xy
        assert_allclose(point.coefficients, b, rtol=1e-9, atol=1e-12)
        rss = 1 - 2 * b @ r_xy + b @ r @ b
        assert point.r_squared == pytest.approx(1 - rss, rel=1e-10)
        assert point.residual_variance == pytest.approx(
            rss * (n - 1) / (n - 1 - np.trace(r @ inv)), rel=1e-9
        )
        assert point.max_vif == pytest.approx(max(point.vif))


def test_gcv_minimizes_the_row_formula(rng):
    n, p = 60, 6
    x = rng.standard_normal((n, 2)) @ rng.standard_normal((2, p)) + 0.2 * rng.standard_normal(
        (n, p)
    )
    y = x[:, 0] - x[:, 3] + 2.0 * rng.standard_normal(n)
    r, r_xy = summary(x, y)
    result = ridge_analysis(
        r, [f"x{j}" for j in range(p)], regression=Regression(n, r_xy=r_xy), threshold=5
    )
    k_gcv = choices(result)[GCV].k
    z, zy = standardize(x), standardize(y)

    def gcv_rows(k):
        # Golub, Heath & Wahba (1979) from the rows: n ||(I - H) y||^2 / (n - 1 - tr H)^2 with
        # H the ridge hat matrix on unit-variance columns (the intercept takes one df).
        h = z @ np.linalg.solve(z.T @ z + (n - 1) * k * np.eye(p), z.T)
        e = zy - h @ zy
        return n * (e @ e) / (n - 1 - np.trace(h)) ** 2

    ks = np.geomspace(1e-5, 1e3, 4001)
    brute = np.array([gcv_rows(k) for k in ks])
    best = ks[np.argmin(brute)]
    assert k_gcv == pytest.approx(best, rel=5e-3)
    assert gcv_rows(k_gcv) <= brute.min() * (1 + 1e-10)


def test_vif_threshold_choice_is_the_smallest_k(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)

    def top_vif(k: float) -> float:
        inv = np.linalg.inv(r + k * np.eye(6))
        return float(np.diag(inv @ r @ inv).max())

    for threshold in (2.0, 5.0, 10.0, 100.0):
        result = ridge_analysis(
            r, names, regression=Regression(len(y), r_xy=r_xy), threshold=threshold, grid=[0]
        )
        k = choices(result)[VIF_THRESHOLD].k
        # The reference inverts R + kI explicitly (another route than the core's eigen form),
        # with a rounding of about eps * cond(R + kI) <= 2.2e-16 * 2300 = 5e-13 relative. The
        # bisection stops within 1e-10 of the crossing, so at k the VIF can sit closer to the
        # threshold than that rounding (2.7e-12 below it at threshold 100): allow 1e-11 there.
        # Just below k the VIF is about 1e-8 above the threshold, far beyond rounding.
        assert top_vif(k) <= threshold * (1 + 1e-11)
        assert top_vif(k * (1 - 1e-8)) > threshold
        assert choices(result)[VIF_THRESHOLD].max_vif == pytest.approx(threshold, rel=1e-8)


def test_vif_threshold_is_zero_when_already_under(rng):
    x = rng.standard_normal((100, 4))
    r = np.corrcoef(x, rowvar=False)
    result = ridge_analysis(r, list("abcd"), regression=Regression(100), threshold=5)
    ch = choices(result)
    assert ch[VIF_THRESHOLD].k == 0.0 and "already" in ch[VIF_THRESHOLD].note
    assert ch[HKB].k is None and "response" in ch[HKB].note
    assert all(pt.coefficients is None and pt.r_squared is None for pt in result.trace)


def test_default_grid_rule(longley):
    x, y, _ = longley
    r, _ = summary(x, y)
    lam = np.linalg.eigvalsh(r)
    grid = default_grid(lam, 10.0)
    assert grid[0] == 0.0 and len(grid) == 100
    assert grid[1] == pytest.approx(lam.min() / 100)
    assert grid[-1] == pytest.approx(max(100 * lam.min(), 1 / 40))
    assert np.all(np.diff(grid) > 0)


def test_exact_dependency(rng):
    n = 80
    x = rng.standard_normal((n, 4))
    x[:, 3] = x[:, 0] - 2 * x[:, 1]
    y = x[:, 0] + x[:, 2] + rng.standard_normal(n)
    r, r_xy = summary(x, y)
    result = ridge_analysis(
        r, list("abcd"), regression=Regression(n, r_xy=r_xy), threshold=5, grid=[0.0, 0.01, 0.2]
    )
    at0 = result.trace[0]
    assert at0.vif[0] is None and at0.vif[1] is None and at0.vif[3] is None
    assert at0.vif[2] == pytest.approx(np.linalg.inv(r[:3, :3])[2, 2], rel=1e-8)
    assert at0.coefficients is None and at0.max_vif is None
    ch = choices(result)
    assert ch[HKB].k is None and "exact dependency" in ch[HKB].note
    z, zy = standardize(x), standardize(y)
    for point in result.trace[1:]:
        sk = SkRidge(alpha=(n - 1) * point.k, solver="svd").fit(z, zy)
        assert_allclose(point.coefficients, sk.coef_, rtol=1e-8, atol=1e-10)


def test_no_intercept_uses_the_cosine_scale(rng):
    n, p = 50, 3
    x = rng.standard_normal((n, p)) + 2.0
    x[:, 2] = x[:, 0] + 0.1 * rng.standard_normal(n)
    y = x @ [1.0, -1.0, 0.5] + rng.standard_normal(n)
    norms = np.linalg.norm(x, axis=0)
    cosine = x.T @ x / np.outer(norms, norms)
    r_xy = x.T @ y / (norms * np.linalg.norm(y))
    result = ridge_analysis(
        cosine,
        list("abc"),
        regression=Regression(n, intercept=False, r_xy=r_xy),
        threshold=5,
        grid=[0.0, 0.02],
    )
    assert result.unit_variance_factor == n and result.residual_df == n - p
    rms, rms_y = norms / np.sqrt(n), np.linalg.norm(y) / np.sqrt(n)
    for point in result.trace:
        # Columns scaled to unit mean square: X'X = n * cosine, so alpha = n k.
        sk = SkRidge(alpha=n * point.k, fit_intercept=False, solver="cholesky")
        sk.fit(x / rms, y / rms_y)
        assert_allclose(point.coefficients, sk.coef_, rtol=1e-8, atol=1e-10)


@pytest.mark.parametrize(
    ("grid", "pointer"),
    [([0.1, -1.0], "/ridge/grid/1"), ([float("nan")], "/ridge/grid/0"), ([], "/ridge/grid")],
)
def test_bad_grid_names_the_value(grid, pointer):
    with pytest.raises(OptionError) as err:
        ridge_analysis(np.eye(2), ["a", "b"], regression=Regression(10), threshold=5, grid=grid)
    assert err.value.problems[0].pointer == pointer
