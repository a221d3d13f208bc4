"""Load benchmark: a mix of requests at and beyond saturation, with latency, 503s and memory.

Run: ``.venv/bin/python bench/bench_load.py [--quick] [--duration S] [--seed N] [--json PATH]``

Starts ``python -m knotwork`` on a free 127.0.0.1 port with the limits below (2 computing
slots, 4 queue places) and drives it from one asyncio process for a fixed time (60 s by
default, 12 s with ``--quick``), split into three phases of equal length with 2, 6 and 24
clients (connections) sending back to back: the slots busy, slots and queue full, and four
times the capacity. Each client picks, from a seed:

- 60 % small correlation requests (p = 20; removal, conditioning, VIF),
- 25 % mid-size tables (2,000 rows x 25 columns as JSON, about 1 MB, every section),
- 15 % bad requests (malformed JSON, a constant column, too many columns, a wrong content type,
  an unknown route), each with the status it must get.

Per phase it prints the throughput (answers per second, and right answers per second), p50 and
p99 latency of the successful answers by kind, the share of 503s, the count of any other 5xx
(must be 0), wrong answers (each 200 is compared byte for byte with the answer to the same
request sent alone before the load) and transport errors. It reads the server's peak resident
memory (VmHWM of the process and its children, /proc) over the whole run against the bound
that follows from the limits:

    baseline + concurrency x (max_body + 34 x max_cells + 270 x max_columns^2)
             + queue x max_body + connections x 64 KiB

(deploy/README.md, "Sizing": a JSON request costs its body plus about 34 bytes a number and
270 p^2; a body is read only once its request holds a slot or a queue place, so waiting
requests hold at most their bodies, and a refused one holds only its head, which the server
caps at 64 KiB). Exit status 1 if a 5xx other than 503, a wrong answer or a breach of the
bound occurs. The client shares the 2 cores with the server: the figures are what one shared
machine gives, not the service's ceiling.
"""

from __future__ import annotations

import argparse
import asyncio
import json
import random
import statistics
import tempfile
import time
from collections import Counter, defaultdict
from dataclasses import dataclass, field
from pathlib import Path

import httpx

from knotwork_harness.batch_models import correlation_body, table_body
from knotwork_harness.live_server import serve
from knotwork_harness.processes import peak_memory_kib, reset_peak, resident_kib

ROOT = Path(__file__).resolve().parents[1]

CONCURRENCY, QUEUE = 2, 4
MAX_BODY = 4 * 1024 * 1024
MAX_CELLS = 250_000
MAX_COLUMNS = 100
HEAD_LIMIT = 64 * 1024  # the request-head limit of python -m knotwork (uvicorn, h11)
ENV = {
    "KNOTWORK_CONCURRENCY": str(CONCURRENCY),
    "KNOTWORK_QUEUE": str(QUEUE),
    "KNOTWORK_MAX_BODY_BYTES": str(MAX_BODY),
    "KNOTWORK_MAX_CELLS": str(MAX_CELLS),
    "KNOTWORK_MAX_COLUMNS": str(MAX_COLUMNS),
    "KNOTWORK_MAX_BATCH_ITEMS": "20",
    "KNOTWORK_REQUEST_TIMEOUT_S": "10",
    "KNOTWORK_LOG_LEVEL": "warning",
}
PHASES = (("slots busy", 2), ("slots and queue full", 6), ("4x capacity", 24))
JSON = "application/json"


@dataclass(frozen=True)
class Kind:
    name: str
    path: str
    content_type: str
    bodies: tuple[bytes, ...]
    expected: int  # the status a request of this kind must get when not refused with 503
    weight: float


def kinds() -> list[Kind]:
    small = tuple(
        json.dumps(
            correlation_body(20, 200, seed=s, sections=["variables", "conditioning", "removal"])
        ).encode()
        for s in range(8)
    )
    mid = tuple(json.dumps(table_body(2000, 25, seed=s)).encode() for s in range(4))
    constant = {"input": {"kind": "table", "columns": {"a": [1.0] * 50, "b": list(range(50))}}}
    wide = {"input": {"kind": "table", "columns": {f"w{j}": [1.0, 2.0] for j in range(101)}}}
    return [
        Kind("small", "/v1/assess", JSON, small, 200, 0.60),
        Kind("mid", "/v1/assess", JSON, mid, 200, 0.25),
        Kind("malformed", "/v1/assess", JSON, (b'{"input": [1, 2',), 400, 0.03),
        Kind("constant", "/v1/assess", JSON, (json.dumps(constant).encode(),), 422, 0.03),
        Kind("too wide", "/v1/assess", JSON, (json.dumps(wide).encode(),), 413, 0.03),
        Kind("wrong type", "/v1/assess", "text/csv", (b"a,b\n1,2\n",), 415, 0.03),
        Kind("no route", "/v1/asess", JSON, (small[0],), 404, 0.03),
    ]


@dataclass
class Phase:
    label: str
    clients: int
    seconds: float = 0.0
    statuses: Counter[int] = field(default_factory=Counter)
    latencies: dict[str, list[float]] = field(default_factory=lambda: defaultdict(list))
    unexpected: Counter[str] = field(default_factory=Counter)
    wrong: int = 0
    transport_errors: int = 0

    @property
    def answers(self) -> int:
        return sum(self.statuses.values())


async def run_phase(
    url: str, phase: Phase, mix: list[Kind], reference: dict, seconds: float, seed: int
) -> None:
    weights = [k.weight for k in mix]
    end = time.monotonic() + seconds
    limits = httpx.Limits(max_connections=phase.clients, max_keepalive_connections=phase.clients)

    async with httpx.AsyncClient(base_url=url, timeout=60, limits=limits) as client:

        async def worker(index: int) -> None:
            rng = random.Random(seed * 1000 + index)
            for _ in range(1_000_000):  # bounded; the clock ends the phase long before
                if time.monotonic() >= end:
                    return
                kind = rng.choices(mix, weights)[0]
                body = rng.choice(kind.bodies)
                started = time.perf_counter()
                try:
                    response = await client.post(
                        kind.path, content=body, headers={"Content-Type": kind.content_type}
                    )
                except httpx.HTTPError:
                    phase.transport_errors += 1
                    continue
                took = time.perf_counter() - started
                status = response.status_code
                phase.statuses[status] += 1
                if status == kind.expected:
                    phase.latencies[kind.name].append(took)
                    if status == 200 and response.content != reference[body]:
                        phase.wrong += 1
                elif status != 503:
                    phase.unexpected[f"{kind.name}: {status}"] += 1

        started = time.monotonic()
        await asyncio.gather(*(worker(i) for i in range(phase.clients)))
        phase.seconds = time.monotonic() - started


def percentile(values: list[float], q: float) -> float:
    if not values:
        return float("nan")
    ordered = sorted(values)
    return ordered[min(len(ordered) - 1, int(q * len(ordered)))]


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="12 s instead of 60 s")
    parser.add_argument("--duration", type=float, default=None, help="total seconds")
    parser.add_argument("--seed", type=int, default=20261201)
    parser.add_argument("--json", type=Path, help="also write the figures to this file")
    args = parser.parse_args()
    total = args.duration or (12.0 if args.quick else 60.0)
    mix = kinds()
    phases = [Phase(label, clients) for label, clients in PHASES]
    with (
        tempfile.TemporaryDirectory(prefix="knotwork-bench-load-") as tmp,
        serve(Path(tmp), ENV) as server,
    ):
        pid = server.process.pid
        reference = {}
        for kind in mix:
            if kind.expected == 200:
                for body in kind.bodies:
                    answer = httpx.post(
                        server.url + kind.path,
                        content=body,
                        headers={"Content-Type": kind.content_type},
                        timeout=60,
                    )
                    assert answer.status_code == 200, answer.text
                    reference[body] = answer.content
        baseline = resident_kib(pid) * 1024
        reset_peak(pid)
        for index, phase in enumerate(phases):
            asyncio.run(
                run_phase(server.url, phase, mix, reference, total / len(phases), args.seed + index)
            )
        peak = peak_memory_kib(pid) * 1024

    per_request = MAX_BODY + 34 * MAX_CELLS + 270 * MAX_COLUMNS**2
    connections = max(p.clients for p in phases)
    bound = baseline + CONCURRENCY * per_request + QUEUE * MAX_BODY + connections * HEAD_LIMIT

    print(f"Load mix for {total:.0f} s against {CONCURRENCY} slots + {QUEUE} queue places")
    header = f"{'':34}" + "".join(f"{p.label:>22}" for p in phases)
    print(header)

    def row(label: str, values: list[str]) -> None:
        print(f"{label:34}" + "".join(f"{v:>22}" for v in values))

    row("clients (connections)", [str(p.clients) for p in phases])
    row("answers", [str(p.answers) for p in phases])
    row("answers / s", [f"{p.answers / p.seconds:.0f}" for p in phases])
    right = [sum(len(v) for v in p.latencies.values()) for p in phases]
    row(
        "expected answers / s", [f"{r / p.seconds:.0f}" for r, p in zip(right, phases, strict=True)]
    )
    for name in ("small", "mid"):
        row(
            f"{name} p50 / p99 ms",
            [
                f"{1000 * percentile(p.latencies[name], 0.5):.1f} / "
                f"{1000 * percentile(p.latencies[name], 0.99):.1f}"
                for p in phases
            ],
        )

    def bad_p50(p: Phase) -> float:
        times = [t for k, v in p.latencies.items() if k not in ("small", "mid") for t in v]
        return 1000 * statistics.median(times) if times else float("nan")

    row("bad requests p50 ms", [f"{bad_p50(p):.1f}" for p in phases])
    row("share of 503", [f"{p.statuses[503] / max(p.answers, 1):.1%}" for p in phases])
    other_5xx = [sum(c for s, c in p.statuses.items() if s >= 500 and s != 503) for p in phases]
    row("other 5xx", [str(v) for v in other_5xx])
    row("wrong answers", [str(p.wrong) for p in phases])
    row("unexpected statuses", [str(sum(p.unexpected.values())) for p in phases])
    row("transport errors", [str(p.transport_errors) for p in phases])
    print()
    print(f"server baseline after warm-up   {baseline / 2**20:8.0f} MiB")
    print(f"server peak over the run        {peak / 2**20:8.0f} MiB (VmHWM)")
    print(f"bound from the limits           {bound / 2**20:8.0f} MiB")
    print(f"peak growth / bound growth      {(peak - baseline) / (bound - baseline):8.2f}")
    for p in phases:
        if p.unexpected:
            print(f"unexpected in {p.label}: {dict(p.unexpected)}")
    failed = any(other_5xx) or any(p.wrong for p in phases) or peak > bound
    failed = failed or any(p.unexpected for p in phases)
    if args.json:
        figures = {
            "seconds": total,
            "phases": [
                {
                    "label": p.label,
                    "clients": p.clients,
                    "answers": p.answers,
                    "answers_per_s": p.answers / p.seconds,
                    "statuses": dict(p.statuses),
                    "p50_ms": {k: 1000 * percentile(v, 0.5) for k, v in p.latencies.items()},
                    "p99_ms": {k: 1000 * percentile(v, 0.99) for k, v in p.latencies.items()},
                    "wrong": p.wrong,
                    "unexpected": dict(p.unexpected),
                    "transport_errors": p.transport_errors,
                }
                for p in phases
            ],
            "baseline_mib": baseline / 2**20,
            "peak_mib": peak / 2**20,
            "bound_mib": bound / 2**20,
        }
        args.json.write_text(json.dumps(figures, indent=1) + "\n", encoding="utf-8")
    return 1 if failed else 0


if __name__ == "__main__":
    raise SystemExit(main())
