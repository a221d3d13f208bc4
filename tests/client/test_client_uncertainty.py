"""options.uncertainty from the client and the command line, against the service in process.

The service is the real application (litestar's TestClient) behind an httpx transport, so the
client's encodings, decoders and frames meet the service's own answers.
"""

from __future__ import annotations

import csv
import io
import json
from collections.abc import Iterator
from typing import Any

import httpx
import numpy as np
import pytest
from answer_fields import UNCERTAINTY_FRAME_COLUMNS, VARIABLE_FIELDS
from kc_support import bakery_frame
from litestar.testing import TestClient

from knotwork.api import create_app
from knotwork.settings import Settings
from knotwork_client import Client, InputRejectedError, UncertaintyOptions, summarize
from knotwork_client._cli import CSV_FIELDS, main
from knotwork_client._encode import normalize_options

INTERVAL_COLUMNS = UNCERTAINTY_FRAME_COLUMNS
PREDICTORS = ["oven_hours", "flour_kg", "staff_shifts", "van_trips", "market_stalls", "region"]


@pytest.fixture(scope="module")
def transport() -> Iterator[httpx.MockTransport]:
    """Every request forwarded to the service's application, in process."""
    with TestClient(create_app(Settings(concurrency=2))) as service:

        def forward(request: httpx.Request) -> httpx.Response:
            answer = service.request(
                request.method,
                request.url.path,
                params=request.url.params,
                content=request.read(),
                headers={"content-type": request.headers.get("content-type", "")},
            )
            return httpx.Response(
                answer.status_code, content=answer.content, headers=answer.headers
            )

        yield httpx.MockTransport(forward)


@pytest.fixture
def client(transport) -> Iterator[Client]:
    with Client("http://service.test", transport=transport) as c:
        yield c


def frame(rows: int = 300) -> Any:
    return bakery_frame(rows=rows)[[*PREDICTORS, "loaves"]]


def test_options_accept_a_mapping_a_struct_or_a_bare_method() -> None:
    # What is sent: the contract's Struct with its defaults filled in.
    want = {"uncertainty": {"method": "bootstrap", "level": 0.95, "replicates": 500, "seed": 1}}
    given = {"method": "bootstrap", "replicates": np.int64(500), "seed": 1}
    assert normalize_options({"uncertainty": given}) == want
    struct = UncertaintyOptions(method="bootstrap", replicates=500, seed=1)
    assert normalize_options({"uncertainty": struct}) == want
    assert normalize_options({"uncertainty": "normal"})["uncertainty"]["method"] == "normal"
    # The contract's own rule and wording, before anything is sent.
    with pytest.raises(ValueError, match="uncertainty/replicates"):
        normalize_options({"uncertainty": {"method": "bootstrap", "replicates": 10}})


def test_frames_carry_the_bounds_and_shares_only_when_asked(client) -> None:
    data = frame()
    plain = client.assess(data, response="loaves", sections=["variables", "terms"])
    assert tuple(plain.to_frame().columns) == VARIABLE_FIELDS
    normal = client.assess(
        data, response="loaves", sections=["variables", "terms"], uncertainty="normal"
    )
    table = normal.to_frame()
    assert tuple(table.columns) == (*VARIABLE_FIELDS, *INTERVAL_COLUMNS)
    assert (table["vif_low"] <= table["vif"]).all() and (table["vif"] <= table["vif_high"]).all()
    assert table["threshold_p_value"].between(0, 1).all()
    assert table["share_dropped"].isna().all()  # bootstrap only
    assert normal.uncertainty is not None and normal.uncertainty.method == "normal"
    # The indicator columns of region (all levels but the first in sorted order) are flagged.
    levels = sorted(data["region"].unique())
    assert len(normal.uncertainty.approximate) == len(levels) - 1
    assert all(name.startswith("region[") for name in normal.uncertainty.approximate)
    # Identical existing columns: the same service computation with intervals added.
    assert table[list(VARIABLE_FIELDS)].equals(plain.to_frame())


def test_bootstrap_from_a_frame_as_json_and_as_arrow(client) -> None:
    data = frame()
    ask = {"method": "bootstrap", "replicates": 200, "seed": 1}
    answers = [
        client.assess(data, response="loaves", uncertainty=ask, encoding=encoding)
        for encoding in ("json", "arrow")
    ]
    first, second = answers
    table = first.to_frame()
    assert table["share_above_threshold"].between(0, 1).all()
    assert table["threshold_p_value"].isna().all()  # normal only
    # The tangled pair (flour_kg tracks oven_hours) is above the threshold in most replicates.
    assert table.loc[["oven_hours", "flour_kg"], "share_above_threshold"].min() > 0.5
    terms = first.terms_frame()
    assert list(terms.index) == ["region"]
    assert terms.loc["region", "gvif_low"] <= terms.loc["region", "gvif_high"]
    record = first.uncertainty
    assert record is not None and record.replicates == 200 and record.seed == 1
    assert record.share_same_kept is not None and 0 <= record.share_same_kept <= 1
    # Another encoding of the same numbers (JSON text against Arrow's binary float64): the
    # same counts are drawn, so the answers agree to rounding of the summaries.
    for column in ("vif_low", "vif_high", "share_above_threshold", "share_dropped"):
        np.testing.assert_allclose(second.to_frame()[column], table[column], rtol=1e-12, atol=1e-14)


def test_the_bootstrap_on_a_local_summary_is_refused_naming_the_field(client) -> None:
    summary = summarize(frame(), response="loaves")
    with pytest.raises(InputRejectedError) as info:
        client.assess(summary, uncertainty={"method": "bootstrap"})
    (error,) = info.value.problem.errors
    assert error.pointer == "/options/uncertainty/method"
    assert "the bootstrap resamples rows" in error.reason
    # normal works from the summary alone.
    assert client.assess(summary, uncertainty="normal").variables[0].vif_interval is not None


def run(transport, *args: str) -> tuple[int, str]:
    err = io.StringIO()
    code = main([*args], transport=transport, stderr=err)
    return code, err.getvalue()


def test_the_command_line_writes_bounds_and_shares(transport, tmp_path) -> None:
    models = tmp_path / "models"
    models.mkdir()
    frame(200).to_csv(models / "bakery.csv", index=False)
    out = tmp_path / "out"
    code, log = run(
        transport,
        str(models),
        "--out",
        str(out),
        "--response",
        "loaves",
        "--categorical",
        "region",
        "--uncertainty",
        "bootstrap",
        "--replicates",
        "150",
        "--seed",
        "2",
        "--sections",
        "variables,terms",
    )
    assert code == 1, log  # the tangled pair breaks the common-practice threshold 5
    with (out / "screen.csv").open() as fh:
        reader = csv.DictReader(fh)
        assert tuple(reader.fieldnames or ()) == CSV_FIELDS
        (row,) = list(reader)
    assert row["uncertainty"] == "bootstrap"
    assert float(row["worst_vif_low"]) <= float(row["max_vif"]) <= float(row["worst_vif_high"])
    assert 0 <= float(row["worst_share_above"]) <= 1 and row["worst_p_value"] == ""
    assert 0 <= float(row["kept_share"]) <= 1
    for part in row["drop_shares"].split(";"):
        name, share = part.split("=")
        assert name in PREDICTORS and 0 < float(share) <= 1
    report = json.loads((out / "bakery.json").read_text())
    assert report["assessment"]["uncertainty"]["replicates"] == 150


def test_the_command_line_refuses_settings_without_a_method(transport, tmp_path) -> None:
    path = tmp_path / "m.csv"
    frame(50).to_csv(path, index=False)
    code, log = run(transport, str(path), "--replicates", "200")
    assert code == 2 and "--replicates set the intervals of --uncertainty" in log
    code, log = run(transport, str(path), "--summary-only", "--uncertainty", "bootstrap")
    assert code == 2 and "the bootstrap resamples rows" in log
    code, log = run(transport, str(path), "--uncertainty", "normal", "--level", "1.5")
    assert code == 2 and "uncertainty/level" in log
