"""Per-request context: the request id and the timings the access log reports."""

from __future__ import annotations

from contextvars import ContextVar
from dataclasses import dataclass, field

__all__ = ["RequestInfo", "current_request", "current_request_id"]


@dataclass(slots=True)
class RequestInfo:
    """What the access log line needs to know about a request beyond its ASGI messages.

    Attributes
    ----------
    request_id
        The id echoed in ``X-Request-ID`` and in problem documents.
    timings
        Named durations in milliseconds (``queue_ms``, ``compute_ms``), set by the handlers.
    fields
        Other sizes worth logging (``items`` of a batch, ``encoding``); never values.
    """

    request_id: str
    timings: dict[str, float] = field(default_factory=dict)
    fields: dict[str, str | int] = field(default_factory=dict)


_current: ContextVar[RequestInfo | None] = ContextVar("knotwork_request", default=None)


def current_request() -> RequestInfo | None:
    """The context of the request being answered, if any."""
    return _current.get()


def current_request_id() -> str | None:
    """The id of the request being answered, if any."""
    info = _current.get()
    return info.request_id if info is not None else None


def bind(info: RequestInfo):  # type: ignore[no-untyped-def]
    """Make ``info`` the current request context; returns the token to reset it."""
    return _current.set(info)


def unbind(token) -> None:  # type: ignore[no-untyped-def]
    """Undo :func:`bind`."""
    _current.reset(token)
