"""Faults benchmark: a batch job through a faulty network, and a server stopped mid-load.

Run: ``.venv/bin/python bench/bench_faults.py [--quick] [--models N] [--seed S] [--json PATH]``

In one run, against ``python -m knotwork`` started here on a free 127.0.0.1 port:

(a) the client's batch command line (``knotwork-screen``) screens N generated models (200; 50
    with ``--quick``; every third sends only its local summary) straight to the service, then
    again through a proxy on loopback that drops connections, resets them, loses answers after
    the service did the work, truncates answers and answers 503 in the service's place, at
    random from the seed (``knotwork_harness.fault_proxy.FaultProxy``). Side by side:
    time, requests, faults by kind, and results lost, duplicated or wrong (each model's VIFs
    are checked against statsmodels on its own rows);
(b) a server holding more requests than it has slots and queue places gets SIGTERM: how many
    were answered whole and right, refused with 503 before the signal, or lost.

Exit status 1 if any result is lost, duplicated or wrong. The machine is shared: times are
rough, the counts are exact.
"""

from __future__ import annotations

import argparse
import json
import signal
import tempfile
import time
from concurrent.futures import ThreadPoolExecutor
from pathlib import Path

import httpx

from knotwork_harness.batch_models import correlation_body, run_screen, tally_reports, write_models
from knotwork_harness.fault_proxy import FAULTS, FaultPlan, FaultProxy
from knotwork_harness.live_server import serve
from knotwork_harness.together import post_together

ROOT = Path(__file__).resolve().parents[1]

TOKEN = "bench-faults-token-0123456789ab"


def batch_job(server_url: str, count: int, seed: int, tmp: Path) -> dict:
    folder = tmp / "models"
    models = write_models(folder, count)
    (folder / "token").write_text(TOKEN + "\n", encoding="utf-8")
    rows = {}
    for label, faulty in (("direct", False), ("through faults", True)):
        out = tmp / f"out-{label.replace(' ', '-')}"
        started = time.monotonic()
        if faulty:
            with FaultProxy(server_url, FaultPlan(seed=seed)) as proxy:
                status = run_screen(folder, proxy.url, out)
            counts = proxy.counts
            requests, faults = counts.requests, dict(counts.faults)
        else:
            status = run_screen(folder, server_url, out)
            requests, faults = count, {}
        took = time.monotonic() - started
        tally = tally_reports(models, out)
        rows[label] = {
            "models": count,
            "seconds": round(took, 2),
            "exit": status,
            "requests": requests,
            "faults": faults,
            **tally,
        }
    return rows


def sigterm_mid_load(tmp: Path, requests: int = 10) -> dict:
    env = {"KNOTWORK_CONCURRENCY": "2", "KNOTWORK_QUEUE": "4"}
    sections = ["variables", "conditioning", "removal"]

    def batch(k: int) -> bytes:
        items = [correlation_body(250, 500, seed=10 * k + i, sections=sections) for i in range(4)]
        return json.dumps({"items": items}).encode()

    bodies = [batch(k) for k in range(requests)]
    headers = {"Content-Type": "application/json"}
    with serve(tmp, env) as server:
        expected = [
            httpx.post(
                server.url + "/v1/assess/batch", content=b, headers=headers, timeout=120
            ).json()
            for b in bodies
        ]
        with ThreadPoolExecutor(requests) as pool:
            results, futures = post_together(
                pool, server.url + "/v1/assess/batch", bodies, headers, timeout=120, wait=30
            )
            deadline = time.monotonic() + 60
            while httpx.get(server.url + "/readyz", timeout=10).json()["in_flight"] < 4:
                if time.monotonic() > deadline:
                    raise RuntimeError("the requests were never admitted")
                time.sleep(0.005)
            in_flight = httpx.get(server.url + "/readyz", timeout=10).json()["in_flight"]
            server.process.send_signal(signal.SIGTERM)
            signalled = time.monotonic()
            for future in futures:
                future.result(timeout=180)
            status = server.process.wait(timeout=120)
            drained = time.monotonic() - signalled
    answered = sum(
        isinstance(r, httpx.Response) and r.status_code == 200 and r.json() == expected[i]
        for i, r in enumerate(results)
    )
    wrong = sum(
        isinstance(r, httpx.Response) and r.status_code == 200 and r.json() != expected[i]
        for i, r in enumerate(results)
    )
    refused = sum(isinstance(r, httpx.Response) and r.status_code == 503 for r in results)
    other = sum(isinstance(r, httpx.Response) and r.status_code not in (200, 503) for r in results)
    lost = sum(not isinstance(r, httpx.Response) for r in results)
    return {
        "requests": requests,
        "in_flight_at_signal": in_flight,
        "answered_right": answered,
        "wrong": wrong,
        "refused_503": refused,
        "other_status": other,
        "lost": lost,
        "drain_seconds": round(drained, 2),
        "exit_status": status,
    }


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="50 models instead of 200")
    parser.add_argument("--models", type=int, default=None, help="number of models")
    parser.add_argument("--seed", type=int, default=20261201, help="seed of the faults")
    parser.add_argument("--json", type=Path, help="also write the figures to this file")
    args = parser.parse_args()
    count = args.models or (50 if args.quick else 200)
    with tempfile.TemporaryDirectory(prefix="knotwork-bench-faults-") as name:
        tmp = Path(name)
        env = {"KNOTWORK_TOKENS": TOKEN, "KNOTWORK_CONCURRENCY": "2", "KNOTWORK_QUEUE": "8"}
        (tmp / "server").mkdir()
        with serve(tmp / "server", env) as server:
            jobs = batch_job(server.url, count, args.seed, tmp)
        (tmp / "sigterm").mkdir()
        stop = sigterm_mid_load(tmp / "sigterm")

    print(f"(a) batch job of {count} models, knotwork-screen --parallel 4 --attempts 5")
    direct, faulty = jobs["direct"], jobs["through faults"]
    print(f"{'':24}{'direct':>12}{'through faults':>16}")
    for key in ("seconds", "requests", "lost", "duplicated", "wrong", "pass", "fail", "exit"):
        print(f"{key:24}{direct[key]!s:>12}{faulty[key]!s:>16}")
    injected = sum(faulty["faults"].values())
    print(f"{'faults injected':24}{0:>12}{injected:>16}")
    for kind in FAULTS:
        print(f"{'  ' + kind:24}{'':>12}{faulty['faults'].get(kind, 0):>16}")
    print(f"time through faults / direct: {faulty['seconds'] / max(direct['seconds'], 1e-9):.2f}")
    print()
    print(f"(b) SIGTERM with {stop['in_flight_at_signal']} of {stop['requests']} requests in")
    print("    flight (2 slots, 4 queue places; each a batch of 4 assessments at p = 250)")
    for key, value in stop.items():
        print(f"    {key:24}{value!s:>10}")
    if args.json:
        args.json.write_text(json.dumps({"batch": jobs, "sigterm": stop}, indent=1) + "\n")
    bad = faulty["lost"] + faulty["duplicated"] + faulty["wrong"] + direct["lost"]
    bad += direct["duplicated"] + direct["wrong"] + stop["lost"] + stop["wrong"]
    bad += stop["other_status"]
    return 1 if bad else 0


if __name__ == "__main__":
    raise SystemExit(main())
