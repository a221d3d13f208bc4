"""Timing helper shared by the bench scripts (run as ``python bench/<script>.py``)."""

from __future__ import annotations

import time
from collections.abc import Callable


def best(fn: Callable[[], object], repeat: int) -> float:
    """The fastest of ``repeat`` runs of ``fn``, in seconds: the least disturbed by a noisy host."""
    out = float("inf")
    for _ in range(repeat):
        t = time.perf_counter()
        fn()
        out = min(out, time.perf_counter() - t)
    return out
