"""The routes with litestar's TestClient: answers, encodings, batches, operation routes, logs."""

from __future__ import annotations

import copy
import json
import logging
import re
from html.parser import HTMLParser
from typing import Any

import numpy as np
import pytest
from answer_fields import VARIABLE_FIELDS
from bodies_and_problems import (
    ARROW,
    ARROW_FILE,
    JSON,
    PARQUET,
    arrow_file,
    arrow_stream,
    arrow_table,
    assert_problem,
    parquet,
)
from numeric import assert_close_answers
from numpy.testing import assert_allclose

from knotwork.api._examples import (
    CORRELATION_EXAMPLE,
    MOMENTS_EXAMPLE,
    PARTS_EXAMPLE,
    ROOTSTOCK,
    TABLE_COLUMNS,
    TABLE_EXAMPLE,
)
from knotwork.api._logging import JsonFormatter


def with_sections(example: dict[str, Any], sections: list[str] | None = None) -> dict[str, Any]:
    """A copy of the example asking for ``sections`` (None: every section)."""
    body = copy.deepcopy(example)
    options = body.setdefault("options", {})
    options.pop("sections", None)
    if sections is not None:
        options["sections"] = sections
    return body


def post(client: Any, body: Any, path: str = "/v1/assess") -> Any:
    return client.post(path, content=json.dumps(body), headers={"Content-Type": JSON})


@pytest.mark.parametrize(
    "example", [TABLE_EXAMPLE, CORRELATION_EXAMPLE, MOMENTS_EXAMPLE, PARTS_EXAMPLE]
)
def test_examples_are_answered_with_the_fixed_field_names(client: Any, example: Any) -> None:
    response = post(client, with_sections(example))
    assert response.status_code == 200, response.text
    assert response.headers["content-type"] == JSON
    result = response.json()
    assert {"input_kind", "n", "p", "variables", "warnings", "cautions"} <= set(result)
    assert result["input_kind"] == example["input"]["kind"]
    for variable in result["variables"]:
        assert set(variable) >= {"name", *VARIABLE_FIELDS}
    assert {"basis", "eigenvalues", "condition_number", "indices", "proportions", "tangles"} <= set(
        result["conditioning"]
    )
    assert {"threshold", "steps", "kept"} <= set(result["removal"])
    assert result["ridge"]["k_scale"] == "correlation"
    assert {rule["rule"] for rule in result["ridge"]["choices"]} >= {
        "hoerl_kennard_baldwin",
        "lawless_wang",
        "gcv",
        "vif_threshold",
    }
    assert {"eigenvalues", "explained", "cumulative", "loadings", "kept", "rule"} <= set(
        result["components"]
    )


def test_table_vif_matches_statsmodels(client: Any) -> None:
    # Outside source: statsmodels 0.15.0 variance_inflation_factor on the design with a
    # constant column (the centred VIF of each predictor is then 1 / (1 - R_j^2)).
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    names = ["rainfall_mm", "irrigation_l", "soil_moisture", "sun_hours", "tree_age_y"]
    body = {"input": {"kind": "table", "columns": {k: TABLE_COLUMNS[k] for k in names}}}
    result = post(client, with_sections(body, ["variables"])).json()
    design = np.column_stack([np.ones(16)] + [TABLE_COLUMNS[k] for k in names])
    expected = [variance_inflation_factor(design, j) for j in range(1, design.shape[1])]
    got = [v["vif"] for v in result["variables"]]
    assert [v["name"] for v in result["variables"]] == names
    assert_allclose(got, expected, rtol=1e-9)


def test_json_arrow_and_parquet_give_the_same_answer(client: Any) -> None:
    options = {"threshold": 5, "protect": ["irrigation_l"]}
    body = {
        "input": {
            "kind": "table",
            "columns": TABLE_COLUMNS,
            "categorical": {"rootstock": ROOTSTOCK},
            "response": "yield_kg",
        },
        "options": options,
    }
    expected = post(client, body).json()
    table = arrow_table(TABLE_COLUMNS, {"rootstock": ROOTSTOCK})
    query = "threshold=5&protect=irrigation_l&response=yield_kg"
    for media, content in (
        (ARROW, arrow_stream(table)),
        (ARROW_FILE, arrow_file(table)),
        (PARQUET, parquet(table)),
        (ARROW, arrow_stream(table.replace_schema_metadata(None).combine_chunks())),
    ):
        response = client.post(
            f"/v1/assess?{query}", content=content, headers={"Content-Type": media}
        )
        assert response.status_code == 200, response.text
        # Different encodings, different decoders: they hand the core the same doubles
        # (test_api_codecs checks the decoding exactly), but nothing promises the same bits
        # after that (Arrow buffers, chunks and row groups may reach the core laid out
        # differently). Reordering sums moves this answer by at most 4e-12 relative (measured
        # by permuting the rows), so 1e-9 holds, with 1e-12 absolute for values that are zero
        # up to rounding. The GCV choice is a minimiser's result on a flat curve: rounding moves
        # it (and the fit at its k) by up to 1e-7 relative, hence 1e-5 there.
        assert_close_answers(
            response.json(), expected, rtol=1e-9, atol=1e-12, looser={"/ridge/choices": 1e-5}
        )


def test_dictionary_encoded_levels_equal_plain_strings(client: Any) -> None:
    import pyarrow as pa

    plain = arrow_table(TABLE_COLUMNS, {"rootstock": ROOTSTOCK})
    encoded = plain.set_column(
        plain.schema.get_field_index("rootstock"),
        "rootstock",
        pa.array(ROOTSTOCK).dictionary_encode(),
    )
    answers = [
        client.post(
            "/v1/assess?sections=variables,terms&response=yield_kg",
            content=arrow_stream(t),
            headers={"Content-Type": ARROW},
        ).json()
        for t in (plain, encoded)
    ]
    # Two encodings of the labels, decoded by different branches: the same tolerance as for
    # the other encodings above (rounding at most, 1e-9 relative; 1e-12 for values near 0).
    assert_close_answers(answers[1], answers[0], rtol=1e-9, atol=1e-12)
    assert answers[0]["terms"][0]["name"] == "rootstock"


def test_batch_answers_each_item_on_its_own(client: Any) -> None:
    bad = {
        "input": {"kind": "correlation", "names": ["a", "b"], "matrix": [[1, 2], [2, 1]], "n": 9}
    }
    items = [
        with_sections(CORRELATION_EXAMPLE),
        {"input": {"kind": "table", "columns": {"a": [1, "x"]}}},
        bad,
        with_sections(MOMENTS_EXAMPLE),
    ]
    response = post(client, {"items": items}, "/v1/assess/batch")
    assert response.status_code == 200, response.text
    results = response.json()["results"]
    assert len(results) == 4
    assert results[0]["input_kind"] == "correlation"
    assert results[3]["input_kind"] == "moments"
    assert results[1]["type"].endswith("/invalid-request")
    assert results[1]["errors"][0]["pointer"] == "/items/1/input/columns/a/1"
    assert results[2]["type"].endswith("/invalid-matrix")
    assert results[2]["status"] == 422
    assert results[2]["errors"][0]["pointer"] == "/items/2/input/matrix/0/1"
    # The batch answer equals the single answer bit for bit: each item goes through the same
    # decode_assess and run as a single request (routes._assess_many), on the same values.
    assert results[0] == post(client, with_sections(CORRELATION_EXAMPLE)).json()


def test_request_ids_are_echoed_when_plain(client: Any) -> None:
    response = client.get("/healthz", headers={"X-Request-ID": "job-42.step:7"})
    assert response.headers["x-request-id"] == "job-42.step:7"
    response = client.get("/healthz", headers={"X-Request-ID": "bad id\twith spaces"})
    assert re.fullmatch(r"[0-9a-f]{32}", response.headers["x-request-id"])


def test_health_and_readiness(client: Any) -> None:
    assert client.get("/healthz").json() == {"status": "ok"}
    ready = client.get("/readyz")
    assert ready.status_code == 200
    assert ready.json()["status"] == "ready"
    assert ready.json()["capacity"] == 6  # 2 slots + a queue of 4


def test_warm_up_loads_every_codec_before_readiness() -> None:
    # In a fresh interpreter: after the start-up warm-up, the modules a first Arrow or Parquet
    # request would import (pyarrow's Parquet reader, and pandas, which pyarrow's conversion to
    # numpy loads) are already there.
    import subprocess
    import sys

    # The child leaves at once after printing (os._exit): now and then, under load, the
    # interpreter's ordinary teardown aborts in a native library's thread ("terminate called
    # without an active exception", seen 2 times in 20 before any change of ours), which says
    # nothing about the warm-up.
    code = (
        "import os, sys; from knotwork.api._app import _warm_up; _warm_up(); "
        "print(all(m in sys.modules for m in ('pandas', 'pyarrow.parquet', 'pyarrow.ipc')), "
        "flush=True); os._exit(0)"
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "True", out.stderr


def test_readiness_is_503_before_start_up() -> None:
    from litestar.testing import TestClient

    from knotwork.api import create_app

    client = TestClient(create_app())  # outside "with": the start-up hook has not run
    response = client.get("/readyz")
    assert response.status_code == 503
    assert response.json()["status"] == "starting"


def test_metrics_are_labelled_by_route_template(client: Any) -> None:
    post(client, with_sections(CORRELATION_EXAMPLE, ["variables"]))
    client.post("/v1/assess?threshold=9", content=b"x", headers={"Content-Type": ARROW})
    response = client.get("/metrics")
    # The Prometheus text format's media type (prometheus_client's CONTENT_TYPE_LATEST), with
    # its charset once.
    from prometheus_client import CONTENT_TYPE_LATEST

    assert response.headers["content-type"] == CONTENT_TYPE_LATEST
    text = response.text
    assert 'knotwork_requests_total{app_name="knotwork",method="POST",path="/v1/assess"' in text
    assert "knotwork_compute_seconds_bucket" in text
    assert "threshold=9" not in text


class _Links(HTMLParser):
    def __init__(self) -> None:
        super().__init__()
        self.links: list[str] = []

    def handle_starttag(self, tag: str, attrs: list[tuple[str, str | None]]) -> None:
        for name, value in attrs:
            if name in ("src", "href") and value:
                self.links.append(value)


def test_docs_page_works_offline(client: Any) -> None:
    page = client.get("/docs")
    assert page.status_code == 200
    assert page.headers["content-type"].startswith("text/html")
    parser = _Links()
    parser.feed(page.text)
    assert len(parser.links) >= 3  # the CSS, the bundle and the standalone preset
    for link in parser.links:
        assert link.startswith("/"), f"{link} is not served by this service"
        asset = client.get(link)
        assert asset.status_code == 200, link
        assert len(asset.content) > 1000, link
    assert "https://cdn" not in page.text
    assert '"openapi":"3.1.0"' in page.text


def test_openapi_json_is_served(client: Any) -> None:
    document = client.get("/openapi.json").json()
    assert document["openapi"] == "3.1.0"
    assert document == client.get("/docs/openapi.json").json()


def _log_lines(caplog: pytest.LogCaptureFixture) -> list[str]:
    # The service's records only: httpx logs on the test's (client) side.
    formatter = JsonFormatter()
    return [
        formatter.format(record)
        for record in caplog.records
        if not record.name.startswith(("httpx", "httpcore"))
    ]


def test_logs_hold_no_values(client: Any, caplog: pytest.LogCaptureFixture) -> None:
    secret = 7341.9286
    columns = {k: list(v) for k, v in TABLE_COLUMNS.items()}
    columns["sun_hours"][3] = secret
    body = {"input": {"kind": "table", "columns": columns}, "options": {"sections": ["variables"]}}
    table = arrow_table(columns)
    with caplog.at_level(logging.DEBUG):
        assert post(client, body).status_code == 200
        assert (
            client.post(
                "/v1/assess?sections=variables&threshold=7",
                content=arrow_stream(table),
                headers={"Content-Type": ARROW},
            ).status_code
            == 200
        )
        bad = copy.deepcopy(body)
        bad["input"]["columns"]["sun_hours"][5] = str(secret)
        assert post(client, bad).status_code == 400
        ragged = copy.deepcopy(body)
        ragged["input"]["columns"]["sun_hours"].append(secret)
        assert post(client, ragged).status_code == 422
    lines = _log_lines(caplog)
    access = [json.loads(line) for line in lines if '"logger":"knotwork.access"' in line]
    assert len(access) == 4
    for entry in access:
        assert {"request_id", "method", "route", "status", "bytes_in", "bytes_out"} <= set(entry)
        assert entry["route"] == "/v1/assess"
        assert entry["duration_ms"] >= 0
    assert [entry["status"] for entry in access] == [200, 200, 400, 422]
    assert {"read_ms", "queue_ms", "compute_ms"} <= set(access[0])
    # The whole number is searched: its first digits alone turn up in random request ids.
    for line in lines:
        assert "7341.9286" not in line, line


def test_unexpected_errors_are_500_problems_logged_without_their_message(
    client: Any, caplog: pytest.LogCaptureFixture, monkeypatch: pytest.MonkeyPatch
) -> None:
    import knotwork.api._routes as routes

    def broken(prepared: Any) -> Any:
        raise RuntimeError("value 7341.9286 leaked")

    monkeypatch.setattr(routes, "run", broken)
    with caplog.at_level(logging.DEBUG):
        response = post(client, with_sections(CORRELATION_EXAMPLE))
    assert_problem(response, 500, "internal-error", None)
    assert "7341.9286" not in response.text
    lines = _log_lines(caplog)
    assert any('"error_type":"RuntimeError"' in line for line in lines)
    assert not any("7341.9286" in line for line in lines)


def test_public_names_are_sorted_and_exist() -> None:
    import importlib

    for name in ("knotwork.api", "knotwork.codecs"):
        module = importlib.import_module(name)
        exported = module.__all__
        order = sorted(exported, key=lambda s: (not s.isupper(), not s[:1].isupper(), s))
        assert exported == order, name
        for attr in exported:
            assert getattr(module, attr) is not None
