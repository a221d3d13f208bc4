"""Answers sized for their reader: ``detail`` summary by default, every table on request.

The summary must be the full answer with its p x p tables and per-step, per-k vectors left
out, and nothing else changed; the rows and pairs that stand for the tables must be the ones
the full tables hold.
"""

from __future__ import annotations

import json
from typing import Any

import msgspec
import numpy as np
import pyarrow as pa
import pytest
from bodies_and_problems import ARROW, JSON, arrow_stream

from knotwork.core import summary_detail
from knotwork.demo import garden_centres, request_body
from knotwork_contract import Assessment

# bytes: the demo's default answer (9 predictors, every section); 20.3 KB with the null
# interval and share fields of options.uncertainty (4 per variable and term).
SUMMARY_BUDGET = 21_000


def post(client: Any, body: dict[str, Any]) -> Any:
    return client.post("/v1/assess", content=json.dumps(body), headers={"Content-Type": JSON})


@pytest.fixture(scope="module")
def demo_body() -> dict[str, Any]:
    return request_body(garden_centres(240, 7), 5.0)


@pytest.fixture(scope="module")
def answers(client: Any, demo_body: dict[str, Any]) -> dict[str, Any]:
    summary = post(client, demo_body)
    full = post(client, {**demo_body, "options": {**demo_body["options"], "detail": "full"}})
    assert summary.status_code == full.status_code == 200
    return {"summary": summary, "full": full}


def test_the_demo_answer_is_compact_by_default(answers: dict[str, Any]) -> None:
    summary, full = answers["summary"], answers["full"]
    assert len(summary.content) <= SUMMARY_BUDGET < len(full.content)
    assert summary.json()["detail"] == "summary" and full.json()["detail"] == "full"


def test_the_summary_is_the_full_answer_with_the_tables_left_out(answers: dict[str, Any]) -> None:
    full = msgspec.json.decode(answers["full"].content, type=Assessment)
    # The same function on the same values (JSON round-trips floats exactly; a whole number
    # sent as an integer comes back as a float, so values are compared, not bytes).
    left_out = json.loads(msgspec.json.encode(summary_detail(full)))
    summary = answers["summary"].json()
    # The provenance names the options in force, and the two requests differ in one option:
    # its record differs there (and so does the fingerprint), everything else is the same.
    full_provenance, summary_provenance = left_out.pop("provenance"), summary.pop("provenance")
    assert full_provenance["options"] == {**summary_provenance["options"], "detail": "full"}
    assert full_provenance["fingerprint"] != summary_provenance["fingerprint"]
    assert left_out == summary
    assert summary["conditioning"]["proportions"] == []
    assert summary["tests"]["partial_correlations"] == summary["tests"]["partial_t"] == []
    assert all(step["vifs"] is None for step in summary["removal"]["steps"])
    assert summary["removal"]["alternative"] is None
    assert summary["components"]["loadings"] == summary["components"]["variable_correlations"]
    assert summary["components"]["loadings"] == []
    trace = summary["ridge"]["trace"]
    grid = [point["k"] for point in answers["full"].json()["ridge"]["trace"]]
    assert len(trace) == 8 and trace[0]["k"] == grid[0] and trace[-1]["k"] == grid[-1]
    assert all(point["vif"] == [] and point["max_vif"] is not None for point in trace)
    # Everything per variable and term is kept as it is.
    for key in ("variables", "terms", "dependencies", "comparison", "warnings", "cautions"):
        assert summary[key] == answers["full"].json()[key]


def test_high_index_rows_are_the_full_table_rows_above_the_index_threshold(
    answers: dict[str, Any],
) -> None:
    full = answers["full"].json()["conditioning"]
    rows = answers["summary"].json()["conditioning"]["high_index_rows"]
    expected = [
        (k, index)
        for k, index in enumerate(full["indices"])
        if index is not None and index > full["index_threshold"]
    ]
    assert [(r["component"], r["index"]) for r in rows] == sorted(expected, key=lambda e: -e[1])
    for row in rows:
        table_row = full["proportions"][row["component"]]
        large = [j for j, share in enumerate(table_row) if share is not None and share >= 0.1]
        assert row["variables"] == [full["names"][j] for j in large]
        assert row["proportions"] == [table_row[j] for j in large]


def test_strongest_partials_are_the_largest_of_the_full_table(answers: dict[str, Any]) -> None:
    tests = answers["full"].json()["tests"]
    names = [v["name"] for v in answers["full"].json()["variables"]]
    table = np.array(tests["partial_correlations"], dtype=float)
    upper = np.triu_indices(len(names), 1)
    top = np.sort(np.abs(table[upper]))[::-1][:5]
    pairs = answers["summary"].json()["tests"]["strongest_partials"]
    assert [abs(p["correlation"]) for p in pairs] == top.tolist()
    for pair in pairs:
        i, j = names.index(pair["first"]), names.index(pair["second"])
        assert i < j and pair["correlation"] == tests["partial_correlations"][i][j]
        assert pair["t"] == tests["partial_t"][i][j]


def test_binary_bodies_take_detail_as_a_query_parameter(client: Any) -> None:
    rng = np.random.default_rng(3)
    a = rng.normal(size=60)
    table = pa.table({"a": a, "b": a + rng.normal(size=60), "c": rng.normal(size=60)})
    answers = {}
    for detail in ("summary", "full"):
        response = client.post(
            f"/v1/assess?detail={detail}",
            content=arrow_stream(table),
            headers={"Content-Type": ARROW},
        )
        assert response.status_code == 200
        answers[detail] = response.json()
    assert answers["summary"]["detail"] == "summary"
    assert answers["full"]["conditioning"]["proportions"]
    assert answers["summary"]["conditioning"]["proportions"] == []


@pytest.mark.parametrize(
    ("request_kwargs", "pointer"),
    [
        ({"json": {"options": {"detail": "everything"}}}, "/options/detail"),
        ({"query": "detail=everything"}, "/query/detail"),
    ],
)
def test_an_unknown_detail_names_the_field(
    client: Any, request_kwargs: dict[str, Any], pointer: str
) -> None:
    if "json" in request_kwargs:
        body = {
            "input": {"kind": "correlation", "names": ["a", "b"], "n": 9,
                      "matrix": [[1, 0.2], [0.2, 1]]},
            **request_kwargs["json"],
        }  # fmt: skip
        response = post(client, body)
    else:
        table = pa.table({"a": [1.0, 2.0, 4.0, 3.0], "b": [2.0, 1.0, 3.0, 5.0]})
        response = client.post(
            "/v1/assess?" + request_kwargs["query"],
            content=arrow_stream(table),
            headers={"Content-Type": ARROW},
        )
    assert response.status_code == 400
    first = response.json()["errors"][0]
    assert first["pointer"] == pointer
    assert first["reason"] == "Invalid enum value 'everything'"


@pytest.mark.parametrize("sections", [["variables"], ["variables", "removal"]])
def test_small_requests_are_answered_as_the_codecs_compute_them(
    client: Any, sections: list[str]
) -> None:
    # Computed on the event loop (cheap sections only) or on the pool: the same function on
    # the same body either way, so the same bytes.
    from knotwork.codecs import Limits, decode_assess, run

    rng = np.random.default_rng(11)
    x = rng.normal(size=(80, 6))
    x[:, 1] += x[:, 0]
    names = [f"x{j}" for j in range(6)]
    doc = {
        "input": {"kind": "correlation", "names": names, "n": 80,
                  "matrix": np.corrcoef(x, rowvar=False).tolist()},
        "options": {"sections": sections},
    }  # fmt: skip
    body = json.dumps(doc).encode()
    answer = client.post("/v1/assess", content=body, headers={"Content-Type": JSON})
    assert answer.status_code == 200
    assert answer.content == msgspec.json.encode(run(decode_assess(body, Limits())))
