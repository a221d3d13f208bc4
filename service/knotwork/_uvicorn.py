"""uvicorn's h11 protocol with a time limit on every request head, and problem+json answers.

uvicorn limits nothing but the silence between requests on a kept-alive connection: a client
that opens a connection and sends nothing, or trickles header lines one at a time, holds the
connection (and a file descriptor) for as long as it likes. This protocol gives each head a
time limit, counted from the connection's opening or, on a kept-alive connection, from the
first byte of the next head; a head still incomplete then is answered 408 (problem+json) and
the connection is closed. Once a head is complete the request's own limits apply (the body's
read time limit, the computation's time limit).

A head that cannot be parsed (malformed, or over h11's size limit) gets a problem+json 400
too, where uvicorn would answer in plain text: every answer of the service is a problem
document, even those given before the application sees the request.

``python -m knotwork`` selects this protocol for uvicorn; the limit is the request time limit
(``KNOTWORK_REQUEST_TIMEOUT_S``), set when the worker builds its application.
"""

from __future__ import annotations

import asyncio
import uuid

import h11
from uvicorn.protocols.http.h11_impl import H11Protocol

from knotwork.api._problems import PROBLEM_MEDIA_TYPE, problem_bytes

__all__ = ["GuardedH11Protocol"]


class GuardedH11Protocol(H11Protocol):
    """:class:`uvicorn.protocols.http.h11_impl.H11Protocol` with a time limit per request head
    and problem+json answers for heads it cannot read.

    Attributes
    ----------
    head_timeout_s
        Seconds a request head may take to arrive (class-wide: one limit per process).
    """

    head_timeout_s: float = 30.0

    _head_timer: asyncio.TimerHandle | None = None

    def connection_made(self, transport: asyncio.Transport) -> None:  # type: ignore[override]
        super().connection_made(transport)
        self._arm_head_timer()

    def data_received(self, data: bytes) -> None:
        before = self.cycle
        if before is None or before.response_complete:
            self._arm_head_timer()  # bytes of a new head (a no-op when already armed)
        super().data_received(data)
        if self.cycle is not before:  # a head was complete: the request's own limits apply
            self._cancel_head_timer()

    def connection_lost(self, exc: Exception | None) -> None:
        self._cancel_head_timer()
        super().connection_lost(exc)

    def _arm_head_timer(self) -> None:
        if self._head_timer is None:
            self._head_timer = self.loop.call_later(self.head_timeout_s, self._head_too_slow)

    def _cancel_head_timer(self) -> None:
        if self._head_timer is not None:
            self._head_timer.cancel()
            self._head_timer = None

    def _head_too_slow(self) -> None:
        self._head_timer = None
        waiting = self.cycle is None or self.cycle.response_complete
        if not waiting or self.transport.is_closing():
            return
        # h11 cannot answer a request it has not parsed, so the answer is written as bytes.
        request_id = uuid.uuid4().hex
        body = problem_bytes(
            408,
            "head-timeout",
            f"the request head did not arrive within {self.head_timeout_s:g} s; send the "
            "request line and headers at once",
            request_id,
        )
        head = (
            "HTTP/1.1 408 Request Timeout\r\n"
            f"content-type: {PROBLEM_MEDIA_TYPE}\r\n"
            f"content-length: {len(body)}\r\n"
            f"x-request-id: {request_id}\r\n"
            "connection: close\r\n\r\n"
        ).encode()
        self.transport.write(head + body)
        self.transport.close()

    def send_400_response(self, msg: str) -> None:
        """The answer to a head h11 cannot parse, as a problem document (uvicorn: plain text)."""
        self._cancel_head_timer()
        limit = self.config.h11_max_incomplete_event_size
        size = f" or larger than {limit // 1024} KiB" if limit else ""
        request_id = uuid.uuid4().hex
        body = problem_bytes(
            400,
            "malformed-head",
            f"the request line or headers cannot be read: not valid HTTP/1.1{size}",
            request_id,
        )
        headers = [
            (b"content-type", PROBLEM_MEDIA_TYPE.encode()),
            (b"content-length", str(len(body)).encode()),
            (b"x-request-id", request_id.encode()),
            (b"connection", b"close"),
        ]
        event = h11.Response(status_code=400, headers=headers, reason=b"Bad Request")
        self.transport.write(self.conn.send(event) or b"")
        self.transport.write(self.conn.send(h11.Data(data=body)) or b"")
        self.transport.write(self.conn.send(h11.EndOfMessage()) or b"")
        self.transport.close()
