"""Service benchmark: transport floor, in-process decode + core, full requests, small-request rate.

Run with ``python bench/bench_service.py`` (``--quick`` for a smaller table). In one run it
starts local servers on free 127.0.0.1 ports and prints, side by side:

(a) the transport floor: a bare ASGI app that only drains the body and answers 11 bytes;
(b) the in-process decode + core time for the same table (and the core with 1 and 2 BLAS
    threads);
(c) the full ``POST /v1/assess`` of a 100k x 50 table as Arrow IPC (about 40 MB) and as JSON
    columns (about 95 MB), under uvicorn and granian;
(d) the rate and latency of small correlation requests (p = 20) at concurrency 32 against the
    bare app's rate with a 1 KB body; beside them, litestar itself with one draining route and
    nothing else (the framework's own ceiling) and the service's ``GET /healthz``.

``--small`` runs only (d) on uvicorn, the three servers interleaved run by run, and prints
the service's rate against both the bare app and plain litestar.

Goals: (c) Arrow within 1.3 x (a) + (b); JSON decoding at least 150 MB/s; (d) the service at
least 0.35 x the bare app's rate and at least half of plain litestar's. The machine is
shared, so each figure is a median of several runs; compare ratios within one run, not
figures across runs.
"""

from __future__ import annotations

import argparse
import asyncio
import io
import json
import os
import signal
import socket
import statistics
import subprocess
import sys
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

HERE = Path(__file__).resolve().parent
HOST = "127.0.0.1"
SECTIONS = ["variables", "conditioning", "tests", "dependencies", "removal"]


# --------------------------------------------------------------------------------------------
# The bare ASGI app: the floor every server pays for moving the bytes.


async def bare_app(
    scope: dict[str, Any], receive: Callable[..., Any], send: Callable[..., Any]
) -> None:
    if scope["type"] == "lifespan":
        while True:
            message = await receive()
            if message["type"] == "lifespan.startup":
                await send({"type": "lifespan.startup.complete"})
            elif message["type"] == "lifespan.shutdown":
                await send({"type": "lifespan.shutdown.complete"})
                return
    more = True
    while more:
        message = await receive()
        more = message.get("more_body", False)
    await send(
        {
            "type": "http.response.start",
            "status": 200,
            "headers": [(b"content-type", b"application/json"), (b"content-length", b"11")],
        }
    )
    await send({"type": "http.response.body", "body": b'{"ok":true}'})


def plain_litestar_app() -> Any:
    """litestar itself with one route that drains the body and answers 11 bytes: no middleware,
    no guard, no OpenAPI, no work. It shows how much of the bare rate the framework keeps."""
    from litestar import Litestar, Request, post

    @post("/", status_code=200, media_type="application/json")
    async def drain(request: Request[Any, Any, Any]) -> bytes:
        await request.body()
        return b'{"ok":true}'

    return Litestar([drain], openapi_config=None)


# --------------------------------------------------------------------------------------------
# Servers


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind((HOST, 0))
        return int(sock.getsockname()[1])


class Server:
    """A server subprocess on a free loopback port."""

    def __init__(self, kind: str, server: str, env: dict[str, str]) -> None:
        self.port = free_port()
        self.url = f"http://{HOST}:{self.port}"
        environment = {**os.environ, **env, "PYTHONPATH": str(HERE)}
        target = "bench_service:bare_app"
        if kind == "plain":
            target = "bench_service:plain_litestar_app"
        elif kind == "knotwork":
            # The service starts only on uvicorn; granian runs its worker factory here, for
            # comparison only (without the request-head guards of knotwork._uvicorn).
            target = "knotwork.__main__:worker_app"
        if kind == "knotwork" and server == "uvicorn":
            command = [sys.executable, "-m", "knotwork", "--host", HOST, "--port", str(self.port)]
        elif server == "uvicorn":
            command = [
                sys.executable,
                "-m",
                "uvicorn",
                target,
                *(["--factory"] if kind == "plain" else []),
                # The service's own parser (see knotwork.__main__), so the floors are like for like.
                "--http",
                "h11",
                "--host",
                HOST,
                "--port",
                str(self.port),
                "--no-access-log",
                "--log-level",
                "warning",
            ]
        else:  # granian, for every kind
            command = [
                sys.executable,
                "-m",
                "granian",
                *(["--factory"] if kind in ("plain", "knotwork") else []),
                "--interface",
                "asgi",
                "--host",
                HOST,
                "--port",
                str(self.port),
                "--log-level",
                "warning",
                target,
            ]
        self.process = subprocess.Popen(
            command, env=environment, cwd=HERE, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL
        )
        self._wait(kind)

    def _wait(self, kind: str) -> None:
        import httpx

        path = "/readyz" if kind == "knotwork" else "/"
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                raise RuntimeError(f"server exited with {self.process.returncode}")
            try:
                # The plain app has only a POST route: any answer means it is listening.
                status = httpx.get(self.url + path, timeout=2).status_code
                if status == 200 or (kind == "plain" and status < 500):
                    return
            except httpx.TransportError:
                pass
            time.sleep(0.1)
        raise RuntimeError("server did not start")

    def stop(self) -> None:
        self.process.send_signal(signal.SIGTERM)
        try:
            self.process.wait(timeout=30)
        except subprocess.TimeoutExpired:
            self.process.kill()
            self.process.wait()


# --------------------------------------------------------------------------------------------
# Clients


def median_time(fn: Callable[[], Any], repeat: int) -> float:
    fn()  # warm-up
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def post_once(url: str, body: bytes, media: str) -> Callable[[], None]:
    import httpx

    client = httpx.Client(timeout=120)

    def call() -> None:
        response = client.post(url, content=body, headers={"Content-Type": media})
        if response.status_code != 200:
            raise RuntimeError(f"{url}: {response.status_code} {response.text[:300]}")

    return call


async def _hammer(
    port: int, request: bytes, concurrency: int, seconds: float
) -> tuple[int, list[float]]:
    latencies: list[float] = []
    deadline = time.perf_counter() + seconds

    async def worker() -> None:
        reader, writer = await asyncio.open_connection(HOST, port)
        try:
            while time.perf_counter() < deadline:
                start = time.perf_counter()
                writer.write(request)
                await writer.drain()
                head = await reader.readuntil(b"\r\n\r\n")
                length = 0
                for line in head.split(b"\r\n"):
                    if line.lower().startswith(b"content-length:"):
                        length = int(line.split(b":", 1)[1])
                if not head.startswith(b"HTTP/1.1 200"):
                    raise RuntimeError(head.decode("latin-1"))
                await reader.readexactly(length)
                latencies.append(time.perf_counter() - start)
        finally:
            writer.close()

    await asyncio.gather(*(worker() for _ in range(concurrency)))
    return len(latencies), latencies


def rate(
    port: int, path: str, body: bytes, concurrency: int, seconds: float
) -> tuple[float, float, float]:
    """Requests per second, p50 and p99 latency (ms) of keep-alive POSTs at a concurrency."""
    request = (
        f"POST {path} HTTP/1.1\r\nHost: {HOST}:{port}\r\nContent-Type: application/json\r\n"
        f"Content-Length: {len(body)}\r\n\r\n"
    ).encode() + body
    asyncio.run(_hammer(port, request, concurrency, 0.5))  # warm-up
    count, latencies = asyncio.run(_hammer(port, request, concurrency, seconds))
    latencies.sort()
    p50 = latencies[len(latencies) // 2] * 1000
    p99 = latencies[int(len(latencies) * 0.99)] * 1000
    return count / seconds, p50, p99


def get_rate(port: int, path: str, concurrency: int, seconds: float) -> float:
    """Requests per second of keep-alive GETs."""
    request = f"GET {path} HTTP/1.1\r\nHost: {HOST}:{port}\r\n\r\n".encode()
    count, _ = asyncio.run(_hammer(port, request, concurrency, seconds))
    return count / seconds


# --------------------------------------------------------------------------------------------
# Data


def make_table(rows: int, cols: int) -> tuple[bytes, bytes, dict[str, Any]]:
    import numpy as np
    import pyarrow as pa

    rng = np.random.default_rng(20240611)
    x = rng.normal(size=(rows, cols))
    x[:, 1] = 0.9 * x[:, 0] + 0.1 * x[:, 1]  # one strong relation, so there is something to see
    names = [f"x{j:02d}" for j in range(cols)]
    table = pa.table({name: x[:, j] for j, name in enumerate(names)})
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table, max_chunksize=65536)
    arrow = sink.getvalue()
    document = {
        "input": {"kind": "table", "columns": {n: x[:, j].tolist() for j, n in enumerate(names)}},
        "options": {"sections": SECTIONS},
    }
    return arrow, json.dumps(document).encode(), document


def small_correlation(p: int = 20, sections: list[str] | None = None) -> bytes:
    import numpy as np

    rng = np.random.default_rng(5)
    x = rng.normal(size=(200, p))
    x[:, 1] += x[:, 0]
    r = np.corrcoef(x, rowvar=False).round(6)
    r = (r + r.T) / 2
    np.fill_diagonal(r, 1.0)
    options = {"sections": sections} if sections else {}
    body = {
        "input": {"kind": "correlation", "names": [f"v{i}" for i in range(p)],
                  "matrix": r.tolist(), "n": 200},
        "options": options,
    }  # fmt: skip
    return json.dumps(body).encode()


# --------------------------------------------------------------------------------------------
# The run


def in_process(arrow: bytes, json_body: bytes, repeat: int) -> dict[str, float]:
    from threadpoolctl import threadpool_limits

    from knotwork.codecs import ARROW_STREAM, Limits, decode_assess, decode_table_body, run

    limits = Limits(max_cells=10**9, max_columns=10**4)
    query = ("sections=" + ",".join(SECTIONS)).encode()
    results: dict[str, float] = {}
    prepared = decode_table_body(arrow, ARROW_STREAM, query, limits)
    results["arrow_decode"] = median_time(
        lambda: decode_table_body(arrow, ARROW_STREAM, query, limits), repeat
    )
    for threads in (1, 2):
        with threadpool_limits(limits=threads):
            results[f"core_blas{threads}"] = median_time(lambda: run(prepared), repeat)
    results["json_decode"] = median_time(
        lambda: decode_assess(json_body, limits), max(2, repeat // 2)
    )
    return results


def small_only(seconds: float, repeat: int) -> int:
    """(d) alone on uvicorn: bare, plain litestar and the service, interleaved ``repeat`` times
    so that a noisy neighbour slows all three alike; medians printed with their ratios."""
    env = {"KNOTWORK_LOG_LEVEL": "warning", "KNOTWORK_BLAS_THREADS": "1"}
    one_kb = b'{"pad":"' + b"x" * 1010 + b'"}'
    small_vars = small_correlation(sections=["variables"])
    servers = {
        "bare 1 KB": (Server("bare", "uvicorn", env), "/", one_kb),
        "plain litestar 1 KB": (Server("plain", "uvicorn", env), "/", one_kb),
        "knotwork p=20 variables": (Server("knotwork", "uvicorn", env), "/v1/assess", small_vars),
    }
    runs: dict[str, list[tuple[float, float, float]]] = {name: [] for name in servers}
    try:
        for _ in range(repeat):
            for name, (server, path, body) in servers.items():
                runs[name].append(rate(server.port, path, body, 32, seconds))
    finally:
        for server, _, _ in servers.values():
            server.stop()
    medians = {
        name: tuple(statistics.median(r[i] for r in results) for i in range(3))
        for name, results in runs.items()
    }
    bare, plain = medians["bare 1 KB"][0], medians["plain litestar 1 KB"][0]
    print("(d) small requests at concurrency 32, uvicorn, medians of interleaved runs")
    print("    goal: the service >= 0.35 x bare and >= 0.5 x plain litestar")
    print(f"    {'':26} {'req/s':>8} {'p50 ms':>8} {'p99 ms':>8} {'x bare':>8} {'x plain':>8}")
    for name, (per_s, p50, p99) in medians.items():
        print(
            f"    {name:26} {per_s:8.0f} {p50:8.1f} {p99:8.1f} {per_s / bare:8.2f} "
            f"{per_s / plain:8.2f}"
        )
    return 0


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="10k x 50 instead of 100k x 50")
    parser.add_argument("--seconds", type=float, default=3.0, help="length of each rate run")
    parser.add_argument("--repeat", type=int, default=5, help="runs per median")
    parser.add_argument(
        "--small", action="store_true", help="only (d), the small-request rates, on uvicorn"
    )
    args = parser.parse_args()
    if args.small:
        return small_only(args.seconds, args.repeat)
    rows = 10_000 if args.quick else 100_000
    arrow, json_body, _ = make_table(rows, 50)
    mb_arrow, mb_json = len(arrow) / 1e6, len(json_body) / 1e6
    print(f"table {rows} x 50: Arrow IPC {mb_arrow:.1f} MB, JSON {mb_json:.1f} MB; "
          f"{os.cpu_count()} CPUs (shared)\n")  # fmt: skip

    local = in_process(arrow, json_body, args.repeat)
    b = local["arrow_decode"] + local["core_blas1"]
    print("(b) in process")
    print(f"    Arrow decode             {local['arrow_decode'] * 1000:8.1f} ms")
    print(f"    core, 1 BLAS thread      {local['core_blas1'] * 1000:8.1f} ms")
    print(
        f"    core, 2 BLAS threads     {local['core_blas2'] * 1000:8.1f} ms   "
        f"(ratio 2/1 = {local['core_blas2'] / local['core_blas1']:.2f})"
    )
    print(f"    JSON decode              {local['json_decode'] * 1000:8.1f} ms   "
          f"= {mb_json / local['json_decode']:.0f} MB/s (goal >= 150)\n")  # fmt: skip

    env = {
        "KNOTWORK_MAX_BODY_BYTES": str(256 * 1024 * 1024),
        "KNOTWORK_MAX_CELLS": str(10**8),
        "KNOTWORK_LOG_LEVEL": "warning",
        "KNOTWORK_BLAS_THREADS": "1",
        "KNOTWORK_QUEUE": "64",
    }
    small_all = small_correlation()
    small_vars = small_correlation(sections=["variables"])
    one_kb = b'{"pad":"' + b"x" * 1010 + b'"}'
    rows_out: list[tuple[str, ...]] = []
    rates: dict[str, tuple[float, float, float]] = {}
    # The stack's own ceiling: litestar, the guard, metrics and the access log, no body, no work.
    healthz: dict[str, float] = {}
    for server in ("uvicorn", "granian"):
        bare = Server("bare", server, env)
        try:
            floor = median_time(
                post_once(bare.url + "/", arrow, "application/octet-stream"), args.repeat
            )
            floor_json = median_time(
                post_once(bare.url + "/", json_body, "application/json"), max(2, args.repeat // 2)
            )
            rates[f"{server} bare 1 KB"] = rate(bare.port, "/", one_kb, 32, args.seconds)
        finally:
            bare.stop()
        plain = Server("plain", server, env)
        try:
            rates[f"{server} plain litestar 1 KB"] = rate(plain.port, "/", one_kb, 32, args.seconds)
        finally:
            plain.stop()
        service = Server("knotwork", server, env)
        try:
            query = "?sections=" + ",".join(SECTIONS)
            full_arrow = median_time(
                post_once(service.url + "/v1/assess" + query, arrow,
                          "application/vnd.apache.arrow.stream"), args.repeat)  # fmt: skip
            full_json = median_time(
                post_once(service.url + "/v1/assess", json_body, "application/json"),
                max(2, args.repeat // 2),
            )
            rates[f"{server} p=20 all sections"] = rate(
                service.port, "/v1/assess", small_all, 32, args.seconds
            )
            rates[f"{server} p=20 variables"] = rate(
                service.port, "/v1/assess", small_vars, 32, args.seconds
            )
            healthz[server] = get_rate(service.port, "/healthz", 32, args.seconds)
        finally:
            service.stop()
        b_json = local["json_decode"] + local["core_blas1"]
        rows_out.append((
            server,
            f"{floor * 1000:.0f}",
            f"{full_arrow * 1000:.0f}",
            f"{full_arrow / (floor + b):.2f}",
            f"{floor_json * 1000:.0f}",
            f"{full_json * 1000:.0f}",
            f"{full_json / (floor_json + b_json):.2f}",
        ))  # fmt: skip

    print("(a) floor and (c) full requests, medians in ms (goal for Arrow: ratio <= 1.3)")
    print(f"    {'server':8} {'(a) Arrow':>10} {'(c) Arrow':>10} {'(c)/((a)+(b))':>14} "
          f"{'(a) JSON':>10} {'(c) JSON':>10} {'(c)/((a)+(b))':>14}")  # fmt: skip
    for r in rows_out:
        print(f"    {r[0]:8} {r[1]:>10} {r[2]:>10} {r[3]:>14} {r[4]:>10} {r[5]:>10} {r[6]:>14}")
    print(
        "\n(d) small requests at concurrency 32 (goal for p = 20 variables: >= 0.35 x bare and"
        " >= 0.5 x plain litestar)"
    )
    print(f"    {'':28} {'req/s':>8} {'p50 ms':>8} {'p99 ms':>8} {'x bare':>8} {'x plain':>8}")
    for name, (per_s, p50, p99) in rates.items():
        server = name.split()[0]
        bare_rate = rates[f"{server} bare 1 KB"][0]
        plain_rate = rates[f"{server} plain litestar 1 KB"][0]
        print(
            f"    {name:28} {per_s:8.0f} {p50:8.1f} {p99:8.1f} {per_s / bare_rate:8.2f}"
            f" {per_s / plain_rate:8.2f}"
        )
    for server, per_s in healthz.items():
        bare_rate = rates[f"{server} bare 1 KB"][0]
        plain_rate = rates[f"{server} plain litestar 1 KB"][0]
        print(
            f"    {server + ' GET /healthz':28} {per_s:8.0f} {'':8} {'':8}"
            f" {per_s / bare_rate:8.2f} {per_s / plain_rate:8.2f}"
        )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
