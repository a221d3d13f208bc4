"""Every error as ``application/problem+json`` (RFC 9457), mapped in this one place.

A problem document has ``type`` (a stable URI per kind of error: :data:`PROBLEM_BASE` plus
a slug), ``title`` (fixed per type), ``status``, ``detail`` (this occurrence, in one
sentence), ``errors`` (``{pointer, reason}`` entries, JSON pointers per RFC 6901 into the
request, or ``/query/<parameter>``) and ``request_id`` (also in the ``X-Request-ID`` header).

Sources, all handled by :func:`problem_of`:

- codec errors (:class:`knotwork.codecs.CodecError`): 400, 413, 415, 422 (the core's errors
  reach this layer as codec errors, their pointers already translated);
- :class:`ApiError`, raised by this package: 401, 403, 413, 503 (saturated, time limit);
- litestar's HTTP exceptions (routing: 404, 405; body limit: 413) with their headers kept;
- anything else: 500, logged with its traceback (never its message, which could hold data).
"""

from __future__ import annotations

import logging
import traceback
from collections.abc import Mapping
from typing import Any

import msgspec
from litestar import Request, Response
from litestar.exceptions import HTTPException

from knotwork.codecs import CodecError
from knotwork_contract import Problem, ProblemDocument

from ._context import current_request_id

__all__ = [
    "PROBLEM_BASE",
    "PROBLEM_MEDIA_TYPE",
    "TITLES",
    "ApiError",
    "handle_exception",
    "problem_bytes",
    "problem_of",
]

#: Base of every problem ``type`` URI; the slug of the kind of error follows it.
PROBLEM_BASE = "https://knotwork.example/problems/"
PROBLEM_MEDIA_TYPE = "application/problem+json"

_log = logging.getLogger("knotwork.errors")

#: The title of each problem type, by slug (stable: clients may show or match them).
TITLES: Mapping[str, str] = {
    "malformed-body": "The body could not be parsed",
    "invalid-request": "The request does not fit the schema",
    "invalid-input": "The input cannot be used as given",
    "missing-values": "The input has missing values",
    "invalid-matrix": "A matrix is not a valid correlation or covariance matrix",
    "too-few-data": "Too few observations or predictors",
    "fit-failed": "The model cannot be fitted to the data",
    "invalid-option": "An option is out of range or does not fit the input",
    "unauthorized": "A bearer token is required",
    "forbidden": "The bearer token is not accepted",
    "not-found": "No such resource",
    "method-not-allowed": "Method not allowed on this resource",
    "body-too-large": "The body is larger than allowed",
    "body-timeout": "The body did not arrive in time",
    "head-timeout": "The request head did not arrive in time",
    "malformed-head": "The request line or headers could not be read",
    "too-many-cells": "The input has more numbers than allowed",
    "too-many-columns": "The input has more columns than allowed",
    "too-many-items": "The batch has more items than allowed",
    "unsupported-media-type": "The content type is not supported here",
    "saturated": "The service is busy",
    "time-limit": "The request took longer than the time limit",
    "internal-error": "Internal error",
    "http-error": "HTTP error",
}

_STATUS_SLUGS = {
    400: "invalid-request",
    401: "unauthorized",
    403: "forbidden",
    404: "not-found",
    405: "method-not-allowed",
    413: "body-too-large",
    415: "unsupported-media-type",
    503: "saturated",
}
# Headers of a framework exception that a client needs, kept on the problem response.
_KEPT_HEADERS = ("allow", "connection", "retry-after", "www-authenticate")


class ApiError(Exception):
    """An error this package raises, with its status, slug, detail, faults and headers."""

    def __init__(
        self,
        status: int,
        kind: str,
        detail: str,
        errors: list[Problem] | None = None,
        headers: Mapping[str, str] | None = None,
    ) -> None:
        super().__init__(detail)
        self.status = status
        self.kind = kind
        self.detail = detail
        self.errors = errors or []
        self.headers = dict(headers or {})


def _document(status: int, kind: str, detail: str, errors: list[Problem]) -> ProblemDocument:
    return ProblemDocument(
        type=PROBLEM_BASE + kind,
        title=TITLES.get(kind, TITLES["http-error"]),
        status=status,
        detail=detail,
        errors=errors,
        request_id=current_request_id(),
    )


def problem_bytes(status: int, kind: str, detail: str, request_id: str) -> bytes:
    """A problem document as JSON bytes, for answers written below the application (the
    server layer's answers to request heads it cannot use), with the id it sends as
    ``X-Request-ID``."""
    document = msgspec.structs.replace(_document(status, kind, detail, []), request_id=request_id)
    return msgspec.json.encode(document)


def problem_of(exc: BaseException) -> tuple[ProblemDocument, dict[str, str]]:
    """The problem document and response headers for an exception raised answering a request."""
    if isinstance(exc, ApiError):
        return _document(exc.status, exc.kind, exc.detail, exc.errors), exc.headers
    if isinstance(exc, CodecError):
        return _document(exc.status, exc.kind, exc.message, list(exc.problems)), {}
    if isinstance(exc, HTTPException):
        status = exc.status_code
        if status >= 500:
            _log_unexpected(exc)
        kind = _STATUS_SLUGS.get(status, "http-error")
        detail = exc.detail if status < 500 else TITLES["internal-error"]
        headers = {
            key: value for key, value in (exc.headers or {}).items() if key.lower() in _KEPT_HEADERS
        }
        return _document(status, kind, str(detail), []), headers
    _log_unexpected(exc)
    detail = "an unexpected error occurred; the request id identifies it in the service's logs"
    return _document(500, "internal-error", detail, []), {}


def _log_unexpected(exc: BaseException) -> None:
    # The traceback's frames locate the fault; the message is left out because it may quote
    # the client's data.
    frames = traceback.extract_tb(exc.__traceback__)
    where = [f"{frame.filename}:{frame.lineno} in {frame.name}" for frame in frames[-8:]]
    _log.error(
        "unexpected error",
        extra={"fields": {"error_type": type(exc).__qualname__, "frames": where}},
    )


def handle_exception(request: Request[Any, Any, Any], exc: Exception) -> Response[bytes]:
    """The application's one exception handler: every error leaves as problem+json."""
    document, headers = problem_of(exc)
    return Response(
        content=msgspec.json.encode(document),
        status_code=document.status,
        media_type=PROBLEM_MEDIA_TYPE,
        headers=headers,
    )
