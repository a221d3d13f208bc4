"""Contract fuzzing at scale: the schemathesis checks of tests/reliability with many examples.

Run: ``.venv/bin/python bench/bench_fuzz.py [--quick] [--examples N] [--seed S] [--json PATH]``

Runs tests/reliability/test_contract_fuzz.py (the committed OpenAPI document against a real
server on a free 127.0.0.1 port, every operation, positive and negative generation, the
coverage phase's boundary cases, hand-made Arrow and Parquet bodies) with N examples per
operation (1000 by default, 100 with ``--quick``) drawn from the seed rather than the fixed
draws of ``make test``, under a time limit. It prints what was sent and how it was answered,
side by side by operation: cases, 2xx, 4xx by status, 5xx (must be 0), and the time. Exit
status 1 if a check failed (the pytest output says which and how to reproduce it).
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from collections import Counter, defaultdict
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
TEST = ROOT / "tests" / "reliability" / "test_contract_fuzz.py"


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="100 examples per operation")
    parser.add_argument("--examples", type=int, default=None, help="examples per operation")
    parser.add_argument("--seed", type=int, default=20261201, help="hypothesis seed")
    parser.add_argument("--timeout", type=float, default=3600, help="seconds for the whole run")
    parser.add_argument("--json", type=Path, help="also write the tally to this file")
    args = parser.parse_args()
    examples = args.examples or (100 if args.quick else 1000)
    with tempfile.TemporaryDirectory(prefix="knotwork-bench-fuzz-") as tmp:
        report = Path(tmp) / "tally.json"
        env = {
            **os.environ,
            "KNOTWORK_FUZZ_EXAMPLES": str(examples),
            "KNOTWORK_FUZZ_REPORT": str(report),
            "KNOTWORK_FUZZ_SEED": str(args.seed),
        }
        command = [
            sys.executable,
            "-m",
            "pytest",
            str(TEST),
            "-q",
            "-p",
            "no:cacheprovider",
            f"--hypothesis-seed={args.seed}",
            "-k",
            "the_contract",
        ]
        started = time.monotonic()
        done = subprocess.run(
            command, cwd=ROOT, env=env, capture_output=True, text=True, timeout=args.timeout
        )
        took = time.monotonic() - started
        rows = json.loads(report.read_text()) if report.exists() else []
    by_operation: dict[str, Counter[str]] = defaultdict(Counter)
    statuses: dict[str, Counter[int]] = defaultdict(Counter)
    documented = {("POST", "/v1/assess"), ("POST", "/v1/assess/batch")}
    documented |= {("GET", p) for p in ("/healthz", "/readyz", "/metrics")}
    for method, path, media, mode, status, count in rows:
        if (method, path) in documented:
            kind = f" ({media.rsplit('.', 1)[-1]})" if "vnd" in media else ""
            operation = f"{method} {path}{kind}"
        else:
            operation = "undocumented methods (all paths)"
        by_operation[operation]["cases"] += count
        by_operation[operation][mode] += count
        by_operation[operation][f"{status // 100}xx"] += count
        statuses[operation][status] += count
    print(f"schemathesis: {examples} examples per operation, seed {args.seed}, {took:.0f} s")
    header = ("operation", "cases", "positive", "negative", "2xx", "4xx", "5xx", "statuses")
    print(f"{header[0]:40}" + "".join(f"{h:>9}" for h in header[1:7]) + f"  {header[7]}")
    total: Counter[str] = Counter()
    for operation in sorted(by_operation):
        c = by_operation[operation]
        total.update(c)
        detail = " ".join(f"{s}:{n}" for s, n in sorted(statuses[operation].items()))
        print(
            f"{operation:40}"
            + "".join(f"{c[k]:>9}" for k in ("cases", "positive", "negative", "2xx", "4xx", "5xx"))
            + f"  {detail}"
        )
    print(
        f"{'all':40}"
        + "".join(f"{total[k]:>9}" for k in ("cases", "positive", "negative", "2xx", "4xx", "5xx"))
    )
    if args.json:
        args.json.write_text(json.dumps({"rows": rows, "seconds": took}, indent=1) + "\n")
    if done.returncode != 0:
        print(done.stdout[-20000:])
        print(done.stderr[-5000:], file=sys.stderr)
        return 1
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
