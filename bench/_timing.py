"""Timing helper shared by the bench scripts (run as ``python bench/<script>.py``)."""

from __future__ import annotations

import argparse
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


def table_header(*columns: str) -> None:
    """Print a table's column heads (each a preformatted, right-aligned cell) and a rule."""
    header = " ".join(columns)
    print(header)
    print("-" * len(header))


def size_parser(description: str) -> argparse.ArgumentParser:
    """The options every p-scaling bench takes: --quick (p in {100, 300}), --threads, --repeat."""
    parser = argparse.ArgumentParser(description=description)
    parser.add_argument("--quick", action="store_true", help="p in {100, 300} only, fewer repeats")
    parser.add_argument("--threads", type=int, default=2, help="BLAS threads (default 2)")
    parser.add_argument("--repeat", type=int, default=None, help="best of this many runs")
    return parser


def sizes_and_repeat(
    args: argparse.Namespace, *, quick_repeat: int, full_repeat: int
) -> tuple[tuple[int, ...], int]:
    """The p to run and the runs per timing, from :func:`size_parser`'s options."""
    sizes = (100, 300) if args.quick else (100, 300, 1000)
    return sizes, args.repeat or (quick_repeat if args.quick else full_repeat)
