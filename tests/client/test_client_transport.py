"""The clients across the boundary, without a network: httpx.MockTransport.

Retries, back-off, Retry-After, budgets, error mapping, the wire format of each input kind,
and the async client mirroring the sync one.
"""

from __future__ import annotations

import asyncio
import email.utils
import io

import httpx
import msgspec
import numpy as np
import pyarrow as pa
import pytest
from kc_support import problem

from knotwork_client import (
    AsyncClient,
    AuthenticationError,
    Client,
    Correlation,
    InputRejectedError,
    Moments,
    ProblemDetails,
    ResponseFormatError,
    Retry,
    ServerError,
    ServiceBusyError,
    TransportError,
    summarize,
)
from knotwork_client._config import parse_retry_after

URL = "http://knotwork.test"


def client_for(stand_in, fake_time, **kwargs) -> Client:
    return Client(
        URL,
        transport=stand_in.transport,
        sleep=fake_time.sleep,
        clock=fake_time.clock,
        **kwargs,
    )


def busy(status=503, retry_after: str | None = "2"):
    headers = {"Retry-After": retry_after} if retry_after is not None else {}
    return lambda request: httpx.Response(
        status, headers=headers, json=problem(status, "", "saturated", "busy")
    )


def drop_connection(request):
    raise httpx.ConnectError("connection refused", request=request)


# --- retries -------------------------------------------------------------------------------


def test_retries_503_honouring_retry_after_then_succeeds(stand_in, fake_time, bakery):
    stand_in.script = [busy(503, "2"), busy(429, "3")]
    with client_for(stand_in, fake_time) as client:
        result = client.assess(bakery[["oven_hours", "flour_kg", "staff_shifts"]])
    assert len(stand_in.requests) == 3
    # Waits are at least what Retry-After asked for.
    assert fake_time.sleeps[0] >= 2 and fake_time.sleeps[1] >= 3
    assert [v.name for v in result.variables] == ["oven_hours", "flour_kg", "staff_shifts"]


def test_backoff_doubles_with_jitter_within_bounds(stand_in, fake_time, bakery):
    stand_in.script = [busy(503, None)] * 3
    retry = Retry(attempts=4, backoff=0.5, max_delay=8.0)
    with client_for(stand_in, fake_time, retry=retry) as client:
        client.assess(bakery[["oven_hours", "flour_kg"]])
    # Equal jitter: retry i waits within [d_i / 2, d_i], d_i = 0.5 * 2**(i-1).
    for i, wait in enumerate(fake_time.sleeps, start=1):
        d = 0.5 * 2 ** (i - 1)
        assert d / 2 <= wait <= d


def test_backoff_without_jitter_is_exact_and_capped(stand_in, fake_time, bakery):
    stand_in.script = [busy(503, None)] * 5
    retry = Retry(attempts=6, backoff=1.0, max_delay=4.0, jitter=False, total=100)
    with client_for(stand_in, fake_time, retry=retry) as client:
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert fake_time.sleeps == [1.0, 2.0, 4.0, 4.0, 4.0]


def test_gives_up_after_the_allowed_attempts(stand_in, fake_time, bakery):
    stand_in.script = [busy(503, "1")] * 10
    with (
        client_for(stand_in, fake_time, retry=Retry(attempts=3)) as client,
        pytest.raises(ServiceBusyError) as info,
    ):
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert len(stand_in.requests) == 3
    assert info.value.status == 503
    assert info.value.retry_after == 1.0
    assert info.value.type.endswith("/busy")


def test_total_time_budget_stops_retrying(stand_in, fake_time, bakery):
    # Retry-After beyond the budget: no point waiting, fail now with the hint.
    stand_in.script = [busy(429, "120")]
    with (
        client_for(stand_in, fake_time, retry=Retry(total=60)) as client,
        pytest.raises(ServiceBusyError) as info,
    ):
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert fake_time.sleeps == []
    assert info.value.retry_after == 120.0
    # Budget used up by earlier waits stops later ones.
    fake_time.sleeps.clear()
    stand_in.script = [busy(503, "25")] * 10
    with (
        client_for(stand_in, fake_time, retry=Retry(attempts=10, total=60)) as client,
        pytest.raises(ServiceBusyError),
    ):
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert sum(fake_time.sleeps) <= 60
    assert len(fake_time.sleeps) == 2


def test_connection_errors_are_retried_then_reported(stand_in, fake_time, bakery):
    stand_in.script = [drop_connection, drop_connection]
    with client_for(stand_in, fake_time) as client:
        assert client.assess(bakery[["oven_hours", "flour_kg"]]).p == 2
    assert len(stand_in.requests) == 3
    stand_in.script = [drop_connection] * 10
    with (
        client_for(stand_in, fake_time, retry=Retry(attempts=2)) as client,
        pytest.raises(TransportError, match="failed after 2 attempt"),
    ):
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert isinstance(TransportError("x"), ConnectionError)


def test_read_timeout_is_not_retried(stand_in, fake_time, bakery):
    def slow(request):
        raise httpx.ReadTimeout("no answer", request=request)

    stand_in.script = [slow]
    with client_for(stand_in, fake_time) as client, pytest.raises(TransportError):
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert len(stand_in.requests) == 1


@pytest.mark.parametrize(
    ("status", "error", "base"),
    [
        (400, InputRejectedError, ValueError),
        (413, InputRejectedError, ValueError),
        (415, InputRejectedError, ValueError),
        (422, InputRejectedError, ValueError),
        (401, AuthenticationError, PermissionError),
        (403, AuthenticationError, PermissionError),
        (500, ServerError, Exception),
    ],
)
def test_other_errors_are_never_retried_and_carry_the_problem(
    stand_in, fake_time, bakery, status, error, base
):
    doc = problem(status, "/input/columns/flour_kg", "is constant; drop it")
    stand_in.script = [lambda r: httpx.Response(status, json=doc)] * 5
    with client_for(stand_in, fake_time) as client, pytest.raises(error) as info:
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert len(stand_in.requests) == 1 and fake_time.sleeps == []
    exc = info.value
    assert isinstance(exc, base)
    assert exc.status == status
    assert exc.problem == msgspec.convert(doc, ProblemDetails)
    assert exc.pointers == ["/input/columns/flour_kg"]
    assert exc.detail == "is constant; drop it"
    assert str(exc) == (
        f"{status} the input cannot be used: is constant; drop it\n"
        "  at /input/columns/flour_kg: is constant; drop it"
    )


def test_error_without_a_problem_document(stand_in, fake_time, bakery):
    stand_in.script = [lambda r: httpx.Response(502, text="<html>bad gateway</html>")]
    with client_for(stand_in, fake_time) as client, pytest.raises(ServerError) as info:
        client.assess(bakery[["oven_hours", "flour_kg"]])
    assert info.value.problem.title == "Bad Gateway"
    assert info.value.problem.status == 502


def test_success_that_is_not_json(stand_in, fake_time, bakery):
    stand_in.script = [lambda r: httpx.Response(200, text="hello")]
    with (
        client_for(stand_in, fake_time) as client,
        pytest.raises(ResponseFormatError, match="is not JSON"),
    ):
        client.assess(bakery[["oven_hours", "flour_kg"]])


@pytest.mark.parametrize(
    ("value", "seconds"),
    [
        ("7", 7.0),
        (" 0 ", 0.0),
        ("soon", None),
        ("-3", None),
        (None, None),
        (email.utils.formatdate(1_000_030, usegmt=True), 30.0),
        (email.utils.formatdate(999_000, usegmt=True), 0.0),
    ],
)
def test_parse_retry_after(value, seconds):
    assert parse_retry_after(value, now=lambda: 1_000_000.0) == seconds


def test_retry_policy_is_validated():
    with pytest.raises(ValueError, match="attempts must be at least 1"):
        Retry(attempts=0)
    with pytest.raises(ValueError, match="total must be a finite number"):
        Retry(total=float("inf"))


# --- what goes on the wire -----------------------------------------------------------------


def test_small_table_goes_as_json_with_options(stand_in, fake_time, bakery):
    with client_for(stand_in, fake_time, token="s3cret") as client:
        client.assess(
            bakery.drop(columns="weeks"),
            response="loaves",
            threshold=10,
            protect=["oven_hours"],
            missing="drop_rows",
            ridge={"grid": [0.01, 0.1]},
            components={"rule": "cumulative", "limit": 0.9},
            sections=["variables", "removal"],
        )
    request = stand_in.requests[0]
    assert request.headers["authorization"] == "Bearer s3cret"
    assert request.headers["content-type"] == "application/json"
    body = msgspec.json.decode(request.content)
    assert body["options"] == {
        "threshold": 10.0,
        "protect": ["oven_hours"],
        "missing": "drop_rows",
        "ridge": {"grid": [0.01, 0.1]},
        "components": {"rule": "cumulative", "limit": 0.9},
        "sections": ["variables", "removal"],
    }
    inp = body["input"]
    assert inp["kind"] == "table"
    assert inp["response"] == "loaves"
    assert list(inp["columns"]) == [
        "oven_hours",
        "flour_kg",
        "staff_shifts",
        "van_trips",
        "market_stalls",
        "loaves",
    ]
    assert inp["categorical"]["region"][:3] == list(bakery["region"][:3])
    assert inp["columns"]["oven_hours"] == bakery["oven_hours"].tolist()


def test_missing_values_are_null_in_json(stand_in, fake_time):
    with client_for(stand_in, fake_time) as client:
        client.assess(
            {"a": [1.0, np.nan, 3.0, 4.0], "b": [2.0, 1.0, None, 5.0]}, missing="drop_rows"
        )
    body = msgspec.json.decode(stand_in.requests[0].content)
    assert body["input"]["columns"] == {"a": [1.0, None, 3.0, 4.0], "b": [2.0, 1.0, None, 5.0]}


def test_large_table_goes_as_arrow_with_query_options(stand_in, fake_time):
    rng = np.random.default_rng(3)
    x = rng.normal(size=(20_000, 6))
    x[5, 2] = np.nan
    names = [f"x{i}" for i in range(6)]
    with client_for(stand_in, fake_time) as client:
        result = client.assess(
            (x, names),
            threshold=7.5,
            protect=["x0", "x1"],
            intercept=False,
            missing="drop_rows",
            repair="nearest",
            ridge={"grid": [0.01, 0.5]},
            components={"rule": "cumulative", "limit": 0.9},
            response="x5",
        )
    request = stand_in.requests[0]
    assert request.headers["content-type"] == "application/vnd.apache.arrow.stream"
    assert dict(request.url.params) == {
        "threshold": "7.5",
        "protect": "x0,x1",
        "intercept": "false",
        "missing": "drop_rows",
        "repair": "nearest",
        "ridge_grid": "0.01,0.5",
        "components_rule": "cumulative",
        "components_limit": "0.9",
        "response": "x5",
    }
    table = pa.ipc.open_stream(io.BytesIO(request.content)).read_all()
    assert table.column_names == names
    assert table["x2"].null_count == 1  # missing goes as an Arrow null, never as NaN
    assert result.p == 5


def test_categorical_goes_as_dictionary_in_arrow(stand_in, fake_time, bakery):
    with client_for(stand_in, fake_time) as client:
        client.assess(bakery, encoding="arrow")
    table = pa.ipc.open_stream(io.BytesIO(stand_in.requests[0].content)).read_all()
    assert pa.types.is_dictionary(table["region"].type)
    assert table["region"].to_pylist() == bakery["region"].tolist()


def test_summary_goes_as_moments_and_correlation_as_is(stand_in, fake_time, bakery):
    s = summarize(bakery, response="loaves", weights="weeks")
    corr = Correlation(["a", "b"], [[1.0, 0.5], [0.5, 1.0]], 50, response=("y", [0.1, 0.2]))
    mom = Moments(["a", "b"], 50, [0.0, 1.0], [[1.0, 0.2], [0.2, 2.0]])
    with client_for(stand_in, fake_time) as client:
        client.assess(s, threshold=10)
        client.assess(corr)
        client.assess(mom)
        with pytest.raises(ValueError, match=r"\['response'\] apply to tables only"):
            client.assess(s, response="loaves")
    sent = [msgspec.json.decode(r.content)["input"] for r in stand_in.requests]
    assert sent[0] == msgspec.json.decode(msgspec.json.encode(s.to_input()))
    assert sent[0]["kind"] == "moments" and sent[0]["n"] == bakery["weeks"].sum()
    assert sent[1] == {
        "kind": "correlation",
        "names": ["a", "b"],
        "matrix": [[1.0, 0.5], [0.5, 1.0]],
        "n": 50.0,
        "response": {"name": "y", "correlations": [0.1, 0.2]},
    }
    assert sent[2]["kind"] == "moments" and sent[2]["covariance"] == [[1.0, 0.2], [0.2, 2.0]]


def test_local_option_checks(stand_in, fake_time, bakery):
    with client_for(stand_in, fake_time) as client:
        with pytest.raises(ValueError, match=r"unknown options \['treshold'\]"):
            client.assess(bakery, treshold=10)
        # The contract's rules, in the service's own words and pointers.
        with pytest.raises(
            ValueError, match=r"Invalid enum value 'sometimes' \(at /options/missing\)"
        ):
            client.assess(bakery, missing="sometimes")
        with pytest.raises(ValueError, match=r"Expected `float` > 1.0 \(at /options/threshold\)"):
            client.assess(bakery, threshold=0.5)
        with pytest.raises(ValueError, match="encoding must be"):
            client.assess(bakery, encoding="xml")
    assert stand_in.requests == []


@pytest.mark.parametrize(
    "options",
    [
        {"threshold": 0.5},
        {"threshold": 1},
        {"missing": "sometimes"},
        {"sections": ["variables", "everything"]},
        {"components": {"rule": "largest"}},
        {"ridge": {"grid": [0.1, -1.0]}},
        {"protect": [""]},
    ],
)
def test_the_client_refuses_what_the_service_refuses_in_its_words(options):
    from litestar.testing import TestClient

    from knotwork.api import create_app
    from knotwork_client._encode import normalize_options
    from knotwork_contract import OptionsError

    with pytest.raises(OptionsError) as refused:
        normalize_options(options)
    body = {"input": {"kind": "correlation", "names": ["a", "b"], "n": 9,
                      "matrix": [[1, 0.2], [0.2, 1]]}, "options": options}  # fmt: skip
    with TestClient(create_app()) as service:
        answer = service.post("/v1/assess", json=body)
    # 422 for a number outside its range, 400 for a value of the wrong kind.
    assert answer.status_code in (400, 422)
    first = answer.json()["errors"][0]
    assert (first["pointer"], first["reason"]) == (refused.value.pointer, refused.value.reason)


def test_batch_mixes_results_and_problems(stand_in, fake_time, bakery):
    good = bakery[["oven_hours", "flour_kg", "staff_shifts"]]
    with client_for(stand_in, fake_time) as client:
        results = client.assess_batch(
            [good, (bakery[["oven_hours"]], {"threshold": 2}), summarize(good)], threshold=10
        )
    assert [type(r).__name__ for r in results] == ["Assessment", "ProblemDetails", "Assessment"]
    assert results[1].status == 422
    body = msgspec.json.decode(stand_in.requests[0].content)
    assert [i["options"] for i in body["items"]] == [
        {"threshold": 10.0},
        {"threshold": 2.0},
        {"threshold": 10.0},
    ]
    assert [i["input"]["kind"] for i in body["items"]] == ["table", "table", "moments"]


def test_health_and_ready(stand_in, fake_time):
    with client_for(stand_in, fake_time) as client:
        assert client.health() == {"status": "ok"}
        assert client.ready() is True
        stand_in.script = [busy(503, "1")]
        assert client.ready() is False
        stand_in.script = [drop_connection]
        assert client.ready() is False
    assert fake_time.sleeps == []


def test_base_url_prefix_is_kept():
    seen = []

    def handler(request):
        seen.append(str(request.url))
        return httpx.Response(200, json={"status": "ok"})

    with Client(URL + "/screening/", transport=httpx.MockTransport(handler)) as client:
        client.health()
    assert seen == [URL + "/screening/healthz"]


def test_token_must_be_one_line():
    with pytest.raises(ValueError, match="token must be a non-empty string on one line"):
        Client(URL, token="abc\r\nX-Evil: 1")


def test_default_timeout_is_finite():
    client = Client(URL)
    timeout = client._http.timeout
    assert timeout.connect == 5.0 and timeout.read == 60.0
    client.close()


# --- the async client mirrors the sync one ------------------------------------------------


def test_async_client_mirrors_the_sync_client(stand_in, fake_time, bakery):
    frame = bakery[["oven_hours", "flour_kg", "staff_shifts"]]
    stand_in.script = [busy(503, "2"), drop_connection]

    async def run():
        async with AsyncClient(
            URL,
            token="t",
            transport=stand_in.transport,
            sleep=fake_time.asleep,
            clock=fake_time.clock,
        ) as client:
            result = await client.assess(frame, threshold=10)
            batch = await client.assess_batch([frame, summarize(frame)])
            health = await client.health()
            ready = await client.ready()
            return result, batch, health, ready

    result, batch, health, ready = asyncio.run(run())
    with client_for(stand_in, fake_time, token="t") as client:
        sync_result = client.assess(frame, threshold=10)
    # Exact: both clients send the same bytes (checked below) and the stand-in answers a body
    # by the same computation.
    assert result == sync_result
    assert len(batch) == 2 and health == {"status": "ok"} and ready
    assert fake_time.sleeps[0] >= 2 and len(fake_time.sleeps) == 2
    bodies = [r.content for r in stand_in.requests if r.url.path == "/v1/assess"]
    assert bodies[-1] == bodies[-2]  # same bytes from both clients


def test_async_client_maps_errors_the_same_way(stand_in, fake_time, bakery):
    stand_in.script = [lambda r: httpx.Response(401, json=problem(401, "", "no token"))]

    async def run():
        async with AsyncClient(URL, transport=stand_in.transport, sleep=fake_time.asleep) as c:
            await c.assess(bakery[["oven_hours", "flour_kg"]])

    with pytest.raises(AuthenticationError) as info:
        asyncio.run(run())
    assert info.value.status == 401
