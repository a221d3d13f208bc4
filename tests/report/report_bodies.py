"""The demo's request in every encoding, for the report and provenance tests."""

from __future__ import annotations

import io
from typing import Any

import pyarrow as pa
import pyarrow.ipc
import pyarrow.parquet as pq

from knotwork.demo import garden_centres, request_body

JSON = "application/json"
ARROW_STREAM = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"
HTML = "text/html; charset=utf-8"


def demo_body(**options: Any) -> dict[str, Any]:
    """The demo as a JSON request (rows, a categorical region, the response), threshold 5."""
    body = request_body(garden_centres(240, 7), 5.0)
    body["options"] = {**body["options"], **options}  # type: ignore[dict-item]
    return body


def demo_table() -> pa.Table:
    """The demo's columns in the JSON request's order: the numbers, then the region."""
    data = demo_body()["input"]
    arrays = {name: pa.array(values, pa.float64()) for name, values in data["columns"].items()}
    arrays["region"] = pa.array(data["categorical"]["region"], pa.string())
    return pa.table(arrays)


def binary_bodies() -> dict[str, bytes]:
    """The demo table as an Arrow IPC stream, an Arrow IPC file and Parquet."""
    table = demo_table()
    stream, file, parquet = io.BytesIO(), io.BytesIO(), io.BytesIO()
    with pa.ipc.new_stream(stream, table.schema) as writer:
        writer.write_table(table)
    with pa.ipc.new_file(file, table.schema) as writer:
        writer.write_table(table)
    pq.write_table(table, parquet)
    return {
        ARROW_STREAM: stream.getvalue(),
        ARROW_FILE: file.getvalue(),
        PARQUET: parquet.getvalue(),
    }


#: The binary bodies' options as query parameters (a string column is categorical).
DEMO_QUERY = "response=weekly_takings&threshold=5"
