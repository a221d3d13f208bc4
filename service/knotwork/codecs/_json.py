"""JSON bodies -> :class:`Prepared`, with JSON pointers to every fault.

Decoders are built once. A table's columns arrive as raw JSON and are decoded one by one, so a
wrong value is reported as ``/input/columns/<name>/<row>`` rather than msgspec's anonymous
``[...]``; decoding a column on its own is also faster than one pass over the whole document.
"""

from __future__ import annotations

from typing import Annotated

import msgspec
import numpy as np
from msgspec import Meta, Raw, Struct

from ._errors import Fault, InvalidRequest, MalformedBody, TooLarge
from ._pointers import join, msgspec_fault
from ._prepared import CorrelationData, Limits, MomentsData, Origin, Prepared, TableData
from ._wire import AssessRequest, CorrelationInput, MomentsInput, Name, TableInput

__all__ = ["decode_assess", "decode_batch"]

Buffer = bytes | bytearray | memoryview


class _RawBatch(Struct, frozen=True, kw_only=True, forbid_unknown_fields=True):
    items: Annotated[list[Raw], Meta(min_length=1)]


_REQUEST = msgspec.json.Decoder(AssessRequest)
_BATCH = msgspec.json.Decoder(_RawBatch)
_NUMBERS = msgspec.json.Decoder(list[float | None])
_LABELS = msgspec.json.Decoder(list[str | None])
_NAMES = msgspec.json.Decoder(Annotated[list[Name], Meta(min_length=1)])

_EMPTY_BODY = 'the body is empty; send a JSON document {"input": {...}, "options": {...}}'


def _parse(decoder: msgspec.json.Decoder, body: Buffer, prefix: str):  # type: ignore[no-untyped-def]
    try:
        return decoder.decode(body)
    except msgspec.ValidationError as exc:
        pointer, reason = msgspec_fault(exc, prefix)
        raise InvalidRequest(reason, [Fault(pointer, reason)]) from None
    except msgspec.DecodeError as exc:
        reason = f"the body is not valid JSON: {exc}"
        raise MalformedBody(reason, [Fault(prefix, reason)]) from None


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
        raise MalformedBody(_EMPTY_BODY, [Fault(base, _EMPTY_BODY)])
    request: AssessRequest = _parse(_REQUEST, body, base)
    inp = request.input
    at = base + "/input"
    data: TableData | CorrelationData | MomentsData
    if isinstance(inp, TableInput):
        data = _table(inp, limits, at)
    elif isinstance(inp, CorrelationInput):
        data = _correlation(inp, limits, at)
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
        raise MalformedBody(reason, [Fault("", reason)])
    batch: _RawBatch = _parse(_BATCH, body, "")
    if len(batch.items) > limits.max_batch_items:
        reason = (
            f"{len(batch.items)} items is more than the limit of {limits.max_batch_items}; "
            "split the batch"
        )
        raise TooLarge("too-many-items", reason, [Fault("/items", reason)])
    return batch.items


def _too_many_columns(count: int, limits: Limits, pointer: str) -> None:
    if count > limits.max_columns:
        reason = (
            f"{count} columns is more than the limit of {limits.max_columns}; send fewer variables"
        )
        raise TooLarge("too-many-columns", reason, [Fault(pointer, reason)])


def _too_many_cells(cells: int, limits: Limits, pointer: str) -> None:
    if cells > limits.max_cells:
        reason = (
            f"more than the limit of {limits.max_cells} numbers in the input; send a sample "
            "of the rows, or a summary (correlation or moments) computed on your side"
        )
        raise TooLarge("too-many-cells", reason, [Fault(pointer, reason)])


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
        columns=columns, categorical=categorical, response=inp.response, weights=inp.weights
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
            raise InvalidRequest(reason, [Fault(f"{at}/{given[0]}", reason)])
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
        raise InvalidRequest(reason, [Fault(f"{at}/{missing[0]}", reason)])
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
