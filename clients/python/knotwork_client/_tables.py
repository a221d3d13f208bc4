"""Turn the many kinds of tabular input into one form: a stream of column blocks.

A :class:`Block` holds a bounded number of rows: numeric columns as float64 arrays (NaN for
missing) and categorical columns as integer codes (-1 for missing) with their level strings.
Everything downstream (summaries, request encoding) reads blocks only, so a Parquet file of any
size, an iterator of record batches, a DataFrame and a named numpy array all take one path.

pandas and pyarrow are imported only when the input needs them.
"""

from __future__ import annotations

import os
import queue
import threading
from collections.abc import Iterable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from ._exceptions import DataError

__all__ = ["TABLE_SUFFIXES", "Block", "iter_blocks"]

#: File suffixes read as tables, by format.
TABLE_SUFFIXES = {
    ".csv": "csv",
    ".parquet": "parquet",
    ".pq": "parquet",
    ".arrow": "arrow",
    ".ipc": "arrow",
    ".feather": "arrow",
    ".arrows": "arrow",
}

#: Upper bound on rows x columns per block: 1 Mi cells is 8 MB of float64, so a block, its
#: centred copy and the reader's own buffers stay small whatever the input; larger blocks were
#: no faster here (the Gram product is memory-bound at these shapes).
_BLOCK_CELLS = 1 << 20
_MAX_BLOCK_ROWS = 1 << 16


@dataclass(frozen=True, slots=True)
class Block:
    """A bounded slice of rows.

    Attributes
    ----------
    numeric
        Column name -> float64 values, NaN for missing, in input order.
    categorical
        Column name -> (codes, levels): int64 codes (-1 for missing) into ``levels`` (strings).
    rows
        Number of rows in the block.
    """

    numeric: dict[str, np.ndarray]
    categorical: dict[str, tuple[np.ndarray, list[str]]]
    rows: int


def block_rows(columns: int) -> int:
    """Rows per block for a table with ``columns`` columns."""
    return int(max(1024, min(_MAX_BLOCK_ROWS, _BLOCK_CELLS // max(columns, 1))))


def iter_blocks(
    data: Any,
    *,
    categorical: Sequence[str] = (),
    columns: Sequence[str] | None = None,
    names: Sequence[str] | None = None,
) -> Iterator[Block]:
    """Yield the rows of ``data`` as blocks.

    ``data`` may be a pandas DataFrame, a pyarrow Table, RecordBatch, RecordBatchReader or
    Dataset, a numpy structured array, a 2-D numpy array with ``names`` (or an ``(array,
    names)`` pair), a mapping of column name -> values, a path to a CSV, Parquet or Arrow file
    or to a folder of Parquet files, or an iterable of any of these (chunks of one table).
    String, dictionary and pandas ``category`` columns are categorical; ``categorical`` names
    further columns (integer codes, say) to treat as categorical. ``columns`` keeps only those
    columns (read from disk only).
    """
    forced = frozenset(categorical)
    wanted = list(columns) if columns is not None else None
    yield from _dispatch(data, forced, wanted, names)


def _dispatch(
    data: Any, forced: frozenset[str], wanted: list[str] | None, names: Sequence[str] | None
) -> Iterator[Block]:
    if isinstance(data, (str, os.PathLike)):
        yield from _from_path(Path(data), forced, wanted)
        return
    if isinstance(data, tuple) and len(data) == 2 and isinstance(data[0], np.ndarray):
        array, array_names = data
        yield from _from_ndarray(array, list(array_names), forced, wanted)
        return
    if isinstance(data, np.ndarray):
        yield from _from_ndarray(data, list(names) if names is not None else None, forced, wanted)
        return
    module = type(data).__module__
    if module.startswith("pandas") and hasattr(data, "iloc"):
        yield from _from_pandas(data, forced, wanted)
        return
    if module.startswith("pyarrow"):
        yield from _from_arrow(data, forced, wanted)
        return
    if isinstance(data, Mapping):
        yield from _from_mapping(data, forced, wanted)
        return
    if isinstance(data, Iterable):
        for part in data:
            if isinstance(part, (str, os.PathLike)) or (
                isinstance(part, Iterable) and not _is_table(part)
            ):
                raise DataError(
                    "an iterable input must yield tables (DataFrames or record batches), "
                    f"got {type(part).__name__}"
                )
            yield from _dispatch(part, forced, wanted, names)
        return
    raise DataError(
        f"cannot read a table from {type(data).__name__}: pass a DataFrame, an Arrow table or "
        "record batches, a named numpy array, a mapping of columns, or a file path"
    )


def _is_table(part: Any) -> bool:
    module = type(part).__module__
    return (
        module.startswith(("pandas", "pyarrow"))
        or isinstance(part, (np.ndarray, Mapping))
        or (isinstance(part, tuple) and len(part) == 2 and isinstance(part[0], np.ndarray))
    )


# --- numpy and plain mappings -------------------------------------------------------------


def _from_ndarray(
    array: np.ndarray, names: list[str] | None, forced: frozenset[str], wanted: list[str] | None
) -> Iterator[Block]:
    if array.dtype.names is not None:
        if array.ndim != 1:
            raise DataError("a structured array must be one-dimensional (one record per row)")
        cols = {name: array[name] for name in array.dtype.names}
        yield from _from_mapping(cols, forced, wanted)
        return
    if array.ndim != 2:
        raise DataError(f"a numeric array must be 2-D (rows x columns), got {array.ndim}-D")
    if names is None:
        raise DataError(
            "a plain 2-D array has no column names: pass (array, names), a structured array "
            "or a DataFrame"
        )
    if len(names) != array.shape[1]:
        raise DataError(f"got {len(names)} names for an array with {array.shape[1]} columns")
    yield from _from_mapping({n: array[:, j] for j, n in enumerate(names)}, forced, wanted)


def _from_mapping(
    cols: Mapping[str, Any], forced: frozenset[str], wanted: list[str] | None
) -> Iterator[Block]:
    arrays = {str(k): np.asarray(v) for k, v in cols.items()}
    arrays = _select(arrays, wanted)
    lengths = {len(a) for a in arrays.values()}
    if len(lengths) > 1:
        detail = ", ".join(f"{k!r}: {len(a)}" for k, a in arrays.items())
        raise DataError(
            f"columns have different lengths ({detail}); every column needs one value per row"
        )
    rows = lengths.pop() if lengths else 0
    numeric: dict[str, np.ndarray] = {}
    categorical: dict[str, tuple[np.ndarray, list[str]]] = {}
    for name, a in arrays.items():
        if a.ndim != 1:
            raise DataError(f"column {name!r} must be one-dimensional", [(name, "not 1-D")])
        if a.dtype.kind == "O" and name not in forced and _all_numbers(a):
            # A list with None for missing values arrives as an object array of numbers.
            numeric[name] = np.array([np.nan if v is None else v for v in a], dtype=np.float64)
        elif name in forced or a.dtype.kind in "USO":
            categorical[name] = _encode_levels(a, name)
        elif a.dtype.kind in "biuf":
            numeric[name] = a.astype(np.float64, copy=False)
        else:
            raise DataError(
                f"column {name!r} has type {a.dtype}, which is neither numeric nor text; "
                "convert it to numbers or pass it in categorical=",
                [(name, f"unsupported type {a.dtype}")],
            )
    step = block_rows(len(arrays))
    for start in range(0, max(rows, 1), step):
        stop = min(rows, start + step)
        yield Block(
            {k: v[start:stop] for k, v in numeric.items()},
            {k: (c[start:stop], lv) for k, (c, lv) in categorical.items()},
            stop - start,
        )


def _encode_levels(values: np.ndarray, name: str) -> tuple[np.ndarray, list[str]]:
    """Codes and level strings of a 1-D array; None, NaN and empty-object cells are missing."""
    as_obj = values.astype(object)
    missing = np.array([_is_missing(v) for v in as_obj], dtype=bool)
    text = np.array([("" if m else str(v)) for v, m in zip(as_obj, missing, strict=True)])
    levels, codes = (
        np.unique(text[~missing], return_inverse=True)
        if (~missing).any()
        else (
            np.array([], dtype=str),
            np.array([], dtype=np.int64),
        )
    )
    out = np.full(len(values), -1, dtype=np.int64)
    out[~missing] = codes
    return out, [str(level) for level in levels]


def _all_numbers(values: np.ndarray) -> bool:
    present = [v for v in values if v is not None]
    return bool(present) and all(
        isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, str)
        for v in present
    )


def _is_missing(v: Any) -> bool:
    return v is None or (isinstance(v, float) and v != v)


def _select(arrays: dict[str, Any], wanted: list[str] | None) -> dict[str, Any]:
    if wanted is None:
        return arrays
    absent = [w for w in wanted if w not in arrays]
    if absent:
        raise DataError(
            f"columns not found: {absent}; available: {list(arrays)}",
            [(w, "no such column") for w in absent],
        )
    return {w: arrays[w] for w in wanted}


# --- pandas --------------------------------------------------------------------------------


def _from_pandas(frame: Any, forced: frozenset[str], wanted: list[str] | None) -> Iterator[Block]:
    import pandas as pd

    if isinstance(frame, pd.Series):
        frame = frame.to_frame()
    if wanted is not None:
        absent = [w for w in wanted if w not in frame.columns]
        if absent:
            raise DataError(
                f"columns not found: {absent}; available: {[str(c) for c in frame.columns]}",
                [(w, "no such column") for w in absent],
            )
        frame = frame[wanted]
    if frame.columns.has_duplicates:
        dup = sorted({str(c) for c in frame.columns[frame.columns.duplicated()]})
        raise DataError(f"duplicate column names: {dup}", [(d, "duplicate name") for d in dup])
    step = block_rows(frame.shape[1])
    for start in range(0, max(len(frame), 1), step):
        part = frame.iloc[start : start + step]
        numeric: dict[str, np.ndarray] = {}
        categorical: dict[str, tuple[np.ndarray, list[str]]] = {}
        for col in part.columns:
            name = str(col)
            series = part[col]
            dtype = series.dtype
            if name in forced or not (
                pd.api.types.is_numeric_dtype(dtype) or pd.api.types.is_bool_dtype(dtype)
            ):
                if pd.api.types.is_datetime64_any_dtype(dtype) or pd.api.types.is_timedelta64_dtype(
                    dtype
                ):
                    raise DataError(
                        f"column {name!r} holds dates or durations; convert it to numbers "
                        "(days since a start, say) before summarizing",
                        [(name, f"unsupported type {dtype}")],
                    )
                codes, uniques = pd.factorize(series, sort=False, use_na_sentinel=True)
                categorical[name] = (np.asarray(codes, dtype=np.int64), [str(u) for u in uniques])
            else:
                numeric[name] = series.to_numpy(dtype=np.float64, na_value=np.nan)
        yield Block(numeric, categorical, len(part))


# --- Arrow ---------------------------------------------------------------------------------


def _from_arrow(obj: Any, forced: frozenset[str], wanted: list[str] | None) -> Iterator[Block]:
    import pyarrow as pa

    if isinstance(obj, pa.Table):
        if wanted is not None:
            obj = obj.select(_checked(obj.schema.names, wanted))
        batches: Iterable[Any] = obj.to_batches(max_chunksize=block_rows(obj.num_columns))
    elif isinstance(obj, pa.RecordBatch):
        if wanted is not None:
            obj = obj.select(_checked(obj.schema.names, wanted))
        batches = [obj]
    elif isinstance(obj, pa.RecordBatchReader):
        batches = _read_ahead(obj)
    else:
        try:
            import pyarrow.dataset as ds
        except ImportError:  # pragma: no cover - pyarrow always ships dataset today
            ds = None
        if ds is not None and isinstance(obj, ds.Dataset):
            batches = _read_ahead(_dataset_batches(obj, wanted))
        else:
            raise DataError(f"cannot read a table from {type(obj).__name__}")
    for batch in batches:
        if wanted is not None and batch.schema.names != wanted:
            batch = batch.select(_checked(batch.schema.names, wanted))
        step = block_rows(batch.num_columns)
        for start in range(0, max(batch.num_rows, 1), step):
            yield _arrow_block(batch.slice(start, step), forced)


class _Failed:
    def __init__(self, exc: BaseException) -> None:
        self.exc = exc


_DONE = object()


def _read_ahead(batches: Iterable[Any], depth: int = 1) -> Iterator[Any]:
    """Decode the next batch on a helper thread while the caller works on the current one.

    Arrow decodes and numpy computes without holding the GIL, so reading and summarizing
    overlap on two cores. At most ``depth`` decoded batches wait, so memory grows by that
    many batches only. The helper stops when the consumer stops early.
    """
    ready: queue.Queue[Any] = queue.Queue(maxsize=depth)
    stop = threading.Event()

    def offer(item: Any) -> bool:
        while not stop.is_set():
            try:
                ready.put(item, timeout=0.05)
                return True
            except queue.Full:
                continue
        return False

    def produce() -> None:
        try:
            for batch in batches:
                if not offer(batch):
                    return
        except BaseException as exc:  # handed to the consumer, raised there
            offer(_Failed(exc))
            return
        offer(_DONE)

    helper = threading.Thread(target=produce, name="knotwork-read-ahead", daemon=True)
    helper.start()
    try:
        while True:
            item = ready.get()
            if item is _DONE:
                return
            if isinstance(item, _Failed):
                raise item.exc
            yield item
    finally:
        stop.set()
        helper.join(timeout=10)


def _checked(available: list[str], wanted: list[str]) -> list[str]:
    absent = [w for w in wanted if w not in available]
    if absent:
        raise DataError(
            f"columns not found: {absent}; available: {available}",
            [(w, "no such column") for w in absent],
        )
    return wanted


def _arrow_block(batch: Any, forced: frozenset[str]) -> Block:
    import pyarrow as pa

    def compute() -> Any:  # imported on first need: plain float64 columns never need it
        import pyarrow.compute as pc

        return pc

    names = batch.schema.names
    if len(set(names)) != len(names):
        dup = sorted({n for n in names if names.count(n) > 1})
        raise DataError(f"duplicate column names: {dup}", [(d, "duplicate name") for d in dup])
    numeric: dict[str, np.ndarray] = {}
    categorical: dict[str, tuple[np.ndarray, list[str]]] = {}
    for name, column in zip(names, batch.columns, strict=True):
        kind = column.type
        textual = pa.types.is_string(kind) or pa.types.is_large_string(kind)
        textual = textual or pa.types.is_dictionary(kind) or pa.types.is_string_view(kind)
        if name in forced or textual:
            if pa.types.is_dictionary(kind):
                column = column.cast(kind.value_type)
            pc = compute()
            if not (pa.types.is_string(column.type) or pa.types.is_large_string(column.type)):
                column = pc.cast(column, pa.string())
            encoded = pc.dictionary_encode(column)
            codes = pc.fill_null(encoded.indices, -1).to_numpy(zero_copy_only=False)
            categorical[name] = (
                codes.astype(np.int64, copy=False),
                [str(v) for v in encoded.dictionary.to_pylist()],
            )
        elif pa.types.is_floating(kind) or pa.types.is_integer(kind) or pa.types.is_boolean(kind):
            if not pa.types.is_float64(kind):
                column = compute().cast(column, pa.float64())
            numeric[name] = column.to_numpy(zero_copy_only=False)
        elif pa.types.is_null(kind):
            numeric[name] = np.full(batch.num_rows, np.nan)
        elif pa.types.is_decimal(kind):
            numeric[name] = compute().cast(column, pa.float64()).to_numpy(zero_copy_only=False)
        else:
            raise DataError(
                f"column {name!r} has Arrow type {kind}, which is neither numeric nor text; "
                "convert it to numbers or pass it in categorical=",
                [(name, f"unsupported type {kind}")],
            )
    return Block(numeric, categorical, batch.num_rows)


def _dataset_batches(dataset: Any, wanted: list[str] | None) -> Iterator[Any]:
    # Small read-ahead keeps memory bounded: the defaults buffer 16 batches of 4 files at once.
    batches: Iterator[Any] = dataset.to_batches(
        columns=wanted,
        batch_size=block_rows(len(wanted or dataset.schema.names)),
        batch_readahead=1,
        fragment_readahead=1,
    )
    return batches


# --- files ---------------------------------------------------------------------------------


def _from_path(path: Path, forced: frozenset[str], wanted: list[str] | None) -> Iterator[Block]:
    if not path.exists():
        raise DataError(f"no such file or folder: {path}", [(str(path), "not found")])
    if path.is_dir():
        yield from _from_arrow(_parquet_dataset(path), forced, wanted)
        return
    kind = TABLE_SUFFIXES.get(path.suffix.lower())
    if kind is None:
        raise DataError(
            f"cannot tell the format of {path.name}: use a .csv, .parquet or .arrow file",
            [(str(path), "unknown file type")],
        )
    if kind == "parquet":
        yield from _from_arrow(_parquet_reader(path, wanted), forced, wanted)
    elif kind == "arrow":
        yield from _from_arrow(_ipc_reader(path), forced, wanted)
    else:
        yield from _from_csv(path, forced, wanted)


def _pyarrow(what: str) -> Any:
    try:
        import pyarrow
    except ImportError as exc:
        raise ImportError(f"{what} needs pyarrow: pip install 'knotwork-client[arrow]'") from exc
    return pyarrow


def _parquet_reader(path: Path, wanted: list[str] | None) -> Any:
    _pyarrow("reading Parquet")
    import pyarrow as pa
    import pyarrow.parquet as pq

    # Buffered column streams without pre-buffering: pages are read as batches need them, so
    # memory stays bounded by the batch and the page size, not by the row-group size (with
    # pre_buffer, whole row groups, and here whole files, were held at once).
    handle = pq.ParquetFile(path, buffer_size=1 << 18, pre_buffer=False)
    names = wanted if wanted is not None else handle.schema_arrow.names
    if wanted is not None:
        _checked(handle.schema_arrow.names, wanted)
    batches = handle.iter_batches(batch_size=block_rows(len(names)), columns=wanted)
    schema = (
        handle.schema_arrow
        if wanted is None
        else pa.schema([handle.schema_arrow.field(n) for n in wanted])
    )
    return pa.RecordBatchReader.from_batches(schema, batches)


def _parquet_dataset(path: Path) -> Any:
    _pyarrow("reading a Parquet dataset")
    import pyarrow.dataset as ds

    scan = ds.ParquetFragmentScanOptions(
        use_buffered_stream=True, buffer_size=1 << 18, pre_buffer=False
    )
    fmt = ds.ParquetFileFormat(default_fragment_scan_options=scan)
    dataset = ds.dataset(path, format=fmt)
    if not dataset.files:
        raise DataError(f"no Parquet files in {path}", [(str(path), "empty folder")])
    return dataset


def _ipc_reader(path: Path) -> Any:
    _pyarrow("reading Arrow files")
    import pyarrow as pa
    import pyarrow.ipc as ipc

    source = pa.memory_map(str(path), "r")
    try:
        reader = ipc.open_file(source)
    except pa.ArrowInvalid:
        source.seek(0)
        return ipc.open_stream(source)
    return pa.RecordBatchReader.from_batches(
        reader.schema, (reader.get_batch(i) for i in range(reader.num_record_batches))
    )


def _from_csv(path: Path, forced: frozenset[str], wanted: list[str] | None) -> Iterator[Block]:
    # CSV is read whole: a streaming CSV reader fixes column types from the first block and
    # fails later on a column that turns from integers to decimals. Parquet and Arrow files
    # stream in bounded memory; convert a very large CSV to Parquet first.
    try:
        import pyarrow.csv as pacsv
    except ImportError:
        pacsv = None
    if pacsv is not None:
        convert = pacsv.ConvertOptions(include_columns=wanted) if wanted else None
        yield from _from_arrow(pacsv.read_csv(path, convert_options=convert), forced, wanted)
        return
    try:
        import pandas as pd
    except ImportError as exc:
        raise ImportError(
            "reading CSV needs pyarrow or pandas: pip install 'knotwork-client[arrow]'"
        ) from exc
    yield from _from_pandas(pd.read_csv(path, usecols=wanted), forced, wanted)
