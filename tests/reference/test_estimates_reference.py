"""Estimates input against statsmodels (0.15.0) fits on datasets shipped with statsmodels.

Outside sources: statsmodels' OLS, GLM and Logit ``cov_params()`` on Longley's data
(statsmodels.datasets.longley) and on the Spector & Mazzeo data (statsmodels.datasets.spector);
numpy's correlation and SVD of the design; statsmodels' ``variance_inflation_factor``. Fox &
Monette's (1992) VIF and GVIF are computed here, independently of the core, from the
correlation of the estimates with the intercept removed: VIF_j = [C^-1]_jj and
GVIF_J = det C_JJ det C_-J,-J / det C.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor

from knotwork.core import Options, assess, from_correlation, from_estimates, from_table
from knotwork.core._glm import fit_glm, glm_summary

LONGLEY = sm.datasets.longley.load_pandas().data
LONGLEY_X = LONGLEY.drop(columns="TOTEMP")
SPECTOR = sm.datasets.spector.load_pandas().data
SPECTOR_X = SPECTOR[["GPA", "TUCE", "PSI"]]
# statsmodels' GLM stops by default at 1e-8 on the deviance, which leaves the VIFs about 2e-6
# from the converged ones; fitted to 1e-13 on the parameters its own stopping error is far
# below every tolerance here.
SM_FIT = {"tol": 1e-13, "tol_criterion": "params", "maxiter": 500}
TERMS = {"prices": ["GNPDEFL", "GNP"], "people": ["UNEMP", "ARMED", "POP"]}


def _ols(with_constant: bool = True):
    x = sm.add_constant(LONGLEY_X) if with_constant else LONGLEY_X
    return sm.OLS(LONGLEY["TOTEMP"], x).fit()


def _logit_glm(**fit):
    x = sm.add_constant(SPECTOR_X)
    return sm.GLM(SPECTOR["GRADE"], x, family=sm.families.Binomial()).fit(**SM_FIT, **fit)


def _estimates_of(result, intercept: str | None = "const", **kw):
    cov = result.cov_params()
    return from_estimates(list(cov.index), cov.to_numpy(), intercept, **kw)


def _slope_correlation(result) -> np.ndarray:
    cov = result.cov_params().drop(index="const", columns="const").to_numpy()
    d = np.sqrt(np.diag(cov))
    return cov / np.outer(d, d)


def _fox_monette_vif(c: np.ndarray) -> np.ndarray:
    return np.diag(np.linalg.inv(c))


def _fox_monette_gvif(c: np.ndarray, cols: list[int]) -> float:
    rest = [j for j in range(c.shape[0]) if j not in cols]
    det = np.linalg.det
    return float(det(c[np.ix_(cols, cols)]) * det(c[np.ix_(rest, rest)]) / det(c))


def test_ols_estimates_imply_the_centred_design_correlation() -> None:
    # Source: numpy's correlation of Longley's predictors. For least squares the slopes' block
    # of cov_params() is s^2 (Xc'Xc)^-1, so its inverse scaled to unit diagonal is that
    # correlation in theory; statsmodels inverts by a pseudo-inverse and we invert back, each
    # step losing about eps x cond(R) (cond about 1.2e4 here, measured 6e-14), so 1e-10.
    expected = np.corrcoef(LONGLEY_X.to_numpy(), rowvar=False)
    inverse = np.linalg.inv(_slope_correlation(_ols()))
    d = np.sqrt(np.diag(inverse))
    assert_allclose(inverse / np.outer(d, d), expected, atol=1e-10)
    assert_allclose(_estimates_of(_ols()).R, expected, atol=1e-10)


# Longley's raw design is badly conditioned on purpose (that is why it is a test case);
# statsmodels says so, and the VIFs it computes are still accurate to the tolerance below.
@pytest.mark.filterwarnings("ignore:The design matrix is poorly conditioned:UserWarning")
def test_ols_estimates_give_the_design_vifs() -> None:
    # Source: statsmodels' variance_inflation_factor on the design with its constant column
    # (the centred VIFs). Another route to the same quantity (two inversions of the estimates'
    # correlation against a regression per column): 1e-8 relative, measured 1e-12.
    design = sm.add_constant(LONGLEY_X).to_numpy()
    expected = [
        variance_inflation_factor(design, j, standardize=False) for j in range(1, design.shape[1])
    ]
    result = assess(_estimates_of(_ols()), Options(sections=["variables"]))
    assert [v.name for v in result.variables] == list(LONGLEY_X.columns)
    assert_allclose([v.vif for v in result.variables], expected, rtol=1e-8)
    assert_allclose(
        [v.vif for v in result.variables], _fox_monette_vif(_slope_correlation(_ols())), rtol=1e-8
    )


def test_ols_estimates_answer_as_the_table_path() -> None:
    # The same model through two inputs: rows (the OLS/gaussian path) and the estimates of
    # its least-squares fit. VIFs, GVIFs, the tests and the removal steps are functions of the
    # centred correlation, which the estimates carry through two inversions, each losing about
    # eps x cond(R), 3e-12 for Longley (measured 1e-12 relative on the VIFs), so 1e-8.
    rows = from_table({c: LONGLEY_X[c].to_numpy() for c in LONGLEY_X.columns})
    # A table input has no terms but its categorical variables; the rows' own correlation
    # with the terms attached stands for it in the GVIFs.
    with_terms = from_correlation(rows.names, rows.R, rows.n, terms=TERMS)
    ests = _estimates_of(_ols(), n=16, terms=TERMS)
    sections = ["variables", "terms", "tests", "removal"]
    ours = assess(ests, Options(sections=sections))
    theirs = assess(rows, Options(sections=sections))
    assert_allclose([v.vif for v in ours.variables], [v.vif for v in theirs.variables], rtol=1e-8)
    grouped = assess(with_terms, Options(sections=["terms"]))
    assert_allclose([t.gvif for t in ours.terms], [t.gvif for t in grouped.terms], rtol=1e-8)
    assert ours.tests is not None and theirs.tests is not None
    assert_allclose(
        ours.tests.farrar_glauber.chi_square, theirs.tests.farrar_glauber.chi_square, rtol=1e-8
    )
    # The removal with the terms as units, against the same on the rows' correlation.
    assert ours.removal is not None
    ref = assess(with_terms, Options(sections=["removal"])).removal
    assert ref is not None
    assert [s.drop for s in ours.removal.steps] == [s.drop for s in ref.steps]
    assert ours.removal.kept == ref.kept
    assert_allclose(
        [s.max_vif_after for s in ours.removal.steps],
        [s.max_vif_after for s in ref.steps],
        rtol=1e-8,
    )


def test_ols_estimates_condition_the_scaled_design_with_its_constant() -> None:
    # Source: numpy's SVD of Longley's design with the constant, every column scaled to unit
    # length (Belsley, Kuh & Welsch). The inverse of the whole cov_params() scaled to unit
    # diagonal is that design's scaled cross-products; the route through a cross-product squares
    # the condition number (eps x 43275^2, about 4e-7, for the largest index), so 1e-6.
    z = sm.add_constant(LONGLEY_X).to_numpy()
    z = z / np.linalg.norm(z, axis=0)
    s = np.linalg.svd(z, compute_uv=False)
    result = assess(_estimates_of(_ols()), Options(sections=["variables", "conditioning"]))
    cond = result.conditioning
    assert cond is not None
    assert cond.basis == "estimates"
    assert cond.names == ("<constant>", *LONGLEY_X.columns)
    assert_allclose(cond.indices, s[0] / s, rtol=1e-6)
    # Longley's largest index, 43275.0, is also the published check value of the moments path
    # (docs/numerics.md, Conditioning).
    assert_allclose(cond.condition_number, 43275.0, rtol=1e-5)


def test_ols_without_intercept_gives_the_uncentred_vifs() -> None:
    # Regression through the origin: cov_params() is s^2 (X'X)^-1 with X uncentred, so the
    # estimates imply the cosine matrix; the rows path with intercept=false computes the same
    # uncentred VIFs from moments. Another route to the same quantity: the cosine matrix has
    # cond about 1.2e6 here, and eps x cond is about 3e-10 (measured 1e-10); 1e-7.
    ours = assess(_estimates_of(_ols(False), None), Options(sections=["variables"]))
    rows = from_table({c: LONGLEY_X[c].to_numpy() for c in LONGLEY_X.columns})
    theirs = assess(rows, Options(intercept=False, sections=["variables"]))
    assert ours.intercept is False
    assert_allclose([v.vif for v in ours.variables], [v.vif for v in theirs.variables], rtol=1e-7)


def test_spector_logit_vifs() -> None:
    # Source: statsmodels GLM (binomial, logit) of GRADE on GPA, TUCE and PSI with a constant;
    # Fox & Monette's VIFs from its cov_params(), computed here. Check values 1.188155,
    # 1.078527, 1.148729 (docs/numerics.md, Check values, GLM weighted VIFs). The independent
    # computation inverts the same well-conditioned 3 x 3 correlation (cond < 2) once, ours
    # twice: 1e-8 relative is far above that rounding.
    result = _logit_glm()
    ours = assess(_estimates_of(result), Options(sections=["variables"]))
    vifs = [v.vif for v in ours.variables]
    assert_allclose(vifs, _fox_monette_vif(_slope_correlation(result)), rtol=1e-8)
    assert_allclose(vifs, [1.188155, 1.078527, 1.148729], atol=5e-7)
    # The discrete Logit model reaches the same optimum by Newton's method.
    logit = sm.Logit(SPECTOR["GRADE"], sm.add_constant(SPECTOR_X)).fit(disp=0, tol=1e-12)
    assert_allclose(vifs, _fox_monette_vif(_slope_correlation(logit)), rtol=1e-7)


def test_spector_logit_gvif() -> None:
    # Source: Fox & Monette's GVIF formula evaluated here with numpy determinants on the
    # correlation of statsmodels' logit estimates; ours comes from the implied design
    # correlation by Cholesky log-determinants (another route, a 3 x 3 matrix): 1e-8.
    result = _logit_glm()
    terms = {"grades": ["GPA", "TUCE"]}
    ours = assess(_estimates_of(result, terms=terms), Options(sections=["variables", "terms"]))
    expected = _fox_monette_gvif(_slope_correlation(result), [0, 1])
    assert ours.terms[0].df == 2
    assert_allclose(ours.terms[0].gvif, expected, rtol=1e-8)


@pytest.mark.parametrize("cov_type", ["HC0", "HC3"])
def test_robust_covariance_vifs(cov_type: str) -> None:
    # Source: statsmodels' sandwich covariance of the same logit fit; the VIFs describe that
    # covariance (Fox & Monette's definition holds for any covariance of estimates). Same
    # reason for 1e-8 as for the model-based covariance.
    result = _logit_glm(cov_type=cov_type)
    ours = assess(_estimates_of(result), Options(sections=["variables"]))
    expected = _fox_monette_vif(_slope_correlation(result))
    assert_allclose([v.vif for v in ours.variables], expected, rtol=1e-8)


def test_logit_estimates_equal_the_core_weighted_design() -> None:
    # The same logit model through the core's own IRLS fit (the design weighted at the fit)
    # and through statsmodels' estimates. The IRLS stops at 1e-9 on the linear predictor,
    # which keeps the working weights within about 1e-9 relative (docs/numerics.md,
    # Generalized linear models), so 1e-6.
    fit = fit_glm(
        SPECTOR_X.to_numpy(),
        SPECTOR["GRADE"].to_numpy(dtype=float),
        family="binomial",
        names=list(SPECTOR_X.columns),
    )
    weighted = assess(glm_summary(fit, SPECTOR_X.to_numpy()), Options(sections=["variables"]))
    ours = assess(_estimates_of(_logit_glm()), Options(sections=["variables"]))
    assert_allclose([v.vif for v in ours.variables], [v.vif for v in weighted.variables], rtol=1e-6)


def test_covariance_scale_does_not_matter() -> None:
    # The diagnostics depend on the correlation of the estimates only: a dispersion factor
    # and the units of each coefficient cancel. Rescaling changes the rounding of the
    # correlation (a few ulps), amplified by cond(R) about 1.2e4 for Longley: 1e-9 relative.
    cov = _ols().cov_params()
    scale = np.array([3.0, 1e-3, 1e4, 0.5, 2.0, 7.0, 1e2])
    rescaled = pd.DataFrame(
        cov.to_numpy() * np.outer(scale, scale) * 42.0, index=cov.index, columns=cov.columns
    )
    a = assess(from_estimates(list(cov.index), cov.to_numpy(), "const"))
    b = assess(from_estimates(list(cov.index), rescaled.to_numpy(), "const"))
    assert_allclose([v.vif for v in a.variables], [v.vif for v in b.variables], rtol=1e-9)
