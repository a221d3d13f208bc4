"""The client's estimates inputs: the builder, a fitted statsmodels model read by duck typing,
and both through ``assess`` and the batch against the real service (in memory)."""

from __future__ import annotations

import subprocess
import sys
from types import SimpleNamespace

import httpx
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
import statsmodels.formula.api as smf
from litestar.testing import TestClient
from numpy.testing import assert_allclose

from knotwork.api import create_app
from knotwork_client import Client, DataError, Estimates, estimates, from_fitted

SPECTOR = sm.datasets.spector.load_pandas().data


def _fox_monette_vif(cov: np.ndarray) -> np.ndarray:
    """Fox & Monette (1992): diag of the inverse of the estimates' correlation (no intercept)."""
    d = np.sqrt(np.diag(cov))
    return np.diag(np.linalg.inv(cov / np.outer(d, d)))


@pytest.fixture
def service_client():
    with TestClient(create_app()) as service:

        def forward(request: httpx.Request) -> httpx.Response:
            answer = service.post(
                request.url.path,
                content=request.read(),
                headers={"Content-Type": request.headers["content-type"]},
            )
            return httpx.Response(
                answer.status_code,
                content=answer.content,
                headers={"Content-Type": answer.headers["content-type"]},
            )

        with Client("http://knotwork.test", transport=httpx.MockTransport(forward)) as client:
            yield client


def _logit():
    x = sm.add_constant(SPECTOR[["GPA", "TUCE", "PSI"]])
    return sm.Logit(SPECTOR["GRADE"], x).fit(disp=0, tol=1e-12)


def test_builder_gives_the_input_document() -> None:
    cov = np.array([[4.0, 0.1, 0.2], [0.1, 1.0, 0.3], [0.2, 0.3, 2.0]])
    doc = estimates(["(int)", "a", "b"], cov, "(int)", terms={"t": ["a", "b"]}, n=30).to_input()
    assert doc == {
        "kind": "estimates",
        "names": ["(int)", "a", "b"],
        "covariance": cov.tolist(),
        "intercept": "(int)",
        "terms": {"t": ["a", "b"]},
        "n": 30.0,
    }
    # Without an intercept the field is still sent, as null: the service requires it.
    assert estimates(["a", "b"], cov[1:, 1:]).to_input()["intercept"] is None


def test_builder_refuses_what_cannot_be_sent() -> None:
    with pytest.raises(DataError, match="intercept 'c' is not among names"):
        estimates(["a", "b"], np.eye(2), "c").to_input()
    with pytest.raises(DataError, match=r"covariance must be 2 x 2"):
        estimates(["a", "b"], np.eye(3)).to_input()


def test_from_fitted_reads_a_statsmodels_model() -> None:
    result = _logit()
    est = from_fitted(result)
    assert isinstance(est, Estimates)
    assert list(est.names) == ["const", "GPA", "TUCE", "PSI"]
    assert est.intercept == "const"
    assert est.n == 32.0
    # Copied from cov_params(), number for number.
    assert np.array_equal(est.covariance, result.cov_params().to_numpy())


def test_from_fitted_detects_a_formula_intercept_and_none() -> None:
    formula = smf.ols("GRADE ~ GPA + TUCE + PSI", data=SPECTOR).fit()
    assert from_fitted(formula).intercept == "Intercept"
    through_origin = sm.OLS(SPECTOR["GRADE"], SPECTOR[["GPA", "TUCE", "PSI"]]).fit()
    assert from_fitted(through_origin).intercept is None
    # Arrays instead of frames: statsmodels names the columns const, x1, x2, ...
    arrays = sm.OLS(
        SPECTOR["GRADE"].to_numpy(), sm.add_constant(SPECTOR[["GPA", "TUCE"]].to_numpy())
    )
    est = from_fitted(arrays.fit())
    assert list(est.names) == ["const", "x1", "x2"] and est.intercept == "const"
    assert from_fitted(formula, intercept=None).intercept is None


def test_from_fitted_keeps_only_the_regression_coefficients() -> None:
    # A results object with an extra parameter after the coefficients (as statsmodels gives a
    # negative binomial's alpha), by duck typing: only cov_params, params, model, nobs.
    names = ["const", "a", "b", "alpha"]
    cov = pd.DataFrame(np.diag([4.0, 1.0, 2.0, 0.5]), index=names, columns=names)
    fake = SimpleNamespace(
        cov_params=lambda: cov,
        params=pd.Series(np.zeros(4), index=names),
        model=SimpleNamespace(exog_names=names, exog=np.zeros((50, 3))),
        nobs=50,
    )
    est = from_fitted(fake)
    assert list(est.names) == ["const", "a", "b"]
    assert est.covariance.shape == (3, 3)
    # The same with arrays: no names on the covariance, the coefficients named by the model.
    unnamed = SimpleNamespace(
        cov_params=lambda: cov.to_numpy(),
        params=np.zeros(4),
        model=SimpleNamespace(exog_names=["const", "a", "b"], exog=np.zeros((50, 3))),
        nobs=50,
    )
    est = from_fitted(unnamed)
    assert list(est.names) == ["const", "a", "b"]
    assert np.array_equal(est.covariance, np.diag([4.0, 1.0, 2.0]))  # copied entries
    # A mixed model's fixed effects (fe_params) are kept, its variance parameters left out.
    mixed = SimpleNamespace(
        cov_params=lambda: cov.rename(index={"alpha": "Group Var"}, columns={"alpha": "Group Var"}),
        params=pd.Series(np.zeros(4), index=["const", "a", "b", "Group Var"]),
        fe_params=pd.Series(np.zeros(3), index=["const", "a", "b"]),
        nobs=50.0,
    )
    assert list(from_fitted(mixed).names) == ["const", "a", "b"]


def test_from_fitted_leaves_out_a_negative_binomial_alpha() -> None:
    # Source: statsmodels' NegativeBinomial (its alpha comes last, named in exog_names too);
    # the first 4 x 4 block of cov_params() are the regression coefficients.
    data = sm.datasets.randhie.load_pandas().data.iloc[:2000]
    fit = smf.negativebinomial("mdvis ~ lncoins + idp + lpi", data=data).fit(disp=0)
    est = from_fitted(fit)
    assert list(est.names) == ["Intercept", "lncoins", "idp", "lpi"]
    assert est.intercept == "Intercept"
    assert np.array_equal(est.covariance, fit.cov_params().to_numpy()[:4, :4])  # copied


def test_from_fitted_keeps_a_mixed_model_fixed_effects() -> None:
    # Source: statsmodels' MixedLM on generated data (twenty groups with a random intercept);
    # its cov_params() adds the group variance after the fixed effects.
    rng = np.random.default_rng(7)
    frame = pd.DataFrame({"group": rng.integers(0, 20, 300), "x1": rng.normal(size=300)})
    frame["x2"] = frame["x1"] + 0.5 * rng.normal(size=300)
    frame["y"] = frame["x1"] + frame["x2"] + rng.normal(size=20)[frame["group"]]
    frame["y"] += rng.normal(size=300)
    fit = smf.mixedlm("y ~ x1 + x2", frame, groups=frame["group"]).fit()
    assert list(fit.cov_params().index) == ["Intercept", "x1", "x2", "Group Var"]
    est = from_fitted(fit)
    assert list(est.names) == ["Intercept", "x1", "x2"] and est.intercept == "Intercept"
    assert np.array_equal(est.covariance, fit.cov_params().to_numpy()[:3, :3])  # copied


def test_from_fitted_refuses_what_is_not_a_fit() -> None:
    with pytest.raises(DataError, match="is not a fitted model's results"):
        from_fitted(pd.DataFrame({"a": [1.0]}))


def test_assess_a_fitted_model_and_its_estimates(service_client) -> None:
    result = _logit()
    # Outside source: statsmodels' Logit cov_params(), Fox & Monette's VIFs computed here;
    # the service inverts the same 3 x 3 correlation (cond < 2) twice: 1e-8.
    expected = _fox_monette_vif(result.cov_params().to_numpy()[1:, 1:])
    answer = service_client.assess(from_fitted(result))
    assert answer.input_kind == "estimates"
    assert_allclose([v.vif for v in answer.variables], expected, rtol=1e-8)
    # The results object itself is accepted, and answers exactly the same (same request).
    direct = service_client.assess(result)
    assert [v.vif for v in direct.variables] == [v.vif for v in answer.variables]
    batch = service_client.assess_batch(
        [result, (estimates(["a", "b"], np.ones((2, 2))), {"threshold": 10})]
    )
    assert [v.vif for v in batch[0].variables] == [v.vif for v in answer.variables]
    # Two coefficients with correlation 1: a singular covariance, refused by the service.
    assert batch[1].status == 422
    assert batch[1].errors[0].pointer == "/items/1/input/covariance"


def test_the_client_does_not_import_statsmodels() -> None:
    code = "import sys, knotwork_client; print('statsmodels' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
