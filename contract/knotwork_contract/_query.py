"""Options as query parameters, derived from the option Structs (for bodies that carry a table).

An Arrow IPC or Parquet body has no room for options, so they travel in the query string. The
parameters are not listed by hand: each option field of :class:`AssessOptions` is one parameter
(a nested settings Struct contributes ``<option>_<field>``, e.g. ``ridge_grid``), and each
optional column-name field of :class:`TableInput` (``response``, ``weights``, ...) is one too.
The service parses with :func:`parse_query`, the client writes with :func:`options_query`, and
the OpenAPI document lists :data:`QUERY_PARAMETERS` with the option's own JSON schema.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from dataclasses import dataclass
from typing import Any

import msgspec
import msgspec.inspect as mi

from ._requests import AssessOptions, TableInput

__all__ = ["QUERY_PARAMETERS", "QueryError", "QueryParameter", "options_query", "parse_query"]

_BOOLEANS = {"true": True, "1": True, "false": False, "0": False}


@dataclass(frozen=True, slots=True)
class QueryParameter:
    """One query parameter and the option or input field it carries.

    Attributes
    ----------
    name
        The parameter's name, e.g. ``threshold`` or ``ridge_grid``.
    path
        Where its value goes: option field names (``("ridge", "grid")``), or ``("input",
        "<field>")`` for a column name of the table.
    kind
        ``number``, ``integer`` (a whole number, written without a decimal point),
        ``boolean``, ``string``, or ``list`` (comma-separated or repeated).
    item
        For a list, the kind of its items (``number`` or ``string``); None otherwise.
    schema
        The field's JSON schema, from the same Struct.
    """

    name: str
    path: tuple[str, ...]
    kind: str
    item: str | None
    schema: dict[str, Any]


class QueryError(ValueError):
    """A query parameter that cannot be read: which one, and why."""

    def __init__(self, parameter: str, reason: str) -> None:
        super().__init__(f"query parameter {parameter}: {reason}")
        self.parameter = parameter
        self.reason = reason


def _strip(t: Any) -> Any:
    """The type under ``Metadata`` and ``| None``."""
    while True:
        if isinstance(t, mi.Metadata):
            t = t.type
        elif isinstance(t, mi.UnionType):
            rest = [u for u in t.types if not isinstance(u, mi.NoneType)]
            if len(rest) != 1:
                raise TypeError(f"no query form for {t!r}")
            t = rest[0]
        else:
            return t


def _kind(t: Any) -> str:
    t = _strip(t)
    if isinstance(t, mi.FloatType):
        return "number"
    if isinstance(t, mi.IntType):
        return "integer"
    if isinstance(t, mi.BoolType):
        return "boolean"
    if isinstance(t, mi.StrType | mi.LiteralType):
        return "string"
    if isinstance(t, mi.ListType):
        return "list"
    raise TypeError(f"no query form for {t!r}")


def _resolve(schema: dict[str, Any], components: dict[str, Any]) -> dict[str, Any]:
    ref = schema.get("$ref")
    if ref is not None:
        return dict(components[ref.rsplit("/", 1)[1]])
    for key in ("anyOf",):
        options = [s for s in schema.get(key, []) if s.get("type") != "null"]
        if len(options) == 1:
            inner = _resolve(options[0], components)
            return {**inner, **{k: v for k, v in schema.items() if k != key}}
    return schema


def _derive() -> tuple[QueryParameter, ...]:
    _, components = msgspec.json.schema_components([AssessOptions, TableInput])
    params: list[QueryParameter] = []
    for f in mi.type_info(AssessOptions).fields:  # type: ignore[attr-defined]
        schema = _resolve(components["AssessOptions"]["properties"][f.encode_name], components)
        inner = _strip(f.type)
        if isinstance(inner, mi.StructType):
            nested = components[inner.cls.__name__]["properties"]
            for g in inner.fields:
                params.append(_parameter(f"{f.name}_{g.name}", (f.name, g.name), g.type,
                                         _resolve(nested[g.encode_name], components)))  # fmt: skip
        else:
            params.append(_parameter(f.name, (f.name,), f.type, schema))
    table = components["TableInput"]["properties"]
    for f in mi.type_info(TableInput).fields:  # type: ignore[attr-defined]
        if not f.required and isinstance(_strip(f.type), mi.StrType):
            schema = _resolve(table[f.encode_name], components)
            params.append(_parameter(f.name, ("input", f.name), f.type, schema))
    return tuple(params)


def _parameter(name: str, path: tuple[str, ...], t: Any, schema: dict[str, Any]) -> QueryParameter:
    kind = _kind(t)
    item = _kind(_strip(t).item_type) if kind == "list" else None
    return QueryParameter(name, path, kind, item, schema)


#: Every query parameter a table body accepts, in the order of the Structs' fields.
QUERY_PARAMETERS: tuple[QueryParameter, ...] = _derive()
_BY_NAME = {p.name: p for p in QUERY_PARAMETERS}


def _number(parameter: str, text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise QueryError(parameter, "must be a number") from None
    if not math.isfinite(value):
        raise QueryError(parameter, "must be a finite number")
    return value


def _integer(parameter: str, text: str) -> int:
    # Digits only (an optional sign): "1e3" or "500.0" would be a float in a JSON body too.
    if not text.lstrip("+-").isdigit() or not text.isascii() or len(text) > 40:
        raise QueryError(parameter, "must be a whole number")
    return int(text)


def _value(p: QueryParameter, kind: str, text: str) -> Any:
    if kind == "number":
        return _number(p.name, text)
    if kind == "integer":
        return _integer(p.name, text)
    if kind == "boolean":
        flag = _BOOLEANS.get(text.lower())
        if flag is None:
            raise QueryError(p.name, "must be true or false")
        return flag
    if p.path[0] == "input" and not text:
        raise QueryError(p.name, "must name a column")
    return text


def parse_query(pairs: Iterable[tuple[str, str]]) -> tuple[dict[str, Any], dict[str, str]]:
    """Query pairs -> (an options document for :class:`AssessOptions`, the table's column names).

    Lists may be comma-separated or repeated; every other parameter is given at most once.
    The document is not yet checked against the Struct (the caller converts it, so a value out
    of range is reported like the same value in a JSON body).

    Raises
    ------
    QueryError
        An unknown or repeated parameter, or a value that is not of the parameter's kind.
    """
    seen: dict[str, list[str]] = {}
    for key, text in pairs:
        p = _BY_NAME.get(key)
        if p is None:
            known = ", ".join(q.name for q in QUERY_PARAMETERS)
            raise QueryError(key or "(empty)", f"unknown query parameter; known ones are: {known}")
        if p.kind == "list":
            seen.setdefault(key, []).extend(v.strip() for v in text.split(",") if v.strip())
        elif key in seen:
            raise QueryError(key, "given more than once; give it once")
        else:
            seen[key] = [text.strip()]
    document: dict[str, Any] = {}
    columns: dict[str, str] = {}
    for key, values in seen.items():
        p = _BY_NAME[key]
        if p.kind == "list":
            value: Any = [_value(p, p.item or "string", v) for v in values]
        else:
            value = _value(p, p.kind, values[0])
        if p.path[0] == "input":
            columns[p.path[1]] = value
        elif len(p.path) == 1:
            document[p.path[0]] = value
        else:
            document.setdefault(p.path[0], {})[p.path[1]] = value
    return document, columns


def _text(kind: str, value: Any) -> str:
    if kind == "boolean":
        return "true" if value else "false"
    if kind == "number":
        return repr(float(value))
    if kind == "integer":
        return str(int(value))
    return str(value)


def options_query(
    options: Mapping[str, Any], columns: Mapping[str, str | None] | None = None
) -> dict[str, str]:
    """An options document (and column names such as ``response``) as query parameters."""
    query: dict[str, str] = {}
    for p in QUERY_PARAMETERS:
        if p.path[0] == "input":
            value = (columns or {}).get(p.path[1])
        else:
            value = options.get(p.path[0])
            if len(p.path) == 2:
                value = None if value is None else value.get(p.path[1])
        if value is None:
            continue
        if p.kind == "list":
            query[p.name] = ",".join(_text(p.item or "string", v) for v in value)
        else:
            query[p.name] = _text(p.kind, value)
    return query
