"""Exact dependencies are named, near ones are not; GVIF follows Fox & Monette (1992)."""

from __future__ import annotations

import numpy as np
import pandas as pd
from numpy.testing import assert_allclose

from knotwork.core import Options, assess, from_correlation, from_frame, from_table

BASIC = Options(sections=["variables", "terms", "tests", "conditioning", "dependencies"])


def test_exact_combination_is_aliased_with_its_relation(rng: np.random.Generator) -> None:
    n = 50
    a, b, c = rng.normal(size=(3, n))
    d = 3.0 + a + 2.0 * b  # an exact relation with a constant
    s = from_table({"a": a, "b": b, "c": c, "d": d})
    result = assess(s, BASIC)
    flags = {v.name: (v.aliased, v.vif) for v in result.variables}
    assert flags["a"] == (True, None) and flags["b"] == (True, None) and flags["d"] == (True, None)
    assert flags["c"][0] is False and flags["c"][1] is not None
    (dep,) = result.dependencies
    assert set(dep.variables) == {"a", "b", "d"}
    # In original units the relation is d - a - 2 b - 3 = 0 (up to the scale of the first).
    raw = dict(zip(dep.variables, dep.raw_weights, strict=True))
    scale = 1.0 / raw["d"]
    assert_allclose([raw["a"] * scale, raw["b"] * scale], [-1.0, -2.0], rtol=1e-9)
    assert_allclose(dep.raw_constant * scale, -3.0, rtol=1e-9)
    assert "exact_dependency" in {w.code for w in result.warnings}
    # c's VIF equals the VIF from the design without the redundant column d
    # (statsmodels-independent: the span is the same).
    reduced = assess(from_table({"a": a, "b": b, "c": c}), BASIC)
    assert_allclose(flags["c"][1], reduced.variables[2].vif, rtol=1e-9)
    assert result.tests.farrar_glauber.chi_square is None


def test_two_independent_relations(rng: np.random.Generator) -> None:
    n = 80
    x = rng.normal(size=(n, 4))
    cols = {f"x{j}": x[:, j] for j in range(4)}
    cols["s"] = x[:, 0] - x[:, 1]
    cols["t"] = 2 * x[:, 2] + 0.5 * x[:, 3]
    result = assess(from_table(cols), BASIC)
    sets = sorted(tuple(sorted(d.variables)) for d in result.dependencies)
    assert sets == [("s", "x0", "x1"), ("t", "x2", "x3")]
    assert all(v.aliased for v in result.variables)


def test_near_dependency_is_finite_not_aliased(rng: np.random.Generator) -> None:
    # A relation that holds up to tiny noise: VIF about 1e8, finite, never "aliased".
    n = 200
    a, b = rng.normal(size=(2, n))
    c = a + b + 1e-4 * rng.normal(size=n)
    result = assess(from_table({"a": a, "b": b, "c": c}), BASIC)
    vifs = [v.vif for v in result.variables]
    assert all(v is not None for v in vifs)
    assert 1e7 < max(vifs) < 1e9
    assert not result.dependencies
    assert not any(v.aliased for v in result.variables)


def test_relation_broken_in_one_row_gives_large_finite_vifs(rng: np.random.Generator) -> None:
    n = 100
    a, b = rng.normal(size=(2, n))
    c = a + b
    c[17] += 0.5
    result = assess(from_table({"a": a, "b": b, "c": c}), BASIC)
    assert not result.dependencies
    assert all(v.vif is not None and v.vif > 50 for v in result.variables)


def test_gvif_determinant_formula_and_one_column_term(rng: np.random.Generator) -> None:
    n = 120
    x = rng.normal(size=(n, 4))
    x[:, 2] += 0.7 * x[:, 0]
    x[:, 3] += 0.5 * x[:, 1] - 0.4 * x[:, 2]
    r = np.corrcoef(x, rowvar=False)
    names = ["a", "b", "c", "d"]
    s = from_correlation(names, r, n, terms={"ab": ["a", "b"], "c": ["c"]})
    result = assess(s, BASIC)
    gvif = {t.name: t for t in result.terms}
    # Fox & Monette (1992): GVIF = det(R_TT) det(R_OO) / det(R), by numpy's determinants.
    t, o = [0, 1], [2, 3]
    expected = np.linalg.det(r[np.ix_(t, t)]) * np.linalg.det(r[np.ix_(o, o)]) / np.linalg.det(r)
    assert_allclose(gvif["ab"].gvif, expected, rtol=1e-12)
    assert_allclose(gvif["ab"].gvif_scaled, expected ** (1 / 4), rtol=1e-12)
    assert gvif["ab"].df == 2
    assert_allclose(gvif["c"].gvif, result.variables[2].vif, rtol=1e-12)


def test_gvif_of_categorical_term_ignores_the_reference_level(rng: np.random.Generator) -> None:
    # Fox & Monette (1992): the GVIF does not depend on the coding of the term.
    n = 150
    region = rng.choice(["east", "north", "south", "west"], size=n)
    size = rng.normal(size=n) + 1.5 * (region == "north") - (region == "west")
    frame = pd.DataFrame({"size": size, "age": rng.normal(size=n), "region": region})
    base = assess(from_frame(frame), BASIC).terms[0].gvif
    # Recode the labels so that another level sorts first and becomes the reference.
    for ref in ["north", "south", "west"]:
        relabel = frame.assign(region=frame["region"].replace({ref: "_" + ref}))
        got = assess(from_frame(relabel), BASIC).terms[0].gvif
        assert_allclose(got, base, rtol=1e-10)


def test_statsmodels_style_design_with_categorical_matches_auxiliary_regression(
    rng: np.random.Generator,
) -> None:
    # Source: statsmodels OLS; the VIF of a numeric column next to indicator columns.
    import statsmodels.api as sm

    n = 90
    group = rng.choice(["a", "b", "c"], size=n)
    x = rng.normal(size=n) + (group == "b")
    frame = pd.DataFrame({"x": x, "g": group})
    dummies = pd.get_dummies(frame["g"], drop_first=True, dtype=float)
    r2 = sm.OLS(x, sm.add_constant(dummies)).fit().rsquared
    result = assess(from_frame(frame), BASIC)
    assert_allclose(result.variables[0].vif, 1 / (1 - r2), rtol=1e-10)
