"""Invariants of the GLM-weighted diagnostics, checked on random designs (hypothesis)."""

from __future__ import annotations

import msgspec
import numpy as np
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from numpy.testing import assert_allclose
from scipy.special import expit

from knotwork.codecs import Limits, UnusableInput, decode_assess, run
from knotwork.core import Options, assess
from knotwork.core._errors import FitError
from knotwork.core._glm import fit_glm, glm_summary

OPTS = Options(sections=["variables"])


@st.composite
def models(draw):
    """A random design with built-in collinearity and a response drawn from the family."""
    seed = draw(st.integers(0, 2**32 - 1))
    family = draw(st.sampled_from(["binomial", "poisson", "gamma", "tweedie"]))
    n = draw(st.integers(40, 150))
    p = draw(st.integers(2, 5))
    rng = np.random.default_rng(seed)
    mix = rng.normal(size=(p, p)) * draw(st.floats(0.0, 2.0)) + np.eye(p)
    x = rng.normal(size=(n, p)) @ mix
    x /= x.std(axis=0)
    eta = 0.3 + x @ rng.normal(0, 0.4, p)
    if family == "binomial":
        y = (rng.random(n) < expit(eta)).astype(float)
    elif family == "poisson":
        y = rng.poisson(np.exp(eta)).astype(float)
    elif family == "gamma":
        y = rng.gamma(2.0, np.exp(eta) / 2.0)
    else:  # compound Poisson-gamma, the tweedie case with 1 < v < 2: zeros and positives
        y = np.array([rng.gamma(2.0, 0.5, k).sum() for k in rng.poisson(np.exp(eta))])
    return x, y, family, rng


def _vifs(x: np.ndarray, y: np.ndarray, family: str) -> np.ndarray:
    try:
        fit = fit_glm(x, y, family=family, var_power=1.5 if family == "tweedie" else None)
    except FitError:
        assume(False)  # separation in a small sample: no estimate exists to diagnose
        raise
    return np.array([v.vif for v in assess(glm_summary(fit, x), OPTS).variables])


@settings(max_examples=40, deadline=None)
@given(models())
def test_weighted_vif_at_least_one(model) -> None:
    x, y, family, _ = model
    assert np.all(_vifs(x, y, family) >= 1.0)


@settings(max_examples=40, deadline=None)
@given(models(), st.floats(-1e3, 1e3), st.floats(1e-3, 1e3))
def test_weighted_vif_invariant_to_rescaling_a_column(model, shift, scale) -> None:
    # An affine change of a column, with an intercept, changes no fitted value, so neither the
    # working weights nor the weighted correlation change. The two fits stop at the IRLS
    # tolerance (1e-9 on eta) by different paths, and rounding in R_w grows with the VIF.
    x, y, family, rng = model
    j = int(rng.integers(x.shape[1]))
    moved = x.copy()
    moved[:, j] = moved[:, j] * scale + shift
    base = _vifs(x, y, family)
    assert_allclose(_vifs(moved, y, family), base, rtol=1e-7 + 1e-12 * float(np.max(base)))


def _answer(x: np.ndarray, y: np.ndarray, family: str) -> list[dict]:
    """The variables of the service's answer for this table (JSON body through the codecs)."""
    columns = {f"x{j}": x[:, j].tolist() for j in range(x.shape[1])}
    columns["y"] = y.tolist()
    options: dict = {"family": family, "sections": ["variables"]}
    if family == "tweedie":
        options["var_power"] = 1.5
    body = msgspec.json.encode(
        {"input": {"kind": "table", "columns": columns, "response": "y"}, "options": options}
    )
    try:
        answer = run(decode_assess(body, Limits()))
    except UnusableInput as exc:
        assume(exc.kind != "fit-failed")  # separation in a small sample: no estimate exists
        raise
    return [msgspec.to_builtins(v) for v in answer.variables]


@settings(max_examples=25, deadline=None)
@given(models(), st.lists(st.floats(1e-3, 1e3), min_size=5, max_size=5))
def test_answer_vifs_at_least_one_and_invariant_to_column_scales(model, scales) -> None:
    # Through the codecs: every weighted and design VIF is at least 1, and rescaling every
    # column by its own factor changes neither (the fitted values, so the weights, are the
    # same). Two fits on rescaled designs stop at the IRLS tolerance by different paths, and
    # rounding in R_w grows with the VIF.
    x, y, family, _ = model
    base = _answer(x, y, family)
    assert all(v["vif"] >= 1.0 and v["design_vif"] >= 1.0 for v in base)
    moved = _answer(x * np.asarray(scales[: x.shape[1]]), y, family)
    vifs = np.array([v["vif"] for v in base])
    assert_allclose([v["vif"] for v in moved], vifs, rtol=1e-7 + 1e-12 * float(np.max(vifs)))
    # The design VIFs need no fit, but the same rounding of R grows with them (eps x VIF:
    # 1e-8 relative measured at a design VIF of 1e8).
    designs = [v["design_vif"] for v in base]
    tol = 1e-9 + 1e-13 * float(np.max(designs))
    assert_allclose([v["design_vif"] for v in moved], designs, rtol=tol)
