"""Requests released at the same moment from a thread pool, for load and shutdown runs."""

from __future__ import annotations

import threading
from collections.abc import Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor

import httpx


def post_together(
    pool: ThreadPoolExecutor,
    url: str,
    bodies: Sequence[bytes],
    headers: Mapping[str, str],
    *,
    timeout: float,
    wait: float,
) -> tuple[list[object], list[Future[None]]]:
    """POST every body from its own pool thread, all released at once; return at once.

    ``results[i]`` becomes the response to ``bodies[i]``, or the httpx error it raised; the
    futures say when each is in. ``wait`` bounds how long the threads wait for one another.
    """
    results: list[object] = [None] * len(bodies)
    start = threading.Barrier(len(bodies) + 1)

    def send(index: int) -> None:
        start.wait(wait)
        try:
            results[index] = httpx.post(
                url, content=bodies[index], headers=dict(headers), timeout=timeout
            )
        except httpx.HTTPError as exc:
            results[index] = exc

    futures = [pool.submit(send, i) for i in range(len(bodies))]
    start.wait(wait)
    return results, futures
