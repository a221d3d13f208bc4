"""The HTML report: its size and the time to draw it, beside the assessment alone.

Prints, in process (no HTTP), for the demo (rows, p = 9 with a categorical term) and for a
tangled table of p = 50 predictors (400 rows):

- the assessment alone (decode + summary + every section at full detail), best of a few runs;
- the report (the same assessment, then the page with its charts) and the ratio of the two;
- the page's size in bytes (goals: at most 300 KB for the demo, 1.5 MB at p = 50) and the
  size of the default JSON answer beside it;
- the fingerprint's own cost (a part of the assessment's time).

The first report of a process also imports matplotlib and reads its font list; that one-off
cost is printed apart. The machine is shared: compare the ratios within one run.
"""

from __future__ import annotations

import argparse
import time
from datetime import UTC, datetime

import msgspec
import numpy as np
from _timing import best, table_header
from threadpoolctl import threadpool_limits

from knotwork.codecs import Limits, decode_assess, run
from knotwork.codecs._convert import summarize
from knotwork.codecs._provenance import fingerprint
from knotwork.demo import garden_centres, request_body

DEMO_BUDGET = 300_000
P50_BUDGET = 1_500_000


def wide_body(p: int, rows: int = 400, seed: int = 50) -> bytes:
    """A table of p predictors driven by p/6 common factors (several tangled sets)."""
    rng = np.random.default_rng(seed)
    factors = rng.normal(size=(rows, max(1, p // 6)))
    x = factors @ rng.normal(size=(factors.shape[1], p)) + 0.6 * rng.normal(size=(rows, p))
    y = x[:, : p // 3].sum(axis=1) + rng.normal(size=rows)
    columns = {f"measure_{j:02d}": x[:, j].tolist() for j in range(p)}
    columns["outcome"] = y.tolist()
    body = {"input": {"kind": "table", "columns": columns, "response": "outcome"}}
    return msgspec.json.encode(body)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    repeat = 2 if args.quick else 5
    when = datetime(2026, 1, 1, tzinfo=UTC)
    cases = {
        "demo (p = 9)": (msgspec.json.encode(request_body(garden_centres(240, 7), 5.0)),
                         DEMO_BUDGET),
        "p = 50": (wide_body(50), P50_BUDGET),
    }  # fmt: skip
    from knotwork.report import render_report

    with threadpool_limits(1):
        first = time.perf_counter()
        demo_body = cases["demo (p = 9)"][0]
        render_report(run(decode_assess(demo_body, Limits()), full=True), when)
        print(f"first report in this process (imports matplotlib): "
              f"{time.perf_counter() - first:.2f} s")  # fmt: skip
        table_header(
            f"{'input':>14}", f"{'assess ms':>10}", f"{'report ms':>10}", f"{'ratio':>6}",
            f"{'page KB':>8}", f"{'budget KB':>9}", f"{'JSON KB':>8}", f"{'fp ms':>6}",
        )  # fmt: skip
        failed = False
        for name, (body, budget) in cases.items():
            prepared = decode_assess(body, Limits())

            def assess_only(body: bytes = body) -> object:
                return run(decode_assess(body, Limits()), full=True)

            def report(body: bytes = body) -> str:
                return render_report(run(decode_assess(body, Limits()), full=True), when)

            assess_s = best(assess_only, repeat)
            report_s = best(report, repeat)
            page = report().encode("utf-8")
            answer = msgspec.json.encode(run(prepared))
            summary = summarize(prepared)
            fp_s = best(lambda s=summary, o=prepared.options: fingerprint(s, o), repeat * 4)
            failed |= len(page) > budget
            print(
                f"{name:>14} {assess_s * 1e3:>10.1f} {report_s * 1e3:>10.1f} "
                f"{report_s / assess_s:>5.1f}x {len(page) / 1e3:>8.1f} {budget / 1e3:>9.0f} "
                f"{len(answer) / 1e3:>8.1f} {fp_s * 1e3:>6.2f}"
            )
    if failed:
        print("a page is over its budget")
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
