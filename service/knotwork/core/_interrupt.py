"""Cooperative interruption of long computations.

A thread cannot be stopped from outside in Python, so a caller that gives up on a computation
(a request past its time limit) would otherwise leave it running to the end, holding its
worker. The core calls :func:`checkpoint` between stages and between row blocks; inside
:func:`stop_when` it raises :class:`Interrupted` as soon as the caller's check says stop.
"""

from __future__ import annotations

import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager

_local = threading.local()


class Interrupted(RuntimeError):
    """The caller asked the computation to stop (it no longer wants the result)."""


@contextmanager
def stop_when(check: Callable[[], bool]) -> Iterator[None]:
    """Within this block, :func:`checkpoint` raises :class:`Interrupted` once ``check()``.

    The check is per thread, so concurrent computations each obey their own caller.
    """
    previous = getattr(_local, "check", None)
    _local.check = check
    try:
        yield
    finally:
        _local.check = previous


def checkpoint() -> None:
    """Raise :class:`Interrupted` if the current thread's caller has asked to stop."""
    check = getattr(_local, "check", None)
    if check is not None and check():
        raise Interrupted("the computation was stopped by its caller")
