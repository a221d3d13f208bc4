"""Arrow IPC and Parquet bodies -> :class:`Prepared`.

Numeric columns (integers, floats, decimals, booleans) become float64 arrays with NaN for
null; string and dictionary columns become categorical labels. A NaN or infinite *value* in a
float column is refused (null is the only way to say "missing"), pointing at the column and
row, so an Arrow body and the equivalent JSON body give the same answer.
"""

from __future__ import annotations

import struct
from collections.abc import Callable

import numpy as np
import pyarrow as pa
import pyarrow.ipc
import pyarrow.parquet as pq

from knotwork_contract import Problem, join

from ._errors import MalformedBody, TooLarge, UnusableInput
from ._prepared import Limits, Origin, Prepared, TableData
from ._query import query_options

__all__ = ["ARROW_FILE", "ARROW_STREAM", "PARQUET", "decode_table_body", "read_table"]

ARROW_STREAM = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"

_NAMES = {ARROW_STREAM: "an Arrow IPC stream", ARROW_FILE: "an Arrow IPC file", PARQUET: "Parquet"}

Buffer = bytes | bytearray | memoryview


def _cells_guard(limits: Limits | None, columns: int) -> Callable[[int], None]:
    """A check called with the rows read so far: raises TooLarge past the cell limit."""

    def check(rows: int) -> None:
        if limits is not None and rows * max(columns, 1) > limits.max_cells:
            reason = (
                f"more than the limit of {limits.max_cells} numbers in the table; send a sample "
                "of the rows, or a summary (correlation or moments) computed on your side"
            )
            raise TooLarge("too-many-cells", reason, [Problem("/columns", reason)])

    return check


def _field(meta: bytes, table: int, index: int) -> int | None:
    """Position of field ``index`` of a flatbuffer table, or None when it is absent."""
    vtable = table - struct.unpack_from("<i", meta, table)[0]
    size = struct.unpack_from("<H", meta, vtable)[0]
    slot = 4 + 2 * index
    if slot >= size:
        return None
    offset = struct.unpack_from("<H", meta, vtable + slot)[0]
    return None if offset == 0 else table + offset


def _declared_rows(message: pa.ipc.Message) -> int:
    """Rows a record-batch message declares, read from its metadata before any decoding.

    The Arrow IPC ``Message`` flatbuffer holds the ``RecordBatch`` header (field 2), whose
    field 0 is the batch's length; the body, compressed or not, is not touched.
    """
    meta = message.metadata.to_pybytes()
    root = struct.unpack_from("<I", meta, 0)[0]
    header = _field(meta, root, 2)
    if header is None:
        return 0
    batch = header + struct.unpack_from("<I", meta, header)[0]
    length = _field(meta, batch, 0)
    return 0 if length is None else int(struct.unpack_from("<q", meta, length)[0])


def _prescan(buffer: pa.Buffer, media_type: str, check: Callable[[int], None]) -> None:
    """Check the cell limit against the rows the IPC messages declare, decoding nothing.

    A single compressed batch can inflate a few kilobytes into hundreds of megabytes, so the
    declared lengths are checked before any batch is read. An IPC file carries the same
    message stream after its 8-byte magic. Bytes that do not parse here are left for the
    reader proper, which reports them.
    """
    start = 8 if media_type == ARROW_FILE else 0
    try:
        messages = pa.ipc.MessageReader.open_stream(buffer.slice(start))
        rows = 0
        for message in messages:
            if message.type == "record batch":
                rows += _declared_rows(message)
                check(rows)
    except TooLarge:
        raise
    except (pa.ArrowException, OSError, ValueError, struct.error, IndexError):
        return


def read_table(body: Buffer, media_type: str, limits: Limits | None = None) -> pa.Table:
    """Read the body as an Arrow IPC stream, an Arrow IPC file or Parquet, without copying.

    With ``limits`` the cell limit is checked before the data are decoded where the format
    says the size up front (Parquet's footer), and batch by batch otherwise, so a small
    compressed body cannot inflate to far more than one batch past the limit.

    Raises
    ------
    MalformedBody
        When the bytes are empty, truncated or not of the announced format.
    TooLarge
        When the table has more cells than the limit.
    """
    what = _NAMES[media_type]
    if not body:
        raise MalformedBody.at("", f"the body is empty; send {what} of the table")
    buffer = pa.py_buffer(body)
    try:
        if media_type == ARROW_STREAM:
            stream = pyarrow.ipc.open_stream(buffer)
            check = _cells_guard(limits, len(stream.schema))
            _prescan(buffer, media_type, check)
            batches, rows = [], 0
            for batch in stream:
                rows += batch.num_rows
                check(rows)
                batches.append(batch)
            return pa.Table.from_batches(batches, schema=stream.schema)
        if media_type == ARROW_FILE:
            file = pyarrow.ipc.open_file(buffer)
            check = _cells_guard(limits, len(file.schema))
            _prescan(buffer, media_type, check)
            batches, rows = [], 0
            for i in range(file.num_record_batches):
                batch = file.get_batch(i)
                rows += batch.num_rows
                check(rows)
                batches.append(batch)
            return pa.Table.from_batches(batches, schema=file.schema)
        parquet = pq.ParquetFile(pa.BufferReader(buffer))
        meta = parquet.metadata
        _cells_guard(limits, meta.num_columns)(meta.num_rows)
        return parquet.read()
    except TooLarge:
        raise
    except (pa.ArrowException, OSError, ValueError) as exc:
        # pyarrow's messages describe the bytes (offsets, lengths, magic numbers), never values.
        reason = f"the body is not {what}: {exc}"
        raise MalformedBody.at("", reason) from None


def _numeric(column: pa.ChunkedArray, pointer: str) -> np.ndarray:
    source = column.type
    if pa.types.is_null(source):
        return np.full(len(column), np.nan)
    values: np.ndarray = column.cast(pa.float64(), safe=False).to_numpy(zero_copy_only=False)
    if pa.types.is_floating(source) or pa.types.is_decimal(source):
        finite = np.isfinite(values)
        if values.size - np.count_nonzero(finite) > column.null_count:
            valid = column.is_valid().to_numpy(zero_copy_only=False)
            row = int(np.flatnonzero(~finite & valid)[0])
            what = "NaN" if np.isnan(values[row]) else "infinite"
            raise UnusableInput.at(
                pointer,
                f"row {row} is {what}; values must be finite numbers (null marks a missing value)",
            )
    return values


def _is_numeric(kind: pa.DataType) -> bool:
    return bool(
        pa.types.is_integer(kind)
        or pa.types.is_floating(kind)
        or pa.types.is_decimal(kind)
        or pa.types.is_boolean(kind)
        or pa.types.is_null(kind)
    )


def _is_text(kind: pa.DataType) -> bool:
    return bool(
        pa.types.is_string(kind) or pa.types.is_large_string(kind) or pa.types.is_string_view(kind)
    )


def table_data(
    table: pa.Table,
    limits: Limits,
    response: str | None,
    weights: str | None,
    *,
    offset: str | None = None,
    trials: str | None = None,
) -> TableData:
    """Split an Arrow table into numeric and categorical columns, enforcing the limits.

    Raises
    ------
    TooLarge
        More columns or cells than allowed.
    UnusableInput
        A duplicate column name, an unsupported column type, or a NaN or infinite value.
    """
    names = table.schema.names
    if len(names) > limits.max_columns:
        reason = f"{len(names)} columns is more than the limit of {limits.max_columns}"
        raise TooLarge("too-many-columns", reason, [Problem("/columns", reason)])
    if table.num_rows * len(names) > limits.max_cells:
        reason = (
            f"{table.num_rows} rows x {len(names)} columns is more than the limit of "
            f"{limits.max_cells} numbers; send a sample of the rows, or a summary"
        )
        raise TooLarge("too-many-cells", reason, [Problem("/columns", reason)])
    seen: set[str] = set()
    columns: dict[str, np.ndarray] = {}
    categorical: dict[str, list[str | None]] = {}
    for name, column in zip(names, table.columns, strict=True):
        pointer = join("columns", name)
        if name in seen:
            raise UnusableInput.at(pointer, "the table has two columns of this name")
        seen.add(name)
        kind = column.type
        if pa.types.is_dictionary(kind):
            if _is_text(kind.value_type):
                categorical[name] = column.to_pylist()
                continue
            if _is_numeric(kind.value_type):
                column = column.cast(kind.value_type)
                kind = kind.value_type
        if _is_text(kind):
            categorical[name] = column.to_pylist()
        elif _is_numeric(kind):
            columns[name] = _numeric(column, pointer)
        else:
            raise UnusableInput.at(
                pointer,
                f"columns of type {kind} are not supported; send numbers (integer, float, "
                "decimal or boolean) or labels (string or dictionary of strings)",
            )
    return TableData(
        columns=columns,
        categorical=categorical,
        response=response,
        weights=weights,
        offset=offset,
        trials=trials,
    )


def decode_table_body(
    body: Buffer, media_type: str, query: str | bytes, limits: Limits
) -> Prepared:
    """Decode an Arrow IPC or Parquet body whose options are query parameters.

    Raises
    ------
    CodecError
        MalformedBody, InvalidRequest (a query parameter), TooLarge or UnusableInput.
    """
    options, columns = query_options(query)
    table = read_table(body, media_type, limits)
    data = table_data(
        table,
        limits,
        columns.get("response"),
        columns.get("weights"),
        offset=columns.get("offset"),
        trials=columns.get("trials"),
    )
    return Prepared(data=data, options=options, origin=Origin(query=True))
