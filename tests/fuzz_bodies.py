"""Binary request bodies for the schemathesis runs, registered once for every test module.

schemathesis keeps one strategy per media type for the whole process, so two modules that each
registered their own would silently share whichever was imported last. Both fuzzing modules
call :func:`register` instead, which registers this one set: whole, halved and cut tables in
each binary encoding (valid and broken inputs of several kinds) or random bytes.
"""

from __future__ import annotations

import io

import pyarrow as pa
import pyarrow.parquet as pq
import schemathesis
from hypothesis import strategies as st

ARROW_STREAM = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"

_registered = False


def _tables() -> list[pa.Table]:
    return [
        pa.table(
            {
                "a": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0],
                "b": [2.0, 1.0, 4.0, 3.0, 6.0, 5.5],
                "c": [1.0, 3.0, 2.0, 5.0, 4.0, 7.0],
                "g": ["x", "y", "x", "y", "x", "z"],
            }
        ),
        pa.table({"a": [1.0, 2.0, 3.0], "b": [1.0, None, 2.0]}),  # a missing value
        pa.table({"a": [1.0, 2.0, float("nan")], "b": [1.0, 2.0, 2.0]}),  # NaN
        pa.table({"a": [1.0, 1.0, 1.0], "b": [1.0, 2.0, 3.0]}),  # a constant column
        pa.table({"a": pa.array([], pa.float64())}),  # no rows
        pa.table({"s": ["only", "strings", "here"]}),
        pa.table({"a": [1, 2, 3, 4], "b": [True, False, True, True]}),  # ints and booleans
    ]


def binary_bodies() -> dict[str, list[bytes]]:
    """For each binary media type: every table whole, halved and without its last byte."""
    out: dict[str, list[bytes]] = {ARROW_STREAM: [], ARROW_FILE: [], PARQUET: []}
    for table in _tables():
        for media in out:
            sink = io.BytesIO()
            if media == PARQUET:
                pq.write_table(table, sink)
            else:
                make = pa.ipc.new_stream if media == ARROW_STREAM else pa.ipc.new_file
                with make(sink, table.schema) as writer:
                    writer.write_table(table)
            whole = sink.getvalue()
            out[media] += [whole, whole[: len(whole) // 2], whole[:-1]]
    return out


def register() -> None:
    """Register the binary bodies with schemathesis (once per process)."""
    global _registered
    if _registered:
        return
    for media, bodies in binary_bodies().items():
        schemathesis.openapi.media_type(media, st.sampled_from(bodies) | st.binary(max_size=512))
    _registered = True
