"""Fixtures of the report tests: the application under litestar's TestClient."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from litestar.testing import TestClient

from knotwork.api import create_app
from knotwork.settings import Settings


@pytest.fixture(scope="package")
def client() -> Iterator[TestClient]:
    """The application with default settings (open, as on loopback)."""
    with TestClient(create_app(Settings(concurrency=2))) as test_client:
        yield test_client
