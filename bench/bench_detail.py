"""Answers sized for their reader: sizes, and HTTP against in-process, side by side in one run.

Prints, for correlation inputs with the default options (``detail`` summary) and with
``detail`` full:

- the demo's answer in bytes (goal: at most 20,000 by default);
- p = 400: the whole HTTP request against the naive numpy removal loop alone (re-invert after
  every drop; goal: at least 5x faster);
- p = 1,000: the answer's size (goal: at most 1.5 MB by default) and the HTTP request against
  the in-process decode + assessment + encoding of the same body (goal: at most 1.3x);
- p = 2,000 (skipped with --quick): the status at the default limits, the time (goal: within
  30 s) and the worker's peak resident memory.

One server (``python -m knotwork``, one worker, one BLAS thread) on a free loopback port.
The machine is shared: compare the ratios within a run, not figures across runs.
"""

from __future__ import annotations

import argparse
import json
import tempfile
import time
from pathlib import Path

import httpx
import msgspec
import numpy as np
from _timing import best, table_header
from threadpoolctl import threadpool_limits

from knotwork.codecs import Limits, decode_assess, run
from knotwork.demo import garden_centres, request_body
from knotwork.settings import Settings
from knotwork_harness.live_server import serve
from knotwork_harness.processes import peak_memory_kib, reset_peak


def correlation_body(p: int, seed: int = 5, detail: str | None = None) -> bytes:
    """A tangled correlation matrix of p predictors (a tenth as many common factors) and n."""
    rng = np.random.default_rng(seed)
    n = 3 * p
    factors = rng.normal(size=(n, max(1, p // 10)))
    x = factors @ rng.normal(size=(factors.shape[1], p)) + rng.normal(size=(n, p))
    r = np.corrcoef(x, rowvar=False)
    options = {} if detail is None else {"detail": detail}
    names = [f"v{i}" for i in range(p)]
    doc = {"input": {"kind": "correlation", "names": names, "matrix": r.tolist(), "n": n}}
    return json.dumps({**doc, "options": options}).encode()


def naive_removal(body: bytes, threshold: float = 5.0) -> None:
    """Re-invert the remaining matrix after every drop until no VIF is above the threshold."""
    r = np.array(json.loads(body)["input"]["matrix"])
    keep = np.arange(r.shape[0])
    while keep.size > 1:
        vif = np.diag(np.linalg.inv(r[np.ix_(keep, keep)]))
        worst = int(np.argmax(vif))
        if vif[worst] <= threshold:
            break
        keep = np.delete(keep, worst)


def post(url: str, body: bytes) -> httpx.Response:
    headers = {"Content-Type": "application/json"}
    return httpx.post(url + "/v1/assess", content=body, headers=headers, timeout=300)


def in_process(body: bytes) -> bytes:
    settings = Settings()
    limits = Limits(
        max_cells=settings.max_cells,
        max_columns=settings.max_columns,
        max_batch_items=settings.max_batch_items,
    )
    return msgspec.json.encode(run(decode_assess(body, limits)))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="leave out p = 2,000")
    parser.add_argument("--repeat", type=int, default=3, help="runs per timing (best kept)")
    args = parser.parse_args()
    demo = request_body(garden_centres(240, 7), 5.0)
    with tempfile.TemporaryDirectory() as tmp, serve(Path(tmp), {}) as server:
        url = server.url
        sizes = {}
        for detail in ("summary", "full"):
            body = json.dumps({**demo, "options": {**demo["options"], "detail": detail}})
            sizes[detail] = len(post(url, body.encode()).content)
        print(f"demo answer: {sizes['summary']:,} bytes by default, {sizes['full']:,} in full")
        print("  goal: at most 20,000 bytes by default")
        print()
        table_header(
            f"{'p':>5} {'detail':>8} {'answer bytes':>13} {'http s':>8} {'in-process s':>13} "
            f"{'http/in-proc':>13} {'naive loop s':>13} {'loop/http':>10}"
        )
        with threadpool_limits(limits=1):
            for p in (400, 1000):
                for detail in ("summary", "full"):
                    body = correlation_body(p, detail=None if detail == "summary" else detail)
                    answer = post(url, body)
                    assert answer.status_code == 200, answer.text[:500]
                    http = best(lambda body=body: post(url, body), args.repeat)
                    local = best(lambda body=body: in_process(body), args.repeat)
                    loop = best(lambda body=body: naive_removal(body), 1) if p == 400 else None
                    cells = (
                        f"{p:>5} {detail:>8} {len(answer.content):>13,} {http:>8.3f} "
                        f"{local:>13.3f} {http / local:>13.2f} "
                        + (f"{loop:>13.3f} {loop / http:>10.1f}" if loop else f"{'':>13} {'':>10}")
                    )
                    print(cells)
        print("  goals: p = 1,000 by default at most 1.5 MB and http/in-proc at most 1.3;")
        print("         p = 400 by default loop/http at least 5")
        if not args.quick:
            print()
            body = correlation_body(2000)
            reset_peak(server.process.pid)
            started = time.perf_counter()
            answer = post(url, body)
            took = time.perf_counter() - started
            peak = peak_memory_kib(server.process.pid) / 1024
            print(
                f"p = 2,000 by default: status {answer.status_code}, {len(body) / 2**20:.1f} MiB "
                f"body, {len(answer.content):,} bytes answered in {took:.1f} s; worker peak "
                f"{peak:.0f} MiB (goal: 200 within 30 s)"
            )


if __name__ == "__main__":
    main()
