"""Generated requests from the OpenAPI document (schemathesis): none may answer 500.

schemathesis builds requests, valid and invalid, from the committed contract and sends them to
the application in process. The check is the one that must hold for any input: no server
error, and every answer conforms to the documented status codes, content types and schemas.
"""

from __future__ import annotations

import pytest

schemathesis = pytest.importorskip("schemathesis")
import fuzz_bodies  # noqa: E402
from hypothesis import HealthCheck, settings  # noqa: E402
from schemathesis.checks import (  # noqa: E402
    content_type_conformance,
    not_a_server_error,
    response_schema_conformance,
    status_code_conformance,
)

from knotwork.api import create_app  # noqa: E402
from knotwork.settings import Settings  # noqa: E402

# Binary bodies: valid and broken tables in each encoding, or random bytes (one set for
# every fuzzing module: see tests/fuzz_bodies.py).
fuzz_bodies.register()

app = create_app(Settings(concurrency=2))
schema = schemathesis.openapi.from_asgi("/openapi.json", app)


@schema.include(method="POST").parametrize()
@settings(
    max_examples=40,
    deadline=None,
    derandomize=True,
    suppress_health_check=list(HealthCheck),
)
def test_generated_requests_never_fail_the_server(case: schemathesis.Case) -> None:
    case.call_and_validate(
        checks=[
            not_a_server_error,
            status_code_conformance,
            content_type_conformance,
            response_schema_conformance,
        ]
    )
