"""An HTTP/1.1 forwarder on a loopback port that drops, resets, truncates or answers 503 in
place of the service, at random but from a seed, and counts what it did."""

from __future__ import annotations

import asyncio
import hashlib
import socket
import struct
import threading
from collections import Counter
from dataclasses import dataclass, field

from knotwork_harness import HOST
from knotwork_harness.raw_http import answer_status, content_length

# --------------------------------------------------------------------------------------------
# A fault-injecting HTTP proxy


FAULTS = ("drop", "reset", "lost_answer", "truncate", "busy", "busy_retry_after")


@dataclass
class FaultPlan:
    """How often each fault strikes a request, and the cap on faults in a row per request.

    Attributes
    ----------
    seed
        Seed of the fault draws. A draw depends only on the seed, the request (path and body)
        and how many times that request came before, not on the order in which concurrent
        requests arrive, so a run is reproduced exactly.
    rates
        Probability of each fault (keys from :data:`FAULTS`): ``drop`` closes the connection
        without forwarding, ``reset`` does so with a TCP reset, ``lost_answer`` forwards the
        request and closes before answering (the service did the work, the client never hears
        of it), ``truncate`` forwards and sends half the answer, ``busy`` answers 503 without
        Retry-After, ``busy_retry_after`` answers 503 with ``Retry-After: 1``.
    max_in_a_row
        A request that has met this many faults in a row passes: a client with more attempts
        than this must get through, so a lost result is the client's fault, not bad luck.
    """

    seed: int = 20261201
    rates: dict[str, float] = field(
        default_factory=lambda: {
            "drop": 0.08,
            "reset": 0.05,
            "lost_answer": 0.08,
            "truncate": 0.05,
            "busy": 0.06,
            "busy_retry_after": 0.03,
        }
    )
    max_in_a_row: int = 3

    def draw(self, key: bytes, attempt: int) -> str | None:
        digest = hashlib.sha256(b"%d:%d:" % (self.seed, attempt) + key).digest()
        u = int.from_bytes(digest[:8], "big") / 2.0**64
        edge = 0.0
        for kind in FAULTS:
            edge += self.rates.get(kind, 0.0)
            if u < edge:
                return kind
        return None


@dataclass
class ProxyCounts:
    """What the proxy saw and did."""

    requests: int = 0
    forwarded: int = 0
    faults: Counter[str] = field(default_factory=Counter)
    statuses: Counter[int] = field(default_factory=Counter)
    distinct: int = 0


class FaultProxy:
    """An HTTP/1.1 forwarder with injected faults, running its own event loop in a thread.

    Requests are read whole (head and Content-Length body) and sent upstream one per
    connection; the answer's ``Connection: close`` is removed so that the client keeps its
    connection, which the proxy may then break.
    """

    def __init__(self, upstream: str, plan: FaultPlan | None = None) -> None:
        host, _, port = upstream.removeprefix("http://").partition(":")
        assert host == HOST, "the proxy forwards to loopback only"
        self.upstream = (host, int(port))
        self.plan = plan or FaultPlan(rates={})
        self.counts = ProxyCounts()
        self._attempts: dict[bytes, int] = {}
        self._in_a_row: dict[bytes, int] = {}
        self._lock = threading.Lock()
        self._loop: asyncio.AbstractEventLoop | None = None
        self._stopped: asyncio.Event
        self._writers: set[asyncio.StreamWriter] = set()
        self._thread: threading.Thread | None = None
        self.port = 0

    @property
    def url(self) -> str:
        return f"http://{HOST}:{self.port}"

    def start(self) -> FaultProxy:
        ready = threading.Event()
        self._thread = threading.Thread(
            target=lambda: asyncio.run(self._run(ready)), name="fault-proxy", daemon=True
        )
        self._thread.start()
        if not ready.wait(10):
            raise RuntimeError("the proxy did not start")
        return self

    async def _run(self, ready: threading.Event) -> None:
        self._loop = asyncio.get_running_loop()
        self._stopped = asyncio.Event()
        server = await asyncio.start_server(self._serve, HOST, 0, limit=1 << 16)
        self.port = server.sockets[0].getsockname()[1]
        ready.set()
        async with server:
            await self._stopped.wait()
            for writer in list(self._writers):
                writer.close()

    def stop(self) -> None:
        if self._loop is not None and self._thread is not None:
            self._loop.call_soon_threadsafe(self._stopped.set)
            self._thread.join(10)

    def __enter__(self) -> FaultProxy:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def _decide(self, key: bytes) -> str | None:
        with self._lock:
            self.counts.requests += 1
            attempt = self._attempts.get(key, 0)
            self._attempts[key] = attempt + 1
            self.counts.distinct = len(self._attempts)
            fault = None
            if self._in_a_row.get(key, 0) < self.plan.max_in_a_row:
                fault = self.plan.draw(key, attempt)
            self._in_a_row[key] = self._in_a_row.get(key, 0) + 1 if fault else 0
            if fault:
                self.counts.faults[fault] += 1
            return fault

    async def _serve(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        self._writers.add(writer)
        try:
            while True:
                try:
                    head = await reader.readuntil(b"\r\n\r\n")
                except (asyncio.IncompleteReadError, asyncio.LimitOverrunError):
                    return
                length = content_length(head)
                body = await reader.readexactly(length) if length else b""
                request_line = head.split(b"\r\n", 1)[0]
                fault = self._decide(request_line + b"\n" + body)
                if fault in ("drop", "reset"):
                    if fault == "reset":
                        _abort(writer)
                    return
                if fault in ("busy", "busy_retry_after"):
                    writer.write(_busy(fault == "busy_retry_after"))
                    await writer.drain()
                    with self._lock:
                        self.counts.statuses[503] += 1
                    continue
                answer = await self._forward(_close_after(head), body)
                with self._lock:
                    self.counts.forwarded += 1
                if fault == "lost_answer":
                    return
                if fault == "truncate":
                    writer.write(answer[: max(1, len(answer) // 2)])
                    await writer.drain()
                    return
                with self._lock:
                    self.counts.statuses[answer_status(answer)] += 1
                writer.write(_keep_alive(answer))
                await writer.drain()
        except (ConnectionError, asyncio.IncompleteReadError):
            return
        finally:
            self._writers.discard(writer)
            writer.close()

    async def _forward(self, head: bytes, body: bytes) -> bytes:
        reader, writer = await asyncio.open_connection(*self.upstream)
        try:
            writer.write(head + body)
            await writer.drain()
            return await reader.read(-1)
        finally:
            writer.close()


def _close_after(head: bytes) -> bytes:
    lines = [
        line
        for line in head.rstrip(b"\r\n").split(b"\r\n")
        if line.partition(b":")[0].strip().lower() != b"connection"
    ]
    return b"\r\n".join([*lines, b"Connection: close"]) + b"\r\n\r\n"


def _keep_alive(answer: bytes) -> bytes:
    head, sep, rest = answer.partition(b"\r\n\r\n")
    lines = [
        line
        for line in head.split(b"\r\n")
        if line.partition(b":")[0].strip().lower() != b"connection"
    ]
    return b"\r\n".join(lines) + sep + rest


def _busy(retry_after: bool) -> bytes:
    body = b"busy (injected by the test proxy)"
    extra = b"Retry-After: 1\r\n" if retry_after else b""
    return (
        b"HTTP/1.1 503 Service Unavailable\r\nContent-Type: text/plain\r\n"
        + extra
        + b"Content-Length: %d\r\n\r\n" % len(body)
        + body
    )


def _abort(writer: asyncio.StreamWriter) -> None:
    sock = writer.get_extra_info("socket")
    if sock is not None:
        # SO_LINGER with a zero timeout: close() sends a TCP reset instead of a FIN.
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0))


# --------------------------------------------------------------------------------------------
# Raw HTTP exchanges
