"""Contract fuzzing: schemathesis against the committed OpenAPI document and a real server.

schemathesis reads openapi/openapi.json (the committed copy, not the server's own), builds
valid and invalid requests for every operation (positive and negative generation, the
coverage phase's boundary values, unexpected methods and content types) and sends them over
loopback to ``python -m knotwork`` started here with a bearer token. Every answer must be:

- no server error (no 5xx at all: one client never saturates the service);
- a documented status code, content type, headers and body schema;
- a rejection (4xx) for a request that breaks the schema of ``POST /v1/assess`` (a batch
  answers 200 with one problem document per bad item, by design);
- for every error, a problem document whose status is the response's and whose request id is
  the one in X-Request-ID; for a batch, no item answered with a 5xx problem.

The count is bounded (``KNOTWORK_FUZZ_EXAMPLES`` per operation, 25 by default, derandomized so
that ``make test`` is repeatable); ``bench/bench_fuzz.py`` runs the same checks with many more
examples from a seed (``KNOTWORK_FUZZ_SEED``) and reports the tally that
``KNOTWORK_FUZZ_REPORT`` asks this module to write.
Arrow and Parquet bodies are binary: they are drawn from a few hand-made tables, their
truncations and random bytes rather than generated from a schema.
"""

from __future__ import annotations

import copy
import json
import os
from collections import Counter
from collections.abc import Iterator
from pathlib import Path

import httpx
import pytest

schemathesis = pytest.importorskip("schemathesis")

import fuzz_bodies  # noqa: E402
import pyarrow as pa  # noqa: E402
from hypothesis import HealthCheck, settings  # noqa: E402
from schemathesis.checks import not_a_server_error  # noqa: E402
from schemathesis.specs.openapi.checks import (  # noqa: E402
    content_type_conformance,
    negative_data_rejection,
    response_headers_conformance,
    response_schema_conformance,
    status_code_conformance,
)

from knotwork_harness import JSON, OPENAPI  # noqa: E402
from knotwork_harness.live_server import Server, serve  # noqa: E402

TOKEN = "fuzz-token-0123456789abcdef"
EXAMPLES = int(os.environ.get("KNOTWORK_FUZZ_EXAMPLES", "25"))
REPORT = os.environ.get("KNOTWORK_FUZZ_REPORT")
#: Set by bench/bench_fuzz.py with pytest's --hypothesis-seed: random, reproducible draws.
DERANDOMIZE = "KNOTWORK_FUZZ_SEED" not in os.environ
PROBLEM_BASE = "https://knotwork.example/problems/"

#: What was sent and answered, by (method, path, media type, generation mode, status).
TALLY: Counter[tuple[str, str, str, str, int]] = Counter()


fuzz_bodies.register()


def _view(json_bodies: bool) -> dict:
    """The committed document as seen by one kind of body of ``POST /v1/assess``.

    The document lists the query options for every body of that operation but says they apply
    to Arrow and Parquet bodies only (a JSON body carries its options, and gets a 400 for
    query parameters). OpenAPI cannot tie parameters to one media type, so the JSON view
    drops the query parameters and the binary view drops the JSON body; nothing else changes.
    """
    doc = copy.deepcopy(DOCUMENT)
    operation = doc["paths"]["/v1/assess"]["post"]
    content = operation["requestBody"]["content"]
    if json_bodies:
        operation["requestBody"]["content"] = {JSON: content[JSON]}
        operation.pop("parameters", None)
    else:
        del content[JSON]
        doc["paths"] = {"/v1/assess": doc["paths"]["/v1/assess"]}
    return doc


DOCUMENT = json.loads(OPENAPI.read_text(encoding="utf-8"))
json_schema = schemathesis.openapi.from_dict(_view(json_bodies=True))
binary_schema = schemathesis.openapi.from_dict(_view(json_bodies=False))


class _Bearer:
    """The token, for the cases that should carry it (schemathesis leaves it out of the cases
    that test a missing or wrong credential)."""

    def get(self, case: schemathesis.Case, context: object) -> str:
        return TOKEN

    def set(self, case: schemathesis.Case, data: str, context: object) -> None:
        case.headers = {**(case.headers or {}), "Authorization": f"Bearer {data}"}


for _schema in (json_schema, binary_schema):
    _schema.auth()(_Bearer)


def problem_documents(ctx: object, response: schemathesis.Response, case: schemathesis.Case):
    """Every error answer is a problem document that agrees with its response."""
    if response.status_code < 400 or case.method.upper() == "HEAD":
        return None
    media = response.headers.get("content-type", [""])[0]
    assert media.startswith("application/problem+json"), (response.status_code, media)
    doc = response.json()
    assert doc["status"] == response.status_code, doc
    assert doc["type"].startswith(PROBLEM_BASE), doc
    assert doc["title"] and doc["detail"], doc
    assert doc["request_id"] == response.headers["x-request-id"][0], doc
    return None


def batch_items_answered(ctx: object, response: schemathesis.Response, case: schemathesis.Case):
    """No item of a batch is answered with a server-error problem."""
    if case.path != "/v1/assess/batch" or response.status_code != 200:
        return None
    for index, result in enumerate(response.json()["results"]):
        if "variables" not in result:
            assert result["status"] < 500, (index, result)
    return None


@pytest.fixture(scope="module")
def server(tmp_path_factory: pytest.TempPathFactory) -> Iterator[Server]:
    with serve(tmp_path_factory.mktemp("fuzz"), {"KNOTWORK_TOKENS": TOKEN}) as running:
        yield running
    if REPORT:
        rows = [[*key, count] for key, count in sorted(TALLY.items())]
        Path(REPORT).write_text(json.dumps(rows, indent=1) + "\n", encoding="utf-8")


_SETTINGS = settings(
    max_examples=EXAMPLES,
    deadline=None,
    derandomize=DERANDOMIZE,
    suppress_health_check=list(HealthCheck),
    database=None,
)


def _call_and_check(case: schemathesis.Case, server: Server) -> None:
    checks = [
        not_a_server_error,
        status_code_conformance,
        content_type_conformance,
        response_headers_conformance,
        response_schema_conformance,
        problem_documents,
        batch_items_answered,
    ]
    if case.path == "/v1/assess":
        checks.append(negative_data_rejection)
    response = case.call_and_validate(base_url=server.url, checks=checks, timeout=60)
    mode = str(case.meta.generation.mode.value) if case.meta is not None else "explicit"
    TALLY[(case.method.upper(), case.path, case.media_type or "", mode, response.status_code)] += 1


@json_schema.parametrize()
@_SETTINGS
def test_every_answer_keeps_the_contract(case: schemathesis.Case, server: Server) -> None:
    _call_and_check(case, server)


@binary_schema.parametrize()
@_SETTINGS
def test_binary_tables_keep_the_contract(case: schemathesis.Case, server: Server) -> None:
    _call_and_check(case, server)


@pytest.mark.parametrize("encoding", ["json", "arrow"])
def test_threshold_just_above_one_is_answered(server: Server, encoding: str) -> None:
    # Found by the fuzzer above: the smallest threshold the schema allows (> 1), in a JSON
    # body's options or in the query of an Arrow body.
    from knotwork.api._examples import TABLE_COLUMNS, TABLE_EXAMPLE

    auth = {"Authorization": f"Bearer {TOKEN}"}
    if encoding == "json":
        body = {**TABLE_EXAMPLE, "options": {"threshold": 1.0000000000000002}}
        response = httpx.post(server.url + "/v1/assess", json=body, headers=auth, timeout=60)
    else:
        import io

        table = pa.table(TABLE_COLUMNS)
        sink = io.BytesIO()
        with pa.ipc.new_stream(sink, table.schema) as writer:
            writer.write_table(table)
        response = httpx.post(
            server.url + "/v1/assess?threshold=1.0000000000000002&response=yield_kg",
            content=sink.getvalue(),
            headers={**auth, "Content-Type": fuzz_bodies.ARROW_STREAM},
            timeout=60,
        )
    assert response.status_code == 200, response.text
    assert response.json()["removal"]["kept"], "a lone predictor has VIF 1 and is never dropped"
