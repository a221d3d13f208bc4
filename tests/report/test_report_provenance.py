"""Provenance in every answer: the service version, the input's fingerprint, the options.

The fingerprint digests the summary the diagnostics ran on (rounded, see
``knotwork.codecs._provenance``) and the options in force: the same rows in every encoding give
the same fingerprint, a changed value or option gives another, and the same request answers the
same bytes.
"""

from __future__ import annotations

import copy
from importlib.metadata import version
from typing import Any

import msgspec
import numpy as np
import pytest
from report_bodies import DEMO_QUERY, JSON, binary_bodies, demo_body

from knotwork.codecs import Limits, decode_assess, run
from knotwork.codecs._convert import summarize
from knotwork.codecs._provenance import DECIMALS, canonical_form, fingerprint

FIXED_NAMES = ("service_version", "fingerprint", "options")


def _post(client: Any, body: Any, media: str = JSON, query: str = "") -> Any:
    content = body if isinstance(body, bytes) else msgspec.json.encode(body)
    path = "/v1/assess" + (f"?{query}" if query else "")
    response = client.post(path, content=content, headers={"Content-Type": media})
    assert response.status_code == 200, response.text
    return response


def test_every_answer_carries_the_fixed_names(client: Any) -> None:
    provenance = _post(client, demo_body()).json()["provenance"]
    assert tuple(provenance) == FIXED_NAMES
    # The version as the installed distribution states it (importlib.metadata).
    assert provenance["service_version"] == version("knotwork")
    assert provenance["fingerprint"].startswith("sha256:")
    assert len(provenance["fingerprint"]) == len("sha256:") + 64
    # Every option after defaults, by its wire name.
    assert provenance["options"] == {
        "threshold": 5.0,
        "protect": [],
        "intercept": True,
        "missing": "reject",
        "repair": "reject",
        "sections": None,
        "ridge": None,
        "components": None,
        "detail": "summary",
        "family": "gaussian",
        "var_power": None,
        "uncertainty": None,
    }


def test_json_arrow_and_parquet_give_one_fingerprint(client: Any) -> None:
    expected = _post(client, demo_body()).json()["provenance"]
    for media, body in binary_bodies().items():
        got = _post(client, body, media, DEMO_QUERY).json()["provenance"]
        assert got == expected, media


def test_the_same_request_answers_the_same_bytes(client: Any) -> None:
    # The same function on the same input: identical bytes promised.
    first = _post(client, demo_body()).content
    assert _post(client, demo_body()).content == first


def test_a_changed_value_or_option_changes_the_fingerprint(client: Any) -> None:
    base = _post(client, demo_body()).json()["provenance"]["fingerprint"]
    changed = copy.deepcopy(demo_body())
    changed["input"]["columns"]["floor_area"][17] += 0.1  # one value, by a tenth of a square metre
    seen = {base, _post(client, changed).json()["provenance"]["fingerprint"]}
    for options in ({"threshold": 10}, {"protect": ["floor_area"]}, {"detail": "full"},
                    {"sections": ["variables"]}):  # fmt: skip
        seen.add(_post(client, demo_body(**options)).json()["provenance"]["fingerprint"])
    assert len(seen) == 6


def test_the_batch_and_the_single_answer_share_the_provenance(client: Any) -> None:
    single = _post(client, demo_body()).json()["provenance"]
    response = client.post(
        "/v1/assess/batch",
        content=msgspec.json.encode({"items": [demo_body()]}),
        headers={"Content-Type": JSON},
    )
    assert response.status_code == 200
    assert response.json()["results"][0]["provenance"] == single


def test_rounding_hides_last_bit_noise_only() -> None:
    prepared = decode_assess(msgspec.json.encode(demo_body()), Limits())
    summary = summarize(prepared)
    options = prepared.options
    # A perturbation of a few units in the last place, as another BLAS kernel or another
    # summation order gives, leaves the canonical form as it was ...
    noisy = np.array(summary.correlation) * (1 + 4e-16)
    np.fill_diagonal(noisy, 1.0)
    same = type(summary)(**{**_fields(summary), "correlation": noisy})
    assert canonical_form(same, options) == canonical_form(summary, options)
    # ... while a change of one correlation far above the rounding (1e-10 absolute) does not.
    moved = np.array(summary.correlation)
    moved[0, 1] = moved[1, 0] = moved[0, 1] + 10 ** -(DECIMALS - 2)
    other = type(summary)(**{**_fields(summary), "correlation": moved})
    assert fingerprint(other, options) != fingerprint(summary, options)


def _fields(summary: Any) -> dict[str, Any]:
    import dataclasses

    return {f.name: getattr(summary, f.name) for f in dataclasses.fields(summary)}


@pytest.mark.parametrize("detail", ["summary", "full"])
def test_the_detail_keeps_the_provenance(detail: str) -> None:
    prepared = decode_assess(msgspec.json.encode(demo_body(detail=detail)), Limits())
    result = run(prepared)
    assert result.provenance is not None
    assert result.provenance.options["detail"] == detail
    # The report's full answer carries the JSON answer's provenance (same function, same input).
    assert run(prepared, full=True).provenance == result.provenance


def test_a_glm_and_an_estimates_answer_carry_a_fingerprint_that_follows_the_data(
    client: Any,
) -> None:
    rng = np.random.default_rng(11)
    x = rng.normal(size=(300, 3))
    x[:, 1] += 0.8 * x[:, 0]
    counts = rng.poisson(np.exp(0.2 + 0.3 * x[:, 0]))
    columns = {f"rate_{j}": x[:, j].tolist() for j in range(3)}
    body = {
        "input": {"kind": "table", "columns": {**columns, "claims": counts.tolist()},
                  "response": "claims"},
        "options": {"family": "poisson"},
    }  # fmt: skip
    first = _post(client, body).json()["provenance"]["fingerprint"]
    assert _post(client, body).json()["provenance"]["fingerprint"] == first
    changed = copy.deepcopy(body)
    changed["input"]["columns"]["claims"][0] += 3  # the response moves the fit, so its weights
    assert _post(client, changed).json()["provenance"]["fingerprint"] != first
    covariance = np.cov(x, rowvar=False)
    estimates = {
        "input": {"kind": "estimates", "names": list(columns), "covariance": covariance.tolist(),
                  "intercept": None},
    }  # fmt: skip
    e1 = _post(client, estimates).json()["provenance"]["fingerprint"]
    estimates["input"]["covariance"][0][0] *= 1.5
    assert _post(client, estimates).json()["provenance"]["fingerprint"] != e1
