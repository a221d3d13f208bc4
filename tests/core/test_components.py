"""Principal components and principal-component regression against outside references."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from core_support import NIST_B, standardize, summary
from numpy.testing import assert_allclose
from sklearn.datasets import load_diabetes
from sklearn.decomposition import PCA
from sklearn.linear_model import LinearRegression

from knotwork.core._components import principal_components
from knotwork.core._errors import OptionError


@pytest.fixture(scope="module")
def longley():
    data = sm.datasets.longley.load_pandas()
    return data.exog.to_numpy(dtype=float), data.endog.to_numpy(dtype=float), list(data.exog)


def test_longley_eigenvalues_and_default_rule(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)
    result = principal_components(r, names, n=len(y), r_xy=r_xy)
    # methods.md check values: eigenvalues of Longley's R.
    assert_allclose(
        result.eigenvalues,
        [4.60338, 1.17534, 0.203425, 0.0149283, 0.00255207, 0.000376708],
        rtol=5e-6,
    )
    # The largest centred index sqrt(lambda_max / lambda_min) = 110.544 (methods.md).
    assert result.condition_indices[-1] == pytest.approx(110.544, rel=5e-6)
    assert result.kept == (0, 1, 2, 3)  # indices 42.5 and 110.5 exceed 30 (common practice)
    assert result.rule == "condition_index" and result.limit == 30.0
    assert result.cumulative[-1] == pytest.approx(1.0)
    assert sum(result.explained) == pytest.approx(1.0)


def test_keeping_every_component_is_the_nist_ols_fit(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)
    result = principal_components(
        r,
        names,
        n=len(y),
        limit=1e6,
        r_xy=r_xy,
        sds=x.std(axis=0, ddof=1),
        response_sd=float(y.std(ddof=1)),
        means=x.mean(axis=0),
        response_mean=float(y.mean()),
    )
    assert result.kept == tuple(range(6))
    assert_allclose(result.original_coefficients, NIST_B[1:], rtol=1e-7)  # NIST StRD certified
    assert result.original_intercept == pytest.approx(NIST_B[0], rel=1e-7)
    fit = sm.OLS(y, sm.add_constant(x)).fit()
    # Variances with the full-model s^2 are statsmodels' OLS standard errors squared.
    assert result.variance_basis == "full_model"
    assert_allclose(np.sqrt(result.original_variances), fit.bse[1:], rtol=1e-7)
    assert result.r_squared == pytest.approx(fit.rsquared, rel=1e-10)
    assert result.r_squared_full == pytest.approx(fit.rsquared, rel=1e-10)
    assert result.residual_variance == pytest.approx(1 - fit.rsquared_adj, rel=1e-8)
    assert_allclose(result.vif, np.diag(np.linalg.inv(r)), rtol=1e-8)
    assert_allclose(result.coefficients, result.ols_coefficients, rtol=1e-8)


@pytest.mark.parametrize(("rule", "limit"), [("condition_index", None), ("cumulative", 0.9)])
@pytest.mark.parametrize("dataset", ["diabetes", "longley"])
def test_regression_on_kept_components_equals_scikit_learn(dataset, rule, limit, longley):
    if dataset == "diabetes":
        x, y = load_diabetes(return_X_y=True, scaled=False)  # scikit-learn's bundled data
    else:
        x, y, _ = longley
    n, p = x.shape
    r, r_xy = summary(x, y)
    result = principal_components(
        r, [f"x{j}" for j in range(p)], n=n, rule=rule, limit=limit, r_xy=r_xy
    )
    kept = len(result.kept)
    assert result.kept == tuple(range(kept))
    z, zy = standardize(x), standardize(y)
    pca = PCA(n_components=kept, svd_solver="full").fit(z)
    lr = LinearRegression().fit(pca.transform(z), zy)
    # scikit-learn PCA + LinearRegression on standardized data, mapped back to the variables.
    assert_allclose(result.coefficients, pca.components_.T @ lr.coef_, rtol=1e-8, atol=1e-10)
    assert_allclose(pca.explained_variance_, result.eigenvalues[:kept], rtol=1e-9)
    resid = zy - lr.predict(pca.transform(z))
    assert result.r_squared == pytest.approx(1 - resid @ resid / (zy @ zy), rel=1e-9)


def test_cumulative_rule_and_shares(longley):
    x, y, names = longley
    r, _ = summary(x, y)
    result = principal_components(r, names, n=len(y), rule="cumulative", limit=0.95)
    cum = np.cumsum(np.linalg.eigvalsh(r)[::-1]) / 6
    assert len(result.kept) == int(np.argmax(cum >= 0.95)) + 1
    assert result.coefficients is None and result.variance_basis is None


def test_loadings_are_signed_orthonormal_and_correlate_with_scores(rng):
    x = rng.standard_normal((200, 3)) @ rng.standard_normal((3, 5)) + rng.standard_normal((200, 5))
    r = np.corrcoef(x, rowvar=False)
    result = principal_components(r, list("abcde"), n=200)
    v = np.array(result.loadings).T
    assert_allclose(v.T @ v, np.eye(5), atol=1e-12)
    for k in range(5):
        assert v[np.argmax(np.abs(v[:, k])), k] > 0
    scores = standardize(x) @ v
    corr = np.corrcoef(np.column_stack([standardize(x), scores]), rowvar=False)[:5, 5:]
    assert_allclose(np.array(result.variable_correlations).T, corr, atol=1e-10)


def test_low_variance_component_that_matters_is_flagged(rng):
    # The response follows the smallest component (Jolliffe 1982): dropping it loses the fit.
    n = 300
    base = rng.standard_normal(n)
    x = np.column_stack([base + 0.01 * rng.standard_normal(n), base, rng.standard_normal(n)])
    y = (x[:, 0] - x[:, 1]) * 100 + 0.1 * rng.standard_normal(n)
    r, r_xy = summary(x, y)
    result = principal_components(r, list("abc"), n=n, r_xy=r_xy)
    assert 2 not in result.kept
    assert result.r_squared_by_component[2] > 0.9
    assert any("Jolliffe 1982" in note and "Dropped components 2" in note for note in result.notes)
    assert sum(result.r_squared_by_component) == pytest.approx(result.r_squared_full)


def test_exact_dependency_uses_kept_component_variance(rng):
    n = 50
    x = rng.standard_normal((n, 3))
    x = np.column_stack([x, x[:, 0] + x[:, 1]])
    y = x[:, 0] + rng.standard_normal(n)
    r, r_xy = summary(x, y)
    result = principal_components(r, list("abcd"), n=n, r_xy=r_xy)
    assert result.condition_indices[-1] is None and 3 not in result.kept
    assert result.variance_basis == "kept_components" and result.ols_coefficients is None
    fit = sm.OLS(y, sm.add_constant(x[:, :3])).fit()
    assert result.r_squared_full == pytest.approx(fit.rsquared, rel=1e-9)


@pytest.mark.parametrize(
    ("rule", "limit", "pointer"),
    [
        ("largest", None, "/components/rule"),
        ("cumulative", 1.5, "/components/limit"),
        ("condition_index", 0.5, "/components/limit"),
    ],
)
def test_bad_rule_or_limit(rule, limit, pointer):
    with pytest.raises(OptionError) as err:
        principal_components(np.eye(2), ["a", "b"], n=10, rule=rule, limit=limit)
    assert err.value.problems[0].pointer == pointer
