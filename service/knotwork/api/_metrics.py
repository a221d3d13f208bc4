"""Prometheus metrics: requests by route template, and the work's own figures.

The request metrics are recorded by the access-log wrapper (:mod:`._logging`), which already
times every request and knows its route and status: litestar's Prometheus middleware did the
same work again as a second wrapper, about 40 us of a 450 us small request (measured in
process; DEVELOPERS.md).
"""

from __future__ import annotations

import os
from typing import Any

from litestar import get
from litestar.response import Response
from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
    multiprocess,
)

__all__ = [
    "COMPUTE_SECONDS",
    "IN_FLIGHT",
    "REJECTED",
    "REQUESTS_IN_PROGRESS",
    "in_progress",
    "method_label",
    "metrics",
    "observe_request",
]

_APP = "knotwork"
_REQUEST_LABELS = ["app_name", "method", "path", "status_code"]
#: Requests answered, by method, route template and status.
REQUESTS = Counter("knotwork_requests_total", "Requests answered", _REQUEST_LABELS)
#: Requests answered with a 5xx status.
REQUEST_ERRORS = Counter(
    "knotwork_requests_error_total", "Requests answered with a server error", _REQUEST_LABELS
)
#: Time from the first byte of the request in the application to the last byte of the answer.
REQUEST_SECONDS = Histogram(
    "knotwork_request_duration_seconds", "Request duration, in seconds", _REQUEST_LABELS
)
#: Requests being answered now, by method.
REQUESTS_IN_PROGRESS = Gauge(
    "knotwork_requests_in_progress",
    "Requests being answered now",
    ["app_name", "method"],
    multiprocess_mode="livesum",
)

#: Assessments refused before any work, by reason (``saturated``, ``time-limit``).
REJECTED = Counter(
    "knotwork_rejected_total", "Requests refused for capacity or time, by reason", ["reason"]
)
#: Assessments admitted and not yet finished (running or waiting for a slot).
IN_FLIGHT = Gauge(
    "knotwork_in_flight", "Assessments admitted and not finished", multiprocess_mode="livesum"
)
#: Time spent decoding and computing, by route.
COMPUTE_SECONDS = Histogram(
    "knotwork_compute_seconds",
    "Decoding and computing time of one request, in seconds",
    ["route"],
    buckets=(0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1, 2.5, 5, 10, 30),
)


#: The exposition format's media type without its charset: litestar appends the charset to
#: every text/* type, and the full constant would carry it twice.
_MEDIA_TYPE = CONTENT_TYPE_LATEST.split("; charset=")[0]


#: Methods that get their own label value; any other (a client may send any token) counts as
#: ``OTHER``, so no client can grow the number of series.
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
#: The labelled children, made once each: labels() builds and validates its key on every call.
_series: dict[tuple[str, str, int], tuple[Any, Any]] = {}
_progress: dict[str, Any] = {}


def method_label(method: str) -> str:
    """The method as a label value: one of the usual methods, or ``OTHER``."""
    return method if method in _METHODS else "OTHER"


def in_progress(method: str) -> Any:
    """The in-progress gauge of this method's requests (``method`` from :func:`method_label`)."""
    gauge = _progress.get(method)
    if gauge is None:
        gauge = _progress[method] = REQUESTS_IN_PROGRESS.labels(_APP, method)
    return gauge


def observe_request(method: str, path: str, status: int, seconds: float) -> None:
    """Count one answered request and its duration, labelled by route template, never by
    raw path (``path`` is the template, or ``(unmatched)``)."""
    key = (method, path, status)
    series = _series.get(key)
    if series is None:
        labels = (_APP, method, path, str(status))
        series = (REQUESTS.labels(*labels), REQUEST_SECONDS.labels(*labels))
        _series[key] = series
    series[0].inc()
    series[1].observe(seconds)
    if status >= 500:
        REQUEST_ERRORS.labels(_APP, method, path, str(status)).inc()


@get(
    "/metrics",
    opt={"public": True},
    tags=["operation"],
    summary="Prometheus metrics",
    operation_id="metrics",
    security=[{}],
    media_type=_MEDIA_TYPE,
    response_description="Counters and histograms in the Prometheus text format.",
)
async def metrics() -> Response[bytes]:
    """Every metric of this process, or of all worker processes when they share a folder."""
    registry = REGISTRY
    if os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        registry = CollectorRegistry()
        multiprocess.MultiProcessCollector(registry)  # type: ignore[no-untyped-call]
    return Response(generate_latest(registry), media_type=_MEDIA_TYPE)
