"""Fixtures for the HTTP contract tests: applications under litestar's TestClient."""

from __future__ import annotations

from collections.abc import Iterator

import pytest
from bodies_and_problems import TOKENS
from litestar.testing import TestClient

from knotwork.api import create_app
from knotwork.settings import Settings


@pytest.fixture(scope="module")
def client() -> Iterator[TestClient]:
    """The application with default settings (open, as on loopback)."""
    with TestClient(create_app(Settings(concurrency=2))) as test_client:
        yield test_client


@pytest.fixture(scope="module")
def small_client() -> Iterator[TestClient]:
    """The application with small limits, to reach each of them with a small request."""
    settings = Settings(
        max_body_bytes=4096, max_cells=200, max_columns=8, max_batch_items=3, concurrency=2
    )
    with TestClient(create_app(settings)) as test_client:
        yield test_client


@pytest.fixture(scope="module")
def guarded_client() -> Iterator[TestClient]:
    """The application with two bearer tokens configured."""
    with TestClient(create_app(Settings(tokens=TOKENS, concurrency=2))) as test_client:
        yield test_client
