"""GLM families through the Python client and the command line, against a real service process
on a free loopback port (started here).

Outside references: statsmodels' GLM (0.15.0) on the spector and star98 datasets shipped with
statsmodels. The weighted VIFs are compared with Fox & Monette's (1992) VIFs of statsmodels'
``cov_params()`` (the diagonal of the inverse of the slope coefficients' correlation); the IRLS
tolerance of the service (1e-9 on the linear predictor, echoed as ``model.tolerance``) keeps
the weights within about 1e-9 of statsmodels' fit at 1e-13, so 1e-6 holds with a wide margin.
"""

from __future__ import annotations

import asyncio
import io
import json
from collections.abc import Iterator
from typing import Any

import msgspec
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from numeric import assert_close_answers
from numpy.testing import assert_allclose
from scipy.special import expit

from knotwork_client import (
    AsyncClient,
    Client,
    DataError,
    InputRejectedError,
    summarize_glm_dask,
)
from knotwork_client._cli import main as screen
from knotwork_harness.live_server import serve

pytest.importorskip("knotwork.api", reason="the service is part of this repository")

SM_FIT = {"tol": 1e-13, "tol_criterion": "params", "maxiter": 500}


@pytest.fixture(scope="module")
def service(tmp_path_factory) -> Iterator[str]:
    with serve(tmp_path_factory.mktemp("service"), {"KNOTWORK_WORKERS": "1"}) as server:
        yield server.url


def spector() -> pd.DataFrame:
    return sm.datasets.spector.load_pandas().data[["GPA", "TUCE", "PSI", "GRADE"]]


def _fox_monette(result) -> np.ndarray:
    cov = np.asarray(result.cov_params())[1:, 1:]
    d = np.sqrt(np.diag(cov))
    return np.diag(np.linalg.inv(cov / np.outer(d, d)))


@pytest.mark.parametrize("encoding", ["json", "arrow"])
def test_spector_check_values_through_the_client(service, encoding) -> None:
    # Check values: spector, logit of GRADE on GPA, TUCE, PSI with an intercept (statsmodels
    # 0.15 GLM, six decimals, docs/numerics.md); weighted and plain design VIFs side by side.
    with Client(service) as client:
        a = client.assess(spector(), response="GRADE", family="binomial", encoding=encoding)
    frame = a.to_frame()
    assert list(frame.index) == ["GPA", "TUCE", "PSI"]
    assert list(frame.columns)[-1] == "design_vif"
    assert_allclose(frame["vif"], [1.188155, 1.078527, 1.148729], atol=5e-7)
    assert_allclose(frame["design_vif"], [1.176158, 1.189435, 1.012902], atol=5e-7)
    assert a.model is not None
    assert (a.model.family, a.model.link, a.model.converged) == ("binomial", "logit", True)
    assert a.model.n == 32 and a.model.n_coefficients == 4
    # Source: statsmodels GLM on the same data; the deviance is flat at the optimum.
    theirs = sm.GLM(
        spector()["GRADE"], sm.add_constant(spector()[["GPA", "TUCE", "PSI"]]),
        family=sm.families.Binomial(),
    ).fit(**SM_FIT)  # fmt: skip
    assert_allclose(a.model.deviance, theirs.deviance, rtol=1e-9)
    assert_allclose(frame["vif"], _fox_monette(theirs), rtol=1e-6)


def test_json_and_arrow_paths_agree_with_trials(service) -> None:
    # star98: NABOVE of NABOVE + NBELOW, a binomial with trials. The two encodings carry the
    # same float64 values to the same fit: equal answers exactly.
    data = sm.datasets.star98.load_pandas()
    frame = data.exog.iloc[:, :8].copy()
    counts = data.endog.to_numpy(dtype=float)
    frame["trials_n"] = counts.sum(axis=1)
    frame["share_above"] = counts[:, 0] / frame["trials_n"]
    with Client(service) as client:
        answers = [
            client.assess(
                frame,
                response="share_above",
                trials="trials_n",
                family="binomial",
                sections=["variables", "terms", "removal"],
                encoding=encoding,
            )
            for encoding in ("json", "arrow")
        ]
    assert answers[0] == answers[1]
    endog = np.column_stack([counts[:, 0], counts[:, 1]])
    theirs = sm.GLM(
        endog, sm.add_constant(data.exog.iloc[:, :8]), family=sm.families.Binomial()
    ).fit(**SM_FIT)
    # Source: statsmodels GLM cov_params(), Fox & Monette (1992).
    assert_allclose(answers[0].to_frame()["vif"], _fox_monette(theirs), rtol=1e-6)


def _credit_frame(rows: int = 600, seed: int = 5) -> pd.DataFrame:
    """A generated loan book: a default flag on income, debt, a debt ratio and tenure."""
    rng = np.random.default_rng(seed)
    income = rng.lognormal(3.5, 0.4, rows)
    debt = 0.3 * income + rng.normal(0, 5, rows)
    tenure = rng.uniform(0, 20, rows)
    eta = -1.0 - 0.02 * income + 0.05 * debt - 0.05 * tenure
    return pd.DataFrame(
        {
            "income": income,
            "debt": debt,
            "tenure_years": tenure,
            "months_on_book": rng.integers(1, 60, rows).astype(float),
            "default_flag": (rng.random(rows) < expit(eta)).astype(float),
        }
    )


def test_offset_poisson_and_gaussian_through_the_client(service) -> None:
    frame = _credit_frame()
    frame["log_months"] = np.log(frame["months_on_book"])
    rng = np.random.default_rng(9)
    frame["late_payments"] = rng.poisson(0.05 * frame["months_on_book"]).astype(float)
    predictors = ["income", "debt", "tenure_years"]
    with Client(service) as client:
        counts = client.assess(
            frame[[*predictors, "log_months", "late_payments"]],
            response="late_payments",
            offset="log_months",
            family="poisson",
        )
        plain = client.assess(frame[[*predictors, "default_flag"]], response="default_flag")
    # Source: statsmodels GLM with the same offset.
    theirs = sm.GLM(
        frame["late_payments"], sm.add_constant(frame[predictors]),
        family=sm.families.Poisson(), offset=frame["log_months"],
    ).fit(**SM_FIT)  # fmt: skip
    assert_allclose(counts.to_frame()["vif"], _fox_monette(theirs), rtol=1e-6)
    assert plain.model is None
    assert "design_vif" not in plain.to_frame().columns  # the gaussian table is as before


def test_options_are_checked_before_sending() -> None:
    # The contract's bounds, checked locally by the client: no service needed.
    with Client("http://127.0.0.1:9") as client, pytest.raises(ValueError, match="var_power"):
        client.assess(spector(), response="GRADE", family="tweedie", var_power=2.5)


def test_rejections_name_the_field(service) -> None:
    frame = spector()
    frame.loc[3, "GRADE"] = 2.0
    with Client(service) as client, pytest.raises(InputRejectedError) as info:
        client.assess(frame, response="GRADE", family="binomial", encoding="arrow")
    problem = info.value.problem
    assert problem.errors[0].pointer == "/columns/GRADE"
    assert problem.errors[0].reason.startswith("a binomial response must be 0 or 1; row 3 is 2")


def test_command_line_takes_family_offset_and_trials(service, tmp_path) -> None:
    frame = _credit_frame()
    path = tmp_path / "loans.csv"
    frame[["income", "debt", "tenure_years", "default_flag"]].to_csv(path, index=False)
    out = tmp_path / "reports"
    err = io.StringIO()
    args = [str(path), "--url", service, "--response", "default_flag", "--out", str(out)]
    code = screen([*args, "--family", "binomial"], stderr=err)
    assert code in (0, 1), err.getvalue()
    report = json.loads((out / "loans.json").read_text())
    model = report["assessment"]["model"]
    assert model["family"] == "binomial" and model["link"] == "logit"
    assert all(v["design_vif"] is not None for v in report["assessment"]["variables"])
    # A fit needs rows, which --summary-only never sends: refused before anything is sent.
    err = io.StringIO()
    assert screen([*args, "--family", "binomial", "--summary-only"], stderr=err) == 2
    assert "--summary-only never sends" in err.getvalue()
    err = io.StringIO()
    assert screen([*args, "--family", "tweedie", "--var-power", "3"], stderr=err) == 2
    # Trials with a family that has none: the service names the field.
    frame["n"] = 3.0
    frame.to_csv(path, index=False)
    code = screen([*args, "--family", "poisson", "--trials", "n"], stderr=io.StringIO())
    assert code == 3
    report = json.loads((out / "loans.json").read_text())
    assert report["error"]["problem"]["errors"][0]["pointer"] in ("/input/trials", "/query/trials")


# --- the Dask path --------------------------------------------------------------------------


def _dask_cases() -> dict[str, tuple[pd.DataFrame, dict[str, Any]]]:
    spector_frame = spector()
    randhie = sm.datasets.randhie.load_pandas()
    rand = randhie.exog.copy()
    rng = np.random.default_rng(4)
    rand["log_exposure"] = np.log(rng.uniform(0.5, 2.0, len(rand)))
    rand["prior"] = rng.uniform(0.25, 4.0, len(rand))
    rand["mdvis"] = randhie.endog.to_numpy(dtype=float)
    scotland = sm.datasets.scotland.load_pandas()
    scot = scotland.exog.copy()
    scot["YES"] = scotland.endog.to_numpy(dtype=float)
    fair = sm.datasets.fair.load_pandas().data.drop(columns=["occupation", "occupation_husb"])
    star98 = sm.datasets.star98.load_pandas()
    star = star98.exog.iloc[:, :10].copy()
    counts = star98.endog.to_numpy(dtype=float)
    star["trials_n"] = counts.sum(axis=1)
    star["share_above"] = counts[:, 0] / star["trials_n"]
    occupation = sm.datasets.fair.load_pandas().data.drop(columns=["occupation_husb", "affairs"])
    occupation["occupation"] = [f"level{int(v)}" for v in occupation["occupation"]]
    occupation["any_time"] = (sm.datasets.fair.load_pandas().data["affairs"] > 0).astype(float)
    exposure = {"offset": "log_exposure", "weights": "prior"}
    return {
        "spector": (spector_frame, {"response": "GRADE", "family": "binomial"}),
        "randhie": (rand, {"response": "mdvis", "family": "poisson", **exposure}),
        "scotland": (scot, {"response": "YES", "family": "gamma"}),
        "fair": (fair, {"response": "affairs", "family": "tweedie", "var_power": 1.5}),
        "star98": (star, {"response": "share_above", "family": "binomial", "trials": "trials_n"}),
        "fair_occupation": (occupation, {"response": "any_time", "family": "binomial"}),
    }


@pytest.mark.parametrize(
    "name", ["spector", "randhie", "scotland", "fair", "star98", "fair_occupation"]
)
def test_dask_glm_equals_the_rows_answer(service, name) -> None:
    dd = pytest.importorskip("dask.dataframe")
    frame, args = _dask_cases()[name]
    glm = summarize_glm_dask(dd.from_pandas(frame, npartitions=4), **args)
    with Client(service) as client:
        rows = client.assess(frame, encoding="json", detail="full", **args)
        parts = client.assess(glm, detail="full")
    assert parts.input_kind == "moments" and rows.input_kind == "table"
    assert parts.model.iterations == rows.model.iterations
    # Two fits of the same model by the same iteration, one over the partitions' sums and one
    # over the whole table: they differ by the order of additions only, and the diagnostics
    # by that rounding amplified by the conditioning of the weighted design (VIFs here < 100).
    # The provenance differs by design: the service fingerprinted a moments request (the
    # weighted summary, family gaussian) on one route and the rows with their family on the other.
    assert parts.provenance is not None and parts.provenance.options["family"] == "gaussian"
    assert_close_answers(
        msgspec.structs.replace(parts, input_kind="table", provenance=None),
        msgspec.structs.replace(rows, provenance=None),
        rtol=1e-8,
        atol=1e-12,
    )


def test_dask_glm_through_the_async_client(service) -> None:
    dd = pytest.importorskip("dask.dataframe")
    glm = summarize_glm_dask(
        dd.from_pandas(spector(), npartitions=2), response="GRADE", family="binomial"
    )

    async def go() -> Any:
        async with AsyncClient(service) as client:
            return await client.assess(glm, sections=["variables", "removal", "ridge"])

    answer = asyncio.run(go())
    # Check values as above (statsmodels 0.15 GLM, six decimals).
    assert_allclose([v.vif for v in answer.variables], [1.188155, 1.078527, 1.148729], atol=5e-7)
    assert answer.ridge is None and answer.removal is not None
    assert [w.code for w in answer.warnings][-1] == "glm_remedies_omitted"


@pytest.mark.parametrize(
    ("change", "args", "message"),
    [
        (lambda f: f.assign(GRADE=f["GRADE"] * 2), {"family": "binomial"}, "must be 0 or 1"),
        (lambda f: f.assign(GRADE=-f["GRADE"]), {"family": "poisson"}, "cannot be negative"),
        (lambda f: f, {"family": "gamma"}, "a gamma response must be positive"),
        (lambda f: f.assign(GRADE=(f["GPA"] > 3).astype(float)), {"family": "binomial"},
         "a combination of predictors separates them"),
    ],
)  # fmt: skip
def test_dask_glm_refuses_what_has_no_fit(change, args, message) -> None:
    dd = pytest.importorskip("dask.dataframe")
    frame = change(spector())
    with pytest.raises(DataError, match=message):
        summarize_glm_dask(dd.from_pandas(frame, npartitions=2), response="GRADE", **args)
