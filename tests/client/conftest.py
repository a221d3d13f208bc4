"""Fixtures for the client tests (helpers live in kc_support.py)."""

from __future__ import annotations

import pandas as pd
import pytest
from kc_support import FakeTime, StandIn, bakery_frame


@pytest.fixture
def bakery() -> pd.DataFrame:
    return bakery_frame()


@pytest.fixture
def stand_in() -> StandIn:
    return StandIn()


@pytest.fixture
def fake_time() -> FakeTime:
    return FakeTime()
