"""Python client for the knotwork collinearity-diagnostics service.

Send rows or, from a secure zone, only their summary::

    from knotwork_client import Client, summarize

    summary = summarize("sales.parquet", response="takings")   # read in bounded batches
    with Client("http://127.0.0.1:8000", token=token) as client:
        result = client.assess(summary, threshold=10)
    result.to_frame()["vif"]

Thresholds such as VIF 5 or 10 are rules of thumb (common practice); decisions on regulated
models follow local rules and qualified review.
"""

from ._client import AsyncClient, Client
from ._config import DEFAULT_TIMEOUT, Retry
from ._dask import summarize_dask
from ._exceptions import (
    AuthenticationError,
    DataError,
    InputRejectedError,
    KnotworkClientError,
    MissingValuesError,
    ResponseFormatError,
    ServerError,
    ServiceBusyError,
    ServiceError,
    TransportError,
)
from ._glm_dask import GlmSummaries, summarize_glm_dask
from ._inputs import Correlation, Estimates, Moments, estimates, from_fitted
from ._results import (
    Assessment,
    Component,
    Conditioning,
    Dependency,
    FarrarGlauber,
    FieldError,
    ModelFit,
    ProblemDetails,
    Removal,
    RemovalStep,
    ResultWarning,
    Ridge,
    RidgeChoice,
    RidgePoint,
    Tangle,
    Term,
    Tests,
    Uncertainty,
    UncertaintyOptions,
    Variable,
)
from ._summary import Summary, merge_summaries, summarize
from ._version import VERSION as __version__

__all__ = [
    "DEFAULT_TIMEOUT",
    "Assessment",
    "AsyncClient",
    "AuthenticationError",
    "Client",
    "Component",
    "Conditioning",
    "Correlation",
    "DataError",
    "Dependency",
    "Estimates",
    "FarrarGlauber",
    "FieldError",
    "GlmSummaries",
    "InputRejectedError",
    "KnotworkClientError",
    "MissingValuesError",
    "ModelFit",
    "Moments",
    "ProblemDetails",
    "Removal",
    "RemovalStep",
    "ResponseFormatError",
    "ResultWarning",
    "Retry",
    "Ridge",
    "RidgeChoice",
    "RidgePoint",
    "ServerError",
    "ServiceBusyError",
    "ServiceError",
    "Summary",
    "Tangle",
    "Term",
    "Tests",
    "TransportError",
    "Uncertainty",
    "UncertaintyOptions",
    "Variable",
    "__version__",
    "estimates",
    "from_fitted",
    "merge_summaries",
    "summarize",
    "summarize_dask",
    "summarize_glm_dask",
]
