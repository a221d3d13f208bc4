"""VIFs against outside references: statsmodels, exact rational arithmetic, published values."""

from __future__ import annotations

from fractions import Fraction

import pandas as pd
import pytest
import statsmodels.api as sm
from exact_rational import exact_comoments, exact_vifs
from numpy.testing import assert_allclose
from statsmodels.stats.outliers_influence import variance_inflation_factor

from knotwork.core import Options, assess, from_frame

VIF_ONLY = Options(sections=["variables"])


def _datasets() -> dict[str, pd.DataFrame]:
    from sklearn.datasets import load_diabetes

    out = {
        "longley": sm.datasets.longley.load_pandas().exog,
        "stackloss": sm.datasets.stackloss.load_pandas().exog,
        "copper": sm.datasets.copper.load_pandas().exog,
    }
    # scikit-learn's bundled diabetes data, unscaled (sex coded 1/2).
    out["diabetes"] = load_diabetes(as_frame=True, scaled=False).data
    return out


DATASETS = _datasets()


@pytest.mark.parametrize("name", sorted(DATASETS))
def test_vif_equals_statsmodels_auxiliary_regressions(name: str) -> None:
    # Source: statsmodels OLS of each predictor on all the others with a constant;
    # VIF = 1 / (1 - R^2) by definition (Marquardt 1970).
    frame = DATASETS[name]
    expected = []
    for col in frame.columns:
        others = sm.add_constant(frame.drop(columns=col))
        r2 = sm.OLS(frame[col], others).fit().rsquared
        expected.append(1.0 / (1.0 - r2))
    got = [v.vif for v in assess(from_frame(frame), VIF_ONLY).variables]
    assert_allclose(got, expected, rtol=1e-9)


# statsmodels warns that Longley's raw design is poorly conditioned; that is the point of it.
@pytest.mark.filterwarnings("ignore:The design matrix is poorly conditioned:UserWarning")
@pytest.mark.parametrize("name", sorted(DATASETS))
def test_vif_equals_statsmodels_vif_function(name: str) -> None:
    # Source: statsmodels 0.15.0 variance_inflation_factor on the design with a constant,
    # standardize passed explicitly (its default changed in 0.15).
    frame = DATASETS[name]
    design = sm.add_constant(frame).to_numpy()
    expected = [
        variance_inflation_factor(design, j, standardize=False) for j in range(1, design.shape[1])
    ]
    got = [v.vif for v in assess(from_frame(frame), VIF_ONLY).variables]
    assert_allclose(got, expected, rtol=1e-8)


def test_published_check_values() -> None:
    # Check values computed with numpy/statsmodels and recorded in the project's methods notes.
    expected = {
        "longley": [135.532, 1788.51, 33.6189, 3.58893, 399.151, 758.981],
        "stackloss": [2.90648, 2.57263, 1.33359],
        "diabetes": [
            1.21731,
            1.27807,
            1.50944,
            1.45943,
            59.2025,
            39.1934,
            15.4022,
            8.89099,
            10.0760,
            1.48462,
        ],
        "copper": [3.26322, 65.6123, 3.88208, 1.25710, 50.6274],
    }
    for name, values in expected.items():
        got = [v.vif for v in assess(from_frame(DATASETS[name]), VIF_ONLY).variables]
        assert_allclose(got, values, rtol=5e-6, err_msg=name)


def test_longley_widely_cited_two_decimals() -> None:
    # Widely cited Longley VIFs to 2 dp (from memory): 135.53, 1788.51, 33.62, 3.59, 399.15, 758.98.
    got = [v.vif for v in assess(from_frame(DATASETS["longley"]), VIF_ONLY).variables]
    # Rounding is safe to compare exactly here: every VIF lies at least 8e-7 relative from a
    # rounding boundary (GNP: 1788.5135), and the VIFs agree with exact arithmetic to 1e-9.
    assert [round(v, 2) for v in got] == [135.53, 1788.51, 33.62, 3.59, 399.15, 758.98]


def _exact_vifs(frame: pd.DataFrame) -> list[Fraction]:
    """VIFs of the published decimals taken as exact rationals (repr gives the decimal)."""
    rows = [[Fraction(repr(float(v))) for v in row] for row in frame.itertuples(index=False)]
    return exact_vifs(exact_comoments(rows))


def test_longley_vif_against_exact_rational_arithmetic() -> None:
    # Source: the published decimal Longley data (statsmodels.datasets.longley) taken as exact
    # rationals; VIFs by exact Gauss-Jordan elimination with fractions.Fraction.
    frame = DATASETS["longley"]
    exact = [float(v) for v in _exact_vifs(frame)]
    got = [v.vif for v in assess(from_frame(frame), VIF_ONLY).variables]
    assert_allclose(got, exact, rtol=1e-9)


def test_uncentred_vif_against_statsmodels() -> None:
    # Source: statsmodels 0.15.0 variance_inflation_factor(standardize=False) on the design
    # without a constant: R^2 of a regression through the origin is uncentred, so 1/(1 - R^2)
    # is the uncentred VIF (diagonal of the inverse cosine matrix).
    for name in ("stackloss", "copper"):
        x = DATASETS[name].to_numpy()
        expected = [variance_inflation_factor(x, j, standardize=False) for j in range(x.shape[1])]
        options = Options(intercept=False, sections=["variables"])
        got = assess(from_frame(DATASETS[name]), options).variables
        assert_allclose([v.vif for v in got], expected, rtol=1e-9, err_msg=name)
