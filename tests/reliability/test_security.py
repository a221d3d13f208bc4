"""Security: tokens stay secret, comparison leaks no timing, data never reach logs or errors,
and the running service writes only where the deployment makes room for it.

- A guarded server is sent right, wrong, near-miss and malformed credentials in every place a
  client might put one; neither its logs (at debug level) nor any answer holds a token.
- :meth:`TokenGate.accepts` is timed in process (no network noise): a token that shares no
  prefix with the configured one and one that differs only in its last character take the
  same time, within a generous factor, by the median of many interleaved rounds; so do a match
  on the first and on the last of many configured tokens.
- Bad requests carrying marker values (numbers, labels, strings where numbers belong) are
  answered without those values in the answer or the logs; no name of the input reaches a
  log line either (problem documents point at names, by design, never at values).
- The service, run as the image runs it, opens no file for writing outside the metrics
  folder, which deploy/compose.yaml and deploy/k8s put on a tmpfs or an emptyDir beside a
  read-only root and a non-root user (tests/deploy/test_manifests.py checks the rest).
"""

from __future__ import annotations

import io
import json
import os
import re
import statistics
import time
from pathlib import Path

import httpx
import pyarrow as pa
import pytest
import yaml

from knotwork.api._auth import TokenGate
from knotwork_harness import JSON, ROOT
from knotwork_harness.batch_models import correlation_body
from knotwork_harness.live_server import serve
from knotwork_harness.processes import process_tree
from knotwork_harness.raw_http import raw_exchange

TOKEN = "sec-token-Z8f2Qk9LmN4pR7tV1wX3"
OTHER = "sec-token-older-aB3cD5eF7gH9jK1m"  # a second configured token (rotation)
NEAR_MISS = TOKEN[:-1] + ("A" if TOKEN[-1] != "A" else "B")
ARROW_STREAM = "application/vnd.apache.arrow.stream"


def _all_text(server) -> str:
    return server.stdout.read_text(encoding="utf-8") + server.stderr.read_text(encoding="utf-8")


def test_tokens_are_never_logged_or_echoed(tmp_path: Path) -> None:
    env = {"KNOTWORK_TOKENS": f"{TOKEN},{OTHER}", "KNOTWORK_LOG_LEVEL": "debug"}
    secrets = [TOKEN, OTHER, NEAR_MISS, "sec-token-attacker-guess-0000000"]
    body = json.dumps(correlation_body(4, 30, seed=1, sections=["variables"])).encode()
    answers: list[str] = []
    with serve(tmp_path, env) as server:
        port = int(server.url.rsplit(":", 1)[1])
        attempts = [
            {"Authorization": f"Bearer {TOKEN}"},
            {"Authorization": f"Bearer {OTHER}"},
            {"Authorization": f"Bearer {NEAR_MISS}"},
            {"Authorization": f"Bearer {secrets[3]}"},
            {"Authorization": f"bearer   {TOKEN}"},
            {"Authorization": f"Basic {TOKEN}"},
            {"Authorization": TOKEN},
            {"Authorization": f"Bearer {TOKEN} {NEAR_MISS}"},
            {"X-Api-Key": TOKEN, "Cookie": f"token={TOKEN}"},
        ]
        for headers in attempts:
            for path in ("/v1/assess", "/v1/assess/batch", "/metrics", "/nowhere"):
                content = body if path != "/v1/assess/batch" else b'{"items":[' + body + b"]}"
                response = httpx.post(
                    server.url + path,
                    content=content,
                    headers={"Content-Type": JSON, **headers},
                    timeout=30,
                )
                answers.append(str(response.headers) + response.text)
        # A token in the query string, on a route that takes query options, and in the path.
        for path in (f"/v1/assess?token={TOKEN}&threshold=7", f"/v1/{TOKEN}"):
            response = httpx.post(
                server.url + path,
                content=b"not arrow",
                headers={"Content-Type": ARROW_STREAM, "Authorization": f"Bearer {NEAR_MISS}"},
                timeout=30,
            )
            answers.append(str(response.headers) + response.text)
        # A broken request line carrying the token.
        raw = raw_exchange(port, f"GET /{TOKEN} HTTP/9.9\r\nHost: {TOKEN}\r\n\r\n".encode())
        answers.append((raw.head + raw.body).decode("latin-1"))
        metrics = httpx.get(server.url + "/metrics", timeout=30).text
        answers.append(metrics)
    logs = _all_text(server)
    assert '"status":403' in logs and '"status":401' in logs and '"status":200' in logs
    for secret in secrets:
        assert secret not in logs, "a token reached the logs"
        for answer in answers:
            assert secret not in answer, "a token was echoed"


def test_settings_errors_never_repeat_a_token(tmp_path: Path) -> None:
    import subprocess
    import sys

    short = "Sh0rt-s3cret!"  # shorter than the 16 characters a token needs
    spaced = "a-long-enough-token with-a-space"
    tokens_file = tmp_path / "tokens"
    tokens_file.write_text(f"# rotation\n{spaced}\n", encoding="utf-8")
    env = {
        "PATH": os.environ.get("PATH", "/usr/bin:/bin"),
        "KNOTWORK_TOKENS": short,
        "KNOTWORK_TOKENS_FILE": str(tokens_file),
    }
    done = subprocess.run(
        [sys.executable, "-m", "knotwork", "--port", "1"],
        capture_output=True,
        text=True,
        env=env,
        timeout=60,
    )
    assert done.returncode == 2
    assert "KNOTWORK_TOKENS" in done.stderr and "line 2" in done.stderr
    for secret in (short, spaced, "with-a-space"):
        assert secret not in done.stderr + done.stdout


def _median_ns(call, value: str, repeat: int) -> float:
    started = time.perf_counter_ns()
    for _ in range(repeat):
        call(value)
    return (time.perf_counter_ns() - started) / repeat


def _timings(call, candidates: dict[str, str], rounds: int = 41, repeat: int = 1000) -> dict:
    # Interleaved rounds: a burst of load from other work on the machine hits every candidate
    # alike, and the median ignores the rounds it spoiled.
    samples: dict[str, list[float]] = {name: [] for name in candidates}
    for _ in range(rounds):
        for name, value in candidates.items():
            samples[name].append(_median_ns(call, value, repeat))
    return {name: statistics.median(values) for name, values in samples.items()}


def test_token_comparison_takes_the_same_time_whatever_prefix_matches() -> None:
    gate = TokenGate([TOKEN])
    candidates = {
        "no prefix": "X" * len(TOKEN),
        "all but the last": NEAR_MISS,
        "half": TOKEN[: len(TOKEN) // 2] + "X" * (len(TOKEN) - len(TOKEN) // 2),
        "exact": TOKEN,
    }
    assert gate.accepts(TOKEN) and not gate.accepts(NEAR_MISS)
    medians = _timings(gate.accepts, candidates)
    base = medians["no prefix"]
    for name, value in medians.items():
        # Noise on a shared machine stays well inside a factor of 1.5 for these medians.
        assert 1 / 1.5 < value / base < 1.5, (name, medians)


def test_the_timing_harness_sees_a_leaky_comparison() -> None:
    # The control for the test above: a comparison that stops at the first difference
    # (character by character) is caught by the same harness and the same factor.
    def leaky(presented: str) -> bool:
        for a, b in zip(presented, TOKEN, strict=False):
            if a != b:
                return False
        return len(presented) == len(TOKEN)

    medians = _timings(leaky, {"no prefix": "X" * len(TOKEN), "all but the last": NEAR_MISS})
    assert medians["all but the last"] / medians["no prefix"] > 1.5, medians


def test_token_check_takes_the_same_time_whichever_token_matches() -> None:
    tokens = [f"rotation-token-{i:04d}-abcdefghijk" for i in range(64)]
    gate = TokenGate(tokens)
    medians = _timings(
        gate.accepts,
        {"first": tokens[0], "last": tokens[-1], "none": "rotation-token-9999-abcdefghijk"},
        rounds=21,
        repeat=200,
    )
    for name, value in medians.items():
        assert 1 / 1.5 < value / medians["none"] < 1.5, (name, medians)


# Marker values: they must never come back in an answer or reach a log line.
MARKER_NUMBER = 8765.4321987
MARKER_LABEL = "label-marker-q7w8e9"
MARKER_STRING = "string-marker-z1x2c3"
MARKER_NAME = "colname-marker-m4n5b6"


def _bad_requests() -> list[tuple[str, dict, bytes]]:
    def doc(obj: object) -> bytes:
        return json.dumps(obj).encode()

    def table(columns: dict, **more: object) -> bytes:
        return doc({"input": {"kind": "table", "columns": columns, **more}})

    def matrix(names: list[str], rows: list[list[float]], n: float) -> bytes:
        return doc({"input": {"kind": "correlation", "names": names, "matrix": rows, "n": n}})

    good = {MARKER_NAME: [MARKER_NUMBER, 2.0, 3.0, 4.0], "b": [1.0, 3.0, 2.0, 5.0]}
    arrow = pa.table({MARKER_NAME: [MARKER_NUMBER, float("nan"), 1.0, 2.0], "b": [1.0, 2, 3, 4]})
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, arrow.schema) as writer:
        writer.write_table(arrow)
    as_json, as_arrow = {"Content-Type": JSON}, {"Content-Type": ARROW_STREAM}
    nested = b"[" * 50_000 + str(MARKER_NUMBER).encode() + b"]" * 50_000
    bad_item = {"input": {"kind": "table", "columns": {**good, "b": [MARKER_LABEL]}}}
    assess, batch = "/v1/assess", "/v1/assess/batch"
    broken = f'{{"input": {{"columns": {{"a": [{MARKER_NUMBER}, {MARKER_STRING}'.encode()

    def with_threshold(value: object) -> bytes:
        return doc({"input": {"kind": "table", "columns": good}, "options": {"threshold": value}})

    return [
        # A string where a number belongs; a constant column; too few rows.
        (assess, as_json, table({**good, "b": [1.0, MARKER_STRING, 2.0, 3.0]})),
        (assess, as_json, table({MARKER_NAME: [MARKER_NUMBER] * 4, "b": [1.0, 3.0, 2.0, 5.0]})),
        (assess, as_json, table({MARKER_NAME: [MARKER_NUMBER], "b": [1.0]})),
        # Columns of different lengths; a categorical with one level.
        (assess, as_json, table({**good, "c": [MARKER_NUMBER]})),
        (assess, as_json, table(good, categorical={"g": [MARKER_LABEL] * 4})),
        # A correlation out of range; an asymmetric matrix with the marker as n.
        (assess, as_json, matrix([MARKER_NAME, "b"], [[1, MARKER_NUMBER], [MARKER_NUMBER, 1]], 9)),
        (
            assess,
            as_json,
            matrix(["a", "b", "c"], [[1, 0.5, 0.1], [0.4, 1, 0.2], [0.1, 0.2, 1]], MARKER_NUMBER),
        ),
        # Options of the wrong type or range.
        (assess, as_json, with_threshold(MARKER_STRING)),
        (assess, as_json, with_threshold(-MARKER_NUMBER)),
        # Not JSON at all, with the markers inside.
        (assess, as_json, broken),
        # An Arrow body with a NaN value, and a truncated one with a bad query option.
        (assess, as_arrow, sink.getvalue()),
        (assess + "?threshold=" + MARKER_STRING, as_arrow, sink.getvalue()[:-8]),
        # A batch with one bad item after a good one.
        (batch, as_json, doc({"items": [correlation_body(3, 20, 1), bad_item]})),
        # Deep nesting inside a column (a server error once: logs must stay clean).
        (assess, as_json, b'{"input":{"kind":"table","columns":{"c":' + nested + b"}}}"),
    ]  # fmt: skip


def test_no_request_data_in_answers_or_logs(tmp_path: Path) -> None:
    values = (str(MARKER_NUMBER), MARKER_LABEL, MARKER_STRING, "8765.43")
    with serve(tmp_path, {"KNOTWORK_LOG_LEVEL": "debug"}) as server:
        statuses = []
        for path, headers, body in _bad_requests():
            response = httpx.post(server.url + path, content=body, headers=headers, timeout=30)
            statuses.append(response.status_code)
            assert response.status_code != 200 or path.endswith("batch"), response.text
            text = response.text
            for value in values:
                assert value not in text, (path, text)
            assert "Traceback" not in text
    # Each bad request is a client error (the batch answers 200 with a problem for its bad
    # item).
    assert all(400 <= s < 500 for s in statuses[:-2] + statuses[-1:]), statuses
    assert statuses[-2] == 200, statuses
    logs = _all_text(server)
    assert logs.count('"route":') >= len(statuses)
    for marker in (*values, MARKER_NAME):
        assert marker not in logs, marker
    assert "Traceback" not in logs


# --- what the running service writes ------------------------------------------------------


def _written_files(pid: int) -> set[str]:
    """Regular files the process tree holds open for writing."""
    out = set()
    for process in process_tree(pid):
        fd_dir = Path(f"/proc/{process}/fd")
        try:
            descriptors = list(fd_dir.iterdir())
        except OSError:
            continue
        for fd in descriptors:
            try:
                target = os.readlink(fd)
                flags = Path(f"/proc/{process}/fdinfo/{fd.name}").read_text()
            except OSError:
                continue
            if not target.startswith("/"):
                continue  # sockets, pipes, anonymous inodes
            mode = int(re.search(r"flags:\s+([0-7]+)", flags).group(1), 8) & 0o3
            if mode and Path(target).is_file():  # O_WRONLY or O_RDWR
                out.add(target)
    return out


def test_the_service_writes_only_into_its_metrics_folder(tmp_path: Path) -> None:
    home, work, temp, metrics = (tmp_path / d for d in ("home", "work", "tmp", "tmp/metrics"))
    for folder in (home, work, metrics):
        folder.mkdir(parents=True)
    env = {
        "HOME": str(home),
        "TMPDIR": str(temp),
        "PYTHONDONTWRITEBYTECODE": "1",  # as in the image, whose root is read-only
        "KNOTWORK_WORKERS": "2",
        "PROMETHEUS_MULTIPROC_DIR": str(metrics),
        "KNOTWORK_CONCURRENCY": "1",
    }
    old_cwd = Path.cwd()
    os.chdir(work)
    try:
        with serve(tmp_path, env) as server:
            for seed in range(10):
                body = correlation_body(6, 40, seed=seed)
                assert (
                    httpx.post(server.url + "/v1/assess", json=body, timeout=30).status_code == 200
                )
            assert httpx.get(server.url + "/metrics", timeout=30).status_code == 200
            written = _written_files(server.process.pid)
    finally:
        os.chdir(old_cwd)
    logs = {str(server.stdout), str(server.stderr)}  # the test's own capture of the output
    assert {f for f in written if f not in logs} <= {str(p) for p in metrics.iterdir()}, written
    assert all(str(f).startswith(str(metrics)) for f in written - logs)
    assert not any(home.iterdir()) and not any(work.iterdir())
    assert {p.name for p in temp.iterdir()} <= {"metrics"}
    # The deployment puts that folder on memory-backed or empty storage beside a read-only
    # root, for the image's non-root user.
    compose = yaml.safe_load((ROOT / "deploy" / "compose.yaml").read_text())["services"]["knotwork"]
    assert compose["read_only"] is True and compose["user"].split(":")[0] != "0"
    folder = compose["environment"]["PROMETHEUS_MULTIPROC_DIR"]
    assert any(folder.startswith(t.split(":")[0] + "/") for t in compose["tmpfs"])
    deployment = yaml.safe_load((ROOT / "deploy" / "k8s" / "deployment.yaml").read_text())
    container = deployment["spec"]["template"]["spec"]["containers"][0]
    assert container["securityContext"]["readOnlyRootFilesystem"] is True
    assert container["securityContext"]["runAsNonRoot"] is True
    env_k8s = {e["name"]: e.get("value") for e in container["env"]}
    mounts = [m["mountPath"] for m in container["volumeMounts"]]
    assert any(
        env_k8s["PROMETHEUS_MULTIPROC_DIR"].startswith(m + "/")
        or env_k8s["PROMETHEUS_MULTIPROC_DIR"] == m
        for m in mounts
    )
    containerfile = (ROOT / "deploy" / "Containerfile").read_text()
    runtime = containerfile.rsplit("\nFROM ", 1)[1]
    users = re.findall(r"^USER\s+(\S+)", runtime, flags=re.MULTILINE)
    assert users and users[-1].split(":")[0] not in ("0", "root")
    assert "PYTHONDONTWRITEBYTECODE=1" in runtime
    assert not re.search(r"^ENV\s+.*KNOTWORK_TOKENS", runtime, flags=re.MULTILINE)
    assert not re.search(r"^(COPY|ADD)\s.*(secret|token)", runtime, flags=re.MULTILINE | re.I)


@pytest.fixture(autouse=True)
def _no_proxy_env(monkeypatch: pytest.MonkeyPatch) -> None:
    # httpx would send loopback traffic through a proxy named in the environment.
    for name in ("HTTP_PROXY", "HTTPS_PROXY", "ALL_PROXY", "http_proxy", "https_proxy"):
        monkeypatch.delenv(name, raising=False)
