"""Bytes -> typed input: JSON via msgspec, Arrow IPC and Parquet via pyarrow.

The codecs know nothing of HTTP. Each turns a body (and, for binary tables, the query string)
into a :class:`Prepared` request or raises a :class:`CodecError` that points at the fault;
:func:`run` hands a prepared request to the core.
"""

from ._arrow import ARROW_FILE, ARROW_STREAM, PARQUET, decode_table_body, read_table, table_data
from ._errors import (
    CodecError,
    InvalidRequest,
    MalformedBody,
    TooLarge,
    UnsupportedMediaType,
    UnusableInput,
)
from ._json import decode_assess, decode_batch
from ._prepared import (
    CorrelationData,
    EstimatesData,
    Limits,
    MomentsData,
    Origin,
    Prepared,
    TableData,
)
from ._query import options_from_query, query_options

__all__ = [
    "ARROW_FILE",
    "ARROW_STREAM",
    "PARQUET",
    "CodecError",
    "CorrelationData",
    "EstimatesData",
    "InvalidRequest",
    "Limits",
    "MalformedBody",
    "MomentsData",
    "Origin",
    "Prepared",
    "TableData",
    "TooLarge",
    "UnsupportedMediaType",
    "UnusableInput",
    "decode_assess",
    "decode_batch",
    "decode_table_body",
    "options_from_query",
    "query_options",
    "read_table",
    "run",
    "table_data",
]


def __getattr__(name: str):  # type: ignore[no-untyped-def]
    # The core is imported on first use of ``run`` only, so decoding works (and is tested)
    # without loading the numerical stack.
    if name == "run":
        from ._convert import run

        return run
    raise AttributeError(name)
