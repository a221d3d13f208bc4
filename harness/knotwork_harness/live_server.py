"""Start the real service (``python -m knotwork``, uvicorn) on a free loopback port."""

from __future__ import annotations

import os
import signal
import socket
import subprocess
import sys
import time
from collections.abc import Iterator, Mapping
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import httpx
import numpy as np

from knotwork_harness import HOST


def free_port() -> int:
    with socket.socket(socket.AF_INET, socket.SOCK_STREAM) as sock:
        sock.bind((HOST, 0))
        return int(sock.getsockname()[1])


@dataclass
class Server:
    process: subprocess.Popen[bytes]
    url: str
    stdout: Path
    stderr: Path

    def stop(self, timeout: float = 30) -> int:
        """SIGTERM, then wait for the exit status."""
        if self.process.poll() is None:
            self.process.send_signal(signal.SIGTERM)
        return self.process.wait(timeout=timeout)

    def log_lines(self) -> list[str]:
        return self.stderr.read_text(encoding="utf-8").splitlines()


def launch(
    tmp: Path, env: Mapping[str, str] | None = None, args: tuple[str, ...] = ()
) -> tuple[subprocess.Popen[bytes], Path, Path, int]:
    port = free_port()
    environment = {k: v for k, v in os.environ.items() if not k.startswith("KNOTWORK_")}
    environment.update({"KNOTWORK_BLAS_THREADS": "1", **(env or {})})
    stdout, stderr = tmp / f"server-{port}.out", tmp / f"server-{port}.err"
    with stdout.open("wb") as out, stderr.open("wb") as err:
        process = subprocess.Popen(
            [sys.executable, "-m", "knotwork", "--host", HOST, "--port", str(port), *args],
            stdout=out,
            stderr=err,
            env=environment,
        )
    return process, stdout, stderr, port


@contextmanager
def serve(tmp: Path, env: Mapping[str, str] | None = None) -> Iterator[Server]:
    """A running server, ready (``/readyz`` is 200); stopped with SIGTERM afterwards."""
    process, stdout, stderr, port = launch(tmp, env)
    server = Server(process, f"http://{HOST}:{port}", stdout, stderr)
    try:
        deadline = time.monotonic() + 60
        while True:
            if process.poll() is not None:
                raise RuntimeError(f"the server exited: {stderr.read_text()}")
            try:
                if httpx.get(server.url + "/readyz", timeout=2).status_code == 200:
                    break
            except httpx.TransportError:
                pass
            if time.monotonic() > deadline:
                raise RuntimeError("the server did not become ready in 60 s")
            time.sleep(0.1)
        yield server
    finally:
        if process.poll() is None and not _terminate(process):
            process.kill()
            process.wait()


def _terminate(process: subprocess.Popen[bytes]) -> bool:
    process.send_signal(signal.SIGTERM)
    try:
        process.wait(timeout=30)
    except subprocess.TimeoutExpired:
        return False
    return True


def heavy_item(p: int = 40, seed: int = 7) -> dict[str, object]:
    """A correlation input whose assessment takes a noticeable time (tens of milliseconds)."""
    rng = np.random.default_rng(seed)
    x = rng.normal(size=(4 * p, p))
    x[:, 1] += 3 * x[:, 0]
    r = np.corrcoef(x, rowvar=False).round(8)
    r = (r + r.T) / 2
    np.fill_diagonal(r, 1.0)
    return {
        "input": {
            "kind": "correlation",
            "names": [f"v{i}" for i in range(p)],
            "matrix": r.tolist(),
            "n": 4 * p,
        },
        "options": {"sections": ["variables", "conditioning", "tests", "dependencies", "removal"]},
    }
