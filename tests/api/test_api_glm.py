"""GLM families through the HTTP API: JSON, Arrow IPC and Parquet tables, the model record, the
design VIFs beside the weighted ones, and every bad input with its wording.

The outside reference is statsmodels' GLM (0.15.0) on datasets shipped with statsmodels
(spector, randhie, scotland, fair, star98): the weighted VIFs must equal Fox & Monette's (1992)
VIFs of the fitted coefficients, the diagonal of the inverse of the correlation matrix of
``cov_params()`` over the slope coefficients, derived here in the test. Our IRLS stops when no
linear predictor moves by more than 1e-9 (1 + max |eta|) (the answer's ``model.tolerance``);
statsmodels is run to 1e-13 on its parameters, so the weights of both fits agree to about 1e-9
and the VIFs to far better than the 1e-6 checked.
"""

from __future__ import annotations

from typing import Any

import numpy as np
import pandas as pd
import pyarrow as pa
import pytest
import statsmodels.api as sm
from bodies_and_problems import (
    ARROW,
    ARROW_FILE,
    PARQUET,
    arrow_file,
    arrow_stream,
    assert_problem,
    parquet,
)
from glm_cases import CASES, SM_FIT
from numpy.testing import assert_allclose
from scipy.special import expit

from knotwork_contract import parse_query

VIF_SECTIONS = ["variables", "terms"]


def _fox_monette(cov: np.ndarray) -> np.ndarray:
    """Fox & Monette (1992): the diagonal of the inverse of the estimates' correlation."""
    d = np.sqrt(np.diag(cov))
    return np.diag(np.linalg.inv(cov / np.outer(d, d)))


def _post(client, body: dict[str, Any]) -> dict[str, Any]:
    r = client.post("/v1/assess", json=body)
    assert r.status_code == 200, r.text
    doc: dict[str, Any] = r.json()
    return doc


# --- outside references ---------------------------------------------------------------------


@pytest.mark.parametrize("name", sorted(CASES))
def test_weighted_vifs_equal_fox_monette_of_statsmodels_cov_params(client, name: str) -> None:
    # Source: statsmodels GLM cov_params() (phi (X'WX)^-1 at its fit), intercept removed,
    # converted to a correlation matrix; Fox & Monette's VIF is the diagonal of its inverse.
    case = CASES[name]
    doc = _post(client, case.body(sections=VIF_SECTIONS))
    theirs = case.statsmodels_fit()
    expected = _fox_monette(np.asarray(theirs.cov_params())[1:, 1:])
    assert [v["name"] for v in doc["variables"]] == [str(c) for c in case.x.columns]
    assert_allclose([v["vif"] for v in doc["variables"]], expected, rtol=1e-6)
    model = doc["model"]
    assert model["family"] == case.family
    assert model["link"] == ("logit" if case.family == "binomial" else "log")
    assert model["var_power"] == case.var_power
    assert model["converged"] is True and model["iterations"] >= 1
    assert model["tolerance"] == 1e-9  # the documented IRLS tolerance, echoed
    assert model["n"] == theirs.nobs
    assert model["n_coefficients"] == len(theirs.params)
    # The deviance is flat at the optimum (coefficient errors enter it squared): 1e-9.
    assert_allclose(model["deviance"], theirs.deviance, rtol=1e-9)
    # statsmodels' scale: 1 for binomial and poisson, Pearson chi2 / (n - p) otherwise; the
    # weights agree to about the IRLS tolerance, so 1e-7.
    assert_allclose(model["dispersion"], theirs.scale, rtol=1e-7)


def test_spector_check_values(client) -> None:
    # Check values: spector, logit of GRADE on GPA, TUCE, PSI with an intercept, computed with
    # statsmodels 0.15 GLM and recorded with six decimals in docs/numerics.md; the outside
    # derivation is the test above.
    doc = _post(client, CASES["spector"].body())
    assert_allclose([v["vif"] for v in doc["variables"]], [1.188155, 1.078527, 1.148729], atol=5e-7)
    design = [v["design_vif"] for v in doc["variables"]]
    assert_allclose(design, [1.176158, 1.189435, 1.012902], atol=5e-7)


def test_design_vifs_are_the_gaussian_answer(client) -> None:
    # The design VIF is the least-squares VIF of the same columns: the gaussian answer without
    # the response. Two routes to the same moments (the GLM's design summary and the plain
    # table summary): rounding only, so 1e-12.
    case = CASES["randhie"]
    glm = _post(client, case.body(sections=VIF_SECTIONS))
    body = case.body(sections=VIF_SECTIONS)
    body["options"]["family"] = "gaussian"
    gaussian = _post(client, body)
    assert_allclose(
        [v["design_vif"] for v in glm["variables"]],
        [v["vif"] for v in gaussian["variables"]],
        rtol=1e-12,
    )
    assert gaussian["model"] is None
    assert all(v["design_vif"] is None for v in gaussian["variables"])


def test_gvif_of_a_categorical_term_equals_the_determinant_formula(client) -> None:
    # fair, binomial (any time in affairs) with occupation (six levels) as a categorical term.
    # Source: statsmodels GLM on the same design (indicator columns against the first sorted
    # level, as ours); GVIF = det(C_TT) det(C_OO) / det(C) on the correlation C of
    # cov_params() (Fox & Monette 1992).
    data = sm.datasets.fair.load_pandas().data
    numeric = ["rate_marriage", "age", "yrs_married", "children", "religious", "educ"]
    y = (data["affairs"] > 0).to_numpy(dtype=float)
    labels = [f"level{int(v)}" for v in data["occupation"]]
    columns = {c: data[c].astype(float).tolist() for c in numeric}
    columns["any_time"] = y.tolist()
    body = {
        "input": {
            "kind": "table",
            "columns": columns,
            "categorical": {"occupation": labels},
            "response": "any_time",
        },
        "options": {"family": "binomial", "sections": VIF_SECTIONS},
    }
    doc = _post(client, body)
    (term,) = doc["terms"]
    dummies = pd.get_dummies(pd.Series(labels), dtype=float).iloc[:, 1:]
    design = pd.concat([data[numeric], dummies.set_axis(data.index)], axis=1)
    theirs = sm.GLM(y, sm.add_constant(design), family=sm.families.Binomial()).fit(**SM_FIT)
    cov = np.asarray(theirs.cov_params())[1:, 1:]
    d = np.sqrt(np.diag(cov))
    c = cov / np.outer(d, d)
    t = list(range(len(numeric), len(numeric) + 5))
    o = list(range(len(numeric)))
    det = np.linalg.det
    expected = det(c[np.ix_(t, t)]) * det(c[np.ix_(o, o)]) / det(c)
    assert term["name"] == "occupation" and term["df"] == 5
    assert_allclose(term["gvif"], expected, rtol=1e-6)
    assert term["design_gvif"] is not None and term["design_gvif"] != term["gvif"]
    assert_allclose([v["vif"] for v in doc["variables"]], _fox_monette(cov), rtol=1e-6)


def test_offset_and_prior_weights_reach_the_fit(client) -> None:
    # randhie poisson with a generated log exposure as the offset and generated prior weights
    # (statsmodels' var_weights). Source: statsmodels GLM cov_params(), as above.
    case = CASES["randhie"]
    rng = np.random.default_rng(11)
    n = len(case.y)
    offset = np.log(rng.uniform(0.5, 2.0, n))
    prior = rng.uniform(0.25, 4.0, n)
    body = case.body(sections=VIF_SECTIONS)
    body["input"]["columns"]["log_exposure"] = offset.tolist()
    body["input"]["columns"]["prior"] = prior.tolist()
    body["input"]["offset"] = "log_exposure"
    body["input"]["weights"] = "prior"
    doc = _post(client, body)
    theirs = sm.GLM(
        case.y,
        sm.add_constant(case.x),
        family=sm.families.Poisson(),
        offset=offset,
        var_weights=prior,
    ).fit(**SM_FIT)
    assert [v["name"] for v in doc["variables"]] == list(case.x.columns)
    expected = _fox_monette(np.asarray(theirs.cov_params())[1:, 1:])
    assert_allclose([v["vif"] for v in doc["variables"]], expected, rtol=1e-6)
    assert_allclose(doc["model"]["deviance"], theirs.deviance, rtol=1e-9)


# --- the answer -----------------------------------------------------------------------------


def test_gaussian_family_answers_byte_for_byte_as_no_family(client) -> None:
    # The same request computed by the same code (family gaussian is the default): identical
    # bytes, JSON and Arrow alike.
    body = CASES["scotland"].body()
    body["options"] = {}
    plain = client.post("/v1/assess", json=body)
    body["options"] = {"family": "gaussian"}
    gaussian = client.post("/v1/assess", json=body)
    assert plain.status_code == gaussian.status_code == 200
    assert plain.content == gaussian.content
    assert plain.json()["model"] is None
    table = pa.table(CASES["scotland"].columns())
    stream = arrow_stream(table)
    headers = {"content-type": ARROW}
    one = client.post("/v1/assess", content=stream, headers=headers, params={"response": "outcome"})
    two = client.post(
        "/v1/assess",
        content=stream,
        headers=headers,
        params={"response": "outcome", "family": "gaussian"},
    )
    assert one.status_code == two.status_code == 200
    assert one.content == two.content


def test_glm_answer_leaves_out_least_squares_remedies(client) -> None:
    doc = _post(client, CASES["spector"].body())
    assert doc["ridge"] is None and doc["components"] is None and doc["comparison"] is None
    assert doc["removal"] is not None and doc["conditioning"] is not None
    assert doc["tests"] is not None
    assert doc["conditioning"]["basis"] == "scaled_with_intercept"
    codes = [w["code"] for w in doc["warnings"]]
    assert "glm_remedies_omitted" in codes
    assert doc["response"] == "outcome"
    assert doc["n"] == 32.0 and doc["p"] == 3
    # Asked only for sections a GLM answer has, there is nothing to warn about.
    quiet = _post(client, CASES["spector"].body(sections=["variables", "removal"]))
    assert "glm_remedies_omitted" not in [w["code"] for w in quiet["warnings"]]


@pytest.mark.parametrize(
    ("media", "encode"), [(ARROW, arrow_stream), (ARROW_FILE, arrow_file), (PARQUET, parquet)]
)
def test_binary_tables_answer_as_json(client, media, encode) -> None:
    # The same numbers in another encoding; the decoders only convert them, and the fit is the
    # same function on the same arrays, so the answers are equal exactly.
    case = CASES["star98"]
    json_doc = _post(client, case.body())
    r = client.post(
        "/v1/assess",
        content=encode(pa.table(case.columns())),
        headers={"content-type": media},
        params={"response": "outcome", "family": "binomial", "trials": "trials_n"},
    )
    assert r.status_code == 200, r.text
    assert r.json() == json_doc


def test_query_parameters_carry_family_var_power_offset_and_trials() -> None:
    document, columns = parse_query(
        [("family", "tweedie"), ("var_power", "1.3"), ("offset", "lx"), ("trials", "n")]
    )
    assert document == {"family": "tweedie", "var_power": 1.3}
    assert columns == {"offset": "lx", "trials": "n"}


def test_batch_items_carry_their_own_family(client) -> None:
    spector = CASES["spector"].body(sections=VIF_SECTIONS)
    plain = CASES["spector"].body(sections=VIF_SECTIONS)
    plain["options"].pop("family")
    r = client.post("/v1/assess/batch", json={"items": [spector, plain]})
    assert r.status_code == 200, r.text
    first, second = r.json()["results"]
    # The same request alone and in a batch: the same function on the same input.
    assert first == _post(client, spector)
    assert first["model"]["family"] == "binomial" and second["model"] is None


# --- bad input ------------------------------------------------------------------------------

_rng = np.random.default_rng(3)
N = 80
AREA = _rng.normal(50, 10, N)
DIST = 0.4 * AREA + _rng.normal(0, 4, N)
BOUGHT = (_rng.random(N) < expit(-2 + 0.04 * AREA)).astype(float)
VISITS = _rng.poisson(np.exp(0.2 + 0.01 * AREA)).astype(float)


def _table(y: np.ndarray, **extra: Any) -> dict[str, Any]:
    columns = {"area": AREA.tolist(), "dist": DIST.tolist(), "y": y.tolist()}
    columns.update({k: np.asarray(v, dtype=float).tolist() for k, v in extra.items()})
    return {"kind": "table", "columns": columns, "response": "y"}


def _with(values: np.ndarray, row: int, value: float) -> np.ndarray:
    out = np.array(values, dtype=float)
    out[row] = value
    return out


BAD = [
    # (input, options, status, kind, pointer, reason)
    (
        _table(_with(BOUGHT, 3, 2.0)),
        {"family": "binomial"},
        422,
        "invalid-input",
        "/input/columns/y",
        "a binomial response must be 0 or 1; row 3 is 2. For proportions of successes, give "
        "the number of trials as well",
    ),
    (
        {**_table(_with(BOUGHT, 5, 1.5), n=np.full(N, 4.0)), "trials": "n"},
        {"family": "binomial"},
        422,
        "invalid-input",
        "/input/columns/y",
        "with trials, a binomial response is the proportion of successes and must lie in "
        "[0, 1]; row 5 is 1.5",
    ),
    (
        {**_table(BOUGHT, n=_with(np.full(N, 4.0), 6, 0.0)), "trials": "n"},
        {"family": "binomial"},
        422,
        "invalid-input",
        "/input/columns/n",
        "trials must be positive; row 6 is 0",
    ),
    (
        _table(_with(VISITS, 7, -1.0)),
        {"family": "poisson"},
        422,
        "invalid-input",
        "/input/columns/y",
        "a poisson response counts events and cannot be negative; row 7 is -1",
    ),
    (
        _table(_with(VISITS + 1.0, 8, 0.0)),
        {"family": "gamma"},
        422,
        "invalid-input",
        "/input/columns/y",
        "a gamma response must be positive; row 8 is 0",
    ),
    (
        _table(_with(VISITS, 9, -2.0)),
        {"family": "tweedie", "var_power": 1.5},
        422,
        "invalid-input",
        "/input/columns/y",
        "a tweedie response cannot be negative; row 9 is -2",
    ),
    (
        _table((AREA > 50).astype(float)),
        {"family": "binomial"},
        422,
        "fit-failed",
        "/input/columns/area",
        f"'area' separates the outcomes (no failure where it exceeds "
        f"{AREA[AREA <= 50].max():g}, no success where it is below {AREA[AREA > 50].min():g}), "
        "so its coefficient grows without bound and no finite estimate exists; drop the column "
        "or merge its rare values or categories",
    ),
    (
        {**_table(BOUGHT, t=np.full(N, 1e300)), "trials": "t"},
        {"family": "binomial"},
        422,
        "fit-failed",
        "/input/columns/t",
        "the fit overflowed double precision: values this large (or small) cannot be fitted as "
        "given; rescale the column (for example to other units)",
    ),
    (
        {**_table(BOUGHT, o=_with(np.zeros(N), 0, 1e308)), "offset": "o"},
        {"family": "binomial"},
        422,
        "fit-failed",
        "/input/columns/o",
        "the fit overflowed double precision: values this large (or small) cannot be fitted as "
        "given; rescale the column (for example to other units)",
    ),
    (
        _table(np.ones(N)),
        {"family": "binomial"},
        422,
        "fit-failed",
        "/input/columns/y",
        "every row is a success (the response is 1 throughout); a binomial model needs both "
        "outcomes",
    ),
    (
        _table(BOUGHT),
        {"family": "tweedie"},
        422,
        "invalid-option",
        "/options/var_power",
        "the tweedie family needs var_power, strictly between 1 and 2 (1 is poisson-like, 2 "
        "gamma-like); there is no default",
    ),
    (
        _table(BOUGHT),
        {"family": "binomial", "var_power": 1.5},
        422,
        "invalid-option",
        "/options/var_power",
        "var_power applies to the tweedie family only, not 'binomial'; leave it out or set "
        "family to 'tweedie'",
    ),
    (
        _table(BOUGHT),
        {"family": "tweedie", "var_power": 1.0},
        422,
        "invalid-option",
        "/options/var_power",
        "Expected `float` > 1.0",
    ),
    (
        _table(BOUGHT),
        {"family": "tweedie", "var_power": 2.0},
        422,
        "invalid-option",
        "/options/var_power",
        "Expected `float` < 2.0",
    ),
    (
        _table(BOUGHT),
        {"family": "logistic"},
        400,
        "invalid-request",
        "/options/family",
        # msgspec's own wording, as for every other enumerated option.
        "Invalid enum value 'logistic'",
    ),
    (
        {**_table(VISITS, n=np.full(N, 4.0)), "trials": "n"},
        {"family": "poisson"},
        422,
        "invalid-input",
        "/input/trials",
        "trials apply to the binomial family only, not 'poisson'; leave trials out or set "
        "family to 'binomial'",
    ),
    (
        {**_table(VISITS, lx=np.zeros(N)), "offset": "lx"},
        {},
        422,
        "invalid-input",
        "/input/offset",
        "an offset applies to a fitted model (family binomial, poisson, gamma or tweedie); the "
        "gaussian family's diagnostics do not depend on it, so leave it out",
    ),
    (
        {k: v for k, v in _table(BOUGHT).items() if k != "response"},
        {"family": "binomial"},
        422,
        "invalid-input",
        "/input/response",
        "family 'binomial' fits a model to a response; name the response column",
    ),
    (
        {**_table(BOUGHT), "offset": "exposure"},
        {"family": "binomial"},
        422,
        "invalid-input",
        "/input/offset",
        "offset names 'exposure', which is not a numeric column of the table",
    ),
    (
        {"kind": "correlation", "names": ["a", "b"], "matrix": [[1, 0.5], [0.5, 1]], "n": 50},
        {"family": "poisson"},
        422,
        "invalid-option",
        "/options/family",
        "family 'poisson' fits a model to the rows of a table; a correlation input has no "
        "rows, so only family 'gaussian' applies to it",
    ),
    (
        _table(BOUGHT),
        {"family": "binomial", "missing": "pairwise"},
        422,
        "invalid-option",
        "/options/missing",
        "must be 'reject' or 'drop_rows' for a model fit, which needs complete rows; got "
        "'pairwise'",
    ),
]


@pytest.mark.parametrize(("inp", "options", "status", "kind", "pointer", "reason"), BAD)
def test_bad_input_names_the_field_and_what_to_do(
    client, inp, options, status, kind, pointer, reason
) -> None:
    r = client.post("/v1/assess", json={"input": inp, "options": options})
    doc = assert_problem(r, status, kind, pointer)
    assert doc["errors"][0]["reason"] == reason


def test_separation_by_a_combination_says_fitted_probabilities_hit_0_or_1(client) -> None:
    # No single column separates; area - 2.5 dist does, so the fit diverges.
    y = (AREA - 2.5 * DIST > -1.0).astype(float)
    r = client.post("/v1/assess", json={"input": _table(y), "options": {"family": "binomial"}})
    doc = assert_problem(r, 422, "fit-failed", "/input/columns/y")
    reason = doc["errors"][0]["reason"]
    assert reason.startswith("the fitted probabilities reached 0 or 1 for ")
    assert "a combination of predictors separates them, so coefficients grow without bound" in (
        reason
    )
    assert reason.endswith("and no finite estimate exists; drop or combine those predictors")
    assert doc["title"] == "The model cannot be fitted to the data"


def test_bad_input_in_a_binary_table_points_at_the_query(client) -> None:
    table = pa.table({"area": AREA, "dist": DIST, "y": VISITS, "n": np.full(N, 3.0)})
    r = client.post(
        "/v1/assess",
        content=arrow_stream(table),
        headers={"content-type": ARROW},
        params={"response": "y", "family": "poisson", "trials": "n"},
    )
    doc = assert_problem(r, 422, "invalid-input", "/query/trials")
    assert doc["errors"][0]["reason"].startswith("trials apply to the binomial family only")
    r = client.post(
        "/v1/assess",
        content=arrow_stream(table),
        headers={"content-type": ARROW},
        params={"response": "y", "family": "tweedie", "var_power": "2.5"},
    )
    assert_problem(r, 422, "invalid-option", "/query/var_power")


def test_normal_intervals_are_those_of_the_weighted_design(client) -> None:
    # A GLM's normal intervals come from its weighted design (n = the rows the fit used);
    # each interval holds the weighted VIF it is built around. The bootstrap would need a fit
    # per replicate and is refused by name.
    doc = _post(
        client, CASES["spector"].body(sections=VIF_SECTIONS, uncertainty={"method": "normal"})
    )
    assert doc["uncertainty"]["method"] == "normal"
    assert doc["uncertainty"]["n"] == doc["model"]["n"] == 32
    for v in doc["variables"]:
        low, high = v["vif_interval"]
        assert low <= v["vif"] <= high
    body = CASES["spector"].body(sections=VIF_SECTIONS, uncertainty={"method": "bootstrap"})
    r = client.post("/v1/assess", json=body)
    assert r.status_code == 422, r.text
    problem = r.json()
    assert problem["errors"][0]["pointer"] == "/options/uncertainty/method"
    assert "bootstrap is not offered for family 'binomial'" in problem["errors"][0]["reason"]
