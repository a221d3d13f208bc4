"""Helpers for the HTTP tests: request bodies in each encoding and problem checks."""

from __future__ import annotations

import io
from collections.abc import Mapping
from typing import Any

import pyarrow as pa
import pyarrow.parquet as pq

PROBLEM_BASE = "https://knotwork.example/problems/"
ARROW = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"
JSON = "application/json"

#: Tokens of the guarded test application (made up for the tests).
TOKENS = ("test-token-one-0123456789", "test-token-two-9876543210")

#: The sections the tests ask for when the whole assessment is not the point.
CORE_SECTIONS = ["variables", "terms", "conditioning", "tests", "dependencies", "removal"]


def arrow_stream(table: pa.Table) -> bytes:
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue()


def arrow_file(table: pa.Table) -> bytes:
    sink = io.BytesIO()
    with pa.ipc.new_file(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue()


def parquet(table: pa.Table) -> bytes:
    sink = io.BytesIO()
    pq.write_table(table, sink)
    return sink.getvalue()


def arrow_table(
    columns: Mapping[str, list[Any]], categorical: Mapping[str, list[Any]] | None = None
) -> pa.Table:
    arrays = {name: pa.array(values, pa.float64()) for name, values in columns.items()}
    for name, values in (categorical or {}).items():
        arrays[name] = pa.array(values, pa.string())
    return pa.table(arrays)


def assert_problem(response: Any, status: int, kind: str, pointer: str | None) -> dict[str, Any]:
    """Check a problem+json answer: status, media type, type URI and the first pointer."""
    assert response.status_code == status, response.text
    assert response.headers["content-type"].startswith("application/problem+json")
    doc = response.json()
    assert doc["type"] == PROBLEM_BASE + kind, doc
    assert doc["status"] == status
    assert doc["title"] and doc["detail"]
    assert doc["request_id"] == response.headers["x-request-id"]
    if pointer is None:
        assert doc["errors"] == [], doc
    else:
        assert doc["errors"], doc
        assert doc["errors"][0]["pointer"] == pointer, doc
        assert all(e["reason"] for e in doc["errors"])
    return doc
