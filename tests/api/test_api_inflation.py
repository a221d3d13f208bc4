"""A small compressed table cannot inflate past the cell limit before it is refused."""

from __future__ import annotations

import io

import numpy as np
import pyarrow as pa
import pyarrow.ipc
import pyarrow.parquet as pq
import pytest

from knotwork.codecs import ARROW_STREAM, PARQUET
from knotwork.codecs._arrow import _cells_guard, _prescan, read_table
from knotwork.codecs._errors import TooLarge
from knotwork.codecs._prepared import Limits

LIMITS = Limits(max_cells=1_000_000, max_columns=1000, max_batch_items=500)


def _zeros(rows: int) -> pa.Table:
    return pa.table({name: np.zeros(rows) for name in "abcd"})


def test_parquet_is_refused_from_its_footer() -> None:
    sink = io.BytesIO()
    pq.write_table(_zeros(2_000_000), sink, compression="zstd")
    body = sink.getvalue()
    assert len(body) < 1_000_000  # 64 MB of zeros compress to far less
    with pytest.raises(TooLarge) as info:
        read_table(body, PARQUET, LIMITS)
    assert info.value.kind == "too-many-cells"


def test_arrow_stream_is_refused_batch_by_batch() -> None:
    table = _zeros(2_000_000)
    sink = io.BytesIO()
    options = pa.ipc.IpcWriteOptions(compression="zstd")
    with pa.ipc.new_stream(sink, table.schema, options=options) as writer:
        writer.write_table(table, max_chunksize=50_000)
    with pytest.raises(TooLarge):
        read_table(sink.getvalue(), ARROW_STREAM, LIMITS)


def test_within_the_limit_the_table_is_read_whole() -> None:
    table = _zeros(1000)
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=100)
    assert read_table(sink.getvalue(), ARROW_STREAM, LIMITS).num_rows == 1000


@pytest.mark.parametrize("fmt", ["stream", "file"])
def test_one_compressed_batch_is_refused_from_its_metadata(fmt: str) -> None:
    from knotwork.codecs import ARROW_FILE

    table = _zeros(2_000_000)
    sink = io.BytesIO()
    options = pa.ipc.IpcWriteOptions(compression="zstd")
    opener = pa.ipc.new_stream if fmt == "stream" else pa.ipc.new_file
    with opener(sink, table.schema, options=options) as writer:
        writer.write_table(table, max_chunksize=2_000_000)  # one batch of 8 million zeros
    body = sink.getvalue()
    assert len(body) < 200_000
    media = ARROW_STREAM if fmt == "stream" else ARROW_FILE
    with pytest.raises(TooLarge):
        read_table(body, media, LIMITS)
    # The refusal comes from the declared lengths, before the batch is decoded.
    with pytest.raises(TooLarge):
        _prescan(pa.py_buffer(body), media, _cells_guard(LIMITS, 4))
