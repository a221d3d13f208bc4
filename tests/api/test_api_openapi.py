"""The committed OpenAPI document is the generated one, and it documents the whole contract."""

from __future__ import annotations

import json
from pathlib import Path
from typing import Any

import msgspec
import pytest
from numeric import assert_close_answers

from knotwork.api.openapi import render
from knotwork_contract import RESULT_TYPES, AssessRequest, BatchRequest

COMMITTED = Path(__file__).resolve().parents[2] / "openapi" / "openapi.json"


@pytest.fixture(scope="module")
def document() -> dict[str, Any]:
    return json.loads(render())


def test_committed_document_is_up_to_date() -> None:
    committed = COMMITTED.read_text(encoding="utf-8")
    stale = "openapi/openapi.json is out of date: run `python -m knotwork.api.openapi`"
    # The document holds an answer computed by the core (rounded to six significant digits),
    # made on the machine that committed it; another BLAS kernel changes the last digits,
    # which can move a value across a rounding boundary: one unit in the sixth digit, at most
    # 1e-5 relative. So the content is compared with that tolerance on numbers (everything
    # else exactly), and the text must be the generator's own layout of that content.
    try:
        assert_close_answers(json.loads(committed), json.loads(render()), rtol=2e-5)
    except AssertionError as exc:
        raise AssertionError(f"{stale}\n{exc}") from None
    layout = json.dumps(json.loads(committed), indent=2, sort_keys=False, ensure_ascii=False)
    assert committed == layout + "\n", stale


def _refs(node: Any) -> list[str]:
    if isinstance(node, dict):
        found = [node["$ref"]] if isinstance(node.get("$ref"), str) else []
        return found + [r for value in node.values() for r in _refs(value)]
    if isinstance(node, list):
        return [r for value in node for r in _refs(value)]
    return []


def test_every_reference_resolves(document: dict[str, Any]) -> None:
    schemas = document["components"]["schemas"]
    for ref in _refs(document):
        assert ref.startswith("#/components/schemas/"), ref
        assert ref.rsplit("/", 1)[1] in schemas, ref


def test_fixed_routes_are_documented(document: dict[str, Any]) -> None:
    assert document["openapi"] == "3.1.0"
    assert set(document["paths"]) >= {
        "/v1/assess",
        "/v1/assess/batch",
        "/healthz",
        "/readyz",
        "/metrics",
    }


def test_assess_takes_json_arrow_and_parquet(document: dict[str, Any]) -> None:
    body = document["paths"]["/v1/assess"]["post"]["requestBody"]
    assert set(body["content"]) == {
        "application/json",
        "application/vnd.apache.arrow.stream",
        "application/vnd.apache.arrow.file",
        "application/vnd.apache.parquet",
    }
    parameters = {p["name"] for p in document["paths"]["/v1/assess"]["post"]["parameters"]}
    assert parameters == {
        "threshold",
        "protect",
        "intercept",
        "missing",
        "repair",
        "sections",
        "response",
        "weights",
        "ridge_grid",
        "components_rule",
        "components_limit",
        "detail",
        "family",
        "var_power",
        "offset",
        "trials",
        "uncertainty_method",
        "uncertainty_level",
        "uncertainty_replicates",
        "uncertainty_seed",
    }


def test_request_examples_fit_the_decoders(document: dict[str, Any]) -> None:
    for path, kind in (("/v1/assess", AssessRequest), ("/v1/assess/batch", BatchRequest)):
        media = document["paths"][path]["post"]["requestBody"]["content"]["application/json"]
        assert media["examples"]
        for example in media["examples"].values():
            msgspec.json.decode(json.dumps(example["value"]), type=kind)


def test_errors_are_documented_as_problems(document: dict[str, Any]) -> None:
    for path in ("/v1/assess", "/v1/assess/batch"):
        responses = document["paths"][path]["post"]["responses"]
        assert {"400", "401", "403", "413", "415", "503"} <= set(responses)
        for status, response in responses.items():
            if status.startswith(("4", "5")):
                content = response["content"]["application/problem+json"]
                assert content["schema"] == {"$ref": "#/components/schemas/ProblemDocument"}
                assert content["examples"], (path, status)
        assert "Retry-After" in responses["503"]["headers"]
        assert "WWW-Authenticate" in responses["401"]["headers"]
    assert "422" in document["paths"]["/v1/assess"]["post"]["responses"]


def test_answer_has_a_computed_example(document: dict[str, Any]) -> None:
    answer = document["paths"]["/v1/assess"]["post"]["responses"]["200"]["content"]
    example = answer["application/json"]["examples"]["correlation"]["value"]
    assert example["input_kind"] == "correlation"
    assert [v["name"] for v in example["variables"]] == [
        "rainfall_mm",
        "irrigation_l",
        "soil_moisture",
        "sun_hours",
    ]


def test_result_fields_carry_their_meaning(document: dict[str, Any]) -> None:
    schemas = document["components"]["schemas"]
    for name in ("Assessment", "VariableInflation", "ProblemDocument"):
        schema = schemas[name]
        assert schema["description"]
        for field, prop in schema["properties"].items():
            assert prop.get("description"), f"{name}.{field} has no description"


def test_result_components_are_the_contract_records(document: dict[str, Any]) -> None:
    # The contract's field order is the order of the keys in every answer and in the documented
    # component; every field is sent, so every field is required (the contract's defaults are
    # for clients decoding shortened answers, and are not documented as defaults).
    schemas = document["components"]["schemas"]
    for record in RESULT_TYPES:
        schema = schemas[record.__name__]
        assert list(schema["properties"]) == list(record.__struct_fields__), record.__name__
        assert schema["required"] == sorted(record.__struct_fields__), record.__name__
        assert not any("default" in prop for prop in schema["properties"].values())


def test_an_answer_has_the_documented_keys_in_order(document: dict[str, Any]) -> None:
    answer = document["paths"]["/v1/assess"]["post"]["responses"]["200"]["content"]
    example = answer["application/json"]["examples"]["correlation"]["value"]
    schemas = document["components"]["schemas"]
    assert list(example) == list(schemas["Assessment"]["properties"])
    assert list(example["variables"][0]) == list(schemas["VariableInflation"]["properties"])
