"""Admission control, off-loop computation, time limits and body reading.

CPU work (decoding and the core) runs in worker threads: numpy's linear algebra releases the
GIL, so ``concurrency`` threads compute in parallel while the event loop keeps answering. Two
limiters bound the work: ``running`` (the slots) and ``admitted`` (slots plus a short queue).
A request that finds ``admitted`` full is refused at once with 503 and ``Retry-After``; one
that outlives the time limit gets 503 too, but keeps its slot until its thread has really
finished, so the bound on CPU work holds even then.
"""

from __future__ import annotations

import asyncio
import threading
import time
from collections.abc import Callable
from typing import Any, TypeVar

import anyio
import anyio.to_thread
from litestar import Request
from litestar.exceptions.http_exceptions import RequestEntityTooLarge

from knotwork.core import stop_when

from ._context import current_request
from ._metrics import IN_FLIGHT, REJECTED
from ._problems import ApiError

__all__ = ["Expired", "WorkPool", "read_body"]

T = TypeVar("T")


class Expired(Exception):
    """The request's time limit passed before its work could start."""


class WorkPool:
    """Runs blocking work on a bounded set of threads with a bounded queue and a time limit."""

    def __init__(
        self, concurrency: int, queue: int, timeout_s: float, retry_after_s: int = 1
    ) -> None:
        self.concurrency = concurrency
        self.queue = queue
        self.timeout_s = timeout_s
        self.retry_after_s = retry_after_s
        self._running: anyio.CapacityLimiter | None = None
        self._admitted: anyio.CapacityLimiter | None = None
        self._tasks: set[asyncio.Task[Any]] = set()

    def reset(self) -> None:
        """Forget the limiters (they belong to an event loop); new ones are made on first use."""
        self._running = None
        self._admitted = None

    def _limiters(self) -> tuple[anyio.CapacityLimiter, anyio.CapacityLimiter]:
        if self._running is None or self._admitted is None:
            self._running = anyio.CapacityLimiter(self.concurrency)
            self._admitted = anyio.CapacityLimiter(self.concurrency + self.queue)
        return self._running, self._admitted

    @property
    def in_flight(self) -> int:
        """Admitted work not yet finished."""
        return 0 if self._admitted is None else int(self._admitted.borrowed_tokens)

    def _saturated(self) -> ApiError:
        REJECTED.labels(reason="saturated").inc()
        return ApiError(
            503,
            "saturated",
            f"all {self.concurrency} computing slots and {self.queue} queue places are taken; "
            f"retry after {self.retry_after_s} s",
            headers={"Retry-After": str(self.retry_after_s)},
        )

    def _too_slow(self, timeout_s: float) -> ApiError:
        REJECTED.labels(reason="time-limit").inc()
        return ApiError(
            503,
            "time-limit",
            f"the request needed more than the time limit of {timeout_s:g} s; send a smaller "
            "input, ask for fewer sections, or a summary instead of rows",
        )

    def admit(self) -> object:
        """Take a queue place now, before the body is read, or answer 503 at once.

        Taking it first bounds the memory of bodies in hand by the capacity (slots plus queue
        places, each at most the body limit) instead of by the number of connections; a
        client refused this way gets its 503 before sending the body, not after.
        """
        _, admitted = self._limiters()
        ticket = object()
        try:
            admitted.acquire_on_behalf_of_nowait(ticket)
        except anyio.WouldBlock:
            raise self._saturated() from None
        IN_FLIGHT.inc()
        return ticket

    def release(self, ticket: object) -> None:
        """Give back a queue place taken by :meth:`admit` (when the body could not be read)."""
        _, admitted = self._limiters()
        admitted.release_on_behalf_of(ticket)
        IN_FLIGHT.dec()

    async def run(
        self,
        fn: Callable[..., T],
        *args: Any,
        timeout_s: float | None = None,
        ticket: object | None = None,
    ) -> tuple[T, float, float]:
        """Run ``fn(*args)`` in a worker thread, on the queue place ``ticket`` (or a new one).

        Returns
        -------
        result, queue_s, compute_s
            The result, the time spent waiting for a slot and the time computing.

        Raises
        ------
        ApiError
            503 ``saturated`` (with Retry-After) when no queue place is free; 503
            ``time-limit`` when the work did not finish in time.
        """
        running, _ = self._limiters()
        limit = self.timeout_s if timeout_s is None else timeout_s
        borrower = self.admit() if ticket is None else ticket
        expired = threading.Event()
        submitted = time.perf_counter()
        spans = {"queue": 0.0, "compute": 0.0}

        def timed() -> T:
            started = time.perf_counter()
            spans["queue"] = started - submitted
            if expired.is_set():
                raise Expired
            try:
                # The core checks this between stages and row blocks, so work whose request
                # has timed out stops soon and gives its slot back.
                with stop_when(expired.is_set):
                    return fn(*args)
            finally:
                spans["compute"] = time.perf_counter() - started

        async def job() -> T:
            try:
                return await anyio.to_thread.run_sync(timed, limiter=running)
            finally:
                self.release(borrower)

        # The job is its own task, so a time-out here cannot cancel it: its thread keeps its
        # slot until it ends (at the core's next checkpoint), and the limiter stays true.
        task = asyncio.ensure_future(job())
        self._tasks.add(task)
        task.add_done_callback(self._forget)
        try:
            with anyio.fail_after(limit):
                result = await asyncio.shield(task)
        except TimeoutError:
            expired.set()
            raise self._too_slow(limit) from None
        except Expired:  # pragma: no cover - only when the time-out raced the start
            raise self._too_slow(limit) from None
        return result, spans["queue"], spans["compute"]

    def _forget(self, task: asyncio.Task[Any]) -> None:
        self._tasks.discard(task)
        if not task.cancelled():
            # Marks the exception as seen; the awaiting request has reported it already.
            task.exception()


async def read_body(request: Request[Any, Any, Any], limit: int, timeout_s: float) -> bytearray:
    """Read the whole body into one preallocated buffer, within ``timeout_s``.

    A ``Content-Length`` above ``limit`` is refused before a byte is read; a chunked body is
    cut off at the limit. Streaming into a buffer of the announced size avoids assembling the
    body from a list of chunks, which costs about as much as decoding it. The time spent is
    recorded for the access log (``read_ms``).

    Raises
    ------
    ApiError
        400 for a body that does not match its Content-Length, 408 when it does not arrive in
        time, 413 beyond the limit.
    """
    started = time.perf_counter()
    try:
        # asyncio's own timeout: one timer handle, a tenth of anyio's cancel scope per request.
        async with asyncio.timeout(timeout_s):
            return await _read_body(request, limit)
    except TimeoutError:
        raise ApiError(
            408,
            "body-timeout",
            f"the body did not arrive within {timeout_s:g} s; send it at once, or a smaller one",
            headers={"Connection": "close"},
        ) from None
    finally:
        info = current_request()
        if info is not None:
            info.timings["read_ms"] = (time.perf_counter() - started) * 1000


async def _read_body(request: Request[Any, Any, Any], limit: int) -> bytearray:
    too_large = ApiError(
        413,
        "body-too-large",
        f"the body is larger than the limit of {limit} bytes; send a summary (correlation or "
        "moments) computed on your side, or split the work",
    )
    announced = request.headers.get("content-length")
    if announced is not None:
        try:
            size = int(announced)
        except ValueError:
            raise ApiError(400, "malformed-body", "Content-Length is not a number") from None
        if size > limit:
            raise too_large
        buffer = bytearray(size)
        view = memoryview(buffer)
        position = 0
        try:
            async for chunk in request.stream():
                end = position + len(chunk)
                if end > size:
                    raise ApiError(400, "malformed-body", "the body is longer than Content-Length")
                view[position:end] = chunk
                position = end
        except RequestEntityTooLarge:
            raise too_large from None
        if position != size:
            raise ApiError(400, "malformed-body", "the body is shorter than Content-Length")
        return buffer
    parts = bytearray()
    try:
        async for chunk in request.stream():
            parts += chunk
            if len(parts) > limit:
                raise too_large
    except RequestEntityTooLarge:
        raise too_large from None
    return parts
