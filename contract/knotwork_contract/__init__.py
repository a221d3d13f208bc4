"""The knotwork wire contract, shared by the service and its clients.

Everything a request may contain is declared here once, as msgspec Structs whose constraints,
defaults and descriptions are the rules; the service's decoders, its query-parameter parser and
OpenAPI document, and the client's local checks are derived from these declarations.
"""

from ._pointers import escape, join, msgspec_fault
from ._problems import Problem, ProblemDocument
from ._query import QUERY_PARAMETERS, QueryError, QueryParameter, options_query, parse_query
from ._requests import (
    SECTIONS,
    AssessOptions,
    AssessRequest,
    BatchRequest,
    ComponentsOptions,
    CorrelationInput,
    CorrelationResponse,
    Input,
    MomentsInput,
    MomentsPart,
    Name,
    OptionsError,
    RidgeOptions,
    TableInput,
    check_options,
)

__all__ = [
    "QUERY_PARAMETERS",
    "SECTIONS",
    "AssessOptions",
    "AssessRequest",
    "BatchRequest",
    "ComponentsOptions",
    "CorrelationInput",
    "CorrelationResponse",
    "Input",
    "MomentsInput",
    "MomentsPart",
    "Name",
    "OptionsError",
    "Problem",
    "ProblemDocument",
    "QueryError",
    "QueryParameter",
    "RidgeOptions",
    "TableInput",
    "check_options",
    "escape",
    "join",
    "msgspec_fault",
    "options_query",
    "parse_query",
]
