"""The litestar application: routes, guard, limits, error mapping, logs, metrics, docs."""

from __future__ import annotations

import logging

import anyio.to_thread
import msgspec
from litestar import Litestar
from litestar.datastructures import State
from litestar.openapi import OpenAPIConfig
from litestar.openapi.spec import Components, Contact, License, SecurityScheme, Tag

from knotwork import __version__
from knotwork.codecs import Limits
from knotwork.settings import Settings

from ._auth import TokenGate
from ._docs import assets_router, docs_router, render_plugins
from ._examples import TABLE_COLUMNS, TABLE_EXAMPLE
from ._logging import AccessLog
from ._metrics import metrics
from ._problems import handle_exception
from ._routes import assess, assess_batch, healthz, openapi_json, readyz, report
from ._work import WorkPool

__all__ = ["create_app"]

_log = logging.getLogger("knotwork.app")

_DESCRIPTION = """\
Collinearity diagnostics for regression designs: VIF, tolerance, GVIF for multi-column terms,
condition indices with variance-decomposition proportions, the determinant and Farrar-Glauber
tests, exact linear dependencies, a removal sequence, and remedies side by side (ridge trace
and choices of k, principal components).

Send rows (JSON columns, an Arrow IPC stream or Parquet), a correlation matrix with its n, or
summary moments (possibly in parts, merged exactly). Errors are `application/problem+json`
(RFC 9457) with JSON pointers to the offending field.

Thresholds (VIF 5 or 10, condition index 30) are rules of thumb from common practice, not
tests; decisions on regulated models follow local rules and qualified review.
"""


def _warm_up() -> None:
    # One small, complete assessment (rows, a categorical term, a response, every section)
    # loads every module and BLAS kernel before the first client waits; the same table as an
    # Arrow stream and as Parquet loads the binary codecs (pyarrow's conversion to numpy
    # imports pandas, hundreds of modules), so no first request pays for an import.
    import io

    import pyarrow as pa
    import pyarrow.parquet as pq

    from knotwork.codecs import ARROW_STREAM, PARQUET, decode_assess, decode_table_body, run

    run(decode_assess(msgspec.json.encode(TABLE_EXAMPLE), Limits()))
    table = pa.table(
        {name: pa.array(values, pa.float64()) for name, values in TABLE_COLUMNS.items()}
    )
    stream, parquet = io.BytesIO(), io.BytesIO()
    with pa.ipc.new_stream(stream, table.schema) as writer:
        writer.write_table(table)
    pq.write_table(table, parquet)
    for body, media in ((stream.getvalue(), ARROW_STREAM), (parquet.getvalue(), PARQUET)):
        run(decode_table_body(body, media, b"sections=variables", Limits()))


def create_app(settings: Settings | None = None) -> Litestar:
    """Build the application.

    Parameters
    ----------
    settings
        The configuration; default: :class:`Settings` defaults (no tokens, local use).
        ``python -m knotwork`` passes ``Settings.from_env()``.
    """
    settings = settings or Settings()
    gate = TokenGate(settings.tokens)
    pool = WorkPool(
        concurrency=settings.concurrency,
        queue=settings.queue or 0,
        timeout_s=settings.request_timeout_s,
        retry_after_s=settings.retry_after_s,
    )
    limits = Limits(
        max_cells=settings.max_cells,
        max_columns=settings.max_columns,
        max_batch_items=settings.max_batch_items,
    )
    state = State({"settings": settings, "pool": pool, "limits": limits, "ready": False})

    async def start(app: Litestar) -> None:
        pool.reset()
        try:
            await anyio.to_thread.run_sync(_warm_up)
        except Exception as exc:  # the service stays up but reports itself not ready
            _log.error("warm-up failed", extra={"fields": {"error_type": type(exc).__name__}})
            return
        app.state["ready"] = True

    async def stop(app: Litestar) -> None:
        app.state["ready"] = False

    openapi_config = OpenAPIConfig(
        title="knotwork",
        version=__version__,
        description=_DESCRIPTION,
        contact=Contact(name="knotwork maintainers"),
        license=License(name="Apache-2.0", identifier="Apache-2.0"),
        openapi_router=docs_router(),
        render_plugins=render_plugins(),
        components=Components(
            security_schemes={
                "bearer": SecurityScheme(
                    type="http",
                    scheme="bearer",
                    description=(
                        "A token from KNOTWORK_TOKENS_FILE or KNOTWORK_TOKENS; not needed when "
                        "the service runs without tokens."
                    ),
                )
            }
        ),
        security=[{"bearer": []}],
        tags=[
            Tag(name="assessment", description="Collinearity diagnostics."),
            Tag(name="operation", description="Health, readiness and metrics (no token)."),
        ],
        create_examples=False,
        use_handler_docstrings=False,
    )
    app = Litestar(
        route_handlers=[
            assess,
            assess_batch,
            report,
            healthz,
            readyz,
            openapi_json,
            metrics,
            assets_router(),
        ],
        # Without tokens there is nothing to check; litestar copies the route handler for every
        # guard call (about 50 us a request), so an open service registers none.
        guards=[] if settings.open else [gate.guard],
        exception_handlers={Exception: handle_exception},
        openapi_config=openapi_config,
        request_max_body_size=settings.max_body_bytes,
        logging_config=None,
        on_startup=[start],
        on_shutdown=[stop],
        state=state,
        debug=False,
    )
    # The access log wraps everything, routing errors included, so every request gets a line
    # and is counted in the request metrics.
    app.asgi_handler = AccessLog(app.asgi_handler)
    return app
