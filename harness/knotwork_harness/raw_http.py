"""One hand-written HTTP request over a socket, bounded in time, for the cases an HTTP client
will not send (trickled bodies, floods of headers, lying lengths)."""

from __future__ import annotations

import socket
import time
from collections.abc import Iterable
from dataclasses import dataclass

from knotwork_harness import HOST


@dataclass
class RawAnswer:
    """A response read off a socket (or the lack of one)."""

    status: int | None
    head: bytes
    body: bytes
    seconds: float
    closed: bool

    def header(self, name: str) -> str | None:
        for line in self.head.split(b"\r\n")[1:]:
            key, _, value = line.partition(b":")
            if key.strip().lower() == name.lower().encode():
                return value.strip().decode("latin-1")
        return None


def raw_exchange(
    port: int,
    head: bytes,
    chunks: Iterable[bytes] = (),
    *,
    pause: float = 0.0,
    timeout: float = 20.0,
) -> RawAnswer:
    """Send ``head`` then each of ``chunks`` (``pause`` seconds apart) and read one answer.

    Stops sending as soon as the service answers or closes. The whole exchange is bounded by
    ``timeout`` seconds; the answer is read until its Content-Length or the end of the
    connection.
    """
    started = time.monotonic()
    deadline = started + timeout
    received = b""
    closed = False
    with socket.create_connection((HOST, port), timeout=timeout) as sock:
        try:
            sock.sendall(head)
        except OSError:
            # The service stopped reading (and may have answered): read what it said.
            closed = True
            chunks = ()
        for chunk in chunks:
            if time.monotonic() > deadline:
                break
            sock.settimeout(max(pause, 0.001))
            try:
                data = sock.recv(65536)
                if not data:
                    closed = True
                    break
                received += data
                break  # the service answered before the body was complete
            except TimeoutError:
                pass
            try:
                sock.sendall(chunk)
            except OSError:
                closed = True
                break
        while time.monotonic() < deadline:
            sock.settimeout(max(0.01, deadline - time.monotonic()))
            try:
                data = sock.recv(65536)
            except TimeoutError:
                break
            except OSError:
                closed = True
                break
            if not data:
                closed = True
                break
            received += data
            head_part, sep, body = received.partition(b"\r\n\r\n")
            if sep:
                length = content_length(head_part)
                if len(body) >= length:
                    break
    head_part, _, body = received.partition(b"\r\n\r\n")
    status = None
    if head_part.startswith(b"HTTP/"):
        status = answer_status(head_part)
    return RawAnswer(status, head_part, body, time.monotonic() - started, closed)


# --------------------------------------------------------------------------------------------
# Generated data (our own scenario: weekly figures of fictional ferry routes)


def content_length(head: bytes) -> int:
    for line in head.split(b"\r\n")[1:]:
        name, _, value = line.partition(b":")
        if name.strip().lower() == b"content-length":
            return int(value.strip())
    return 0


def answer_status(answer: bytes) -> int:
    try:
        return int(answer.split(b" ", 2)[1])
    except (IndexError, ValueError):
        return 0
