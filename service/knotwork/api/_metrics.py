"""Prometheus metrics: litestar's request metrics (by route template) and our own."""

from __future__ import annotations

import os

from litestar import get
from litestar.plugins.prometheus import PrometheusConfig
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

__all__ = ["COMPUTE_SECONDS", "IN_FLIGHT", "REJECTED", "metrics", "prometheus_config"]

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


def prometheus_config() -> PrometheusConfig:
    """Request counts and durations labelled by route template, never by raw path."""
    return PrometheusConfig(app_name="knotwork", prefix="knotwork", group_path=True)


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
