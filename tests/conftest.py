"""Shared fixtures: outside datasets and a seeded random generator whose seed shows on failure."""

from __future__ import annotations

import os

import numpy as np
import pandas as pd
import pytest


@pytest.fixture
def rng(request: pytest.FixtureRequest) -> np.random.Generator:
    """A seeded generator; the seed is printed in the test report when the test fails."""
    seed = int(os.environ.get("KNOTWORK_TEST_SEED", "20261201"))
    request.node.user_properties.append(("seed", seed))
    print(f"random seed: {seed} (set KNOTWORK_TEST_SEED to replay)")
    return np.random.default_rng(seed)


@pytest.fixture(scope="session")
def longley() -> pd.DataFrame:
    """Longley's macroeconomic data (statsmodels.datasets.longley; the NIST StRD Longley set)."""
    import statsmodels.api as sm

    data = sm.datasets.longley.load_pandas()
    frame = data.exog.copy()
    frame["TOTEMP"] = data.endog
    return frame


@pytest.fixture(scope="session")
def longley_exog(longley: pd.DataFrame) -> pd.DataFrame:
    return longley.drop(columns="TOTEMP")
