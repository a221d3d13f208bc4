"""Query parameters -> options, for bodies that carry only a table (Arrow IPC, Parquet).

Parameters: ``threshold``, ``protect`` (comma-separated or repeated), ``intercept``,
``missing``, ``repair``, ``sections`` (comma-separated or repeated), ``response``, ``weights``,
``ridge_grid`` (comma-separated k), ``components_rule`` and ``components_limit``. They are
checked against the same :class:`AssessOptions` Struct as a JSON body, so both encodings obey
one set of rules; faults point at ``/query/<parameter>``.
"""

from __future__ import annotations

import math
from typing import Any
from urllib.parse import parse_qsl

import msgspec

from knotwork_contract import join, msgspec_fault

from ._errors import Fault, InvalidRequest
from ._prepared import Origin
from ._wire import AssessOptions

__all__ = ["QUERY_PARAMETERS", "options_from_query"]

_SCALARS = (
    "threshold",
    "intercept",
    "missing",
    "repair",
    "response",
    "weights",
    "components_rule",
    "components_limit",
)
_LISTS = ("protect", "sections", "ridge_grid")
#: Every query parameter a table body accepts.
QUERY_PARAMETERS = (*_SCALARS, *_LISTS)
_NUMBERS = ("threshold", "components_limit")
_BOOLEANS = {"true": True, "1": True, "false": False, "0": False}


def _fail(parameter: str, reason: str) -> InvalidRequest:
    pointer = join("query", parameter)
    return InvalidRequest(f"query parameter {parameter}: {reason}", [Fault(pointer, reason)])


def _number(parameter: str, text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise _fail(parameter, "must be a number") from None
    if not math.isfinite(value):
        raise _fail(parameter, "must be a finite number")
    return value


def options_from_query(query: str | bytes) -> tuple[AssessOptions, str | None, str | None]:
    """Parse a query string into options and the ``response`` and ``weights`` column names.

    Raises
    ------
    InvalidRequest
        An unknown, repeated, malformed or out-of-range parameter, pointing at
        ``/query/<parameter>``.
    """
    if isinstance(query, bytes):
        query = query.decode("latin-1")
    try:
        pairs = parse_qsl(query, keep_blank_values=True, max_num_fields=1000)
    except ValueError:
        raise InvalidRequest.at("/query", "too many query parameters") from None
    scalars: dict[str, str] = {}
    lists: dict[str, list[str]] = {}
    for key, value in pairs:
        if key in _SCALARS:
            if key in scalars:
                raise _fail(key, "given more than once; give it once")
            scalars[key] = value.strip()
        elif key in _LISTS:
            lists.setdefault(key, []).extend(v.strip() for v in value.split(",") if v.strip())
        else:
            known = ", ".join(QUERY_PARAMETERS)
            raise _fail(key or "(empty)", f"unknown query parameter; known ones are: {known}")

    document: dict[str, Any] = {}
    for key in ("threshold",):
        if key in scalars:
            document[key] = _number(key, scalars[key])
    if "intercept" in scalars:
        flag = _BOOLEANS.get(scalars["intercept"].lower())
        if flag is None:
            raise _fail("intercept", "must be true or false")
        document["intercept"] = flag
    for key in ("missing", "repair"):
        if key in scalars:
            document[key] = scalars[key]
    if "protect" in lists:
        document["protect"] = lists["protect"]
    if "sections" in lists:
        document["sections"] = lists["sections"]
    if "ridge_grid" in lists:
        document["ridge"] = {"grid": [_number("ridge_grid", v) for v in lists["ridge_grid"]]}
    components: dict[str, Any] = {}
    if "components_rule" in scalars:
        components["rule"] = scalars["components_rule"]
    if "components_limit" in scalars:
        components["limit"] = _number("components_limit", scalars["components_limit"])
    if components:
        document["components"] = components

    try:
        options = msgspec.convert(document, AssessOptions)
    except msgspec.ValidationError as exc:
        pointer, reason = msgspec_fault(exc)
        where = Origin(query=True).locate("options", pointer)
        parameter = where.removeprefix("/query/")
        raise InvalidRequest(
            f"query parameter {parameter}: {reason}", [Fault(where, reason)]
        ) from None

    names: dict[str, str | None] = {}
    for key in ("response", "weights"):
        column = scalars.get(key)
        if column is not None and not column:
            raise _fail(key, "must name a column")
        names[key] = column
    return options, names["response"], names["weights"]
