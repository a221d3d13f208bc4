"""Farrar-Glauber tests, determinant and partial correlations against outside references."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.stats
import statsmodels.api as sm
from statsmodels.datasets import longley
from statsmodels.stats.outliers_influence import variance_inflation_factor

from knotwork.core._dependencies import Spectrum
from knotwork.core._significance import collinearity_tests


@pytest.fixture(scope="module")
def longley_case():
    frame = longley.load_pandas().exog
    x = frame.to_numpy(dtype=float)
    corr = np.corrcoef(x, rowvar=False)
    # statsmodels 0.15 VIF, centred explicitly (standardize=True) so the pin is not relied on.
    design = sm.add_constant(x)
    vif = [variance_inflation_factor(design, j + 1, standardize=True) for j in range(x.shape[1])]
    return x, corr, tuple(frame.columns), vif


def test_longley_chi_square_and_determinant(longley_case):
    x, corr, names, vif = longley_case
    result = collinearity_tests(corr, len(x), names, vif)
    # docs/numerics.md check values (computed with numpy): chi^2 = 218.556 on 15 df,
    # det R = 1.57962e-8.
    assert result.farrar_glauber.chi_square == pytest.approx(218.556, rel=5e-6)
    assert result.farrar_glauber.df == 15
    assert result.determinant == pytest.approx(1.57962e-8, rel=5e-6)
    assert result.log_determinant == pytest.approx(np.log(1.57962e-8), rel=1e-6)
    # Exact: the core calls scipy.special.chdtrc, the function scipy.stats.chi2.sf evaluates,
    # on the same statistic.
    assert result.farrar_glauber.p_value == scipy.stats.chi2.sf(
        result.farrar_glauber.chi_square, 15
    )


def test_chi_square_equals_bartlett_sphericity_from_eigenvalues(longley_case):
    # Bartlett (1951): -(n - 1 - (2p + 5)/6) * sum(log lambda_k), lambda_k from numpy.
    x, corr, names, vif = longley_case
    n, p = x.shape
    bartlett = -(n - 1 - (2 * p + 5) / 6) * np.sum(np.log(np.linalg.eigvalsh(corr)))
    result = collinearity_tests(corr, n, names, vif)
    assert result.farrar_glauber.chi_square == pytest.approx(bartlett, rel=1e-9)
    assert result.farrar_glauber.p_value == pytest.approx(
        scipy.stats.chi2.sf(bartlett, p * (p - 1) // 2), rel=1e-9
    )


def test_variable_f_equals_auxiliary_regression_f(longley_case):
    x, corr, names, vif = longley_case
    n, p = x.shape
    result = collinearity_tests(corr, n, names, vif)
    for j, test in enumerate(result.variable_f):
        others = np.delete(x, j, axis=1)
        auxiliary = sm.OLS(x[:, j], sm.add_constant(others)).fit()
        assert test.name == names[j]
        assert (test.df1, test.df2) == (p - 1, n - p)
        assert test.df2 == auxiliary.df_resid
        assert test.f == pytest.approx(auxiliary.fvalue, rel=1e-9)
        # Exact: scipy.special.fdtrc in the core, the function scipy.stats.f.sf evaluates.
        assert test.p_value == scipy.stats.f.sf(test.f, p - 1, n - p)
        assert test.p_value == pytest.approx(auxiliary.f_pvalue, rel=1e-6, abs=1e-300)


def test_partial_correlations_equal_residual_correlations(longley_case):
    x, corr, names, vif = longley_case
    n, p = x.shape
    result = collinearity_tests(corr, n, names, vif)
    residuals = {}
    for i in range(p):
        for j in range(p):
            if i == j:
                continue
            rest = sm.add_constant(np.delete(x, [i, j], axis=1))
            ri = residuals.setdefault((i, j), sm.OLS(x[:, i], rest).fit().resid)
            rj = sm.OLS(x[:, j], rest).fit().resid
            reference = np.corrcoef(ri, rj)[0, 1]
            assert result.partial_correlations[i][j] == pytest.approx(reference, abs=1e-9)
            # t on n - p df: the slope t of the residual-on-residual regression has df
            # n - p once the p - 2 others and the constant are counted (Frisch-Waugh-Lovell).
            t = reference * np.sqrt(n - p) / np.sqrt(1 - reference**2)
            assert result.partial_t[i][j] == pytest.approx(t, rel=1e-7)
            assert result.partial_p_values[i][j] == pytest.approx(
                2 * scipy.stats.t.sf(abs(t), n - p), rel=1e-6
            )
        assert result.partial_correlations[i][i] == 1.0
        assert result.partial_t[i][i] is None
    assert result.partial_df == n - p


def test_partial_t_matches_ols_slope_t(longley_case):
    # The t of x_i in the full OLS of x_j on all other predictors equals the partial t.
    x, corr, names, vif = longley_case
    result = collinearity_tests(corr, len(x), names, vif)
    i, j = 1, 5  # GNP and YEAR
    others = np.delete(x, j, axis=1)
    fit = sm.OLS(x[:, j], sm.add_constant(others)).fit()
    assert result.partial_t[i][j] == pytest.approx(fit.tvalues[1 + i], rel=1e-7)


def test_notes_carry_the_caveats(longley_case):
    x, corr, names, vif = longley_case
    notes = " ".join(collinearity_tests(corr, len(x), names, vif).notes)
    assert "normal population" in notes
    assert "Wichers 1975" in notes and "Kumar 1975" in notes and "McCabe 1975" in notes


def test_shared_spectrum_gives_the_same_answer(longley_case):
    x, corr, names, vif = longley_case
    direct = collinearity_tests(corr, len(x), names, vif)
    shared = collinearity_tests(corr, len(x), names, vif, spectrum=Spectrum.of(corr))
    # Exact: without a spectrum the function computes Spectrum.of(corr) itself, the same call
    # on the same matrix (unlike condition_diagnostics, which rescales R first).
    assert shared == direct


def test_orthogonal_design_does_not_reject():
    result = collinearity_tests(np.eye(3), 50, ("a", "b", "c"), (1.0, 1.0, 1.0))
    # Exact: the factorizations of the identity multiply and add only zeros and ones.
    assert result.determinant == 1.0
    assert result.log_determinant == 0.0
    assert result.farrar_glauber.chi_square == 0.0
    assert result.farrar_glauber.p_value == 1.0
    assert all(t.f == 0.0 and t.p_value == 1.0 for t in result.variable_f)


def test_singular_matrix_reports_none_where_undefined():
    rng = np.random.default_rng(11)
    x1, x2, x4, x5 = rng.normal(size=(4, 60))
    x3 = x1 - 0.5 * x2  # exact dependency among x1, x2, x3
    x = np.column_stack([x1, x2, x3, x4, x5])
    names = ("x1", "x2", "x3", "x4", "x5")
    corr = np.corrcoef(x, rowvar=False)
    n, p = x.shape
    spectrum = Spectrum.of(corr)
    assert spectrum.null_dim == 1
    # VIFs of the variables outside the dependency from statsmodels OLS auxiliary regressions.
    # statsmodels warns on a rank-deficient design (an error under pytest), so x3 is left out
    # of the regressors: x3 = x1 - 0.5 x2 adds nothing to their span.
    vif: list[float | None] = [None, None, None]
    for j, other in ((3, 4), (4, 3)):
        fit = sm.OLS(x[:, j], sm.add_constant(x[:, [0, 1, other]])).fit()
        vif.append(1.0 / (1.0 - fit.rsquared))

    result = collinearity_tests(corr, n, names, vif, spectrum=spectrum)
    assert result.determinant == 0.0
    assert result.log_determinant is None
    assert result.farrar_glauber.chi_square is None
    assert result.farrar_glauber.p_value is None
    assert result.farrar_glauber.df == 10
    assert [t.f is None for t in result.variable_f] == [True, True, True, False, False]
    for i in range(3):
        assert all(v is None for v in result.partial_correlations[i])
        assert all(result.partial_correlations[j][i] is None for j in range(p))

    # x4 and x5 are outside the dependency: their partial correlation given the rest is the
    # correlation of least-squares residuals on the rank-deficient conditioning set
    # [1, x1, x2, x3] (numpy lstsq, which handles the deficiency without a warning).
    rest = np.column_stack([np.ones(n), x[:, :3]])
    r4 = x[:, 3] - rest @ np.linalg.lstsq(rest, x[:, 3], rcond=None)[0]
    r5 = x[:, 4] - rest @ np.linalg.lstsq(rest, x[:, 4], rcond=None)[0]
    reference = np.corrcoef(r4, r5)[0, 1]
    assert result.partial_correlations[3][4] == pytest.approx(reference, abs=1e-9)
    assert result.partial_df == n - p + 1
    slope = sm.OLS(x[:, 4], sm.add_constant(x[:, [0, 1, 3]])).fit()
    assert slope.df_resid == n - p + 1
    assert result.partial_t[3][4] == pytest.approx(slope.tvalues[3], rel=1e-7)
    assert result.partial_correlations[3][3] == 1.0
    assert any("singular" in note for note in result.notes)


def test_indefinite_matrix_does_not_crash():
    indefinite = np.array([[1.0, 0.9, 0.9], [0.9, 1.0, -0.9], [0.9, -0.9, 1.0]])
    result = collinearity_tests(indefinite, 30, ("a", "b", "c"), (None, None, None))
    assert result.farrar_glauber.chi_square is None
    assert result.log_determinant is None


def test_single_predictor_has_nothing_to_test():
    result = collinearity_tests(np.eye(1), 20, ("a",), (1.0,))
    assert result.farrar_glauber.chi_square is None
    assert result.farrar_glauber.df == 0
    assert result.variable_f[0].f is None
    assert result.partial_correlations == ((1.0,),)


def test_non_integral_n_keeps_float_df():
    result = collinearity_tests(np.eye(2), 20.5, ("a", "b"), (1.0, 1.0))
    assert result.variable_f[0].df2 == 18.5
    assert type(collinearity_tests(np.eye(2), 20.0, ("a", "b"), (1.0, 1.0)).partial_df) is int


def test_result_fields_are_plain_python_values(longley_case):
    x, corr, names, vif = longley_case
    result = collinearity_tests(corr, len(x), names, np.asarray(vif))
    assert type(result.determinant) is float
    assert type(result.log_determinant) is float
    assert type(result.farrar_glauber.chi_square) is float
    assert type(result.farrar_glauber.p_value) is float
    assert all(type(t.f) is float and type(t.p_value) is float for t in result.variable_f)
    assert all(type(t.df2) is int for t in result.variable_f)
    for table in (result.partial_correlations, result.partial_t, result.partial_p_values):
        assert all(v is None or type(v) is float for row in table for v in row)
