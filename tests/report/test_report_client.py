"""The client's report and the command line's pages, against a real server on loopback."""

from __future__ import annotations

import io
import json
import re
from collections.abc import Iterator
from pathlib import Path

import anyio
import pytest
from page_checks import Page, outside_references

from knotwork.demo import garden_centres
from knotwork_client import AsyncClient, Client, InputRejectedError
from knotwork_client._cli import main as screen
from knotwork_harness.live_server import serve


@pytest.fixture(scope="module")
def service(tmp_path_factory: pytest.TempPathFactory) -> Iterator[str]:
    with serve(tmp_path_factory.mktemp("service"), {"KNOTWORK_WORKERS": "1"}) as server:
        yield server.url


@pytest.mark.slow
def test_client_writes_the_page(service: str, tmp_path: Path) -> None:
    frame = garden_centres(240, 7)
    with Client(service) as client:
        written = client.report(frame, tmp_path / "demo.html", response="weekly_takings",
                                categorical=["region"], threshold=5)  # fmt: skip
        answer = client.assess(frame, response="weekly_takings", categorical=["region"],
                               threshold=5)  # fmt: skip
    assert written == tmp_path / "demo.html"
    text = written.read_text(encoding="utf-8")
    assert Page(text).errors == [] and outside_references(text) == []
    for variable in answer.variables:
        assert f"<td>{variable.name}</td><td class=num>{variable.vif:.2f}</td>" in text
    # The same request to both routes: one fingerprint.
    assert answer.provenance is not None and answer.provenance.fingerprint in text


@pytest.mark.slow
def test_async_client_writes_the_page_and_errors_raise(service: str, tmp_path: Path) -> None:
    async def go() -> Path:
        async with AsyncClient(service) as client:
            return await client.report({"a": [1.0, 2.0, 4.0, 3.0, 5.0], "b": [2.0, 1.0, 3.0,
                                        5.0, 4.0]}, tmp_path / "small.html")  # fmt: skip

    assert "Collinearity report" in anyio.run(go).read_text(encoding="utf-8")
    with Client(service) as client, pytest.raises(InputRejectedError) as caught:
        client.report({"a": [1.0, 1.0, 1.0], "b": [1.0, 2.0, 3.0]}, tmp_path / "no.html")
    assert caught.value.status == 422 and caught.value.problem.errors
    assert not (tmp_path / "no.html").exists()


@pytest.mark.slow
def test_command_line_writes_pages_and_an_index(service: str, tmp_path: Path) -> None:
    models = tmp_path / "models"
    models.mkdir()
    frame = garden_centres(240, 7)
    frame.to_csv(models / "tangled.csv", index=False)
    frame[["local_households", "checkout_lanes", "weekly_takings"]].to_csv(
        models / "lean.csv", index=False
    )
    (models / "broken.csv").write_text("a,b\n1,1\n1,1\n1,1\n", encoding="utf-8")
    out = tmp_path / "out"
    code = screen(
        [str(models), "--url", service, "--response", "weekly_takings", "--categorical",
         "region", "--out", str(out), "--report-html"],
        stderr=io.StringIO(),
    )  # fmt: skip
    assert code == 3  # the broken model could not be assessed
    assert {p.name for p in out.glob("*.html")} == {"index.html", "lean.html", "tangled.html"}
    index = (out / "index.html").read_text(encoding="utf-8")
    siblings = frozenset(p.name for p in out.glob("*.html"))  # links to the pages beside it
    assert Page(index).errors == [] and outside_references(index, siblings) == []
    rows = re.findall(r"<tr><td>(.*?)</td><td class=(\w+)>", index)
    assert [(re.sub(r"<[^>]+>", "", name), status) for name, status in rows] == [
        ("broken", "error"),
        ("lean", "pass"),
        ("tangled", "fail"),
    ]
    assert '<a href="tangled.html">tangled</a>' in index and 'href="broken.html"' not in index
    tangled = json.loads((out / "tangled.json").read_text(encoding="utf-8"))
    largest = max(v["vif"] for v in tangled["assessment"]["variables"])
    assert f"{largest:.2f}" in index
    page = (out / "tangled.html").read_text(encoding="utf-8")
    assert tangled["assessment"]["provenance"]["fingerprint"] in page
