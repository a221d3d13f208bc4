"""The client against a real service process on a free loopback port (started here).

The central invariant: assessing the rows, their correlation matrix with n, and their local
summary gives the same VIFs (to 1e-9) and the same removal sequence; Longley's VIFs come out
as published whichever way they travel.
"""

from __future__ import annotations

import asyncio
import contextlib
import io
import json
from collections.abc import Iterator
from pathlib import Path

import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from kc_support import bakery_frame
from numpy.testing import assert_allclose

from knotwork_client import (
    Assessment,
    AsyncClient,
    AuthenticationError,
    Client,
    InputRejectedError,
    ProblemDetails,
    summarize,
)
from knotwork_client._cli import main as screen
from knotwork_harness.live_server import serve

pytest.importorskip("knotwork.api", reason="the service is part of this repository")

OLD_TOKEN, NEW_TOKEN = "loaf-token-one-0123456789", "loaf-token-two-0123456789"


@contextlib.contextmanager
def _service(tmp: Path, **env: str) -> Iterator[str]:
    """``python -m knotwork`` on a free loopback port, ready; stopped after (the harness's)."""
    with serve(tmp, {"KNOTWORK_WORKERS": "1", **env}) as server:
        yield server.url


@pytest.fixture(scope="module")
def service(tmp_path_factory) -> Iterator[str]:
    with _service(tmp_path_factory.mktemp("service")) as url:
        yield url


@pytest.fixture(scope="module")
def guarded(tmp_path_factory) -> Iterator[str]:
    with _service(
        tmp_path_factory.mktemp("guarded"), KNOTWORK_TOKENS=f"{OLD_TOKEN},{NEW_TOKEN}"
    ) as url:
        yield url


def vifs(a: Assessment) -> np.ndarray:
    return np.array([np.nan if v.vif is None else v.vif for v in a.variables])


def drops(a: Assessment) -> list[str]:
    return [s.drop for s in a.removal.steps]


# --- the invariant -------------------------------------------------------------------------


@pytest.mark.slow
@pytest.mark.parametrize("weighted", [False, True])
def test_rows_correlation_and_summary_agree(service, weighted):
    frame = bakery_frame(rows=1500)
    if not weighted:
        frame = frame.drop(columns="weeks")
    weights = "weeks" if weighted else None
    summary = summarize(frame, response="loaves", weights=weights)
    with Client(service) as client:
        rows = client.assess(frame, response="loaves", weights=weights, threshold=5)
        arrow = client.assess(
            frame, response="loaves", weights=weights, threshold=5, encoding="arrow"
        )
        moments = client.assess(summary, threshold=5)
        correlation = client.assess(summary.to_input(kind="correlation"), threshold=5)
    assert rows.input_kind == "table" and moments.input_kind == "moments"
    assert correlation.input_kind == "correlation"
    names = [v.name for v in rows.variables]
    for other in (arrow, moments, correlation):
        assert [v.name for v in other.variables] == names
        assert_allclose(vifs(other), vifs(rows), rtol=1e-9)
        assert drops(other) == drops(rows)
        assert [(t.name, t.columns) for t in other.terms] == [
            (t.name, t.columns) for t in rows.terms
        ]
        assert_allclose([t.gvif for t in other.terms], [t.gvif for t in rows.terms], rtol=1e-9)
    # Exact: n sums whole-number weights, exact in floating point in any order.
    assert moments.n == rows.n == (frame["weeks"].sum() if weighted else len(frame))
    assert drops(rows)  # the tangled pairs make the sequence non-trivial


@pytest.mark.slow
def test_longley_whichever_way_it_travels(service):
    # Source: statsmodels.datasets.longley; check values from docs/numerics.md (widely cited to
    # 2 dp, from memory: 135.53, 1788.51, 33.62, 3.59, 399.15, 758.98).
    from statsmodels.datasets import longley

    frame = longley.load_pandas().data.drop(columns="TOTEMP") + 1e6  # shifted: stays exact
    published = [135.532, 1788.51, 33.6189, 3.58893, 399.151, 758.981]
    chunks = (frame.iloc[i : i + 4] for i in range(0, 16, 4))
    with Client(service) as client:
        rows = client.assess(frame, threshold=10)
        summary = client.assess(summarize(chunks), threshold=10)
    assert_allclose(vifs(rows), published, rtol=5e-6)
    assert_allclose(vifs(summary), vifs(rows), rtol=1e-9)
    # Greedy removal at threshold 10 (docs/numerics.md): GNP, YEAR, GNPDEFL; kept UNEMP, ARMED, POP.
    assert drops(summary) == drops(rows) == ["GNP", "YEAR", "GNPDEFL"]


@pytest.mark.slow
def test_pairwise_summary_matches_pairwise_rows(service):
    frame = bakery_frame(rows=800, missing=True).drop(columns="weeks")
    summary = summarize(frame, response="loaves", missing="pairwise")
    with Client(service) as client:
        rows = client.assess(frame, response="loaves", missing="pairwise")
        local = client.assess(summary)
    assert local.input_kind == "correlation"
    assert local.n == rows.n  # exact: the smallest pairwise count, a whole number
    assert_allclose(vifs(local), vifs(rows), rtol=1e-9)


@pytest.mark.slow
def test_async_client_and_batch(service):
    frame = bakery_frame(rows=300).drop(columns="weeks")

    async def run():
        async with AsyncClient(service) as client:
            single = await client.assess(frame, response="loaves")
            batch = await client.assess_batch(
                [summarize(frame, response="loaves"), frame[["oven_hours"]], frame],
                threshold=10,
            )
            return single, batch, await client.ready()

    single, batch, ready = asyncio.run(run())
    assert ready
    assert isinstance(batch[0], Assessment) and isinstance(batch[2], Assessment)
    assert isinstance(batch[1], ProblemDetails)
    assert batch[1].status == 422 and batch[1].errors[0].pointer.startswith("/items/1")
    assert_allclose(vifs(batch[0]), vifs(single), rtol=1e-9)
    assert batch[0].threshold == 10


# --- errors as the service sends them ----------------------------------------------------


@pytest.mark.slow
def test_rejections_carry_the_problem_document(service):
    frame = bakery_frame(rows=400, missing=True)
    with Client(service) as client:
        with pytest.raises(InputRejectedError) as missing:
            client.assess(frame, response="loaves")
        with pytest.raises(InputRejectedError) as too_few:
            client.assess(
                frame.dropna().iloc[:4][
                    ["oven_hours", "flour_kg", "staff_shifts", "van_trips", "market_stalls"]
                ]
            )
        assert client.health() == {"status": "ok"}
    assert missing.value.status == 422
    assert "/input/columns/flour_kg" in missing.value.pointers
    assert missing.value.type != "about:blank"
    assert too_few.value.status == 422
    assert isinstance(missing.value, ValueError)


@pytest.mark.slow
def test_tokens(guarded):
    frame = bakery_frame(rows=100)[["oven_hours", "flour_kg", "staff_shifts"]]
    with Client(guarded) as anonymous, pytest.raises(AuthenticationError) as none:
        anonymous.assess(frame)
    with (
        Client(guarded, token="loaf-token-bad-0123456789") as wrong,
        pytest.raises(AuthenticationError) as bad,
    ):
        wrong.assess(frame)
    assert (none.value.status, bad.value.status) == (401, 403)
    for token in (OLD_TOKEN, NEW_TOKEN):  # both tokens of a rotation work
        with Client(guarded, token=token) as client:
            assert client.assess(frame).p == 3


# --- the command line end to end ---------------------------------------------------------


@pytest.mark.slow
def test_command_line_gates_a_pipeline(service, tmp_path):
    frame = bakery_frame(rows=500)
    models = tmp_path / "models"
    models.mkdir()
    frame[["oven_hours", "staff_shifts", "market_stalls", "loaves", "weeks"]].to_csv(
        models / "lean.csv", index=False
    )
    pq.write_table(pa.Table.from_pandas(frame), models / "everything.parquet")
    out = tmp_path / "reports"
    err = io.StringIO()
    code = screen(
        [
            str(models),
            "--url",
            service,
            "--response",
            "loaves",
            "--weights",
            "weeks",
            "--summary-only",
            "--out",
            str(out),
        ],
        stderr=err,
    )
    assert code == 1, err.getvalue()
    report = json.loads((out / "everything.json").read_text())
    assert report["sent"] == "moments" and report["status"] == "fail"
    assert "oven_hours" in report["breaches"]
    assert json.loads((out / "lean.json").read_text())["status"] == "pass"
    code = screen(
        [str(models / "lean.csv"), "--url", service, "--response", "loaves", "--out", str(out)],
        stderr=io.StringIO(),
    )
    assert code == 0
