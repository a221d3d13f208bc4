"""Helpers for the client tests: generated data and an in-memory stand-in service.

The data are generated (a fictional bakery cooperative's weekly figures, several of them
tangled); the stand-in service answers over ``httpx.MockTransport`` with VIFs it computes
itself from whatever input it gets, so the client can be exercised end to end without a
network or the real server.
"""

from __future__ import annotations

import io
import math
from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import httpx
import msgspec
import numpy as np
import pandas as pd

REGIONS = ("harbour", "hill", "market", "riverside")


def bakery_frame(rows: int = 400, seed: int = 7, *, missing: bool = False) -> pd.DataFrame:
    """Weekly figures of a fictional bakery cooperative's branches (generated, fixed seed).

    ``flour_kg`` tracks ``oven_hours`` closely and ``van_trips`` follows ``staff_shifts``, so
    two pairs are tangled; ``region`` is categorical; ``loaves`` is the response; ``weeks``
    (how many weeks a row pools) serves as frequency weights.
    """
    rng = np.random.default_rng(seed)
    oven = rng.normal(60.0, 8.0, rows)
    flour = 11.0 * oven + rng.normal(0.0, 15.0, rows)
    shifts = rng.normal(30.0, 5.0, rows)
    vans = 0.8 * shifts + rng.normal(0.0, 1.5, rows)
    stalls = rng.poisson(4.0, rows).astype(float)
    region = rng.choice(REGIONS, rows)
    loaves = 20 * oven + 3 * shifts + 15 * stalls + rng.normal(0, 40, rows)
    weeks = rng.integers(1, 5, rows).astype(float)
    frame = pd.DataFrame(
        {
            "oven_hours": oven,
            "flour_kg": flour,
            "staff_shifts": shifts,
            "van_trips": vans,
            "market_stalls": stalls,
            "region": pd.Series(region, dtype="str"),
            "loaves": loaves,
            "weeks": weeks,
        }
    )
    if missing:
        frame.loc[rng.choice(rows, rows // 10, replace=False), "flour_kg"] = np.nan
        frame.loc[rng.choice(rows, rows // 20, replace=False), "van_trips"] = np.nan
        frame.loc[rng.choice(rows, rows // 25, replace=False), "region"] = None
    return frame


# --- the stand-in service -----------------------------------------------------------------


def _vifs_from_correlation(r: np.ndarray) -> list[float | None]:
    try:
        inv = np.linalg.inv(r)
    except np.linalg.LinAlgError:
        return [None] * len(r)
    return [float(v) if v > 0 and math.isfinite(v) and v < 1e12 else None for v in np.diag(inv)]


def _rows_to_correlation(
    columns: dict[str, np.ndarray], response: str | None, weights: str | None
) -> tuple[list[str], np.ndarray, float]:
    names = [c for c in columns if c not in (response, weights)]
    x = np.column_stack([columns[c] for c in names])
    keep = ~np.isnan(x).any(axis=1)
    x = x[keep]
    return names, np.corrcoef(x, rowvar=False), float(keep.sum())


def _correlation_of(doc: dict[str, Any], body: bytes, request: httpx.Request) -> tuple:
    """(names, predictor correlation, n, kind) from any input the service accepts."""
    if request.headers["content-type"].startswith("application/vnd.apache.arrow.stream"):
        import pyarrow as pa

        table = pa.ipc.open_stream(io.BytesIO(body)).read_all()
        cols = {
            n: table[n].to_numpy(zero_copy_only=False).astype(float)
            for n in table.column_names
            if not pa.types.is_dictionary(table[n].type)
        }
        names, r, n = _rows_to_correlation(
            cols, request.url.params.get("response"), request.url.params.get("weights")
        )
        return names, r, n, "table"
    inp = doc["input"]
    if inp["kind"] == "table":
        cols = {
            k: np.array([np.nan if v is None else v for v in vs])
            for k, vs in inp["columns"].items()
        }
        names, r, n = _rows_to_correlation(cols, inp.get("response"), inp.get("weights"))
        return names, r, n, "table"
    if inp["kind"] == "correlation":
        return inp["names"], np.array(inp["matrix"]), inp["n"], "correlation"
    names = list(inp["names"])
    cov = np.array(inp["covariance"])
    if inp.get("response") is not None:
        keep = [i for i, nm in enumerate(names) if nm != inp["response"]]
        names = [names[i] for i in keep]
        cov = cov[np.ix_(keep, keep)]
    sd = np.sqrt(np.diag(cov))
    return names, cov / np.outer(sd, sd), inp["n"], "moments"


def assessment_for(names: list[str], r: np.ndarray, n: float, kind: str, threshold: float):
    vifs = _vifs_from_correlation(r)
    return {
        "variables": [
            {
                "name": nm,
                "vif": v,
                # As the contract says for an aliased variable: tolerance 0, R^2 1.
                "tolerance": 0.0 if v is None else 1 / v,
                "r_squared": 1.0 if v is None else 1 - 1 / v,
                "se_inflation": None if v is None else math.sqrt(v),
                "above_threshold": v is None or v > threshold,
                "aliased": v is None,
                "a_field_from_the_future": {"kept": "as unknown"},
            }
            for nm, v in zip(names, vifs, strict=True)
        ],
        "terms": [],
        "removal": {"threshold": threshold, "steps": [], "kept": names},
        "warnings": [],
        "cautions": ["thresholds are rules of thumb"],
        "n": n,
        "p": len(names),
        "input_kind": kind,
    }


@dataclass
class StandIn:
    """An in-memory service: records every request and can be told to fail first."""

    script: list[Callable[[httpx.Request], httpx.Response | None]] = field(default_factory=list)
    requests: list[httpx.Request] = field(default_factory=list)

    def handler(self, request: httpx.Request) -> httpx.Response:
        self.requests.append(request)
        if self.script:
            scripted = self.script.pop(0)(request)
            if scripted is not None:
                return scripted
        path = request.url.path
        if path == "/healthz":
            return httpx.Response(200, json={"status": "ok"})
        if path == "/readyz":
            return httpx.Response(200, json={"status": "ready"})
        body = request.read()
        if path == "/v1/assess":
            doc = (
                {}
                if request.headers["content-type"].startswith("application/vnd")
                else (msgspec.json.decode(body))
            )
            threshold = float(
                request.url.params.get("threshold", (doc.get("options") or {}).get("threshold", 5))
            )
            return httpx.Response(
                200, json=assessment_for(*_correlation_of(doc, body, request), threshold)
            )
        if path == "/v1/assess/batch":
            items = msgspec.json.decode(body)["items"]
            results = []
            for item in items:
                try:
                    fake = httpx.Request("POST", "http://x/v1/assess", json=item)
                    names, r, n, kind = _correlation_of(item, b"", fake)
                    if len(names) < 2:
                        raise ValueError("too few")
                    thr = float((item.get("options") or {}).get("threshold", 5))
                    results.append(assessment_for(names, r, n, kind, thr))
                except Exception:
                    results.append(problem(422, "/input", "cannot use this item"))
            return httpx.Response(200, json={"results": results})
        return httpx.Response(404, json=problem(404, "", "no such route"))

    @property
    def transport(self) -> httpx.MockTransport:
        return httpx.MockTransport(self.handler)


def problem(status: int, pointer: str, reason: str, kind: str = "invalid-input") -> dict:
    return {
        "type": f"https://knotwork.invalid/problems/{kind}",
        "title": "the input cannot be used",
        "status": status,
        "detail": reason,
        "errors": [{"pointer": pointer, "reason": reason}],
    }


class FakeTime:
    """A clock and a sleep that advances it, so retry tests never wait."""

    def __init__(self) -> None:
        self.now = 0.0
        self.sleeps: list[float] = []

    def clock(self) -> float:
        return self.now

    def sleep(self, seconds: float) -> None:
        self.sleeps.append(seconds)
        self.now += seconds

    async def asleep(self, seconds: float) -> None:
        self.sleep(seconds)
