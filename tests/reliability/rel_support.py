"""Helpers for the reliability tests and the bench scripts that share them.

- :class:`FaultProxy`: an HTTP/1.1 forwarder on a loopback port that drops, resets, truncates
  or answers 503 in place of the service, at random but from a seed, and counts what it did;
- :func:`raw_exchange`: one hand-written HTTP request over a socket, bounded in time, for the
  cases an HTTP client will not send (trickled bodies, floods of headers, lying lengths);
- :func:`peak_memory_kib`: the high-water mark of a process and its children, from /proc;
- generated data: the models of a batch job and bodies of every size.

Everything listens on and connects to 127.0.0.1 only.
"""

from __future__ import annotations

import asyncio
import csv
import hashlib
import json
import os
import socket
import struct
import threading
import time
from collections import Counter
from collections.abc import Iterable, Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

HOST = "127.0.0.1"
ROOT = Path(__file__).resolve().parents[2]
OPENAPI = ROOT / "openapi" / "openapi.json"
JSON = "application/json"

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


# --------------------------------------------------------------------------------------------
# A fault-injecting HTTP proxy


FAULTS = ("drop", "reset", "lost_answer", "truncate", "busy", "busy_retry_after")


@dataclass
class FaultPlan:
    """How often each fault strikes a request, and the cap on faults in a row per request.

    Attributes
    ----------
    seed
        Seed of the fault draws. A draw depends only on the seed, the request (path and body)
        and how many times that request came before, not on the order in which concurrent
        requests arrive, so a run is reproduced exactly.
    rates
        Probability of each fault (keys from :data:`FAULTS`): ``drop`` closes the connection
        without forwarding, ``reset`` does so with a TCP reset, ``lost_answer`` forwards the
        request and closes before answering (the service did the work, the client never hears
        of it), ``truncate`` forwards and sends half the answer, ``busy`` answers 503 without
        Retry-After, ``busy_retry_after`` answers 503 with ``Retry-After: 1``.
    max_in_a_row
        A request that has met this many faults in a row passes: a client with more attempts
        than this must get through, so a lost result is the client's fault, not bad luck.
    """

    seed: int = 20261201
    rates: dict[str, float] = field(
        default_factory=lambda: {
            "drop": 0.08,
            "reset": 0.05,
            "lost_answer": 0.08,
            "truncate": 0.05,
            "busy": 0.06,
            "busy_retry_after": 0.03,
        }
    )
    max_in_a_row: int = 3

    def draw(self, key: bytes, attempt: int) -> str | None:
        digest = hashlib.sha256(b"%d:%d:" % (self.seed, attempt) + key).digest()
        u = int.from_bytes(digest[:8], "big") / 2.0**64
        edge = 0.0
        for kind in FAULTS:
            edge += self.rates.get(kind, 0.0)
            if u < edge:
                return kind
        return None


@dataclass
class ProxyCounts:
    """What the proxy saw and did."""

    requests: int = 0
    forwarded: int = 0
    faults: Counter[str] = field(default_factory=Counter)
    statuses: Counter[int] = field(default_factory=Counter)
    distinct: int = 0


class FaultProxy:
    """An HTTP/1.1 forwarder with injected faults, running its own event loop in a thread.

    Requests are read whole (head and Content-Length body) and sent upstream one per
    connection; the answer's ``Connection: close`` is removed so that the client keeps its
    connection, which the proxy may then break.
    """

    def __init__(self, upstream: str, plan: FaultPlan | None = None) -> None:
        host, _, port = upstream.removeprefix("http://").partition(":")
        assert host == HOST, "the proxy forwards to loopback only"
        self.upstream = (host, int(port))
        self.plan = plan or FaultPlan(rates={})
        self.counts = ProxyCounts()
        self._attempts: dict[bytes, int] = {}
        self._in_a_row: dict[bytes, int] = {}
        self._lock = threading.Lock()
        self._loop: asyncio.AbstractEventLoop | None = None
        self._stopped: asyncio.Event
        self._writers: set[asyncio.StreamWriter] = set()
        self._thread: threading.Thread | None = None
        self.port = 0

    @property
    def url(self) -> str:
        return f"http://{HOST}:{self.port}"

    def start(self) -> FaultProxy:
        ready = threading.Event()
        self._thread = threading.Thread(
            target=lambda: asyncio.run(self._run(ready)), name="fault-proxy", daemon=True
        )
        self._thread.start()
        if not ready.wait(10):
            raise RuntimeError("the proxy did not start")
        return self

    async def _run(self, ready: threading.Event) -> None:
        self._loop = asyncio.get_running_loop()
        self._stopped = asyncio.Event()
        server = await asyncio.start_server(self._serve, HOST, 0, limit=1 << 16)
        self.port = server.sockets[0].getsockname()[1]
        ready.set()
        async with server:
            await self._stopped.wait()
            for writer in list(self._writers):
                writer.close()

    def stop(self) -> None:
        if self._loop is not None and self._thread is not None:
            self._loop.call_soon_threadsafe(self._stopped.set)
            self._thread.join(10)

    def __enter__(self) -> FaultProxy:
        return self.start()

    def __exit__(self, *exc: object) -> None:
        self.stop()

    def _decide(self, key: bytes) -> str | None:
        with self._lock:
            self.counts.requests += 1
            attempt = self._attempts.get(key, 0)
            self._attempts[key] = attempt + 1
            self.counts.distinct = len(self._attempts)
            fault = None
            if self._in_a_row.get(key, 0) < self.plan.max_in_a_row:
                fault = self.plan.draw(key, attempt)
            self._in_a_row[key] = self._in_a_row.get(key, 0) + 1 if fault else 0
            if fault:
                self.counts.faults[fault] += 1
            return fault

    async def _serve(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        self._writers.add(writer)
        try:
            while True:
                try:
                    head = await reader.readuntil(b"\r\n\r\n")
                except (asyncio.IncompleteReadError, asyncio.LimitOverrunError):
                    return
                length = _content_length(head)
                body = await reader.readexactly(length) if length else b""
                request_line = head.split(b"\r\n", 1)[0]
                fault = self._decide(request_line + b"\n" + body)
                if fault in ("drop", "reset"):
                    if fault == "reset":
                        _abort(writer)
                    return
                if fault in ("busy", "busy_retry_after"):
                    writer.write(_busy(fault == "busy_retry_after"))
                    await writer.drain()
                    with self._lock:
                        self.counts.statuses[503] += 1
                    continue
                answer = await self._forward(_close_after(head), body)
                with self._lock:
                    self.counts.forwarded += 1
                if fault == "lost_answer":
                    return
                if fault == "truncate":
                    writer.write(answer[: max(1, len(answer) // 2)])
                    await writer.drain()
                    return
                with self._lock:
                    self.counts.statuses[_status(answer)] += 1
                writer.write(_keep_alive(answer))
                await writer.drain()
        except (ConnectionError, asyncio.IncompleteReadError):
            return
        finally:
            self._writers.discard(writer)
            writer.close()

    async def _forward(self, head: bytes, body: bytes) -> bytes:
        reader, writer = await asyncio.open_connection(*self.upstream)
        try:
            writer.write(head + body)
            await writer.drain()
            return await reader.read(-1)
        finally:
            writer.close()


def _content_length(head: bytes) -> int:
    for line in head.split(b"\r\n")[1:]:
        name, _, value = line.partition(b":")
        if name.strip().lower() == b"content-length":
            return int(value.strip())
    return 0


def _close_after(head: bytes) -> bytes:
    lines = [
        line
        for line in head.rstrip(b"\r\n").split(b"\r\n")
        if line.partition(b":")[0].strip().lower() != b"connection"
    ]
    return b"\r\n".join([*lines, b"Connection: close"]) + b"\r\n\r\n"


def _keep_alive(answer: bytes) -> bytes:
    head, sep, rest = answer.partition(b"\r\n\r\n")
    lines = [
        line
        for line in head.split(b"\r\n")
        if line.partition(b":")[0].strip().lower() != b"connection"
    ]
    return b"\r\n".join(lines) + sep + rest


def _status(answer: bytes) -> int:
    try:
        return int(answer.split(b" ", 2)[1])
    except (IndexError, ValueError):
        return 0


def _busy(retry_after: bool) -> bytes:
    body = b"busy (injected by the test proxy)"
    extra = b"Retry-After: 1\r\n" if retry_after else b""
    return (
        b"HTTP/1.1 503 Service Unavailable\r\nContent-Type: text/plain\r\n"
        + extra
        + b"Content-Length: %d\r\n\r\n" % len(body)
        + body
    )


def _abort(writer: asyncio.StreamWriter) -> None:
    sock = writer.get_extra_info("socket")
    if sock is not None:
        # SO_LINGER with a zero timeout: close() sends a TCP reset instead of a FIN.
        sock.setsockopt(socket.SOL_SOCKET, socket.SO_LINGER, struct.pack("ii", 1, 0))


# --------------------------------------------------------------------------------------------
# Raw HTTP exchanges


@dataclass
class RawAnswer:
    """A response read off a socket (or the lack of one)."""

    status: int | None
    head: bytes
    body: bytes
    seconds: float
    closed: bool

    def header(self, name: str) -> str | None:
        for line in self.head.split(b"\r\n")[1:]:
            key, _, value = line.partition(b":")
            if key.strip().lower() == name.lower().encode():
                return value.strip().decode("latin-1")
        return None


def raw_exchange(
    port: int,
    head: bytes,
    chunks: Iterable[bytes] = (),
    *,
    pause: float = 0.0,
    timeout: float = 20.0,
) -> RawAnswer:
    """Send ``head`` then each of ``chunks`` (``pause`` seconds apart) and read one answer.

    Stops sending as soon as the service answers or closes. The whole exchange is bounded by
    ``timeout`` seconds; the answer is read until its Content-Length or the end of the
    connection.
    """
    started = time.monotonic()
    deadline = started + timeout
    received = b""
    closed = False
    with socket.create_connection((HOST, port), timeout=timeout) as sock:
        try:
            sock.sendall(head)
        except OSError:
            # The service stopped reading (and may have answered): read what it said.
            closed = True
            chunks = ()
        for chunk in chunks:
            if time.monotonic() > deadline:
                break
            sock.settimeout(max(pause, 0.001))
            try:
                data = sock.recv(65536)
                if not data:
                    closed = True
                    break
                received += data
                break  # the service answered before the body was complete
            except TimeoutError:
                pass
            try:
                sock.sendall(chunk)
            except OSError:
                closed = True
                break
        while time.monotonic() < deadline:
            sock.settimeout(max(0.01, deadline - time.monotonic()))
            try:
                data = sock.recv(65536)
            except TimeoutError:
                break
            except OSError:
                closed = True
                break
            if not data:
                closed = True
                break
            received += data
            head_part, sep, body = received.partition(b"\r\n\r\n")
            if sep:
                length = _content_length(head_part)
                if len(body) >= length:
                    break
    head_part, _, body = received.partition(b"\r\n\r\n")
    status = None
    if head_part.startswith(b"HTTP/"):
        status = _status(head_part)
    return RawAnswer(status, head_part, body, time.monotonic() - started, closed)


# --------------------------------------------------------------------------------------------
# Generated data (our own scenario: weekly figures of fictional ferry routes)


def ferry_model(index: int, seed: int = 20261201) -> dict[str, list[float]]:
    """Columns of candidate model ``index``: 3 to 6 predictors, 30 to 80 rows, some tangled.

    Every model has its own column names and row count, so a result that went to the wrong
    model, or twice to one, shows in its names and n.
    """
    rng = np.random.default_rng([seed, index])
    rows = int(rng.integers(30, 81))
    p = int(rng.integers(3, 7))
    base = rng.normal(size=(rows, p))
    # Tangle the second predictor with the first, more so for some models than for others.
    base[:, 1] = base[:, 0] * rng.uniform(0.5, 4.0) + base[:, 1] * rng.uniform(0.2, 1.0)
    names = [f"m{index:03d}_route{j}" for j in range(p)]
    scale = rng.uniform(1.0, 50.0, p)
    shift = rng.uniform(-100.0, 100.0, p)
    return {
        name: (base[:, j] * scale[j] + shift[j]).round(6).tolist() for j, name in enumerate(names)
    }


def reference_vifs(columns: dict[str, list[float]]) -> list[float]:
    """VIFs from statsmodels 0.15.0's variance_inflation_factor on the design with a constant,
    centred explicitly (``standardize=True``: the constant stays, the other columns are
    standardized, which leaves the VIFs of a model with an intercept unchanged)."""
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    design = sm.add_constant(np.column_stack(list(columns.values())))
    return [
        variance_inflation_factor(design, j, standardize=True) for j in range(1, design.shape[1])
    ]


def correlation_body(p: int, n: int, seed: int, sections: list[str] | None = None) -> dict:
    """A valid correlation input of ``p`` predictors (from ``n`` generated rows)."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(max(n, p + 2), p))
    if p > 1:
        x[:, 1] += 2.0 * x[:, 0]
    r = np.corrcoef(x, rowvar=False)
    r = (r + r.T) / 2
    np.fill_diagonal(r, 1.0)
    body: dict[str, Any] = {
        "input": {
            "kind": "correlation",
            "names": [f"c{i}" for i in range(p)],
            "matrix": r.tolist(),
            "n": float(x.shape[0]),
        }
    }
    if sections:
        body["options"] = {"sections": sections}
    return body


def table_body(rows: int, p: int, seed: int, sections: list[str] | None = None) -> dict:
    """A valid table input of ``rows`` x ``p`` generated numbers."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(rows, p))
    if p > 1:
        x[:, 1] += x[:, 0]
    body: dict[str, Any] = {
        "input": {
            "kind": "table",
            "columns": {f"t{j}": x[:, j].round(5).tolist() for j in range(p)},
        }
    }
    if sections:
        body["options"] = {"sections": sections}
    return body


# --------------------------------------------------------------------------------------------
# A batch job of generated models through the client's command line


def write_models(folder: Path, count: int) -> dict[str, dict[str, list[float]]]:
    """Write ``count`` generated models as CSV files and a manifest (every third model sends
    only its local summary); return the columns of each model by name."""
    folder.mkdir(parents=True, exist_ok=True)
    models: dict[str, dict[str, list[float]]] = {}
    entries = []
    for index in range(count):
        name = f"model{index:03d}"
        columns = ferry_model(index)
        with (folder / f"{name}.csv").open("w", newline="", encoding="utf-8") as fh:
            writer = csv.writer(fh)
            writer.writerow(list(columns))
            writer.writerows(zip(*columns.values(), strict=True))
        models[name] = columns
        entries.append({"path": f"{name}.csv", "summary_only": index % 3 == 0})
    (folder / "manifest.json").write_text(json.dumps({"models": entries}), encoding="utf-8")
    return models


def run_screen(folder: Path, url: str, out: Path, *, parallel: int = 4) -> int:
    """Run ``knotwork-screen`` on the manifest in ``folder`` (token in ``folder/token``)."""
    from knotwork_client._cli import main as screen

    return screen(
        [
            str(folder / "manifest.json"),
            "--url",
            url,
            "--token-file",
            str(folder / "token"),
            "--out",
            str(out),
            "--parallel",
            str(parallel),
            "--attempts",
            "5",
            "--timeout",
            "30",
            "--sections",
            "variables,removal",
            "--progress",
            "none",
        ]
    )


def tally_reports(models: dict[str, dict[str, list[float]]], out: Path) -> dict[str, int]:
    """Count what a batch job's reports say against what was sent.

    ``lost``: models without a report or whose report is an error; ``duplicated``: reports or
    table rows beyond one per model; ``wrong``: reports about another model (names, n) or with
    VIFs that differ from statsmodels' by more than 1e-9 relative; ``pass`` and ``fail``: the
    threshold rule's verdicts.
    """
    counts = {"lost": 0, "duplicated": 0, "wrong": 0, "pass": 0, "fail": 0}
    reports = [p.stem for p in out.glob("*.json")]
    with (out / "screen.csv").open(encoding="utf-8") as fh:
        rows = [r["model"] for r in csv.DictReader(fh)]
    counts["duplicated"] = max(0, len(rows) - len(set(rows))) + len(set(reports) - set(models))
    for name, columns in models.items():
        path = out / f"{name}.json"
        if not path.exists() or name not in rows:
            counts["lost"] += 1
            continue
        report = json.loads(path.read_text(encoding="utf-8"))
        if report.get("status") not in ("pass", "fail"):
            counts["lost"] += 1
            continue
        counts[report["status"]] += 1
        doc = report["assessment"]
        # Source: statsmodels 0.15.0 variance_inflation_factor on the same rows with a constant.
        expected = reference_vifs(columns)
        got = [v["vif"] for v in doc["variables"]]
        right = (
            report["model"] == name
            and [v["name"] for v in doc["variables"]] == list(columns)
            and doc["n"] == len(next(iter(columns.values())))
            and all(g is not None for g in got)
            and np.allclose(got, expected, rtol=1e-9, atol=0)
        )
        counts["wrong"] += not right
    return counts


def check_reports(models: dict[str, dict[str, list[float]]], out: Path) -> dict[str, int]:
    """Every model has exactly one report, about itself, with the right VIFs; returns counts."""
    counts = tally_reports(models, out)
    assert counts["lost"] == counts["duplicated"] == counts["wrong"] == 0, counts
    return counts


@contextmanager
def time_limit(seconds: float) -> Iterator[None]:
    """Fail the block (with AssertionError) if it takes longer than ``seconds`` (checked at
    exit: the block itself must be bounded, this states the bound)."""
    started = time.monotonic()
    yield
    took = time.monotonic() - started
    assert took < seconds, f"took {took:.1f} s, more than the bound of {seconds} s"
