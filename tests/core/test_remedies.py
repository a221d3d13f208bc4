"""Remedies side by side, checked against statsmodels fits and the remedies' own results."""

from __future__ import annotations

import numpy as np
import pytest
import statsmodels.api as sm
from nist_longley import longley_rows, summary

from knotwork.core import Regression
from knotwork.core._components import principal_components
from knotwork.core._remedies import MEANINGS, compare_remedies
from knotwork.core._removal import removal_sequence
from knotwork.core._ridge import VIF_THRESHOLD, ridge_analysis


@pytest.fixture(scope="module")
def longley():
    x, y, names = longley_rows()
    return x, y, names, *summary(x, y)


def remedies(r, names, n, r_xy, threshold=10.0):
    """Every remedy at the threshold, compared side by side: (comparison, removal, ridge, comps)."""
    removal = removal_sequence(r, names, threshold=threshold, r_xy=r_xy)
    regression = Regression(n, r_xy=r_xy)
    ridge = ridge_analysis(r, names, regression=regression, threshold=threshold)
    comps = principal_components(r, names, regression=regression)
    result = compare_remedies(
        r,
        names,
        regression=regression,
        threshold=threshold,
        removal=removal,
        ridge=ridge,
        components=comps,
    )
    return result, removal, ridge, comps


def test_longley_rows_against_statsmodels(longley):
    x, y, names, r, r_xy = longley
    result, removal, ridge, comps = remedies(r, names, len(y), r_xy)
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
    result, *_ = remedies(r, names, len(y), None)
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
    r, r_xy = summary(x, y)
    result, *_ = remedies(r, list("abcd"), n, r_xy, threshold=5)
    rows = {row.remedy: row for row in result.rows}
    assert rows["none"].max_vif is None and rows["none"].parameters == 3
    fit = sm.OLS(y, sm.add_constant(x[:, :3])).fit()
    assert rows["none"].r_squared == pytest.approx(fit.rsquared, rel=1e-9)
    assert rows["removal"].max_vif is not None
    assert rows["removal"].r_squared == pytest.approx(fit.rsquared, rel=1e-9)
