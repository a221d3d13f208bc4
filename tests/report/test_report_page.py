"""POST /v1/report without a browser: the page parses, names every variable with its VIF,
references nothing outside itself, keeps within its size, and errors stay problem+json."""

from __future__ import annotations

import re
from datetime import UTC, datetime
from typing import Any

import msgspec
import numpy as np
import pytest
from page_checks import Page, outside_references
from report_bodies import DEMO_QUERY, HTML, JSON, PARQUET, binary_bodies, demo_body

from knotwork.codecs import Limits, decode_assess, run
from knotwork.report import format_vif, render_report

DEMO_BUDGET = 300_000  # bytes, the bound for the demo
P50_BUDGET = 1_500_000  # bytes, at p = 50
STAMP = re.compile(rb'<time datetime="[^"]*">[^<]*</time>')


def _report(client: Any, body: Any, media: str = JSON, query: str = "") -> Any:
    content = body if isinstance(body, bytes) else msgspec.json.encode(body)
    path = "/v1/report" + (f"?{query}" if query else "")
    return client.post(path, content=content, headers={"Content-Type": media})


@pytest.fixture(scope="module")
def demo_page(client: Any) -> Any:
    response = _report(client, demo_body())
    assert response.status_code == 200, response.text
    return response


def test_the_answer_is_one_html_page(demo_page: Any) -> None:
    assert demo_page.headers["content-type"] == HTML
    assert "default-src 'none'" in demo_page.headers["content-security-policy"]
    page = Page(demo_page.text)
    assert page.errors == []
    assert [tag for tag, _ in page.tags][:1] == ["html"]
    assert len(demo_page.content) <= DEMO_BUDGET


def test_the_page_references_nothing_outside_itself(demo_page: Any) -> None:
    assert outside_references(demo_page.text) == []


def test_every_variable_is_named_with_its_vif(client: Any, demo_page: Any) -> None:
    answer = client.post(
        "/v1/assess", content=msgspec.json.encode(demo_body()), headers={"Content-Type": JSON}
    ).json()
    text = demo_page.text
    for variable in answer["variables"]:
        # The table shows each VIF with two decimals, beside the name.
        row = re.search(
            rf"<tr[^>]*><td>{re.escape(variable['name'])}</td><td class=num>([^<]*)</td>", text
        )
        assert row is not None, variable["name"]
        assert row.group(1) == f"{variable['vif']:.2f}"


def test_every_chart_has_a_title_and_a_text_alternative(demo_page: Any) -> None:
    svgs = re.findall(r"<svg [^>]*>.*?</svg>", demo_page.text, flags=re.S)
    # Inflation, terms, conditioning, removal, ridge.
    assert len(svgs) == 5
    for svg in svgs:
        head = svg[: svg.index(">")]
        assert 'role="img"' in head and "aria-labelledby=" in head
        title = re.search(r"<title id=\"[^\"]+\">([^<]+)</title>", svg)
        desc = re.search(r"<desc id=\"[^\"]+\">([^<]+)</desc>", svg)
        assert title is not None and desc is not None and len(desc.group(1)) > 40
    ids = re.findall(r'\bid="([^"]+)"', demo_page.text)
    assert len(ids) == len(set(ids))  # unique in the page, across the charts


def test_the_finding_comes_first_and_provenance_last(demo_page: Any) -> None:
    text = demo_page.text
    finding = text.index('class="finding"')
    assert finding < text.index("<h2>")
    assert "5 have a variance inflation factor above the threshold of 5" in text
    assert "floor_area, glasshouse_area" in text  # a tangled set
    assert "proposes dropping floor_area" in text
    order = [text.index(f'id="{key}"') for key in ("inflation", "notes", "provenance")]
    assert order == sorted(order)
    assert "rules of thumb" in text and "qualified review" in text


def test_the_page_shows_the_answers_provenance(client: Any, demo_page: Any) -> None:
    answer = client.post(
        "/v1/assess", content=msgspec.json.encode(demo_body()), headers={"Content-Type": JSON}
    ).json()
    assert answer["provenance"]["fingerprint"] in demo_page.text
    assert f"<dd>{answer['provenance']['service_version']}</dd>" in demo_page.text
    assert '<time datetime="' in demo_page.text  # when it was made


def test_every_encoding_gives_the_same_page(client: Any, demo_page: Any) -> None:
    expected = STAMP.sub(b"", demo_page.content)
    for media, body in binary_bodies().items():
        response = _report(client, body, media, DEMO_QUERY)
        assert response.status_code == 200, response.text
        # The same summary up to rounding, drawn by the same functions: the page may differ
        # only where a number's last printed digit does, and the fingerprint does not.
        got = STAMP.sub(b"", response.content)
        assert len(got) == pytest.approx(len(expected), rel=0.01)
        fingerprint = re.search(rb"sha256:[0-9a-f]{64}", got)
        assert fingerprint is not None and fingerprint.group(0) in expected


def test_the_same_request_draws_the_same_page() -> None:
    # The same function on the same input, the time fixed: identical bytes.
    prepared = decode_assess(msgspec.json.encode(demo_body()), Limits())
    when = datetime(2026, 12, 4, 12, 0, tzinfo=UTC)
    assert render_report(run(prepared, full=True), when) == render_report(
        run(prepared, full=True), when
    )


def test_errors_stay_problem_json(client: Any) -> None:
    cases = [
        (b'{"input": {', JSON, "", 400),
        (msgspec.json.encode({**demo_body(), "options": {"threshold": 0.5}}), JSON, "", 422),
        (b"PAR1 not a table PAR1", PARQUET, "", 400),
        (b"a,b\n1,2\n", "text/csv", "", 415),
        (msgspec.json.encode(demo_body()), JSON, "threshold=4", 400),
    ]
    few = {"input": {"kind": "correlation", "names": ["a", "b", "c"],
                     "matrix": [[1, 0.5, 0.2], [0.5, 1, 0.3], [0.2, 0.3, 1]], "n": 3}}  # fmt: skip
    cases.append((msgspec.json.encode(few), JSON, "", 422))
    for body, media, query, status in cases:
        response = _report(client, body, media, query)
        assert response.status_code == status, response.text
        assert response.headers["content-type"].startswith("application/problem+json")


def test_an_exact_dependency_and_a_subset_of_sections(client: Any) -> None:
    rng = np.random.default_rng(11)
    a, b, c = rng.normal(size=(3, 60))
    body = {
        "input": {"kind": "table", "columns": {"a": a.tolist(), "b": b.tolist(),
                                               "total": (a + b).tolist(), "c": c.tolist()}},
    }  # fmt: skip
    response = _report(client, body)
    assert response.status_code == 200, response.text
    assert "in an exact linear dependency" in response.text
    assert 'id="dependencies"' in response.text and "infinite" in response.text
    assert outside_references(response.text) == []
    only = _report(client, {**body, "options": {"sections": ["variables"]}})
    assert only.status_code == 200
    assert 'id="inflation"' in only.text and 'id="ridge"' not in only.text


def test_names_are_text_never_markup_or_math(client: Any) -> None:
    rng = np.random.default_rng(5)
    x, y, z = rng.normal(size=(3, 40))
    odd = "<b>cost</b> & $x^2$"
    body = {"input": {"kind": "table", "columns": {odd: x.tolist(), "y": (x + 0.1 * y).tolist(),
                                                    "z": z.tolist()}}}  # fmt: skip
    response = _report(client, body)
    assert response.status_code == 200, response.text
    assert "<b>cost</b>" not in response.text
    assert "&lt;b&gt;cost&lt;/b&gt; &amp; $x^2$" in response.text
    assert Page(response.text).errors == []


def _late_payment_body(**options: Any) -> dict[str, Any]:
    """A generated binary response (a late payment) on three correlated account measures."""
    rng = np.random.default_rng(16)
    n = 400
    base = rng.normal(size=n)
    columns = {
        "balance": base + 0.5 * rng.normal(size=n),
        "limit_used": base + 0.6 * rng.normal(size=n),
        "months_open": rng.normal(size=n),
    }
    eta = 0.8 * columns["balance"] - 0.5 * columns["months_open"]
    late = (rng.uniform(size=n) < 1.0 / (1.0 + np.exp(-eta))).astype(float)
    return {
        "input": {"kind": "table",
                  "columns": {**{k: v.tolist() for k, v in columns.items()},
                              "late": late.tolist()},
                  "response": "late"},
        "options": {"threshold": 5, "family": "binomial", **options},
    }  # fmt: skip


def test_optional_records_are_drawn_when_present() -> None:
    when = datetime(2026, 12, 4, tzinfo=UTC)
    body = _late_payment_body(uncertainty={"method": "normal", "level": 0.9})
    glm = run(decode_assess(msgspec.json.encode(body), Limits()), full=True)
    assert glm.model is not None and glm.uncertainty is not None
    text = render_report(glm, when)
    assert 'id="model"' in text and "binomial" in text and "logit" in text
    assert 'id="uncertainty"' in text and "90% intervals" in text
    assert "VIF interval" in text and "unweighted VIF" in text
    for v in glm.variables:
        assert v.vif_interval is not None and v.design_vif is not None
        low, high = v.vif_interval
        assert f"{format_vif(low)} – {format_vif(high)}" in text
        assert f">{format_vif(v.design_vif)}</td>" in text
    assert "interval" in re.findall(r"<svg .*?</svg>", text, flags=re.S)[0]
    plain = render_report(run(decode_assess(msgspec.json.encode(demo_body()), Limits())), when)
    assert 'id="model"' not in plain and "VIF interval" not in plain
    assert 'id="uncertainty"' not in plain


@pytest.mark.slow
def test_fifty_predictors_stay_within_the_budget(client: Any) -> None:
    rng = np.random.default_rng(50)
    factors = rng.normal(size=(400, 8))
    columns = factors @ rng.normal(size=(8, 50)) + 0.6 * rng.normal(size=(400, 50))
    body = {
        "input": {"kind": "table",
                  "columns": {f"measure_{j:02d}": columns[:, j].tolist() for j in range(50)}},
        "options": {"threshold": 5},
    }  # fmt: skip
    response = _report(client, body)
    assert response.status_code == 200, response.text
    assert len(response.content) <= P50_BUDGET
    assert Page(response.text).errors == []
    assert outside_references(response.text) == []
    for j in range(50):
        assert f"<td>measure_{j:02d}</td>" in response.text


def test_the_report_route_asks_for_a_token_like_assess() -> None:
    from litestar.testing import TestClient

    from knotwork.api import create_app
    from knotwork.settings import Settings

    token = "report-test-token-0123456789"
    with TestClient(create_app(Settings(tokens=(token,), concurrency=1))) as guarded:
        body = msgspec.json.encode(demo_body(sections=["variables"]))
        refused = guarded.post("/v1/report", content=body, headers={"Content-Type": JSON})
        assert refused.status_code == 401
        assert refused.headers["content-type"].startswith("application/problem+json")
        headers = {"Content-Type": JSON, "Authorization": f"Bearer {token}"}
        assert guarded.post("/v1/report", content=body, headers=headers).status_code == 200
        metrics = guarded.get("/metrics").text
        assert 'route="/v1/report"' in metrics
