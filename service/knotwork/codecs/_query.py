"""Query parameters -> options, for bodies that carry only a table (Arrow IPC, Parquet).

The parameters and their kinds come from the contract (:data:`knotwork_contract.QUERY_PARAMETERS`,
derived from the option Structs); the values are checked against the same
:class:`AssessOptions` Struct as a JSON body, so both encodings obey one set of rules. Faults
point at ``/query/<parameter>``.
"""

from __future__ import annotations

from urllib.parse import parse_qsl

import msgspec

from knotwork_contract import (
    AssessOptions,
    Problem,
    QueryError,
    join,
    msgspec_fault,
    parse_query,
)

from ._errors import InvalidRequest, schema_fault
from ._prepared import Origin

__all__ = ["options_from_query", "query_options"]


def _fail(parameter: str, reason: str) -> InvalidRequest:
    pointer = join("query", parameter)
    return InvalidRequest(f"query parameter {parameter}: {reason}", [Problem(pointer, reason)])


def options_from_query(query: str | bytes) -> tuple[AssessOptions, str | None, str | None]:
    """Parse a query string into options and the ``response`` and ``weights`` column names.

    Raises
    ------
    InvalidRequest
        As :func:`query_options`.
    """
    options, columns = query_options(query)
    return options, columns.get("response"), columns.get("weights")


def query_options(query: str | bytes) -> tuple[AssessOptions, dict[str, str]]:
    """Parse a query string into options and the table's column names by field (``response``,
    ``weights``, ``offset``, ``trials``: every column-name field of the table input).

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
    try:
        document, columns = parse_query(pairs)
    except QueryError as exc:
        raise _fail(exc.parameter, exc.reason) from None
    try:
        options = msgspec.convert(document, AssessOptions)
    except msgspec.ValidationError as exc:
        pointer, _ = msgspec_fault(exc)
        where = Origin(query=True).locate("options", pointer)
        parameter = where.removeprefix("/query/")
        raise schema_fault(exc, where=where, label=f"query parameter {parameter}: ") from None
    return options, columns
