"""The server process tree seen from /proc: its processes, resident and peak memory; and a
time limit for a block of test code."""

from __future__ import annotations

import os
import time
from collections.abc import Iterator
from contextlib import contextmanager

# --------------------------------------------------------------------------------------------
# Memory of the server process tree


def _children(pid: int) -> list[int]:
    kids = []
    for entry in os.listdir("/proc"):
        if not entry.isdigit():
            continue
        try:
            with open(f"/proc/{entry}/stat", encoding="ascii", errors="replace") as fh:
                stat = fh.read()
        except OSError:
            continue
        # The command name is in parentheses and may hold spaces: split after the last ")".
        fields = stat.rsplit(")", 1)[-1].split()
        if len(fields) > 1 and int(fields[1]) == pid:
            kids.append(int(entry))
    return kids


def process_tree(pid: int) -> list[int]:
    """``pid`` and all its descendants that are alive now."""
    out, todo = [], [pid]
    while todo:
        current = todo.pop()
        out.append(current)
        todo.extend(_children(current))
    return out


def _status_kib(pid: int, key: str) -> int:
    try:
        with open(f"/proc/{pid}/status", encoding="ascii") as fh:
            for line in fh:
                if line.startswith(key + ":"):
                    return int(line.split()[1])
    except OSError:
        return 0
    return 0


def reset_peak(pid: int) -> None:
    """Reset the resident high-water mark of ``pid`` and its descendants to their current
    resident size (writing 5 to /proc/<pid>/clear_refs, Linux 4.0 and later)."""
    for p in process_tree(pid):
        try:
            with open(f"/proc/{p}/clear_refs", "w", encoding="ascii") as fh:
                fh.write("5")
        except OSError:
            pass


def peak_memory_kib(pid: int) -> int:
    """Sum of the resident high-water marks (VmHWM) of ``pid`` and its live descendants."""
    return sum(_status_kib(p, "VmHWM") for p in process_tree(pid))


def resident_kib(pid: int) -> int:
    """Sum of the resident sizes (VmRSS) of ``pid`` and its live descendants, now."""
    return sum(_status_kib(p, "VmRSS") for p in process_tree(pid))


@contextmanager
def time_limit(seconds: float) -> Iterator[None]:
    """Fail the block (with AssertionError) if it takes longer than ``seconds`` (checked at
    exit: the block itself must be bounded, this states the bound)."""
    started = time.monotonic()
    yield
    took = time.monotonic() - started
    assert took < seconds, f"took {took:.1f} s, more than the bound of {seconds} s"
