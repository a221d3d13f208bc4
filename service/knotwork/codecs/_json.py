"""JSON bodies -> :class:`Prepared`, with JSON pointers to every fault.

Decoders are built once. A table's columns arrive as raw JSON and are decoded one by one, so a
wrong value is reported as ``/input/columns/<name>/<row>`` rather than msgspec's anonymous
``[...]``; decoding a column on its own is also faster than one pass over the whole document.
"""

from __future__ import annotations

from typing import Annotated, Any

import msgspec
import numpy as np
from msgspec import Meta, Raw, Struct

from knotwork_contract import (
    AssessRequest,
    CorrelationInput,
    EstimatesInput,
    MomentsInput,
    Name,
    Problem,
    TableInput,
    join,
)

from ._errors import InvalidRequest, MalformedBody, TooLarge, schema_fault
from ._prepared import (
    CorrelationData,
    EstimatesData,
    Limits,
    MomentsData,
    Origin,
    Prepared,
    TableData,
)

__all__ = ["decode_assess", "decode_batch"]

Buffer = bytes | bytearray | memoryview


class _RawBatch(Struct, frozen=True, kw_only=True, forbid_unknown_fields=True):
    items: Annotated[list[Raw], Meta(min_length=1)]


class _UncountedBatch(Struct, frozen=True, kw_only=True, forbid_unknown_fields=True):
    items: Raw


_SCAN_CHUNK = 1 << 20
_WHITESPACE = np.array([0x20, 0x09, 0x0A, 0x0D], dtype=np.uint8)


def _count_elements(array: bytes | memoryview) -> int:
    """Elements of a JSON array given as valid JSON text, without building any of them.

    Scans the bytes in 1 MiB chunks with numpy (memory stays a few chunk-sizes): a quote
    delimits a string unless an odd run of backslashes precedes it; outside strings, elements
    are separated by commas at depth 1 (the array's own brackets are depth 1).
    """
    data = np.frombuffer(array, dtype=np.uint8)
    inner = data[1:-1]
    if inner.size == 0 or np.isin(inner, _WHITESPACE).all():
        return 0
    commas = 0
    in_string = False  # state carried from one chunk to the next
    depth = 0
    backslashes = 0  # length of the run of backslashes that ended the previous chunk
    for start in range(0, data.size, _SCAN_CHUNK):
        b = data[start : start + _SCAN_CHUNK]
        quotes = np.flatnonzero(b == 0x22)
        if quotes.size:
            slash = b == 0x5C
            if slash.any() or backslashes:
                index = np.arange(b.size, dtype=np.int32)
                last_plain = np.maximum.accumulate(np.where(slash, -1, index))
                before = quotes - 1
                run = np.where(
                    before >= 0,
                    before - last_plain[np.maximum(before, 0)],
                    0,
                )
                # A run touching the chunk's start continues the previous chunk's run.
                touches = (before >= 0) & (last_plain[np.maximum(before, 0)] < 0)
                run = run + np.where(touches | (before < 0), backslashes, 0)
                quotes = quotes[run % 2 == 0]
            delim = np.zeros(b.size, dtype=bool)
            delim[quotes] = True
            parity = (np.cumsum(delim, dtype=np.int32) + int(in_string)) % 2
            outside = (parity == 0) & ~delim
            in_string = bool(parity[-1])
        elif in_string:
            outside = np.zeros(b.size, dtype=bool)
        else:
            outside = np.ones(b.size, dtype=bool)
        step = np.zeros(b.size, dtype=np.int32)
        step[outside & ((b == 0x5B) | (b == 0x7B))] = 1
        step[outside & ((b == 0x5D) | (b == 0x7D))] = -1
        level = np.cumsum(step, dtype=np.int32) + depth
        commas += int(np.count_nonzero(outside & (b == 0x2C) & (level == 1)))
        depth = int(level[-1])
        tail = np.flatnonzero(b != 0x5C)
        backslashes = b.size - 1 - int(tail[-1]) if tail.size else backslashes + b.size
    return commas + 1


_REQUEST = msgspec.json.Decoder(AssessRequest)
_BATCH = msgspec.json.Decoder(_RawBatch)
_BATCH_SHELL = msgspec.json.Decoder(_UncountedBatch)
_NUMBERS = msgspec.json.Decoder(list[float | None])
_LABELS = msgspec.json.Decoder(list[str | None])
_NAMES = msgspec.json.Decoder(Annotated[list[Name], Meta(min_length=1)])

_EMPTY_BODY = 'the body is empty; send a JSON document {"input": {...}, "options": {...}}'


def _parse(decoder: msgspec.json.Decoder[Any], body: Buffer, prefix: str) -> Any:
    try:
        return decoder.decode(body)
    except msgspec.ValidationError as exc:
        raise schema_fault(exc, prefix) from None
    except msgspec.DecodeError as exc:
        reason = f"the body is not valid JSON: {exc}"
        raise MalformedBody(reason, [Problem(prefix, reason)]) from None
    except RecursionError:
        # msgspec bounds its own nesting depth, but a value kept raw and decoded later (a
        # column, a term, a batch item) can still exhaust the interpreter's stack.
        reason = "the JSON is nested too deeply; no valid request nests more than a few levels"
        raise MalformedBody(reason, [Problem(prefix, reason)]) from None


def decode_assess(body: Buffer, limits: Limits, *, base: str = "") -> Prepared:
    """Decode one ``{"input", "options"}`` document.

    Parameters
    ----------
    body
        The JSON document.
    limits
        Cells and columns allowed.
    base
        Pointer of this document inside the request (``/items/<i>`` in a batch).

    Raises
    ------
    CodecError
        MalformedBody, InvalidRequest or TooLarge, each pointing at the fault.
    """
    if not body:
        raise MalformedBody(_EMPTY_BODY, [Problem(base, _EMPTY_BODY)])
    request: AssessRequest = _parse(_REQUEST, body, base)
    inp = request.input
    at = base + "/input"
    data: TableData | CorrelationData | MomentsData | EstimatesData
    if isinstance(inp, TableInput):
        data = _table(inp, limits, at)
    elif isinstance(inp, CorrelationInput):
        data = _correlation(inp, limits, at)
    elif isinstance(inp, EstimatesInput):
        data = _estimates(inp, limits, at)
    else:
        data = _moments(inp, limits, at)
    return Prepared(data=data, options=request.options, origin=Origin(base=base))


def decode_batch(body: Buffer, limits: Limits) -> list[Raw]:
    """Split a batch body into its items (raw JSON), each decoded later on its own.

    Raises
    ------
    CodecError
        When the body is not JSON, not ``{"items": [...]}``, or has too many items.
    """
    if not body:
        reason = 'the body is empty; send {"items": [{"input": {...}, "options": {...}}, ...]}'
        raise MalformedBody(reason, [Problem("", reason)])
    # Count the items before building any: a body of millions of tiny items would otherwise
    # cost tens of bytes of memory for every two bytes sent.
    shell: _UncountedBatch = _parse(_BATCH_SHELL, body, "")
    # Fewer commas than the limit bounds the items already; only a larger body needs a scan.
    few = bytes(shell.items).count(b",") < limits.max_batch_items
    count = 0 if few else _count_elements(shell.items)
    if count > limits.max_batch_items:
        reason = (
            f"{count} items is more than the limit of {limits.max_batch_items}; split the batch"
        )
        raise TooLarge("too-many-items", reason, [Problem("/items", reason)])
    batch: _RawBatch = _parse(_BATCH, body, "")
    return batch.items


def _too_many_columns(count: int, limits: Limits, pointer: str) -> None:
    if count > limits.max_columns:
        reason = (
            f"{count} columns is more than the limit of {limits.max_columns}; send fewer variables"
        )
        raise TooLarge("too-many-columns", reason, [Problem(pointer, reason)])


def _too_many_cells(cells: int, limits: Limits, pointer: str) -> None:
    if cells > limits.max_cells:
        reason = (
            f"more than the limit of {limits.max_cells} numbers in the input; send a sample "
            "of the rows, or a summary (correlation or moments) computed on your side"
        )
        raise TooLarge("too-many-cells", reason, [Problem(pointer, reason)])


def _table(inp: TableInput, limits: Limits, at: str) -> TableData:
    categorical_raw = inp.categorical or {}
    _too_many_columns(len(inp.columns) + len(categorical_raw), limits, at + "/columns")
    cells = 0
    columns: dict[str, np.ndarray] = {}
    for name, raw in inp.columns.items():
        pointer = at + join("columns", name)
        values = _parse(_NUMBERS, raw, pointer)
        cells += len(values)
        _too_many_cells(cells, limits, at + "/columns")
        # None becomes NaN, the core's mark of a missing value.
        columns[name] = np.array(values, dtype=np.float64)
    categorical: dict[str, list[str | None]] = {}
    for name, raw in categorical_raw.items():
        pointer = at + join("categorical", name)
        labels = _parse(_LABELS, raw, pointer)
        cells += len(labels)
        _too_many_cells(cells, limits, at + "/categorical")
        categorical[name] = labels
    return TableData(
        columns=columns,
        categorical=categorical,
        response=inp.response,
        weights=inp.weights,
        offset=inp.offset,
        trials=inp.trials,
    )


def _terms(terms: dict[str, Raw] | None, at: str) -> dict[str, list[str]] | None:
    if terms is None:
        return None
    return {name: _parse(_NAMES, raw, at + join("terms", name)) for name, raw in terms.items()}


def _matrix_cells(matrix: list[list[float]]) -> int:
    return sum(len(row) for row in matrix)


def _correlation(inp: CorrelationInput, limits: Limits, at: str) -> CorrelationData:
    _too_many_columns(len(inp.names), limits, at + "/names")
    _too_many_cells(_matrix_cells(inp.matrix), limits, at + "/matrix")
    response = None
    if inp.response is not None:
        response = (inp.response.name, inp.response.correlations)
    return CorrelationData(
        names=inp.names,
        matrix=inp.matrix,
        n=inp.n,
        response=response,
        terms=_terms(inp.terms, at),
    )


def _moments(inp: MomentsInput, limits: Limits, at: str) -> MomentsData:
    _too_many_columns(len(inp.names), limits, at + "/names")
    single = {"n": inp.n, "means": inp.means, "covariance": inp.covariance}
    given = [key for key, value in single.items() if value is not None]
    if inp.parts is not None:
        if given:
            reason = f"give either parts or n, means and covariance, not both (got {given[0]})"
            raise InvalidRequest(reason, [Problem(f"{at}/{given[0]}", reason)])
        _too_many_cells(
            sum(_matrix_cells(part.covariance) for part in inp.parts), limits, at + "/parts"
        )
        return MomentsData(
            names=inp.names,
            parts=[(part.n, part.means, part.covariance) for part in inp.parts],
            response=inp.response,
            terms=_terms(inp.terms, at),
        )
    missing = [key for key, value in single.items() if value is None]
    if missing:
        reason = f"Object missing required field `{missing[0]}` (or give parts instead)"
        raise InvalidRequest(reason, [Problem(f"{at}/{missing[0]}", reason)])
    assert inp.covariance is not None  # for the type checker: checked just above
    _too_many_cells(_matrix_cells(inp.covariance), limits, at + "/covariance")
    return MomentsData(
        names=inp.names,
        n=inp.n,
        means=inp.means,
        covariance=inp.covariance,
        response=inp.response,
        terms=_terms(inp.terms, at),
    )


def _estimates(inp: EstimatesInput, limits: Limits, at: str) -> EstimatesData:
    _too_many_columns(len(inp.names), limits, at + "/names")
    _too_many_cells(_matrix_cells(inp.covariance), limits, at + "/covariance")
    return EstimatesData(
        names=inp.names,
        covariance=inp.covariance,
        intercept=inp.intercept,
        terms=_terms(inp.terms, at),
        n=inp.n,
    )
