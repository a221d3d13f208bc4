"""Route handlers: read the body, decode and compute off the event loop, answer.

Handlers do no numerics and no validation of their own: the codecs decode, the core computes,
:mod:`._problems` turns every failure into problem+json.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any

import msgspec
from litestar import Request, get, post
from litestar.openapi.datastructures import ResponseSpec
from litestar.response import Response

from knotwork.codecs import (
    ARROW_FILE,
    ARROW_STREAM,
    PARQUET,
    CodecError,
    InvalidRequest,
    Limits,
    Origin,
    Prepared,
    UnsupportedMediaType,
    decode_assess,
    decode_batch,
    decode_table_body,
    run,
)
from knotwork.report import CONTENT_SECURITY_POLICY, REPORT_MEDIA_TYPE
from knotwork_contract import Assessment, Problem, ProblemDocument

from ._context import current_request
from ._metrics import COMPUTE_SECONDS
from ._openapi import (
    ASSESS_RESPONSES,
    BATCH_RESPONSES,
    REPORT_RESPONSES,
    AssessOperation,
    BatchOperation,
    ReportOperation,
    openapi_document,
)
from ._problems import ApiError, problem_of
from ._work import WorkPool, read_body

__all__ = [
    "BatchResponse",
    "Health",
    "Readiness",
    "assess",
    "assess_batch",
    "healthz",
    "readyz",
    "report",
]

JSON = "application/json"
#: litestar adds the charset to a text type: the answer's type is REPORT_MEDIA_TYPE.
HTML = REPORT_MEDIA_TYPE.split(";")[0]
_TABLE_MEDIA = (ARROW_STREAM, ARROW_FILE, PARQUET)
_PUBLIC = {"public": True}


@dataclass(frozen=True, slots=True)
class BatchResponse:
    """The answers to a batch, in the order of its items.

    Attributes
    ----------
    results
        For each item, its assessment or the problem document that says why it has none.
    """

    results: list[Assessment | ProblemDocument]


class Health(msgspec.Struct, frozen=True, kw_only=True):
    """Liveness: the process answers.

    Attributes
    ----------
    status
        Always ``ok``.
    """

    status: str = "ok"


class Readiness(msgspec.Struct, frozen=True, kw_only=True):
    """Readiness: start-up has finished and the core has computed once.

    Attributes
    ----------
    status
        ``ready``, or ``starting`` (also while stopping).
    in_flight
        Assessments admitted and not finished (running or queued).
    capacity
        Computing slots plus queue places; beyond them requests get 503.
    """

    status: str
    in_flight: int
    capacity: int


def _media_type(request: Request[Any, Any, Any], accepted: tuple[str, ...]) -> str:
    # The raw header from the scope: litestar's parsed view builds a header map per access.
    raw = next((v for k, v in request.scope["headers"] if k == b"content-type"), b"")
    media = raw.decode("latin-1").partition(";")[0].strip().lower()
    if media in accepted:
        return media
    given = media or "none"
    reason = f"unsupported content type {given}; send one of: {', '.join(accepted)}"
    raise UnsupportedMediaType(reason, [Problem("", reason)])


def _record(route: str, queue_s: float, compute_s: float, **fields: str | int) -> None:
    COMPUTE_SECONDS.labels(route=route).observe(compute_s)
    info = current_request()
    if info is not None:
        info.timings["queue_ms"] = queue_s * 1000
        info.timings["compute_ms"] = compute_s * 1000
        info.fields.update(fields)


#: A JSON body at most this large whose sections are all cheap is answered on the event loop:
#: at most about 28 predictors as a correlation matrix (a thousand numbers as a table), where
#: VIFs, GVIFs and the exact dependencies cost about a tenth of a millisecond (0.11-0.25 ms
#: decoded and computed at p = 20, measured in process; no eigen-decomposition when the matrix
#: is clearly regular), less than handing the work to a thread and back.
SMALL_JSON_BYTES = 16 * 1024
CHEAP_SECTIONS = frozenset({"variables", "terms", "dependencies"})


def _prepare(body: bytearray, media: str, query: bytes, limits: Limits) -> Prepared:
    if media == JSON:
        return decode_assess(body, limits)
    return decode_table_body(body, media, query, limits)


def _assess_one(body: bytearray, media: str, query: bytes, limits: Limits) -> Assessment:
    result: Assessment = run(_prepare(body, media, query, limits))
    return result


def _report_one(
    body: bytearray, media: str, query: bytes, limits: Limits, made_at: datetime
) -> bytes:
    # Imported here: matplotlib loads with the first report, not with every worker.
    from knotwork.report import render_report

    # Every table, whatever ``detail`` says: the charts draw from them. The provenance is
    # that of the JSON answer to the same request.
    result: Assessment = run(_prepare(body, media, query, limits), full=True)
    page: str = render_report(result, made_at)
    return page.encode("utf-8")


def _checked_media(request: Request[Any, Any, Any]) -> tuple[str, bytes]:
    """The body's media type and the query string (which only a binary table may carry)."""
    media = _media_type(request, (JSON, *_TABLE_MEDIA))
    query: bytes = request.scope.get("query_string", b"")
    if media == JSON and query:
        reason = "a JSON body carries its options in the body; remove the query parameters"
        raise InvalidRequest(reason, [Problem("/query", reason)])
    return media, query


def _assess_many(
    body: bytearray, limits: Limits, deadline: float, timeout_s: float
) -> BatchResponse:
    items = decode_batch(body, limits)
    results: list[Assessment | ProblemDocument] = []
    for index, raw in enumerate(items):
        origin = Origin(base=f"/items/{index}")
        if time.monotonic() > deadline:
            late = ApiError(
                503,
                "time-limit",
                f"the batch reached its time limit of {timeout_s:g} s before this item; "
                "send the rest in another batch",
            )
            results.append(problem_of(late)[0])
            continue
        try:
            results.append(run(decode_assess(raw, limits, base=origin.base)))
        except CodecError as exc:
            results.append(problem_of(exc)[0])
        except Exception as exc:  # one item's fault must not sink the others
            results.append(problem_of(exc)[0])
    return BatchResponse(results=results)


async def _admitted_body(
    request: Request[Any, Any, Any], pool: WorkPool
) -> tuple[bytearray, object]:
    """Take a queue place (or 503 at once), then read the body; give the place back on failure."""
    settings = request.app.state.settings
    ticket = pool.admit()
    try:
        body = await read_body(request, settings.max_body_bytes, settings.request_timeout_s)
    except BaseException:
        pool.release(ticket)
        raise
    return body, ticket


@post(
    "/v1/assess",
    operation_class=AssessOperation,
    summary="Assess a design for collinearity",
    operation_id="assess",
    description=(
        "Diagnostics for one set of predictors: VIF, GVIF, condition indices and "
        "variance-decomposition proportions, determinant and Farrar-Glauber tests, exact "
        "dependencies, a removal sequence, and remedies (ridge, principal components). "
        "Thresholds are rules of thumb; decisions on regulated models follow local rules and "
        "qualified review."
    ),
    responses=ASSESS_RESPONSES,
    response_description="The assessment.",
    status_code=200,
    tags=["assessment"],
)
async def assess(request: Request[Any, Any, Any]) -> Assessment:
    """Decode the body (JSON, Arrow IPC or Parquet), compute, answer.

    The computation runs on the bounded pool, off the event loop, except for a small JSON
    body asking only for cheap sections (see ``SMALL_JSON_BYTES``).
    """
    state = request.app.state
    media, query = _checked_media(request)
    pool: WorkPool = state.pool
    body, ticket = await _admitted_body(request, pool)
    handed = False
    result: Assessment
    try:
        if media == JSON and len(body) <= SMALL_JSON_BYTES:
            # Decoding a small body is cheap; so is the answer when only cheap sections are
            # asked for, which is then computed here rather than through a thread.
            prepared = decode_assess(body, state.limits)
            sections = prepared.options.sections
            cheap = sections is not None and CHEAP_SECTIONS.issuperset(sections)
            # Intervals (a root search per VIF, or replicates) are never cheap.
            if cheap and prepared.options.uncertainty is None:
                started = time.perf_counter()
                answer: Assessment = run(prepared)
                _record("/v1/assess", 0.0, time.perf_counter() - started, encoding=media)
                return answer
            handed = True
            result, queue_s, compute_s = await pool.run(run, prepared, ticket=ticket)
        else:
            handed = True
            result, queue_s, compute_s = await pool.run(
                _assess_one, body, media, query, state.limits, ticket=ticket
            )
    finally:
        if not handed:
            pool.release(ticket)
    _record("/v1/assess", queue_s, compute_s, encoding=media)
    return result


@post(
    "/v1/report",
    operation_class=ReportOperation,
    summary="Assess a design and answer with an HTML report",
    operation_id="report",
    description=(
        "The same bodies, content types, options and limits as POST /v1/assess; the answer is "
        "one self-contained HTML page (inline style sheet, charts as inline SVG, nothing "
        "fetched) with the finding in words, the charts and tables of each section, warnings, "
        "cautions and the provenance, printable on A4 and Letter. Errors are problem+json, as "
        "on /v1/assess. Thresholds are rules of thumb; decisions on regulated models follow "
        "local rules and qualified review."
    ),
    responses=REPORT_RESPONSES,
    response_description="The report page.",
    media_type=HTML,
    status_code=200,
    tags=["assessment"],
)
async def report(request: Request[Any, Any, Any]) -> Response[bytes]:
    """Decode the body as for ``/v1/assess``, compute and draw the page on the bounded pool."""
    state = request.app.state
    media, query = _checked_media(request)
    pool: WorkPool = state.pool
    body, ticket = await _admitted_body(request, pool)
    made_at = datetime.now(UTC)
    page, queue_s, compute_s = await pool.run(
        _report_one, body, media, query, state.limits, made_at, ticket=ticket
    )
    _record("/v1/report", queue_s, compute_s, encoding=media)
    return Response(
        page,
        media_type=HTML,
        headers={"Content-Security-Policy": CONTENT_SECURITY_POLICY},
    )


@post(
    "/v1/assess/batch",
    operation_class=BatchOperation,
    summary="Assess many designs",
    operation_id="assessBatch",
    description=(
        "Each item is answered on its own, in order: an assessment, or a problem document "
        "for an item that cannot be used (its pointers start with /items/<index>)."
    ),
    responses=BATCH_RESPONSES,
    response_description="One result per item, in order: an assessment or a problem document.",
    status_code=200,
    tags=["assessment"],
)
async def assess_batch(request: Request[Any, Any, Any]) -> BatchResponse:
    """Answer every item of a batch; one bad item does not fail the others."""
    state = request.app.state
    _media_type(request, (JSON,))
    if request.scope.get("query_string"):
        reason = "a batch carries its options in each item; remove the query parameters"
        raise InvalidRequest(reason, [Problem("/query", reason)])
    pool: WorkPool = state.pool
    body, ticket = await _admitted_body(request, pool)
    timeout_s = pool.timeout_s
    deadline = time.monotonic() + timeout_s
    # The items stop starting at the deadline; the pool's own limit, a little later, only
    # catches an item that runs far past it.
    result, queue_s, compute_s = await pool.run(
        _assess_many,
        body,
        state.limits,
        deadline,
        timeout_s,
        timeout_s=timeout_s * 1.5 + 1,
        ticket=ticket,
    )
    _record("/v1/assess/batch", queue_s, compute_s, items=len(result.results))
    return result


@get(
    "/healthz",
    opt=_PUBLIC,
    tags=["operation"],
    summary="Liveness",
    operation_id="healthz",
    security=[{}],
    response_description="The process answers.",
)
async def healthz() -> Health:
    """The process is alive (no work is done)."""
    return Health()


@get(
    "/readyz",
    opt=_PUBLIC,
    tags=["operation"],
    summary="Readiness",
    operation_id="readyz",
    security=[{}],
    response_description="Ready: start-up and the warm-up assessment have finished.",
    responses={
        503: ResponseSpec(
            data_container=Readiness,
            generate_examples=False,
            description="Not ready yet (starting) or no longer (stopping).",
        )
    },
)
async def readyz(request: Request[Any, Any, Any]) -> Response[Readiness]:
    """200 once start-up (including one warm-up assessment) has finished, else 503."""
    state = request.app.state
    pool: WorkPool = state.pool
    ready = bool(state.get("ready"))
    body = Readiness(
        status="ready" if ready else "starting",
        in_flight=pool.in_flight,
        capacity=pool.concurrency + pool.queue,
    )
    return Response(body, status_code=200 if ready else 503)


@get(
    "/openapi.json",
    opt=_PUBLIC,
    include_in_schema=False,
    media_type="application/vnd.oai.openapi+json",
)
async def openapi_json(request: Request[Any, Any, Any]) -> bytes:
    """The OpenAPI 3.1 document."""
    return msgspec.json.encode(openapi_document(request.app))
