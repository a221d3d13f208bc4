"""A small driver of headless Chromium over the DevTools protocol (a websocket, JSON messages).

Chromium is Debian's ``chromium`` package (.ci/run installs it when missing). The browser starts
with its network cut off (every host name resolves to nothing, every connection goes to a
closed loopback port), on a fresh profile in a temporary folder, and is stopped by the test
that started it. Protocol: https://chromedevtools.github.io/devtools-protocol/ (Target, Page,
Runtime, Log, Network domains).
"""

from __future__ import annotations

import base64
import json
import os
import shutil
import subprocess
import time
from contextlib import ExitStack, suppress
from pathlib import Path
from typing import Any

from websockets.sync.client import connect

NAMES = ("chromium", "chromium-browser", "google-chrome")
START_S = 30.0
CALL_S = 60.0


def find() -> str | None:
    """The browser's executable, or None when none is installed."""
    for name in NAMES:
        found = shutil.which(name)
        if found:
            return found
    return None


class Browser:
    """One headless Chromium and one page; events are kept in ``events``."""

    def __init__(self, executable: str, profile: Path) -> None:
        args = [
            executable,
            "--headless",
            "--disable-gpu",
            "--no-first-run",
            "--no-default-browser-check",
            "--disable-extensions",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--disable-dev-shm-usage",
            # No network: names resolve to nothing, connections go to a closed local port.
            "--host-resolver-rules=MAP * ~NOTFOUND",
            "--proxy-server=127.0.0.1:9",
            "--remote-debugging-port=0",
            "--remote-allow-origins=*",
            f"--user-data-dir={profile}",
            "--window-size=1100,900",
            "about:blank",
        ]
        if os.geteuid() == 0:
            args.insert(1, "--no-sandbox")  # Chromium refuses to run as root with its sandbox
        self.process = subprocess.Popen(
            args, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, stdin=subprocess.DEVNULL
        )
        self.events: list[dict[str, Any]] = []
        self._next = 0
        self._stack = ExitStack()
        try:
            self.socket = self._stack.enter_context(
                connect(self._address(profile), max_size=None, open_timeout=START_S)
            )
            target = self.call("Target.createTarget", {"url": "about:blank"})["targetId"]
            attached = self.call("Target.attachToTarget", {"targetId": target, "flatten": True})
            self.session = attached["sessionId"]
            for domain in ("Page", "Runtime", "Log", "Network"):
                self.call(f"{domain}.enable", session=self.session)
        except BaseException:
            self.close()
            raise

    def _address(self, profile: Path) -> str:
        # Chromium writes its port and the browser's websocket path to this file once it listens.
        marker = profile / "DevToolsActivePort"
        deadline = time.monotonic() + START_S
        while time.monotonic() < deadline:
            if self.process.poll() is not None:
                raise RuntimeError(f"chromium exited with status {self.process.returncode}")
            if marker.exists():
                lines = marker.read_text().split()
                if len(lines) >= 2:
                    return f"ws://127.0.0.1:{lines[0]}{lines[1]}"
            time.sleep(0.05)
        raise RuntimeError(f"chromium did not listen within {START_S:g} s")

    def call(self, method: str, params: dict[str, Any] | None = None, *, session: str | None = None,
             timeout: float = CALL_S) -> dict[str, Any]:  # fmt: skip
        """Send one command and wait for its answer (events meanwhile go to ``events``)."""
        self._next += 1
        message: dict[str, Any] = {"id": self._next, "method": method, "params": params or {}}
        if session is not None:
            message["sessionId"] = session
        self.socket.send(json.dumps(message))
        deadline = time.monotonic() + timeout
        while True:
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError(f"{method}: no answer within {timeout:g} s")
            reply = json.loads(self.socket.recv(timeout=left))
            if reply.get("id") == self._next:
                if "error" in reply:
                    raise RuntimeError(f"{method}: {reply['error']}")
                result: dict[str, Any] = reply.get("result", {})
                return result
            self.events.append(reply)

    def page(self, method: str, params: dict[str, Any] | None = None) -> dict[str, Any]:
        """A command to the page's session."""
        return self.call(method, params, session=self.session)

    def wait_for(self, event: str, timeout: float = CALL_S) -> None:
        """Wait until the page's session has sent ``event``."""
        deadline = time.monotonic() + timeout
        while not any(e.get("method") == event for e in self.events):
            left = deadline - time.monotonic()
            if left <= 0:
                raise TimeoutError(f"no {event} within {timeout:g} s")
            self.events.append(json.loads(self.socket.recv(timeout=left)))

    def load(self, url: str) -> None:
        """Open ``url`` and wait for its load event, then for the layout to settle."""
        self.events.clear()
        self.page("Page.navigate", {"url": url})
        self.wait_for("Page.loadEventFired")
        self.evaluate("new Promise(r => requestAnimationFrame(() => r(1)))")

    def evaluate(self, expression: str) -> Any:
        """The value of a JavaScript expression in the page (promises awaited)."""
        result = self.page(
            "Runtime.evaluate",
            {"expression": expression, "returnByValue": True, "awaitPromise": True},
        )
        if "exceptionDetails" in result:
            raise RuntimeError(f"{expression}: {result['exceptionDetails']}")
        return result["result"].get("value")

    def screenshot(self) -> bytes:
        """A PNG of the whole page."""
        shot = self.page("Page.captureScreenshot", {"format": "png", "captureBeyondViewport": True})
        return base64.b64decode(shot["data"])

    def pdf(self, width_in: float, height_in: float) -> bytes:
        """The page printed to PDF on paper of this size (the print style sheet applies)."""
        printed = self.page(
            "Page.printToPDF",
            {"paperWidth": width_in, "paperHeight": height_in, "preferCSSPageSize": False},
        )
        return base64.b64decode(printed["data"])

    def requests(self) -> list[str]:
        """The URLs the page asked for."""
        return [
            e["params"]["request"]["url"]
            for e in self.events
            if e.get("method") == "Network.requestWillBeSent"
        ]

    def console_errors(self) -> list[str]:
        """Console errors, uncaught exceptions and error log entries (CSP reports among them)."""
        found = []
        for e in self.events:
            method, params = e.get("method"), e.get("params", {})
            if method == "Runtime.consoleAPICalled" and params.get("type") in ("error", "assert"):
                found.append(json.dumps(params.get("args")))
            elif method == "Runtime.exceptionThrown":
                found.append(json.dumps(params.get("exceptionDetails")))
            elif method == "Log.entryAdded" and params.get("entry", {}).get("level") == "error":
                found.append(params["entry"].get("text", ""))
        return found

    def close(self) -> None:
        """Close the browser (the process this object started), killing it if it hangs."""
        try:
            if getattr(self, "socket", None) is not None:
                # It may close the socket before it answers.
                with suppress(Exception):
                    self.call("Browser.close", timeout=10)
            self._stack.close()
        finally:
            try:
                self.process.wait(timeout=10)
            except subprocess.TimeoutExpired:
                self.process.kill()
                self.process.wait(timeout=10)
