"""Build request bodies: options, input documents, and the JSON or Arrow IPC encoding of tables.

Nothing here touches the network; the clients call these functions and send what they return.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import msgspec
import numpy as np

from knotwork_contract import AssessOptions, check_options, options_query

from ._exceptions import DataError
from ._inputs import Correlation, Estimates, Moments, from_fitted, is_fitted
from ._summary import Summary
from ._tables import Block, iter_blocks

__all__ = [
    "ARROW_STREAM",
    "OPTION_NAMES",
    "Payload",
    "batch_body",
    "encode_assess",
    "input_document",
    "normalize_options",
]

ARROW_STREAM = "application/vnd.apache.arrow.stream"
JSON = "application/json"

#: The service's options, as the contract declares them.
OPTION_NAMES = tuple(f.name for f in msgspec.structs.fields(AssessOptions))

_encoder = msgspec.json.Encoder()


@dataclass(frozen=True, slots=True)
class Payload:
    """One request body, ready to send.

    Attributes
    ----------
    content
        The body bytes.
    content_type
        Its media type.
    params
        Query parameters (the options, for an Arrow body), or None.
    kind
        What was sent: ``table`` (JSON rows), ``arrow`` (Arrow IPC rows), ``moments`` or
        ``correlation`` (summaries).
    """

    content: bytes
    content_type: str
    params: dict[str, str] | None
    kind: str


def _names(value: Any, option: str) -> list[str]:
    if isinstance(value, str):
        return [value]
    try:
        return [str(v) for v in value]
    except TypeError:
        raise ValueError(f"option {option} must be a list of names, got {value!r}") from None


def _plain(value: Any) -> Any:
    """numpy scalars (and lists and mappings of them, and option Structs such as
    :class:`~knotwork_contract.UncertaintyOptions`) as the Python values the contract checks."""
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, msgspec.Struct):
        return _plain(msgspec.structs.asdict(value))
    if isinstance(value, Mapping):
        return {k: _plain(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_plain(v) for v in value]
    return value


def normalize_options(options: Mapping[str, Any]) -> dict[str, Any]:
    """Check options locally, by the contract's rules, and return the wire ``options`` document.

    ``None`` values are dropped (the service's default applies). ``ridge`` is ``{"grid":
    [k, ...]}`` (a bare list is taken as the grid); ``components`` is ``{"rule": ...,
    "limit": ...}`` (a bare string is taken as the rule); ``uncertainty`` is ``{"method": ...,
    "level": ..., "replicates": ..., "seed": ...}``, an :class:`UncertaintyOptions`, or a bare
    method name; a single name may stand for a list.

    Raises
    ------
    ValueError
        An unknown option, or a value the service would refuse (:class:`OptionsError`, with
        the service's own wording and the pointer it would answer with).
    """
    unknown = sorted(set(options) - set(OPTION_NAMES))
    if unknown:
        raise ValueError(f"unknown options {unknown}; the service takes {list(OPTION_NAMES)}")
    out: dict[str, Any] = {}
    for key, value in options.items():
        if value is None:
            continue
        if key in ("protect", "sections"):
            out[key] = _names(value, key)
        elif key == "ridge":
            out[key] = _plain(dict(value) if isinstance(value, Mapping) else {"grid": value})
        elif key == "components":
            out[key] = _plain(dict(value) if isinstance(value, Mapping) else {"rule": value})
        elif key == "uncertainty":
            # A bare method name stands for {"method": ...} with the other settings' defaults.
            out[key] = _plain({"method": value} if isinstance(value, str) else value)
        else:
            out[key] = _plain(value)
    checked = check_options(out)
    # What was given, in the contract's types (an integer threshold becomes a float, ...).
    return {key: msgspec.to_builtins(getattr(checked, key)) for key in out}


# --- tables --------------------------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Table:
    """A whole table gathered from blocks: float64 numeric columns and coded categoricals."""

    numeric: dict[str, np.ndarray]
    categorical: dict[str, tuple[np.ndarray, list[str]]]
    rows: int

    @property
    def cells(self) -> int:
        return self.rows * (len(self.numeric) + len(self.categorical))


def _gather(blocks: Sequence[Block]) -> _Table:
    if not blocks:
        raise DataError("the input holds no table")
    first = blocks[0]
    for b in blocks[1:]:
        if list(b.numeric) != list(first.numeric) or list(b.categorical) != list(first.categorical):
            raise DataError("the chunks of the table do not all have the same columns")
    numeric = {k: np.concatenate([b.numeric[k] for b in blocks]) for k in first.numeric}
    categorical: dict[str, tuple[np.ndarray, list[str]]] = {}
    for k in first.categorical:
        levels: list[str] = []
        index: dict[str, int] = {}
        parts = []
        for b in blocks:
            codes, lv = b.categorical[k]
            remap = np.array([index.setdefault(v, len(index)) for v in lv] + [-1], dtype=np.int64)
            parts.append(remap[codes])  # code -1 picks the trailing -1
        levels = list(index)
        categorical[k] = (np.concatenate(parts), levels)
    rows = sum(b.rows for b in blocks)
    for name, values in numeric.items():
        if np.isinf(values).any():
            raise DataError(
                f"column {name!r} has infinite values; JSON and the service take finite numbers "
                "only (missing values are fine)",
                [(f"/columns/{name}", "infinite values")],
            )
    return _Table(numeric, categorical, rows)


def _check_roles(table: _Table, roles: Mapping[str, str | None]) -> None:
    """Each column a role names (response, weights, offset, trials) is a numeric column."""
    for role, column in roles.items():
        if column is not None and column not in table.numeric:
            raise DataError(
                f"the {role} column {column!r} is not a numeric column of the table",
                [(column, "no such numeric column")],
            )


def _table_document(table: _Table, roles: Mapping[str, str | None]) -> dict[str, Any]:
    doc: dict[str, Any] = {"kind": "table", "columns": {}}
    for name, values in table.numeric.items():
        # msgspec writes NaN as null, which is how the service reads a missing value.
        doc["columns"][name] = values.tolist()
    if table.categorical:
        doc["categorical"] = {
            name: [levels[c] if c >= 0 else None for c in codes.tolist()]
            for name, (codes, levels) in table.categorical.items()
        }
    _check_roles(table, roles)
    doc.update({role: column for role, column in roles.items() if column is not None})
    return doc


def _arrow_stream(table: _Table) -> bytes:
    import pyarrow as pa

    arrays, names = [], []
    for name, values in table.numeric.items():
        missing = np.isnan(values)
        arrays.append(pa.array(values, mask=missing if missing.any() else None))
        names.append(name)
    for name, (codes, levels) in table.categorical.items():
        indices = pa.array(codes.astype(np.int32), mask=codes < 0)
        arrays.append(pa.DictionaryArray.from_arrays(indices, pa.array(levels, pa.string())))
        names.append(name)
    batch = pa.RecordBatch.from_arrays(arrays, names=names)
    sink = pa.BufferOutputStream()
    with pa.ipc.new_stream(sink, batch.schema) as writer:
        writer.write_batch(batch)
    stream: bytes = sink.getvalue().to_pybytes()
    return stream


def _has_pyarrow() -> bool:
    try:
        import pyarrow  # noqa: F401
    except ImportError:
        return False
    return True


# --- inputs --------------------------------------------------------------------------------


def _summary_like(data: Any) -> dict[str, Any] | None:
    if isinstance(data, (Summary, Correlation, Moments, Estimates)):
        return data.to_input()
    if isinstance(data, Mapping) and data.get("kind") in (
        "table",
        "correlation",
        "moments",
        "estimates",
    ):
        return dict(data)
    if is_fitted(data):
        return from_fitted(data).to_input()
    return None


def _no_table_arguments(data: Any, shaping: Mapping[str, Any]) -> None:
    given = sorted(k for k, v in shaping.items() if v)
    if given:
        raise ValueError(
            f"{given} apply to tables only; a {type(data).__name__} already fixed them "
            "(pass them to summarize() instead)"
        )


def input_document(
    data: Any,
    *,
    response: str | None = None,
    weights: str | None = None,
    categorical: Sequence[str] | None = None,
    names: Sequence[str] | None = None,
    columns: Sequence[str] | None = None,
    offset: str | None = None,
    trials: str | None = None,
) -> dict[str, Any]:
    """The JSON ``input`` document for ``data`` (rows as a ``table``, or a summary)."""
    roles = {"response": response, "weights": weights, "offset": offset, "trials": trials}
    shaping = {**roles, "categorical": categorical, "names": names, "columns": columns}
    doc = _summary_like(data)
    if doc is not None:
        _no_table_arguments(data, shaping)
        return doc
    return _table_document(_read_table(data, categorical, columns, names), roles)


def _read_table(
    data: Any,
    categorical: Sequence[str] | None,
    columns: Sequence[str] | None,
    names: Sequence[str] | None,
) -> _Table:
    blocks = list(
        iter_blocks(
            data,
            categorical=[categorical] if isinstance(categorical, str) else (categorical or ()),
            columns=columns,
            names=names,
        )
    )
    return _gather(blocks)


def encode_assess(
    data: Any,
    options: Mapping[str, Any],
    *,
    response: str | None = None,
    weights: str | None = None,
    categorical: Sequence[str] | None = None,
    names: Sequence[str] | None = None,
    columns: Sequence[str] | None = None,
    offset: str | None = None,
    trials: str | None = None,
    encoding: str = "auto",
    arrow_cells: int,
) -> Payload:
    """The body of ``POST /v1/assess`` for ``data`` and ``options``.

    ``encoding`` is ``auto`` (Arrow IPC for tables of at least ``arrow_cells`` cells when
    pyarrow is installed, JSON otherwise), ``json`` or ``arrow``. Summaries always go as JSON.
    """
    if encoding not in ("auto", "json", "arrow"):
        raise ValueError(f"encoding must be 'auto', 'json' or 'arrow', got {encoding!r}")
    opts = normalize_options(options)
    roles = {"response": response, "weights": weights, "offset": offset, "trials": trials}
    summary_doc = _summary_like(data)
    if summary_doc is not None:
        _no_table_arguments(
            data, {**roles, "categorical": categorical, "names": names, "columns": columns}
        )
        body = _encoder.encode({"input": summary_doc, "options": opts})
        return Payload(body, JSON, None, summary_doc["kind"])
    table = _read_table(data, categorical, columns, names)
    use_arrow = encoding == "arrow" or (
        encoding == "auto" and table.cells >= arrow_cells and _has_pyarrow()
    )
    if use_arrow:
        _check_roles(table, roles)
        query = options_query(opts, roles)
        return Payload(_arrow_stream(table), ARROW_STREAM, query, "arrow")
    doc = _table_document(table, roles)
    return Payload(_encoder.encode({"input": doc, "options": opts}), JSON, None, "table")


def batch_body(items: Sequence[tuple[dict[str, Any], dict[str, Any]]]) -> bytes:
    """The body of ``POST /v1/assess/batch`` from (input document, options) pairs."""
    return _encoder.encode({"items": [{"input": i, "options": o} for i, o in items]})
