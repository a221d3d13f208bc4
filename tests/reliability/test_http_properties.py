"""Invariants of the answers, checked through the HTTP boundary on random tables (hypothesis).

The core's own property tests (tests/property/) call the numerics directly; these send
requests through the whole service in process (litestar's TestClient: JSON and Arrow codecs,
options, the error mapping, the JSON encoder), so what they check is what a client receives:

- every VIF of a usable table is at least 1 (or null and flagged aliased), with tolerance,
  R_j^2 and SE inflation consistent with it;
- permuting the columns permutes the per-variable answers and leaves the eigenvalues alone;
- the table sent as JSON, as an Arrow IPC stream, as its correlation matrix with n and as its
  moments (both computed here with numpy, outside the service) give the same VIFs, to 1e-9
  relative, widened by the conditioning of the design (rounding in R is amplified by it);
- a batch answers each item exactly as a single request would.

Examples are bounded (``max_examples`` below) and derandomized so that ``make test`` is
repeatable; each example is a handful of in-process requests.
"""

from __future__ import annotations

import io
from collections.abc import Iterator

import numpy as np
import pyarrow as pa
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from litestar.testing import TestClient
from numpy.testing import assert_allclose

from knotwork.api import create_app
from knotwork.settings import Settings

SECTIONS = ["variables", "conditioning", "dependencies"]
PROPERTY = settings(
    max_examples=30,
    deadline=None,
    derandomize=True,
    database=None,
    suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow],
)


@pytest.fixture(scope="module")
def client() -> Iterator[TestClient]:
    with TestClient(create_app(Settings(concurrency=2))) as test_client:
        yield test_client


@st.composite
def tables(draw: st.DrawFn, *, tangled: bool = True) -> np.ndarray:
    """Random n x p designs: mixed normal columns with a drawn amount of tangling, columns on
    very different scales and some far from zero (a mean up to 1e6 times the spread)."""
    seed = draw(st.integers(0, 2**32 - 1))
    p = draw(st.integers(2, 7))
    n = draw(st.integers(p + 3, 90))
    rng = np.random.default_rng(seed)
    strength = draw(st.floats(0.0, 6.0)) if tangled else 0.0
    mix = np.eye(p) + strength * rng.normal(size=(p, p)) * (rng.random((p, p)) < 0.4)
    x = rng.normal(size=(n, p)) @ mix
    scales = np.array(
        draw(st.lists(st.sampled_from([1e-3, 1.0, 7.5, 1e3]), min_size=p, max_size=p))
    )
    shifts = np.array(
        draw(st.lists(st.sampled_from([0.0, -40.0, 1e3, 1e6]), min_size=p, max_size=p))
    )
    return x * scales + shifts * scales


def _names(p: int) -> list[str]:
    return [f"x{j}" for j in range(p)]


def _table_doc(x: np.ndarray, names: list[str]) -> dict:
    return {
        "input": {"kind": "table", "columns": {n: x[:, j].tolist() for j, n in enumerate(names)}},
        "options": {"sections": SECTIONS},
    }


def _post(client: TestClient, body: dict) -> dict:
    response = client.post("/v1/assess", json=body)
    assert response.status_code == 200, response.text
    return response.json()


def _vifs(doc: dict) -> dict[str, float | None]:
    return {v["name"]: v["vif"] for v in doc["variables"]}


def _rtol(x: np.ndarray) -> float:
    # 1e-9 relative, widened by the condition number of the correlation matrix: a rounding of
    # R's entries by eps is amplified by about cond(R) in the VIFs.
    cond = float(np.linalg.cond(np.corrcoef(x, rowvar=False)))
    return 1e-9 + 1e-13 * cond


def _usable(x: np.ndarray) -> bool:
    return bool(np.linalg.cond(np.corrcoef(x, rowvar=False)) < 1e9)


@PROPERTY
@given(x=tables())
def test_every_vif_is_at_least_one(client: TestClient, x: np.ndarray) -> None:
    doc = _post(client, _table_doc(x, _names(x.shape[1])))
    assert [v["name"] for v in doc["variables"]] == _names(x.shape[1])
    for v in doc["variables"]:
        if v["aliased"]:
            assert v["vif"] is None
            continue
        assert v["vif"] >= 1.0, v
        assert_allclose(v["tolerance"], 1.0 / v["vif"], rtol=1e-12)
        assert_allclose(v["se_inflation"], np.sqrt(v["vif"]), rtol=1e-12)
        assert 0.0 <= v["r_squared"] < 1.0
        assert_allclose(1.0 - v["r_squared"], v["tolerance"], rtol=1e-9, atol=1e-15)


@PROPERTY
@given(x=tables(), order=st.randoms(use_true_random=False))
def test_permuting_columns_permutes_the_answers(client: TestClient, x: np.ndarray, order) -> None:
    names = _names(x.shape[1])
    perm = list(range(len(names)))
    order.shuffle(perm)
    base = _post(client, _table_doc(x, names))
    moved = _post(client, _table_doc(x[:, perm], [names[j] for j in perm]))
    assert [v["name"] for v in moved["variables"]] == [names[j] for j in perm]
    before, after = _vifs(base), _vifs(moved)
    aliased = {v["name"] for v in base["variables"] if v["aliased"]}
    assert aliased == {v["name"] for v in moved["variables"] if v["aliased"]}
    kept = [n for n in names if n not in aliased]
    rtol = _rtol(x)
    assert_allclose([after[n] for n in kept], [before[n] for n in kept], rtol=rtol)
    assert_allclose(
        sorted(moved["conditioning"]["eigenvalues"]),
        sorted(base["conditioning"]["eigenvalues"]),
        rtol=rtol,
        atol=1e-12,
    )


def _arrow(x: np.ndarray, names: list[str]) -> bytes:
    table = pa.table({n: x[:, j] for j, n in enumerate(names)})
    sink = io.BytesIO()
    with pa.ipc.new_stream(sink, table.schema) as writer:
        writer.write_table(table)
    return sink.getvalue()


@PROPERTY
@given(x=tables())
def test_table_correlation_and_moments_paths_agree(client: TestClient, x: np.ndarray) -> None:
    if not _usable(x):
        return  # nearly singular: the paths may rightly disagree on which columns are aliased
    names = _names(x.shape[1])
    n = float(x.shape[0])
    as_json = _vifs(_post(client, _table_doc(x, names)))
    response = client.post(
        "/v1/assess?sections=" + ",".join(SECTIONS),
        content=_arrow(x, names),
        headers={"Content-Type": "application/vnd.apache.arrow.stream"},
    )
    assert response.status_code == 200, response.text
    as_arrow = _vifs(response.json())
    # The summaries are computed here with numpy, independently of the service's own.
    r = np.corrcoef(x, rowvar=False)
    as_correlation = _vifs(
        _post(
            client,
            {
                "input": {"kind": "correlation", "names": names, "matrix": r.tolist(), "n": n},
                "options": {"sections": SECTIONS},
            },
        )
    )
    as_moments = _vifs(
        _post(
            client,
            {
                "input": {
                    "kind": "moments",
                    "names": names,
                    "n": n,
                    "means": x.mean(axis=0).tolist(),
                    "covariance": np.cov(x, rowvar=False, ddof=1).tolist(),
                },
                "options": {"sections": SECTIONS},
            },
        )
    )
    expected = np.diag(np.linalg.inv(r))  # numpy: the VIFs are the diagonal of R^-1
    rtol = _rtol(x)
    for got in (as_json, as_arrow, as_correlation, as_moments):
        assert list(got) == names
        assert all(v is not None for v in got.values())
        assert_allclose([got[k] for k in names], [as_json[k] for k in names], rtol=rtol)
    assert_allclose([as_json[k] for k in names], expected, rtol=rtol)


@settings(PROPERTY, max_examples=10)
@given(designs=st.lists(tables(tangled=True), min_size=1, max_size=5))
def test_a_batch_answers_each_item_as_alone(client: TestClient, designs: list) -> None:
    items = [_table_doc(x, _names(x.shape[1])) for x in designs]
    items.insert(len(items) // 2, {"input": {"kind": "table", "columns": {"a": [1.0, 2.0]}}})
    response = client.post("/v1/assess/batch", json={"items": items})
    assert response.status_code == 200, response.text
    results = response.json()["results"]
    assert len(results) == len(items)
    for index, (item, result) in enumerate(zip(items, results, strict=True)):
        alone = client.post("/v1/assess", json=item)
        if alone.status_code == 200:
            # Exact: a batch item goes through the same decode_assess and run as a single
            # request (routes._assess_many), on the same values.
            assert result == alone.json()
        else:
            problem = alone.json()
            assert result["status"] == problem["status"] == alone.status_code
            assert result["type"] == problem["type"]
            assert [e["pointer"] for e in result["errors"]] == [
                f"/items/{index}" + e["pointer"] for e in problem["errors"]
            ]
