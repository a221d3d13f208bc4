"""GLM fits and their weighted collinearity diagnostics against statsmodels' GLM (0.15.0) on
datasets shipped with statsmodels (spector, randhie, scotland, fair, star98).

The outside reference for the weighted VIFs is the definition of Fox & Monette (1992) for any
model with a covariance of estimates: the diagonal of the inverse of the correlation matrix of
the estimated slope coefficients, computed here from statsmodels' ``cov_params()`` with the
intercept's row and column removed. statsmodels is fitted with ``tol=1e-13`` on its parameters
so that its own stopping error is far below the tolerances checked.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from glm_cases import CASES, SM_FIT, Case
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor

from knotwork.core import Options, assess
from knotwork.core._glm import design_summary, fit_glm, glm_summary, summarize_glm

VIF_ONLY = Options(sections=["variables", "terms"])


def _ours(case: Case):
    return fit_glm(
        case.x.to_numpy(),
        case.y,
        family=case.family,
        var_power=case.var_power,
        trials=case.trials,
        names=list(case.x.columns),
    )


def _theirs(case: Case, **kw):
    return case.statsmodels_fit(**kw)


def _vif_from_covariance(cov: np.ndarray) -> np.ndarray:
    """Fox & Monette (1992): diag of the inverse of the estimates' correlation matrix."""
    d = np.sqrt(np.diag(cov))
    return np.diag(np.linalg.inv(cov / np.outer(d, d)))


def _slope_cov(result) -> np.ndarray:
    return np.asarray(result.cov_params())[1:, 1:]


@pytest.mark.parametrize("name", sorted(CASES))
def test_fit_matches_statsmodels(name: str) -> None:
    # Source: statsmodels GLM on the same data. Our IRLS stops when eta moves by less than
    # 1e-9 (1 + max |eta|); statsmodels at 1e-13 on the parameters. Newton (canonical links)
    # leaves both at rounding level; Fisher scoring (gamma, tweedie with the log link)
    # converges linearly, so allow 1e-7 relative on the coefficients.
    case = CASES[name]
    ours, theirs = _ours(case), _theirs(case)
    params = np.asarray(theirs.params)
    assert ours.converged and ours.n == theirs.nobs
    assert ours.n_coefficients == len(params) == ours.rank
    assert_allclose(ours.coefficients, params, rtol=1e-7, atol=1e-9 * np.max(np.abs(params)))
    # The deviance is flat at the optimum: coefficient errors enter it squared.
    assert_allclose(ours.deviance, theirs.deviance, rtol=1e-10)
    # Pearson chi2 / (n - p) for gamma and tweedie, 1 for binomial and poisson.
    assert_allclose(ours.dispersion, theirs.scale, rtol=1e-7)
    # statsmodels keeps the weights of its last iteration's start; both at the optimum.
    assert_allclose(ours.weights, theirs.model.weights, rtol=1e-7)


@pytest.mark.parametrize("name", sorted(CASES))
def test_weighted_vif_equals_vif_of_the_coefficient_covariance(name: str) -> None:
    # Source: statsmodels cov_params() (phi (X'WX)^-1 at its fit), converted to a correlation
    # matrix with the intercept removed; Fox & Monette's VIF is the diagonal of its inverse.
    # The IRLS tolerance (1e-9 on eta) keeps the working weights within about 1e-9 relative,
    # so 1e-6 holds with a wide margin.
    case = CASES[name]
    fit = _ours(case)
    result = assess(glm_summary(fit, case.x.to_numpy()), VIF_ONLY)
    ours = np.array([v.vif for v in result.variables])
    expected = _vif_from_covariance(_slope_cov(_theirs(case)))
    assert_allclose(ours, expected, rtol=1e-6)


def test_check_values_spector() -> None:
    # Check values computed with statsmodels 0.15 GLM (tol 1e-12) and recorded with six
    # decimals in docs/numerics.md (the GLM check values); the outside derivation is the test above.
    case = CASES["spector"]
    fit = _ours(case)
    x = case.x.to_numpy()
    weighted = [v.vif for v in assess(glm_summary(fit, x), VIF_ONLY).variables]
    design = [v.vif for v in assess(design_summary(x, list(case.x.columns)), VIF_ONLY).variables]
    assert_allclose(weighted, [1.188155, 1.078527, 1.148729], atol=5e-7)
    assert_allclose(design, [1.176158, 1.189435, 1.012902], atol=5e-7)


def test_check_values_randhie() -> None:
    # As above (statsmodels 0.15 GLM, poisson log; six decimals).
    case = CASES["randhie"]
    fit = _ours(case)
    weighted = [v.vif for v in assess(glm_summary(fit, case.x.to_numpy()), VIF_ONLY).variables]
    expected = [1.809953, 1.134451, 1.400240, 1.861647, 1.327059, 1.309022, 1.148504, 1.215444]
    assert_allclose(weighted, [*expected, 1.171930], atol=5e-7)


def test_design_vifs_equal_statsmodels_vif_function() -> None:
    # Source: statsmodels 0.15.0 variance_inflation_factor on the design with a constant
    # (standardize passed explicitly: its default changed in 0.15); the plain design summary
    # is from_table on the same columns.
    case = CASES["spector"]
    design = sm.add_constant(case.x).to_numpy()
    expected = [
        variance_inflation_factor(design, j, standardize=False) for j in range(1, design.shape[1])
    ]
    summary = design_summary(case.x.to_numpy(), list(case.x.columns))
    got = [v.vif for v in assess(summary, VIF_ONLY).variables]
    assert_allclose(got, expected, rtol=1e-9)


def _gvif_from_covariance(cov: np.ndarray, term: list[int]) -> float:
    """Fox & Monette (1992): det(C_TT) det(C_OO) / det(C) on the estimates' correlation C."""
    d = np.sqrt(np.diag(cov))
    c = cov / np.outer(d, d)
    others = [j for j in range(c.shape[0]) if j not in term]
    det = np.linalg.det
    return float(det(c[np.ix_(term, term)]) * det(c[np.ix_(others, others)]) / det(c))


@pytest.mark.parametrize(("family", "var_power"), [("binomial", None), ("tweedie", 1.5)])
def test_gvif_of_a_categorical_term_equals_the_determinant_formula(family, var_power) -> None:
    # fair: occupation (six levels) as a categorical term; binomial models whether any time
    # was spent in affairs, tweedie the time itself. Source: statsmodels GLM on the same
    # design (indicator columns against the first level, as ours), cov_params().
    data = sm.datasets.fair.load_pandas().data
    numeric = ["rate_marriage", "age", "yrs_married", "children", "religious", "educ"]
    y = (data["affairs"] > 0).astype(float) if family == "binomial" else data["affairs"]
    columns = {c: data[c].to_numpy() for c in numeric}
    columns["y"] = y.to_numpy(dtype=float)
    labels = [f"level{int(v)}" for v in data["occupation"]]
    g = summarize_glm(
        columns,
        response="y",
        family=family,
        var_power=var_power,
        categorical={"occupation": labels},
    )
    result = assess(g.weighted, VIF_ONLY)
    (term,) = result.terms

    dummies = pd.get_dummies(pd.Series(labels), dtype=float).iloc[:, 1:]
    design = pd.concat([data[numeric], dummies.set_axis(data.index)], axis=1)
    case = Case(design, columns["y"], family, var_power=var_power)
    theirs = _theirs(case)
    cov = _slope_cov(theirs)
    # The same design, column for column.
    assert_allclose(g.fit.coefficients, np.asarray(theirs.params), rtol=1e-6, atol=1e-9)
    indices = list(range(len(numeric), len(numeric) + 5))
    assert term.name == "occupation" and term.df == 5
    assert_allclose(term.gvif, _gvif_from_covariance(cov, indices), rtol=1e-6)
    assert_allclose([v.vif for v in result.variables], _vif_from_covariance(cov), rtol=1e-6)


def test_offset_and_prior_weights_match_statsmodels() -> None:
    # randhie poisson with an offset (a generated log exposure) and prior weights, which
    # statsmodels calls var_weights. Source: statsmodels GLM and its cov_params().
    case = CASES["randhie"]
    rng = np.random.default_rng(42)
    n = len(case.y)
    offset = np.log(rng.uniform(0.5, 2.0, n))
    prior = rng.uniform(0.25, 4.0, n)
    x = case.x.to_numpy()
    fit = fit_glm(x, case.y, family="poisson", offset=offset, prior_weights=prior)
    theirs = _theirs(case, offset=offset, var_weights=prior)
    assert_allclose(fit.coefficients, np.asarray(theirs.params), rtol=1e-8, atol=1e-11)
    assert_allclose(fit.deviance, theirs.deviance, rtol=1e-10)
    got = [v.vif for v in assess(glm_summary(fit, x), VIF_ONLY).variables]
    assert_allclose(got, _vif_from_covariance(_slope_cov(theirs)), rtol=1e-6)


def test_without_intercept_uncentred_vif_matches_the_covariance() -> None:
    # spector without a constant: the coefficients' covariance is phi (X'WX)^-1 over every
    # column, and Fox & Monette's VIF on it is the uncentred weighted VIF. Source: statsmodels
    # GLM without a constant.
    case = CASES["spector"]
    x = case.x.to_numpy()
    fit = fit_glm(x, case.y, family="binomial", intercept=False)
    theirs = sm.GLM(case.y, x, family=sm.families.Binomial()).fit(**SM_FIT)
    assert_allclose(fit.coefficients, np.asarray(theirs.params), rtol=1e-8)
    result = assess(glm_summary(fit, x), Options(sections=["variables"], intercept=False))
    expected = _vif_from_covariance(np.asarray(theirs.cov_params()))
    assert_allclose([v.vif for v in result.variables], expected, rtol=1e-6)


def test_gaussian_family_is_least_squares() -> None:
    # Source: statsmodels OLS on scotland. Gaussian with the identity link is one weighted
    # least-squares solve; its working weights are 1, so the weighted summary is the plain one.
    case = CASES["scotland"]
    x = case.x.to_numpy()
    fit = fit_glm(x, case.y, family="gaussian")
    ols = sm.OLS(case.y, sm.add_constant(x)).fit()
    assert fit.iterations <= 2
    assert_allclose(fit.coefficients, ols.params, rtol=1e-9)
    assert_allclose(fit.dispersion, ols.scale, rtol=1e-9)
    weighted = [v.vif for v in assess(glm_summary(fit, x), VIF_ONLY).variables]
    plain = [v.vif for v in assess(design_summary(x, list(case.x.columns)), VIF_ONLY).variables]
    # Two code paths (weighted kernel with unit weights, unweighted one-pass kernel) for the
    # same moments: equal to rounding amplified by the conditioning (largest VIF about 100).
    assert_allclose(weighted, plain, rtol=1e-11)
