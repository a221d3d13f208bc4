"""Abuse: inputs built to exhaust the service, each met by a limit with a clear answer.

One server with small limits (below) is started for the module. Each case resets the server's
resident high-water mark (``/proc/<pid>/clear_refs``), sends its request, and checks:

- the answer: the status and problem type of the limit that applies, or, for what an HTTP
  server refuses before the application sees it, a refusal or a closed connection;
- the time: an upper bound with generous slack (the machine is shared), never a lower one;
- the memory: the server's peak resident size grew by at most :data:`BASE_GROWTH` plus twice
  the bytes sent (a request may hold its body and one parsed copy of it, no more);
- the service still answers a normal request afterwards.
"""

from __future__ import annotations

import gzip
import io
import json
import os
import socket
import time
import zlib
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from pathlib import Path

import httpx
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from knotwork_harness import JSON
from knotwork_harness.batch_models import correlation_body
from knotwork_harness.live_server import Server, serve
from knotwork_harness.processes import peak_memory_kib, reset_peak, resident_kib
from knotwork_harness.raw_http import RawAnswer, raw_exchange

MAX_BODY = 16 * 1024 * 1024
LIMITS = {
    "KNOTWORK_MAX_BODY_BYTES": str(MAX_BODY),
    "KNOTWORK_MAX_CELLS": "200000",
    "KNOTWORK_MAX_COLUMNS": "200",
    "KNOTWORK_MAX_BATCH_ITEMS": "20",
    "KNOTWORK_REQUEST_TIMEOUT_S": "2",
    "KNOTWORK_CONCURRENCY": "2",
    "KNOTWORK_QUEUE": "4",
}
#: Growth of the peak resident size any one request may cause beyond twice its size.
BASE_GROWTH = 48 * 1024 * 1024
PROBLEM = "https://knotwork.example/problems/"
ARROW_STREAM = "application/vnd.apache.arrow.stream"
ARROW_FILE = "application/vnd.apache.arrow.file"
PARQUET = "application/vnd.apache.parquet"


#: Each measured case (test, seconds, peak growth in MiB), written out when
#: ``KNOTWORK_ABUSE_REPORT`` names a file (for the figures in the notes).
MEASURED: list[tuple[str, float, float]] = []


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    with serve(tmp_path_factory.mktemp("abuse"), LIMITS) as running:
        yield running
    report = os.environ.get("KNOTWORK_ABUSE_REPORT")
    if report:
        Path(report).write_text(json.dumps(MEASURED, indent=1) + "\n", encoding="utf-8")


def _port(server: Server) -> int:
    return int(server.url.rsplit(":", 1)[1])


@dataclass
class Measured:
    seconds: float
    growth: int  # bytes

    def within(self, sent: int) -> None:
        bound = BASE_GROWTH + 2 * sent
        assert self.growth <= bound, (
            f"peak memory grew by {self.growth / 2**20:.0f} MiB for {sent / 2**20:.1f} MiB "
            f"sent; the bound is {bound / 2**20:.0f} MiB"
        )


def measure(server: Server, action: Callable[[], object]) -> tuple[object, Measured]:
    pid = server.process.pid
    reset_peak(pid)
    before = resident_kib(pid)
    started = time.monotonic()
    result = action()
    took = time.monotonic() - started
    growth = max(0, peak_memory_kib(pid) - before) * 1024
    MEASURED.append((os.environ.get("PYTEST_CURRENT_TEST", "?"), took, growth / 2**20))
    return result, Measured(took, growth)


def still_serves(server: Server) -> None:
    body = correlation_body(4, 30, seed=1, sections=["variables"])
    response = httpx.post(server.url + "/v1/assess", json=body, timeout=30)
    assert response.status_code == 200, response.text


def problem_of(answer: RawAnswer | httpx.Response) -> dict:
    if isinstance(answer, RawAnswer):
        assert (answer.header("content-type") or "").startswith("application/problem+json")
        return json.loads(answer.body)
    assert answer.headers["content-type"].startswith("application/problem+json")
    return answer.json()


# --- bodies too large, too slow ------------------------------------------------------------


def test_a_huge_content_length_is_refused_before_reading(server: Server) -> None:
    head = (
        b"POST /v1/assess HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
        b"Content-Length: 10000000000\r\n\r\n"
    )
    # Only the head is sent: the answer comes without waiting for a byte of the body.
    answer, cost = measure(server, lambda: raw_exchange(_port(server), head, timeout=10))
    assert answer.status == 413
    assert problem_of(answer)["type"] == PROBLEM + "body-too-large"
    assert cost.seconds < 5
    cost.within(len(head))
    still_serves(server)


def test_a_chunked_body_is_cut_off_at_the_limit(server: Server) -> None:
    head = (
        b"POST /v1/assess HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
        b"Transfer-Encoding: chunked\r\n\r\n"
    )
    piece = b"[" * 65536
    chunk = b"%x\r\n%s\r\n" % (len(piece), piece)
    count = 2 * MAX_BODY // len(piece)  # twice the limit, if nobody stopped us
    answer, cost = measure(
        server, lambda: raw_exchange(_port(server), head, [chunk] * count, timeout=30)
    )
    assert answer.status == 413
    assert problem_of(answer)["type"] == PROBLEM + "body-too-large"
    cost.within(MAX_BODY)
    still_serves(server)


def test_a_trickled_body_is_cut_off_by_the_read_time_limit(server: Server) -> None:
    head = (
        b"POST /v1/assess HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
        b"Content-Length: 100000\r\n\r\n"
    )
    # Ten bytes every 0.1 s keeps the connection busy for 1000 s if nothing cuts it off;
    # the read limit (the request time limit, 2 s) counts from the start, not between bytes.
    answer, cost = measure(
        server,
        lambda: raw_exchange(_port(server), head, [b'{"input":0'] * 10000, pause=0.1, timeout=30),
    )
    assert answer.status == 408
    doc = problem_of(answer)
    assert doc["type"] == PROBLEM + "body-timeout"
    assert "2 s" in doc["detail"]
    assert (answer.header("connection") or "").lower() == "close"
    assert cost.seconds < 2 + 10
    cost.within(100_000)
    still_serves(server)


def test_a_trickled_request_head_is_cut_off(server: Server) -> None:
    head = b"GET /healthz HTTP/1.1\r\nHost: x\r\n"
    lines = [b"X-Slow-%d: v\r\n" % i for i in range(1000)]
    # The bound: the request time limit (2 s) plus slack; the trickle would last 200 s.
    started = time.monotonic()
    answer = raw_exchange(_port(server), head, lines, pause=0.2, timeout=8)
    assert answer.status == 408, "still open after 8 s"
    doc = problem_of(answer)
    assert doc["type"] == PROBLEM + "head-timeout"
    assert "2 s" in doc["detail"]
    assert time.monotonic() - started < 2 + 3
    still_serves(server)


def test_a_silent_connection_is_closed(server: Server) -> None:
    # A connection that never sends a byte gets the same limit (uvicorn alone keeps it open).
    started = time.monotonic()
    with socket.create_connection(("127.0.0.1", _port(server)), timeout=8) as sock:
        reply = _read_response(sock)
    assert reply.startswith(b"HTTP/1.1 408"), reply[:60]
    assert b'"type":"https://knotwork.example/problems/head-timeout"' in reply.replace(b" ", b"")
    assert time.monotonic() - started < 2 + 3
    still_serves(server)


def _read_response(sock: socket.socket) -> bytes:
    """One whole response (head and Content-Length body) from a raw socket."""
    data = b""
    while b"\r\n\r\n" not in data:
        chunk = sock.recv(4096)
        if not chunk:
            return data
        data += chunk
    head, _, body = data.partition(b"\r\n\r\n")
    length = 0
    for line in head.split(b"\r\n")[1:]:
        name, _, value = line.partition(b":")
        if name.strip().lower() == b"content-length":
            length = int(value)
    while len(body) < length:
        chunk = sock.recv(4096)
        if not chunk:
            break
        body += chunk
    return head + b"\r\n\r\n" + body


def test_a_kept_alive_connection_limits_each_head(server: Server) -> None:
    # The limit runs again from the first byte of the next head, not from the first request.
    with socket.create_connection(("127.0.0.1", _port(server)), timeout=8) as sock:
        for _ in range(3):
            time.sleep(1.0)  # under the keep-alive idle limit, and the heads' time limit too
            sock.sendall(b"GET /healthz HTTP/1.1\r\nHost: x\r\n\r\n")
            reply = _read_response(sock)
            assert reply.startswith(b"HTTP/1.1 200"), reply[:60]
        sock.sendall(b"GET /healthz HTTP/1.1\r\n")
        started = time.monotonic()
        reply = _read_response(sock)
    assert reply.startswith(b"HTTP/1.1 408"), reply[:60]
    assert 1.0 < time.monotonic() - started < 2 + 3


# --- compressed bodies ----------------------------------------------------------------------


@pytest.mark.parametrize("encoding", ["gzip", "deflate", "br"])
def test_compressed_requests_are_not_inflated(server: Server, encoding: str) -> None:
    # 100 MB of spaces squeezed into about 100 KB: a service that inflated request bodies
    # would hold 100 MB; this one does not honour Content-Encoding and reads the bytes as
    # they are, which are not JSON.
    raw = b" " * 100_000_000
    bomb = gzip.compress(raw, 9) if encoding == "gzip" else zlib.compress(raw, 9)
    headers = {"Content-Type": JSON, "Content-Encoding": encoding}
    response, cost = measure(
        server,
        lambda: httpx.post(server.url + "/v1/assess", content=bomb, headers=headers, timeout=30),
    )
    assert response.status_code in (400, 415), response.text
    assert problem_of(response)["type"] in (
        PROBLEM + "malformed-body",
        PROBLEM + "unsupported-media-type",
    )
    cost.within(len(bomb))
    still_serves(server)


def _zeros_arrow(rows: int, batch: int, media: str) -> bytes:
    """Two columns of ``rows`` numbers (zeros and ones) in zstd-compressed Arrow IPC batches."""
    sink = io.BytesIO()
    schema = pa.schema([("a", pa.float64()), ("b", pa.float64())])
    options = pa.ipc.IpcWriteOptions(compression="zstd")
    part = pa.table({"a": np.zeros(batch), "b": np.ones(batch)}, schema=schema)
    make = pa.ipc.new_stream if media == ARROW_STREAM else pa.ipc.new_file
    with make(sink, schema, options=options) as writer:
        for _ in range(rows // batch):
            writer.write_table(part, max_chunksize=batch)
    return sink.getvalue()


def _zeros_parquet(rows: int, batch: int) -> bytes:
    sink = io.BytesIO()
    part = pa.table({"a": np.zeros(batch), "b": np.ones(batch)})
    with pq.ParquetWriter(sink, part.schema, compression="zstd") as writer:
        for _ in range(rows // batch):
            writer.write_table(part)
    return sink.getvalue()


ROWS = 10_000_000  # 2 columns: 160 MB once decoded, against a limit of 200,000 numbers


@pytest.mark.parametrize(
    ("media", "batch"),
    [
        pytest.param(ARROW_STREAM, 1_000_000, id="arrow-stream-batches"),
        pytest.param(ARROW_STREAM, ROWS, id="arrow-stream-one-batch"),
        pytest.param(ARROW_FILE, ROWS, id="arrow-file-one-batch"),
        pytest.param(PARQUET, 1_000_000, id="parquet-row-groups"),
        pytest.param(PARQUET, ROWS, id="parquet-one-row-group"),
    ],
)
def test_compressed_tables_are_refused_before_inflating(
    server: Server, media: str, batch: int
) -> None:
    body = _zeros_parquet(ROWS, batch) if media == PARQUET else _zeros_arrow(ROWS, batch, media)
    assert len(body) < 1_000_000
    headers = {"Content-Type": media}
    response, cost = measure(
        server,
        lambda: httpx.post(server.url + "/v1/assess", content=body, headers=headers, timeout=60),
    )
    assert response.status_code == 413, response.text
    assert problem_of(response)["type"] == PROBLEM + "too-many-cells"
    try:
        cost.within(len(body))
    finally:
        still_serves(server)


# --- shapes built to hurt -------------------------------------------------------------------

_DEPTH = 100_000


def _nested(prefix: bytes, suffix: bytes) -> bytes:
    return prefix + b"[" * _DEPTH + b"]" * _DEPTH + suffix


_NESTING = {
    "input": ("/v1/assess", _nested(b'{"input":', b"}")),
    "options": ("/v1/assess", _nested(b'{"input":{"kind":"table","columns":{}},"options":', b"}")),
    "column": (
        "/v1/assess",
        _nested(b'{"input":{"kind":"table","columns":{"a":', b"}}}"),
    ),
    "terms": (
        "/v1/assess",
        _nested(
            b'{"input":{"kind":"correlation","names":["a"],"matrix":[[1]],"n":5,"terms":{"t":',
            b"}}}",
        ),
    ),
    "batch item": ("/v1/assess/batch", _nested(b'{"items":[', b"]}")),
}


@pytest.mark.parametrize("where", list(_NESTING))
def test_deeply_nested_json_is_a_client_error(server: Server, where: str) -> None:
    path, body = _NESTING[where]
    response, cost = measure(
        server,
        lambda: httpx.post(
            server.url + path, content=body, headers={"Content-Type": JSON}, timeout=30
        ),
    )
    assert response.status_code == 400, response.text
    assert problem_of(response)["type"] in (PROBLEM + "malformed-body", PROBLEM + "invalid-request")
    assert cost.seconds < 10
    cost.within(len(body))
    still_serves(server)


@pytest.mark.parametrize("kind", ["table", "correlation", "moments"])
def test_huge_p_with_tiny_n_is_refused_at_once(server: Server, kind: str) -> None:
    p = 200  # the column limit of this server
    names = [f"v{j}" for j in range(p)]
    if kind == "table":
        doc = {
            "kind": "table",
            "columns": {n: [1.0 * j, 2.0, 3.5 * j] for j, n in enumerate(names)},
        }
    elif kind == "correlation":
        doc = {"kind": "correlation", "names": names, "matrix": np.eye(p).tolist(), "n": 3}
    else:
        doc = {
            "kind": "moments",
            "names": names,
            "n": 3,
            "means": [0.0] * p,
            "covariance": np.eye(p).tolist(),
        }
    body = json.dumps({"input": doc}).encode()
    response, cost = measure(
        server,
        lambda: httpx.post(
            server.url + "/v1/assess", content=body, headers={"Content-Type": JSON}, timeout=30
        ),
    )
    assert response.status_code == 422, response.text
    doc_ = problem_of(response)
    assert doc_["type"] == PROBLEM + "too-few-data"
    assert "200" in doc_["detail"] and "3" in doc_["detail"]
    assert cost.seconds < 10
    cost.within(len(body))
    # One more column than the limit is refused before any numerics.
    wider = {"input": {"kind": "table", "columns": {f"w{j}": [1.0, 2.0] for j in range(p + 1)}}}
    response = httpx.post(server.url + "/v1/assess", json=wider, timeout=30)
    assert response.status_code == 413
    assert problem_of(response)["type"] == PROBLEM + "too-many-columns"


def test_a_few_more_items_than_allowed_are_refused(server: Server) -> None:
    items = [correlation_body(3, 20, seed=i, sections=["variables"]) for i in range(21)]
    response = httpx.post(server.url + "/v1/assess/batch", json={"items": items}, timeout=30)
    assert response.status_code == 413
    doc = problem_of(response)
    assert doc["type"] == PROBLEM + "too-many-items"
    assert doc["errors"][0]["pointer"] == "/items"


def test_millions_of_tiny_batch_items_are_refused_in_bounded_memory(server: Server) -> None:
    count = MAX_BODY // 2 - 16
    body = b'{"items":[' + b",".join([b"0"] * count) + b"]}"
    assert len(body) <= MAX_BODY
    response, cost = measure(
        server,
        lambda: httpx.post(
            server.url + "/v1/assess/batch",
            content=body,
            headers={"Content-Type": JSON},
            timeout=60,
        ),
    )
    assert response.status_code in (400, 413), response.text
    assert cost.seconds < 30
    try:
        cost.within(len(body))
    finally:
        still_serves(server)


def test_bodies_beyond_the_capacity_are_refused_before_they_are_read(server: Server) -> None:
    from concurrent.futures import ThreadPoolExecutor
    from threading import Barrier

    # 12 MB that cost nothing to decode (white space, then an empty document: a 400), so only
    # the bodies themselves take memory.
    body = b" " * 12_000_000 + b"{}"
    connections, capacity = 40, 6  # 2 slots + 4 queue places on this server
    start = Barrier(connections)

    def send(_: int) -> int:
        with httpx.Client(timeout=60) as client:
            start.wait(30)
            try:
                response = client.post(
                    server.url + "/v1/assess", content=body, headers={"Content-Type": JSON}
                )
            except httpx.HTTPError:
                return 0  # refused mid-body: the connection closed
            return response.status_code

    def flood() -> list[int]:
        with ThreadPoolExecutor(connections) as pool:
            return list(pool.map(send, range(connections)))

    statuses, cost = measure(server, flood)
    assert set(statuses) <= {0, 400, 408, 503}, statuses  # 408: too slow to arrive
    assert statuses.count(400) >= 1
    # Those admitted hold their body and its decoded copy; the others must not hold theirs.
    try:
        cost.within(capacity * len(body))
    finally:
        still_serves(server)


# --- header floods --------------------------------------------------------------------------


@pytest.mark.parametrize(
    "flood",
    [
        "a million header lines",
        "one 16 MB header",
        "a 48 MB request line",
    ],
)
def test_header_floods_are_refused_in_bounded_memory(server: Server, flood: str) -> None:
    if flood == "a million header lines":
        extra = b"".join(b"X-F%d: v\r\n" % i for i in range(1_000_000))
        head = b"GET /healthz HTTP/1.1\r\nHost: x\r\n" + extra + b"\r\n"
    elif flood == "one 16 MB header":
        head = b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: " + b"v" * MAX_BODY + b"\r\n\r\n"
    else:
        head = b"GET /healthz?" + b"q" * (3 * MAX_BODY) + b" HTTP/1.1\r\nHost: x\r\n\r\n"
    answer, cost = measure(server, lambda: raw_exchange(_port(server), head, timeout=30))
    # Refused: an error status (400 or 431) or the connection closed; never served.
    assert answer.status != 200, answer.head[:200]
    assert answer.status is None or answer.status in (400, 413, 414, 431)
    if answer.status == 400:  # from the server layer, but a problem document all the same
        assert problem_of(answer)["type"] == PROBLEM + "malformed-head"
    cost.within(64 * 1024)  # a head of 64 KiB is as much as a server needs to hold
    still_serves(server)


@pytest.mark.parametrize(
    ("head", "rest"),
    [
        (b"NOT A REQUEST LINE\r\n\r\n", []),
        (b"GET /healthz HTTP/1.1\r\nHost: x\r\nno colon here\r\n\r\n", []),
        # h11 refuses a head once more than 64 KiB of it wait unfinished (a head that arrives
        # whole in one read is parsed at once: the bound is 64 KiB plus one read).
        (b"GET /healthz HTTP/1.1\r\nHost: x\r\nX-Big: ", [b"v" * 16384] * 8),
    ],
    ids=["garbage request line", "header without a colon", "a header growing past 64 KiB"],
)
def test_unreadable_heads_get_a_problem_document(
    server: Server, head: bytes, rest: list[bytes]
) -> None:
    answer = raw_exchange(_port(server), head, rest, pause=0.02, timeout=10)
    assert answer.status == 400
    assert (answer.header("content-type") or "").startswith("application/problem+json")
    doc = problem_of(answer)
    assert doc["type"] == PROBLEM + "malformed-head"
    assert "64 KiB" in doc["detail"]
    still_serves(server)
