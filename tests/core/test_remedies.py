"""Remedies side by side, checked against statsmodels fits and the remedies' own results."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm

from knotwork.core import Regression
from knotwork.core._components import principal_components
from knotwork.core._remedies import MEANINGS, compare_remedies
from knotwork.core._removal import removal_sequence
from knotwork.core._ridge import VIF_THRESHOLD, ridge_analysis


@pytest.fixture(scope="module")
def longley():
    data = sm.datasets.longley.load_pandas()
    x = data.exog.to_numpy(dtype=float)
    y = data.endog.to_numpy(dtype=float)
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    return x, y, list(data.exog.columns), c[:-1, :-1], c[:-1, -1]


def remedies(r, names, n, r_xy, threshold=10.0):
    removal = removal_sequence(r, names, threshold=threshold, r_xy=r_xy)
    regression = Regression(n, r_xy=r_xy)
    ridge = ridge_analysis(r, names, regression=regression, threshold=threshold)
    comps = principal_components(r, names, regression=regression)
    return removal, ridge, comps


def test_longley_rows_against_statsmodels(longley):
    x, y, names, r, r_xy = longley
    n = len(y)
    removal, ridge, comps = remedies(r, names, n, r_xy)
    result = compare_remedies(
        r,
        names,
        regression=Regression(n, r_xy=r_xy),
        threshold=10,
        removal=removal,
        ridge=ridge,
        components=comps,
    )
    rows = {row.remedy: row for row in result.rows}
    assert [row.remedy for row in result.rows] == ["none", "removal", "ridge", "components"]
    full = sm.OLS(y, sm.add_constant(x)).fit()
    assert result.r_squared_full == pytest.approx(full.rsquared, rel=1e-10)
    assert rows["none"].parameters == 6 and rows["none"].r_squared_lost == pytest.approx(0)
    assert rows["none"].max_vif == pytest.approx(1788.51, rel=5e-6)  # docs/numerics.md: VIF of GNP
    assert rows["none"].residual_variance == pytest.approx(1 - full.rsquared_adj, rel=1e-8)

    kept = list(removal.kept_indices)
    sub = sm.OLS(y, sm.add_constant(x[:, kept])).fit()
    assert rows["removal"].parameters == 3
    assert rows["removal"].r_squared == pytest.approx(sub.rsquared, rel=1e-10)
    assert rows["removal"].r_squared_lost == pytest.approx(full.rsquared - sub.rsquared)
    assert rows["removal"].residual_variance == pytest.approx(1 - sub.rsquared_adj, rel=1e-8)
    assert rows["removal"].max_vif == pytest.approx(removal.max_vif_left, rel=1e-9)
    assert "GNP" in rows["removal"].setting

    choice = next(c for c in ridge.choices if c.rule == VIF_THRESHOLD)
    assert result.ridge_rule == VIF_THRESHOLD and result.ridge_k == choice.k
    assert rows["ridge"].r_squared == pytest.approx(choice.r_squared, rel=1e-12)
    assert rows["ridge"].parameters == pytest.approx(choice.effective_df)
    assert rows["ridge"].max_vif == pytest.approx(10.0, rel=1e-8)

    assert rows["components"].parameters == len(comps.kept)
    assert rows["components"].r_squared == pytest.approx(comps.r_squared, rel=1e-12)
    assert rows["components"].max_vif == pytest.approx(comps.max_vif)
    for row in result.rows:
        assert row.meaning == MEANINGS[row.remedy]
    assert any("regulated models" in c for c in result.cautions)
    assert any("omitted-variable" in c for c in result.cautions)


def test_without_response_or_remedies(longley):
    _, y, names, r, _ = longley
    removal, ridge, comps = remedies(r, names, len(y), None)
    result = compare_remedies(
        r,
        names,
        regression=Regression(len(y)),
        threshold=10,
        removal=removal,
        ridge=ridge,
        components=comps,
    )
    assert all(row.r_squared is None and row.r_squared_lost is None for row in result.rows)
    assert result.rows[2].remedy == "ridge"  # the VIF-threshold k needs no response
    bare = compare_remedies(
        r,
        names,
        regression=Regression(len(y)),
        threshold=10,
        removal=None,
        ridge=None,
        components=None,
    )
    assert [row.remedy for row in bare.rows] == ["none"]
    assert bare.ridge_rule is None and bare.ridge_k is None


def test_exact_dependency_full_row(rng):
    n = 60
    x = rng.standard_normal((n, 3))
    x = np.column_stack([x, x[:, 0] - x[:, 2]])
    y = x[:, 1] + rng.standard_normal(n)
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    r, r_xy = c[:-1, :-1], c[:-1, -1]
    names = list("abcd")
    removal, ridge, comps = remedies(r, names, n, r_xy, threshold=5)
    result = compare_remedies(
        r,
        names,
        regression=Regression(n, r_xy=r_xy),
        threshold=5,
        removal=removal,
        ridge=ridge,
        components=comps,
    )
    rows = {row.remedy: row for row in result.rows}
    assert rows["none"].max_vif is None and rows["none"].parameters == 3
    fit = sm.OLS(y, sm.add_constant(x[:, :3])).fit()
    assert rows["none"].r_squared == pytest.approx(fit.rsquared, rel=1e-9)
    assert rows["removal"].max_vif is not None
    assert rows["removal"].r_squared == pytest.approx(fit.rsquared, rel=1e-9)
