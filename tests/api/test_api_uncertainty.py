"""options.uncertainty through the routes: JSON and binary bodies, reproducibility, bad input."""

from __future__ import annotations

import json
from typing import Any

import numpy as np
import pytest
from answer_fields import UNCERTAINTY_TERM_FIELDS, UNCERTAINTY_VARIABLE_FIELDS
from bodies_and_problems import ARROW, JSON, PARQUET, arrow_stream, arrow_table, assert_problem
from bodies_and_problems import parquet as parquet_body
from numeric import assert_close_answers

from knotwork_contract import REPLICATES_MAX, REPLICATES_MIN

NEW_VARIABLE_FIELDS = UNCERTAINTY_VARIABLE_FIELDS
NEW_TERM_FIELDS = UNCERTAINTY_TERM_FIELDS


def rows(n: int = 120, seed: int = 5) -> tuple[dict[str, list[float]], dict[str, list[str]]]:
    """Generated rows: three related numeric columns, one free one, and a three-level label."""
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((n, 3))
    mixed = z[:, 0] + z[:, 1] + 0.6 * rng.standard_normal(n)
    columns = {
        "soil_ph": z[:, 0].tolist(),
        "shade": z[:, 1].tolist(),
        "frost_days": z[:, 2].tolist(),
        "water_need": mixed.tolist(),
    }
    labels = {"bed": [("north", "south", "east")[i % 3] for i in range(n)]}
    return columns, labels


def table_body(options: dict[str, Any] | None = None) -> dict[str, Any]:
    columns, labels = rows()
    return {
        "input": {"kind": "table", "columns": columns, "categorical": labels},
        "options": {"sections": ["variables", "terms"], **(options or {})},
    }


def post(client: Any, body: Any) -> Any:
    return client.post("/v1/assess", content=json.dumps(body), headers={"Content-Type": JSON})


def test_without_the_option_every_field_is_as_before_and_the_new_ones_are_null(client) -> None:
    plain = post(client, table_body()).json()
    normal = post(client, table_body({"uncertainty": {"method": "normal"}})).json()
    assert plain["uncertainty"] is None
    # The new fields come after the existing ones, in the contract's order (JSON keys follow
    # the fields; other options may add fields after them).
    for record, new in (
        (plain["variables"][0], NEW_VARIABLE_FIELDS),
        (plain["terms"][0], NEW_TERM_FIELDS),
    ):
        keys = tuple(record)
        start = keys.index(new[0])
        assert start > keys.index("aliased")  # after every field the answer had before
        assert keys[start : start + 4] == new
    for v in plain["variables"]:
        assert all(v[f] is None for f in NEW_VARIABLE_FIELDS)
    for t in plain["terms"]:
        assert all(t[f] is None for f in NEW_TERM_FIELDS)
    # The same computation with intervals added: every existing field identical (the same
    # functions on the same input), only the new fields and the record differ.
    strip_v = [{k: v[k] for k in v if k not in NEW_VARIABLE_FIELDS} for v in normal["variables"]]
    assert strip_v == [
        {k: v[k] for k in v if k not in NEW_VARIABLE_FIELDS} for v in plain["variables"]
    ]
    # The provenance differs too: its options (and so its fingerprint) name the uncertainty.
    other = ("variables", "uncertainty", "provenance")
    rest = {k: normal[k] for k in normal if k not in other}
    assert rest == {k: plain[k] for k in plain if k not in other}


def test_normal_intervals_for_rows_and_their_correlation_matrix(client) -> None:
    columns, _ = rows()
    names = list(columns)
    x = np.column_stack([columns[c] for c in names])
    options = {"sections": ["variables"], "uncertainty": {"method": "normal", "level": 0.9}}
    table = post(client, {"input": {"kind": "table", "columns": columns}, "options": options})
    corr = {
        "kind": "correlation",
        "names": names,
        "matrix": np.corrcoef(x, rowvar=False).tolist(),
        "n": x.shape[0],
    }
    matrix = post(client, {"input": corr, "options": options})
    assert table.status_code == matrix.status_code == 200, matrix.text
    a, b = table.json(), matrix.json()
    assert a["uncertainty"]["method"] == "normal" and a["uncertainty"]["level"] == 0.9
    assert a["uncertainty"]["rank"] == 4 and a["uncertainty"]["n"] == 120
    for v in a["variables"]:
        low, high = v["vif_interval"]
        assert low <= v["vif"] <= high and 0 <= v["threshold_p_value"] <= 1
        assert v["share_above_threshold"] is None and v["share_dropped"] is None
    # The same data as rows and as their correlation matrix: np.corrcoef against the service's
    # moments kernel, rounding amplified through the root search: 1e-9.
    assert_close_answers(a["variables"], b["variables"], rtol=1e-9, atol=1e-12)


def test_bootstrap_in_json_arrow_and_parquet_is_the_same_answer(client) -> None:
    options = {"uncertainty": {"method": "bootstrap", "replicates": 200, "seed": 7}}
    body = table_body(options)
    from_json = post(client, body)
    assert from_json.status_code == 200, from_json.text
    columns, labels = rows()
    table = arrow_table(columns, labels)
    query = (
        "sections=variables,terms&uncertainty_method=bootstrap&uncertainty_replicates=200"
        "&uncertainty_seed=7"
    )
    answers = [from_json.json()]
    for media, content in ((ARROW, arrow_stream(table)), (PARQUET, parquet_body(table))):
        response = client.post(
            f"/v1/assess?{query}", content=content, headers={"Content-Type": media}
        )
        assert response.status_code == 200, response.text
        answers.append(response.json())
    doc = answers[0]
    record = doc["uncertainty"]
    assert (record["method"], record["replicates"], record["seed"]) == ("bootstrap", 200, 7)
    assert record["usable_replicates"] + record["singular_replicates"] == 200
    assert 0 <= record["share_same_kept"] <= 1 and record["kept"]
    for v in doc["variables"]:
        low, high = v["vif_interval"]
        assert low <= high and 0 <= v["share_above_threshold"] <= 1
        assert v["threshold_p_value"] is None
    (bed,) = doc["terms"]
    assert bed["gvif_interval"][0] <= bed["gvif_interval"][1]
    # Another encoding of the same numbers: the decoders only convert them, and the same
    # seed draws the same counts, so the answers agree to rounding of the summaries (1e-12).
    for other in answers[1:]:
        assert_close_answers(other, doc, rtol=1e-12, atol=1e-14)


def test_the_same_seed_gives_the_same_bytes_and_another_seed_differs(client) -> None:
    body = table_body({"uncertainty": {"method": "bootstrap", "replicates": 100, "seed": 3}})
    first, again = post(client, body), post(client, body)
    # The same request twice to one service: identical bytes.
    assert first.content == again.content
    body["options"]["uncertainty"]["seed"] = 4
    other = post(client, body)
    assert other.json()["variables"] != first.json()["variables"]


def test_summary_detail_keeps_the_new_fields(client) -> None:
    body = table_body({"uncertainty": {"method": "bootstrap", "replicates": 100}})
    body["options"].pop("sections")
    summary = post(client, body).json()
    body["options"]["detail"] = "full"
    full = post(client, body).json()
    assert summary["detail"] == "summary"
    assert summary["variables"] == full["variables"] and summary["terms"] == full["terms"]
    assert summary["uncertainty"] == full["uncertainty"]


CORRELATION = {"kind": "correlation", "names": ["a", "b"], "matrix": [[1, 0.5], [0.5, 1]], "n": 40}
MOMENTS = {
    "kind": "moments",
    "names": ["a", "b"],
    "n": 40,
    "means": [0, 0],
    "covariance": [[1, 0.5], [0.5, 1]],
}


# A number outside the contract's bounds is well-formed but unusable (422, as for every option
# bound), as is the bootstrap on an input without rows (a cross-input rule); a wrong type or an
# unknown name does not fit the schema (400).
SCHEMA = (400, "invalid-request")
CROSS = RANGE = (422, "invalid-option")
REPLICATES = "/options/uncertainty/replicates"


@pytest.mark.parametrize(
    ("inp", "uncertainty", "answer", "pointer"),
    [
        (None, {"level": 1.0}, RANGE, "/options/uncertainty/level"),
        (None, {"level": 0}, RANGE, "/options/uncertainty/level"),
        (None, {"replicates": REPLICATES_MIN - 1}, RANGE, REPLICATES),
        (None, {"replicates": REPLICATES_MAX + 1}, RANGE, REPLICATES),
        (None, {"replicates": 500.0}, SCHEMA, REPLICATES),
        (None, {"seed": -1}, RANGE, "/options/uncertainty/seed"),
        (None, {"method": "jackknife"}, SCHEMA, "/options/uncertainty/method"),
        (None, {"samples": 5}, SCHEMA, "/options/uncertainty/samples"),
        (CORRELATION, {"method": "bootstrap"}, CROSS, "/options/uncertainty/method"),
        (MOMENTS, {"method": "bootstrap"}, CROSS, "/options/uncertainty/method"),
    ],
)
def test_bad_uncertainty_options_name_the_field(
    client, inp: Any, uncertainty: dict[str, Any], answer: tuple[int, str], pointer: str
) -> None:
    body = table_body({"uncertainty": uncertainty})
    if inp is not None:
        body["input"] = inp
    doc = assert_problem(post(client, body), *answer, pointer)
    if "method" in uncertainty and inp is not None:
        assert "the bootstrap resamples rows" in doc["errors"][0]["reason"]


def test_bad_query_parameters_name_the_parameter(client) -> None:
    columns, _ = rows()
    content = arrow_stream(arrow_table(columns))
    for query, parameter in (
        ("uncertainty_replicates=500.5", "uncertainty_replicates"),
        ("uncertainty_seed=1e3", "uncertainty_seed"),
        ("uncertainty_level=1.5", "uncertainty_level"),
        ("uncertainty_method=jackknife", "uncertainty_method"),
    ):
        response = client.post(
            f"/v1/assess?{query}", content=content, headers={"Content-Type": ARROW}
        )
        problem = response.json()
        assert response.status_code in (400, 422), response.text
        assert problem["errors"][0]["pointer"] == f"/query/{parameter}", problem


def test_bootstrap_with_pairwise_deletion_of_missing_values_is_refused(client) -> None:
    body = table_body({"uncertainty": {"method": "bootstrap"}, "missing": "pairwise"})
    body["input"]["columns"]["shade"][4] = None
    doc = assert_problem(post(client, body), 422, "invalid-option", "/options/uncertainty/method")
    assert "drop_rows" in doc["errors"][0]["reason"]
    body["options"]["missing"] = "drop_rows"
    answer = post(client, body)
    assert answer.status_code == 200, answer.text
    assert answer.json()["n"] == 119


def test_a_small_bootstrap_request_runs_on_the_pool_under_the_time_limit() -> None:
    # A small JSON body asking only for variables would be answered on the event loop; with
    # uncertainty it goes to the pool, whose time limit stops the replicates (503 time-limit).
    from litestar.testing import TestClient

    from knotwork.api import create_app
    from knotwork.settings import Settings

    columns, _ = rows(40)
    body = {
        "input": {"kind": "table", "columns": columns},
        "options": {
            "sections": ["variables"],
            "uncertainty": {"method": "bootstrap", "replicates": REPLICATES_MAX},
        },
    }
    assert len(json.dumps(body)) < 16 * 1024
    settings = Settings(concurrency=1, request_timeout_s=0.05)
    with TestClient(create_app(settings)) as slow:
        assert_problem(post(slow, body), 503, "time-limit", None)
        # Without the option the same body is answered at once.
        body["options"].pop("uncertainty")
        assert post(slow, body).status_code == 200


def test_uncertainty_without_an_intercept_is_refused_naming_the_option(client) -> None:
    body = table_body({"uncertainty": {"method": "normal"}, "intercept": False})
    doc = assert_problem(post(client, body), 422, "invalid-option", "/options/uncertainty")
    assert "centred VIFs" in doc["errors"][0]["reason"]
    # From a binary body the pointer names a query parameter of the option.
    columns, _ = rows()
    response = client.post(
        "/v1/assess?intercept=false&uncertainty_method=normal",
        content=arrow_stream(arrow_table(columns)),
        headers={"Content-Type": ARROW},
    )
    assert_problem(response, 422, "invalid-option", "/query/uncertainty_method")


def test_query_parameters_of_the_nested_option_round_trip() -> None:
    from knotwork_contract import SEED_MAX, options_query, parse_query

    options = {"uncertainty": {"method": "bootstrap", "level": 0.9, "replicates": 250,
                               "seed": SEED_MAX}}  # fmt: skip
    query = options_query(options)
    assert query == {
        "uncertainty_method": "bootstrap",
        "uncertainty_level": "0.9",
        "uncertainty_replicates": "250",
        "uncertainty_seed": str(SEED_MAX),  # whole numbers keep every digit (no float)
    }
    document, columns = parse_query(query.items())
    assert document == options and columns == {}


@pytest.mark.parametrize(
    ("uncertainty", "kept"),
    [(None, False), ({"method": "normal"}, False), ({"method": "bootstrap"}, True)],
)
def test_the_rows_are_kept_for_the_bootstrap_only(uncertainty: Any, kept: bool) -> None:
    from knotwork.codecs import Limits, decode_assess
    from knotwork.codecs._convert import summarize, summarize_with_rows

    body = table_body({"uncertainty": uncertainty} if uncertainty else None)
    prepared = decode_assess(json.dumps(body).encode(), Limits())
    summary, design = summarize_with_rows(prepared)
    assert (design is not None) == kept
    if design is not None:
        assert design.names == summary.names and design.x.shape == (120, summary.p)
    # The same summary either way (the same kernel on the same columns).
    plain = summarize(prepared)
    assert summary.names == plain.names and np.array_equal(summary.correlation, plain.correlation)


def test_estimates_get_normal_intervals_with_their_n_only(client) -> None:
    import copy

    from knotwork.api._examples import ESTIMATES_EXAMPLE

    body = copy.deepcopy(ESTIMATES_EXAMPLE)
    body["options"]["uncertainty"] = {"method": "normal"}
    answer = post(client, body)
    assert answer.status_code == 200, answer.text
    doc = answer.json()
    assert doc["uncertainty"]["n"] == 16 and doc["uncertainty"]["rank"] == 4
    for v in doc["variables"]:
        low, high = v["vif_interval"]
        assert low <= v["vif"] <= high
    body["options"]["uncertainty"] = {"method": "bootstrap"}
    problem = assert_problem(
        post(client, body), 422, "invalid-option", "/options/uncertainty/method"
    )
    assert "an estimates input has none" in problem["errors"][0]["reason"]
    body["options"]["uncertainty"] = {"method": "normal"}
    del body["input"]["n"]
    problem = assert_problem(post(client, body), *CROSS, "/options/uncertainty")
    assert "give the input's n" in problem["errors"][0]["reason"]


def test_the_documented_example_is_answered(client) -> None:
    from knotwork.api._examples import UNCERTAINTY_EXAMPLE

    doc = post(client, UNCERTAINTY_EXAMPLE).json()
    assert doc["uncertainty"]["replicates"] == 500
    assert all(v["vif_interval"] is not None for v in doc["variables"] if not v["aliased"])
