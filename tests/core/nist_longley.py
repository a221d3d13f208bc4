"""Shared by the core's remedy tests: reference values, the data they use and small helpers."""

from __future__ import annotations

import numpy as np
import statsmodels.api as sm
from sklearn.datasets import load_diabetes

from knotwork.core import Regression

# NIST StRD Longley certified values (docs/numerics.md, check values).
NIST_B = [
    -3482258.63459582,
    15.0618722713733,
    -0.0358191792925910,
    -2.02022980381683,
    -1.03322686717359,
    -0.0511041056535807,
    1829.15146461355,
]


def longley_rows() -> tuple[np.ndarray, np.ndarray, list[str]]:
    """Longley's predictors, response and predictor names (statsmodels.datasets.longley)."""
    data = sm.datasets.longley.load_pandas()
    return data.exog.to_numpy(dtype=float), data.endog.to_numpy(dtype=float), list(data.exog)


def shipped_rows(name: str) -> tuple[np.ndarray, np.ndarray]:
    """Predictors and response of a dataset shipped with statsmodels or scikit-learn."""
    if name == "diabetes":
        x, y = load_diabetes(return_X_y=True, scaled=False)  # scikit-learn's bundled data
        return x, y
    data = getattr(sm.datasets, name).load_pandas()  # statsmodels' bundled data
    return data.exog.to_numpy(dtype=float), data.endog.to_numpy(dtype=float)


def summary(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Correlations of the predictors and their correlations with the response (numpy)."""
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    return c[:-1, :-1], c[:-1, -1]


def original_units(x: np.ndarray, y: np.ndarray) -> Regression:
    """The regression with the scales and means that state a fit in original units (numpy)."""
    _, r_xy = summary(x, y)
    return Regression(
        len(y),
        r_xy=r_xy,
        sds=x.std(axis=0, ddof=1),
        response_sd=float(y.std(ddof=1)),
        means=x.mean(axis=0),
        response_mean=float(y.mean()),
    )


def standardize(a: np.ndarray) -> np.ndarray:
    """Columns centred and scaled to unit sample variance."""
    return (a - a.mean(axis=0)) / a.std(axis=0, ddof=1)
