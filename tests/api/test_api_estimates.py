"""Estimates input through the service: the example, skipped sections, batches and problems."""

from __future__ import annotations

import copy
import json
from typing import Any

import numpy as np
import pytest
from bodies_and_problems import JSON, assert_problem
from numeric import assert_close_answers

from knotwork.api._examples import ESTIMATES_EXAMPLE, TABLE_COLUMNS


def post(client: Any, body: Any, path: str = "/v1/assess") -> Any:
    return client.post(path, content=json.dumps(body), headers={"Content-Type": JSON})


def body_with(**changes: Any) -> dict[str, Any]:
    body = copy.deepcopy(ESTIMATES_EXAMPLE)
    for key, value in changes.items():
        if value is None and key != "intercept":
            body["input"].pop(key, None)
        else:
            body["input"][key] = value
    return body


def test_example_is_answered(client: Any) -> None:
    response = post(client, ESTIMATES_EXAMPLE)
    assert response.status_code == 200, response.text
    result = response.json()
    assert result["input_kind"] == "estimates"
    assert result["n"] == 16
    assert result["intercept"] is True
    assert [v["name"] for v in result["variables"]] == [
        "rainfall_mm",
        "irrigation_l",
        "soil_moisture",
        "sun_hours",
    ]
    assert result["conditioning"]["basis"] == "estimates"
    assert result["conditioning"]["names"][0] == "<constant>"
    assert result["tests"] is not None and result["removal"] is not None
    assert result["ridge"] is None and result["components"] is None
    assert result["comparison"] is None
    codes = [w["code"] for w in result["warnings"]]
    assert "skipped_without_response" in codes and "skipped_without_n" not in codes


def test_example_matches_the_rows_it_was_fitted_to(client: Any) -> None:
    # The example is the covariance of the least-squares fit to the orchard plots, to 6
    # significant digits; the rows' VIFs agree to the rounding of the example's entries
    # (6 digits, amplified by cond(R) about 50 here): 1e-3 relative.
    names = ["rainfall_mm", "irrigation_l", "soil_moisture", "sun_hours"]
    rows = {"input": {"kind": "table", "columns": {k: TABLE_COLUMNS[k] for k in names}}}
    rows["options"] = {"sections": ["variables"]}
    expected = [v["vif"] for v in post(client, rows).json()["variables"]]
    got = [v["vif"] for v in post(client, ESTIMATES_EXAMPLE).json()["variables"]]
    np.testing.assert_allclose(got, expected, rtol=1e-3)


def test_without_n_the_answer_has_null_n_and_says_why_the_tests_are_missing(client: Any) -> None:
    result = post(client, body_with(n=None)).json()
    assert result["n"] is None
    assert result["tests"] is None
    assert "skipped_without_n" in [w["code"] for w in result["warnings"]]


def test_full_detail_and_batch_agree_with_single_requests(client: Any) -> None:
    full = copy.deepcopy(ESTIMATES_EXAMPLE)
    full["options"]["detail"] = "full"
    alone = post(client, full).json()
    batch = post(client, {"items": [full, body_with(intercept="const")]}, "/v1/assess/batch")
    assert batch.status_code == 200
    results = batch.json()["results"]
    # The same request computed twice by the same service: identical bits.
    assert_close_answers(results[0], alone, rtol=0.0)
    assert results[1]["errors"][0]["pointer"] == "/items/1/input/intercept"


BAD = [
    # (change to the example's input, status, slug, pointer)
    ({"intercept": "const"}, 422, "invalid-input", "/input/intercept"),
    ({"names": ["intercept", "a", "b", "c", "c"]}, 422, "invalid-input", "/input/names/4"),
    ({"names": ["intercept", "a", "b", "c", ""]}, 400, "invalid-request", "/input/names/4"),
    ({"n": 3}, 422, "too-few-data", "/input/n"),
    ({"n": 0}, 422, "invalid-input", "/input/n"),
    ({"terms": {"t": ["intercept", "sun_hours"]}}, 422, "invalid-input", "/input/terms/t/0"),
]


@pytest.mark.parametrize(("change", "status", "slug", "pointer"), BAD)
def test_bad_estimates_answer_with_the_field(client, change, status, slug, pointer) -> None:
    assert_problem(post(client, body_with(**change)), status, slug, pointer)


def _covariance(edit) -> list[list[float]]:
    cov = np.array(ESTIMATES_EXAMPLE["input"]["covariance"])
    edit(cov)
    rows: list[list[float]] = cov.tolist()
    return rows


def _asymmetric(cov: np.ndarray) -> None:
    cov[2, 1] *= 2


def _zero_variance(cov: np.ndarray) -> None:
    cov[3, 3] = 0.0


def _aliased(cov: np.ndarray) -> None:
    # Coefficient 4 made a copy of coefficient 3: a singular covariance.
    cov[4, :] = cov[3, :]
    cov[:, 4] = cov[:, 3]


@pytest.mark.parametrize(
    ("edit", "pointer", "fragment"),
    [
        (_asymmetric, "/input/covariance/1/2", "the matrix must be symmetric"),
        (_zero_variance, "/input/covariance/3/3", "the variance of 'soil_moisture' must be"),
        (_aliased, "/input/covariance", "the covariance of the estimates is singular"),
    ],
)
def test_bad_covariance_names_the_entry(client, edit, pointer, fragment) -> None:
    doc = assert_problem(
        post(client, body_with(covariance=_covariance(edit))), 422, "invalid-matrix", pointer
    )
    assert fragment in doc["errors"][0]["reason"]


def test_intercept_must_be_given(client: Any) -> None:
    body = copy.deepcopy(ESTIMATES_EXAMPLE)
    del body["input"]["intercept"]
    doc = assert_problem(post(client, body), 400, "invalid-request", "/input/intercept")
    assert doc["errors"][0]["reason"] == "Object missing required field `intercept`"


def test_non_finite_entry_is_refused(client: Any) -> None:
    body = body_with()
    text = json.dumps(body).replace("0.017884,", "1e999,", 1)
    response = client.post("/v1/assess", content=text, headers={"Content-Type": JSON})
    doc = assert_problem(response, 400, "invalid-request", "/input/covariance/1/2")
    assert doc["errors"][0]["reason"] == "Number out of range"


def test_intercept_false_is_refused_for_a_model_with_one(client: Any) -> None:
    body = body_with()
    body["options"]["intercept"] = False
    assert_problem(post(client, body), 422, "invalid-option", "/options/intercept")
