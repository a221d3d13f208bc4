"""Serve every kind of request once inside the image build, and fail the build on a wrong answer.

The runtime stage of deploy/Containerfile installs its packages without bytecode, prunes what
nothing imports at run time, then runs this script with bytecode writing on. It starts the
service the way the start command does (uvicorn with the h11 parser, the app from
``knotwork.__main__:worker_app``) on a free loopback port, sends every kind of request (JSON, Arrow
IPC stream and file, Parquet, a batch, a report from rows and from Parquet, the docs page and each
asset it links, the OpenAPI document, metrics, and the error paths), checks each answer and stops
the server.

So every module the service loads gets its ``.pyc`` now (the read-only root filesystem allows
none at run time), and nothing else does: a module that only a rare path imports is compiled in
memory when that happens. And a pruning mistake (a removed file that a route needs) makes a
request fail here, and with it the build. The client side uses the standard library only, so
no test tool adds bytecode of its own. The data are generated here.
"""

from __future__ import annotations

import io
import json
import os
import re
import socket
import sys
import threading
import urllib.error
import urllib.request

TOKEN = "image-warm-up-token-not-used-at-run-time"
os.environ.update(KNOTWORK_TOKENS=TOKEN, KNOTWORK_LOG_LEVEL="warning", KNOTWORK_WORKERS="1")
os.environ.pop("PROMETHEUS_MULTIPROC_DIR", None)

import numpy as np  # noqa: E402
import pyarrow as pa  # noqa: E402
import pyarrow.ipc  # noqa: E402
import pyarrow.parquet as pq  # noqa: E402
import uvicorn  # noqa: E402

# The supervisor of several workers (KNOTWORK_WORKERS > 1 in the image's usual set-up).
import uvicorn.supervisors.multiprocess  # noqa: E402

JSON = "application/json"
PROBLEM = "application/problem+json"
PARQUET_MEDIA = "application/vnd.apache.parquet"
ROWS = {"kind": "table", "columns": {"a": [1, 2, 3, 4, 6], "b": [2, 1, 4, 3, 5]}}
CORRELATION = {
    "kind": "correlation",
    "names": ["a", "b", "c"],
    "matrix": [[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]],
    "n": 50,
}
MOMENTS = {
    "kind": "moments",
    "names": ["a", "b"],
    "n": 10,
    "means": [0, 1],
    "covariance": [[1, 0.2], [0.2, 2]],
}


def _tables() -> dict[str, tuple[str, bytes]]:
    """One generated table (numbers, integers, a categorical) in each binary format."""
    rng = np.random.default_rng(7)
    a, b, e = rng.normal(size=(3, 40))
    table = pa.table(
        {
            "a": a,
            "b": b,
            "c": a + 0.5 * b + 0.2 * e,
            "k": pa.array(rng.integers(0, 5, size=40), type=pa.int32()),
            "g": pa.array(["x", "y", "z", "w"] * 10).dictionary_encode(),
        }
    )
    stream, file, parquet = io.BytesIO(), io.BytesIO(), io.BytesIO()
    with pa.ipc.new_stream(stream, table.schema) as writer:
        writer.write_table(table)
    with pa.ipc.new_file(file, table.schema) as writer:
        writer.write_table(table)
    pq.write_table(table, parquet)
    return {
        "arrow stream": ("application/vnd.apache.arrow.stream", stream.getvalue()),
        "arrow file": ("application/vnd.apache.arrow.file", file.getvalue()),
        "parquet": ("application/vnd.apache.parquet", parquet.getvalue()),
    }


class Client:
    def __init__(self, base: str) -> None:
        self.base = base

    def call(self, name, path, status, media, body=None, kind=JSON, token=True) -> bytes:
        """Send one request; the answer must have this status and media type."""
        headers = {"Content-Type": kind} if body is not None else {}
        if token:
            headers["Authorization"] = f"Bearer {TOKEN}"
        if isinstance(body, dict):
            body = json.dumps(body).encode()
        request = urllib.request.Request(self.base + path, data=body, headers=headers)
        try:
            with urllib.request.urlopen(request, timeout=60) as response:
                got, content, data = response.status, response.headers, response.read()
        except urllib.error.HTTPError as error:
            got, content, data = error.code, error.headers, error.read()
        got_media = content.get("Content-Type", "")
        if got != status or not got_media.startswith(media):
            raise AssertionError(
                f"{name}: {got} {got_media}, expected {status} {media}: {data[:400]!r}"
            )
        print(f"image warm-up: {name}: {got} ({len(data)} bytes)", flush=True)
        return data

    def run(self) -> None:
        self.call("liveness", "/healthz", 200, JSON)
        self.call("readiness", "/readyz", 200, JSON)
        self.call("metrics", "/metrics", 200, "text/plain")
        self.call("openapi", "/openapi.json", 200, "application/vnd.oai.openapi+json")
        page = self.call("docs page", "/docs", 200, "text/html").decode()
        links = re.findall(r'(?:src|href)="([^"]+)"', page)
        if len(links) < 3 or not all(link.startswith("/") for link in links):
            raise AssertionError(f"the docs page links {links}: expected its own assets")
        for link in links:
            if len(self.call(f"docs asset {link}", link, 200, "")) < 1000:
                raise AssertionError(f"{link} is nearly empty")
        for name, item in (("rows", ROWS), ("correlation", CORRELATION), ("moments", MOMENTS)):
            self.call(f"assess {name}", "/v1/assess", 200, JSON, {"input": item})
        for name, (media, body) in _tables().items():
            self.call(f"assess {name}", "/v1/assess?response=c", 200, JSON, body, kind=media)
        # One report as JSON rows and one from Parquet: matplotlib and the SVG backend load.
        for name, body, kind, path in (
            ("report rows", {"input": ROWS}, JSON, "/v1/report"),
            ("report parquet", _tables()["parquet"][1], PARQUET_MEDIA, "/v1/report?response=c"),
        ):
            page = self.call(name, path, 200, "text/html", body, kind=kind).decode()
            if page.count("<svg") < 3 or "://" in page or "<script" in page:
                raise AssertionError(f"{name}: not a self-contained page with its charts")
        too_few = {"input": {**CORRELATION, "n": 3}}
        self.call("report of unusable input", "/v1/report", 422, PROBLEM, too_few)
        batch = {"items": [{"input": CORRELATION}, {"input": {**CORRELATION, "n": 2}}]}
        self.call("batch", "/v1/assess/batch", 200, JSON, batch)
        # The error paths: no token, a malformed body, unusable input, a broken table.
        self.call("no token", "/v1/assess", 401, PROBLEM, {"input": ROWS}, token=False)
        self.call("malformed", "/v1/assess", 400, PROBLEM, b'{"input": {')
        few = {"input": {**CORRELATION, "n": 3}}
        self.call("too few observations", "/v1/assess", 422, PROBLEM, few)
        broken = b"PAR1 not a table PAR1"
        self.call("broken parquet", "/v1/assess", 400, PROBLEM, broken, kind=PARQUET_MEDIA)
        self.call("unknown route", "/nowhere", 404, PROBLEM)


def main() -> int:
    sock = socket.socket()
    sock.bind(("127.0.0.1", 0))
    port = sock.getsockname()[1]
    # The start command's server settings (knotwork.__main__), on a free loopback port.
    config = uvicorn.Config(
        "knotwork.__main__:worker_app",
        factory=True,
        http="h11",
        log_config=None,
        access_log=False,
        server_header=False,
    )
    server = uvicorn.Server(config)
    failures: list[str] = []

    def drive() -> None:
        try:
            for _ in range(600):
                if server.started or server.should_exit:
                    break
                threading.Event().wait(0.1)
            if not server.started:
                raise AssertionError("the server did not start within 60 s")
            Client(f"http://127.0.0.1:{port}").run()
        except Exception as exc:  # every failure ends the build, with its reason
            failures.append(f"{type(exc).__name__}: {exc}")
        finally:
            server.should_exit = True

    driver = threading.Thread(target=drive, daemon=True)
    driver.start()
    server.run(sockets=[sock])
    driver.join(timeout=10)
    if failures or driver.is_alive():
        print(
            f"image warm-up: FAILED: {failures or ['the requests did not finish']}", file=sys.stderr
        )
        return 1
    print("image warm-up: every request answered as expected", flush=True)
    return 0


if __name__ == "__main__":
    sys.exit(main())
