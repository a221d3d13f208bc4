"""Principal components and principal-component regression against outside references."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from nist_longley import NIST_B, longley_rows, original_units, shipped_rows, standardize, summary
from numpy.testing import assert_allclose
from sklearn.decomposition import PCA
from sklearn.linear_model import LinearRegression

from knotwork.core import Options, Regression, assess, from_frame
from knotwork.core._components import LIMIT_WITH_VIF_THRESHOLD, principal_components
from knotwork.core._errors import OptionError
from knotwork.demo import garden_centres


@pytest.fixture(scope="module")
def longley():
    return longley_rows()


def _pcr_vifs_by_size(x: np.ndarray) -> list[np.ndarray]:
    """PCR VIFs for the leading m = 1..p components, from scikit-learn's PCA (independent).

    V and lambda come from ``PCA`` of the standardized columns (an SVD of the rows): lambda are
    the eigenvalues of the correlation matrix, and the VIFs of the PCR estimator on the leading
    m components are diag(V_m diag(1/lambda_m) V_m').
    """
    pca = PCA(svd_solver="full").fit(standardize(x))
    v, lam = pca.components_.T, pca.explained_variance_
    p = x.shape[1]
    return [np.diag(v[:, :m] @ np.diag(1.0 / lam[:m]) @ v[:, :m].T) for m in range(1, p + 1)]


def test_longley_eigenvalues_and_condition_index_rule(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)
    result = principal_components(
        r, names, regression=Regression(len(y), r_xy=r_xy), rule="condition_index"
    )
    # docs/numerics.md check values: eigenvalues of Longley's R.
    assert_allclose(
        result.eigenvalues,
        [4.60338, 1.17534, 0.203425, 0.0149283, 0.00255207, 0.000376708],
        rtol=5e-6,
    )
    # The largest centred index sqrt(lambda_max / lambda_min) = 110.544 (docs/numerics.md).
    assert result.condition_indices[-1] == pytest.approx(110.544, rel=5e-6)
    assert result.kept == (0, 1, 2, 3)  # indices 42.5 and 110.5 exceed 30 (common practice)
    assert result.rule == "condition_index" and result.limit == 30.0
    assert result.cumulative[-1] == pytest.approx(1.0)
    assert sum(result.explained) == pytest.approx(1.0)


def test_default_rule_is_the_vif_threshold(longley):
    x, y, names = longley
    r, r_xy = summary(x, y)
    result = principal_components(r, names, regression=Regression(len(y), r_xy=r_xy))
    assert result.rule == "vif_threshold" and result.limit == 5.0  # 5: common practice
    assert "at or below the threshold 5" in result.rule_text
    # Longley's PCR VIFs for 3 and 4 leading components: 2.93 and 42.3 (scikit-learn PCA
    # below), so threshold 5 keeps 3 and threshold 50 keeps 4.
    assert result.kept == (0, 1, 2) and result.max_vif <= 5.0
    wider = principal_components(r, names, threshold=50.0)
    assert wider.kept == (0, 1, 2, 3) and wider.limit == 50.0


@pytest.mark.parametrize("threshold", [5.0, 10.0, 50.0])
@pytest.mark.parametrize("dataset", ["longley", "diabetes", "copper"])
def test_pcr_vifs_and_kept_set_equal_scikit_learn_pca(dataset, threshold):
    x, y = shipped_rows(dataset)
    p = x.shape[1]
    r, _ = summary(x, y)
    result = principal_components(r, [f"x{j}" for j in range(p)], threshold=threshold)
    by_size = _pcr_vifs_by_size(x)
    # The largest leading set whose every PCR VIF is at or below the threshold (common
    # practice: 5 or 10), found from scikit-learn's PCA: the nearest size to the threshold is at
    # least 15% away from it on these data, far beyond the two decompositions' disagreement.
    fits = [m for m in range(1, p + 1) if by_size[m - 1].max() <= threshold]
    assert fits and fits == list(range(1, len(fits) + 1))  # the qualifying sets are leading
    m = fits[-1]
    assert result.kept == tuple(range(m))
    assert all(abs(b.max() / threshold - 1.0) > 0.15 for b in by_size)
    # SVD of the standardized rows vs eigh of the correlation matrix: both backward stable, the
    # kept eigenvalues are well separated (relative gaps > 0.05), so 1e-9 relative is ample.
    assert_allclose(result.vif, by_size[m - 1], rtol=1e-9)
    assert result.max_vif <= threshold
    if m < p:
        assert by_size[m].max() > threshold  # one more component breaks the threshold


@pytest.mark.parametrize(
    ("rule", "limit", "threshold"),
    # Threshold 2000 exceeds Longley's largest OLS VIF, 1788.51 (methods check value, from the
    # NIST data), so the VIF rule keeps every component as a limit of 1e6 does.
    [("condition_index", 1e6, 5.0), ("vif_threshold", None, 2000.0)],
)
def test_keeping_every_component_is_the_nist_ols_fit(longley, rule, limit, threshold):
    x, y, names = longley
    r, _ = summary(x, y)
    result = principal_components(
        r, names, regression=original_units(x, y), rule=rule, limit=limit, threshold=threshold
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


@pytest.mark.parametrize(
    ("rule", "limit"), [("vif_threshold", None), ("condition_index", None), ("cumulative", 0.9)]
)
@pytest.mark.parametrize("dataset", ["diabetes", "longley"])
def test_regression_on_kept_components_equals_scikit_learn(dataset, rule, limit):
    x, y = shipped_rows(dataset)
    n, p = x.shape
    r, r_xy = summary(x, y)
    result = principal_components(
        r, [f"x{j}" for j in range(p)], regression=Regression(n, r_xy=r_xy), rule=rule, limit=limit
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
    result = principal_components(r, names, rule="cumulative", limit=0.95)
    cum = np.cumsum(np.linalg.eigvalsh(r)[::-1]) / 6
    assert len(result.kept) == int(np.argmax(cum >= 0.95)) + 1
    assert result.coefficients is None and result.variance_basis is None


def test_loadings_are_signed_orthonormal_and_correlate_with_scores(rng):
    x = rng.standard_normal((200, 3)) @ rng.standard_normal((3, 5)) + rng.standard_normal((200, 5))
    r = np.corrcoef(x, rowvar=False)
    result = principal_components(r, list("abcde"))
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
    result = principal_components(r, list("abc"), regression=Regression(n, r_xy=r_xy))
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
    result = principal_components(r, list("abcd"), regression=Regression(n, r_xy=r_xy))
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
        ("vif_threshold", 10.0, "/components/limit"),
    ],
)
def test_bad_rule_or_limit(rule, limit, pointer):
    with pytest.raises(OptionError) as err:
        principal_components(np.eye(2), ["a", "b"], rule=rule, limit=limit)
    assert err.value.problems[0].pointer == pointer


def test_vif_threshold_refuses_a_limit_of_its_own():
    # The rule's limit is the threshold: a second number would let the components aim at a
    # different goal from removal and ridge in the comparison, so it is refused, not merged.
    with pytest.raises(OptionError) as err:
        principal_components(np.eye(2), ["a", "b"], limit=10.0)
    assert err.value.problems[0].reason == (
        "the vif_threshold rule takes its limit from threshold; set threshold instead of "
        "components.limit, or choose rule condition_index or cumulative"
    )
    assert err.value.problems[0].reason == LIMIT_WITH_VIF_THRESHOLD
    # The threshold itself is checked once, where options enter the core (assess(), by the
    # contract's rule: tests/core/test_errors.py); the kernel trusts it.


def test_edge_cases_of_the_vif_threshold_rule(rng):
    # Orthogonal predictors: every OLS VIF is 1, so every component is kept and the fit is OLS.
    result = principal_components(np.eye(3), list("abc"), threshold=1.0)
    assert result.kept == (0, 1, 2)
    assert_allclose(result.vif, 1.0, rtol=1e-12)
    assert any("ordinary least squares" in note for note in result.notes)
    # One component always qualifies: v_j1^2 / l_1 <= 1 because l_1 >= 1 (unit diagonal); at
    # the smallest threshold, 1, a strongly tangled design still keeps its first component.
    x = rng.standard_normal((100, 1)) + 1e-3 * rng.standard_normal((100, 4))
    r = np.corrcoef(x, rowvar=False)
    tight = principal_components(r, list("abcd"), threshold=1.0)
    assert tight.kept == (0,) and tight.max_vif <= 1.0
    lam, vec = np.linalg.eigh(r)  # numpy, ascending: the first component is the last column
    # Two decompositions of the same well-separated leading eigenpair: 1e-9 is ample.
    assert tight.max_vif == pytest.approx(np.max(vec[:, -1] ** 2) / lam[-1], rel=1e-9)
    # An exact dependency: its zero-eigenvalue component is never kept, whatever the threshold.
    z = rng.standard_normal((50, 3))
    z = np.column_stack([z, z[:, 0] + z[:, 1]])
    dep = principal_components(np.corrcoef(z, rowvar=False), list("abcd"), threshold=1e12)
    assert dep.kept == (0, 1, 2)
    assert any("exact dependencies are never kept" in note for note in dep.notes)


def test_demo_components_meet_the_threshold_with_the_largest_leading_set():
    frame = garden_centres()
    threshold = 5.0  # common practice; the demo's default
    s = from_frame(frame, response="weekly_takings")
    a = assess(s, Options(threshold=threshold))
    row = {row.remedy: row for row in a.comparison.rows}
    assert row["none"].max_vif > 80  # the demo's largest OLS VIF, 82.79
    assert a.components.rule == "vif_threshold" and a.components.limit == threshold
    assert row["components"].max_vif is not None and row["components"].max_vif <= threshold
    # Independent design: pandas dummies for region with the first level (hills) as reference,
    # as the core expands it (lakes, plains, shore after the numeric columns), and scikit-learn
    # PCA of the standardized columns.
    numeric = frame.drop(columns=["region", "weekly_takings"])
    dummies = pd.get_dummies(frame["region"], drop_first=True, dtype=float)
    x = pd.concat([numeric, dummies], axis=1).to_numpy(dtype=float)
    assert list(s.names[:6]) == list(numeric.columns)
    assert all(level in name for level, name in zip(dummies.columns, s.names[6:], strict=True))
    by_size = _pcr_vifs_by_size(x)
    m = len(a.components.kept)
    assert a.components.kept == tuple(range(m)) and m < x.shape[1]
    assert by_size[m - 1].max() <= threshold < by_size[m].max()  # one more breaks it
    # Different decompositions of the same design (see the test above): the nearest size is
    # more than 15% from the threshold, and the kept eigenvalues are well separated.
    assert all(abs(b.max() / threshold - 1.0) > 0.15 for b in by_size)
    assert row["components"].max_vif == pytest.approx(by_size[m - 1].max(), rel=1e-9)
