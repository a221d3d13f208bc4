"""Start the service: ``python -m knotwork --host H --port P`` (also the ``knotwork`` command).

Settings come from the ``KNOTWORK_*`` environment variables (see :mod:`knotwork.settings`),
checked before anything starts. Without tokens the service runs open only on a loopback
address; on any other address it refuses to start unless ``KNOTWORK_ALLOW_OPEN=true``.

The server is uvicorn (h11 parser, which bounds request heads, with a time limit per head and
problem+json answers for heads it cannot read added by :mod:`knotwork._uvicorn`, and uvloop).
There is one way to start the service, so those answers never depend on which server runs;
``bench/bench_service.py`` still compares other servers side by side.
"""

from __future__ import annotations

import argparse
import ipaddress
import json
import os
import shutil
import sys
import tempfile
from typing import Any

from knotwork.settings import Settings, SettingsError

__all__ = ["curl_line", "is_loopback", "main", "worker_app"]


def is_loopback(host: str) -> bool:
    """Whether ``host`` only accepts connections from this machine."""
    if host.lower() == "localhost":
        return True
    try:
        return ipaddress.ip_address(host.strip("[]")).is_loopback
    except ValueError:
        # A host name other than localhost may resolve to anything: treat it as public.
        return False


def curl_line(host: str, port: int, *, token_needed: bool) -> str:
    """A ready-to-paste curl command posting the correlation example to the service."""
    from knotwork.api._examples import CORRELATION_EXAMPLE

    if host in ("0.0.0.0", ""):
        host = "127.0.0.1"
    elif host == "::":
        host = "::1"
    if ":" in host and not host.startswith("["):
        host = f"[{host}]"
    body = json.dumps(CORRELATION_EXAMPLE, separators=(",", ":"))
    auth = ' -H "Authorization: Bearer $KNOTWORK_TOKEN"' if token_needed else ""
    return (
        f"curl -sS -X POST http://{host}:{port}/v1/assess"
        f" -H 'Content-Type: application/json'{auth} -d '{body}'"
    )


def _prepare_process(settings: Settings) -> None:
    from threadpoolctl import threadpool_limits

    from knotwork.api._logging import configure_logging

    configure_logging(settings.log_level)
    # One BLAS thread per worker was the fastest setting measured (bench/bench_service.py);
    # several would also oversubscribe the cores the request threads already share.
    threadpool_limits(limits=settings.blas_threads)


def worker_app() -> Any:
    """Application factory for server worker processes (settings read again from the env)."""
    from knotwork._uvicorn import GuardedH11Protocol
    from knotwork.api import create_app

    settings = Settings.from_env()
    _prepare_process(settings)
    # Each worker process sets its own (the class attribute is per process).
    GuardedH11Protocol.head_timeout_s = settings.request_timeout_s
    return create_app(settings)


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="knotwork", description="Collinearity diagnostics over HTTP."
    )
    parser.add_argument("--host", default="127.0.0.1", help="address to bind (default 127.0.0.1)")
    parser.add_argument("--port", type=int, default=8000, help="port (default 8000)")
    parser.add_argument(
        "--workers", type=int, default=None, help="processes (default KNOTWORK_WORKERS, or 1)"
    )
    return parser


def main(argv: list[str] | None = None) -> int:
    """Check the settings and the address, print a curl line, run the server."""
    args = _parser().parse_args(argv)
    try:
        settings = Settings.from_env()
    except SettingsError as exc:
        print(f"knotwork: {exc}", file=sys.stderr)
        return 2
    if not 0 < args.port < 65536:
        print(f"knotwork: --port must be between 1 and 65535, got {args.port}", file=sys.stderr)
        return 2
    workers = args.workers if args.workers is not None else settings.workers
    if workers < 1:
        print(f"knotwork: --workers must be at least 1, got {workers}", file=sys.stderr)
        return 2
    if settings.open and not is_loopback(args.host) and not settings.allow_open:
        print(
            f"knotwork: refusing to start on {args.host}, which is not a loopback address, "
            "without tokens. Set KNOTWORK_TOKENS_FILE or KNOTWORK_TOKENS, or set "
            "KNOTWORK_ALLOW_OPEN=true to run open on purpose.",
            file=sys.stderr,
        )
        return 2
    metrics_dir = None
    if workers > 1 and not os.environ.get("PROMETHEUS_MULTIPROC_DIR"):
        # Worker processes must share their counters, or each scrape sees one worker's.
        metrics_dir = tempfile.mkdtemp(prefix="knotwork-metrics-")
        os.environ["PROMETHEUS_MULTIPROC_DIR"] = metrics_dir

    print(
        f"knotwork: serving on http://{args.host}:{args.port} ({workers} "
        f"worker(s), {'open: no token needed' if settings.open else 'bearer tokens required'})."
        f"\nTry:\n  {curl_line(args.host, args.port, token_needed=not settings.open)}",
        flush=True,
    )
    try:
        return _run_uvicorn(settings, args.host, args.port, workers)
    finally:
        if metrics_dir is not None:
            shutil.rmtree(metrics_dir, ignore_errors=True)


#: Largest request line plus headers accepted, in bytes.
_MAX_HEAD_BYTES = 64 * 1024


def _run_uvicorn(settings: Settings, host: str, port: int, workers: int) -> int:
    import uvicorn

    from knotwork._uvicorn import GuardedH11Protocol

    common: dict[str, Any] = {
        "host": host,
        "port": port,
        "log_config": None,
        "access_log": False,
        "server_header": False,
        "timeout_graceful_shutdown": max(5, int(settings.request_timeout_s) + 5),
        # h11 bounds a request head (httptools buffers one of any size): a header flood gets
        # a 400 at 64 KiB. Small-request rates measured the same on both parsers here. The
        # subclass adds a time limit per head (uvicorn has none) and answers problem+json
        # where uvicorn answers plain text: see knotwork._uvicorn.
        "http": GuardedH11Protocol,
        "h11_max_incomplete_event_size": _MAX_HEAD_BYTES,
    }
    if workers == 1:
        app = worker_app()
        uvicorn.run(app, **common)
    else:
        uvicorn.run("knotwork.__main__:worker_app", factory=True, workers=workers, **common)
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
