"""GLM fits by IRLS and the weighted design at the fit: errors (wording pinned), the fit's
record, the summary's construction, and its identities. Outside references (statsmodels on
shipped datasets) are in tests/reference/test_glm_reference.py."""

from __future__ import annotations

import numpy as np
import pytest
from error_checks import assert_names_field
from numpy.testing import assert_allclose
from scipy.special import expit

from knotwork.core import (
    INTERCEPT_NAME,
    InputError,
    Interrupted,
    MissingValuesError,
    OptionError,
    Options,
    TooFewDataError,
    assess,
    from_table,
    stop_when,
)
from knotwork.core._errors import FitError
from knotwork.core._glm import (
    GlmFit,
    design_summary,
    fit_glm,
    glm_summary,
    summarize_glm,
)

VIF_ONLY = Options(sections=["variables", "terms"])

# A generated scenario of our own: weekly visits to a garden centre's loyalty scheme.
_rng = np.random.default_rng(20261204)
N = 120
AREA = _rng.normal(50, 10, N)
DIST = 0.4 * AREA + _rng.normal(0, 4, N)
AGE = _rng.normal(40, 12, N)
ETA = -3 + 0.04 * AREA - 0.05 * DIST + 0.02 * AGE
BOUGHT = (_rng.random(N) < expit(ETA)).astype(float)
VISITS = _rng.poisson(np.exp(0.2 + 0.01 * AREA)).astype(float)
SPEND = _rng.gamma(4.0, np.exp(1 + 0.01 * AREA) / 4.0)
REGION = [("north", "south", "east")[i % 3] for i in range(N)]


def cols(**extra):
    base = {"area": AREA, "dist": DIST, "age": AGE}
    base.update(extra)
    return base


def glm(response_values, family="binomial", **kw):
    columns = kw.pop("columns", cols(y=response_values))
    return summarize_glm(columns, response="y", family=family, **kw)


def _replace(values, row, value):
    out = np.array(values, dtype=float)
    out[row] = value
    return out


SEPARATED = (AREA > 50).astype(float)
QUASI = BOUGHT.copy()
QUASI[[i for i in range(N) if REGION[i] == "east"]] = 1.0  # every 'east' row a success
COMBINED = (AREA - 2.5 * DIST > -1.0).astype(float)  # no single column separates
EAST = np.array([r == "east" for r in REGION], dtype=float)
ZERO_EAST = VISITS.copy()
ZERO_EAST[[i for i in range(N) if REGION[i] == "east"]] = 0.0

CASES = [
    # (build, exception class, pointer, message fragment)
    (
        lambda: glm(BOUGHT, family="logistic"),
        OptionError,
        "/family",
        "must be one of 'gaussian', 'binomial', 'poisson', 'gamma', 'tweedie'; got 'logistic'",
    ),
    (
        lambda: glm(SPEND, family="tweedie"),
        OptionError,
        "/var_power",
        "the tweedie family needs var_power, strictly between 1 and 2",
    ),
    (
        lambda: glm(SPEND, family="tweedie", var_power=2.0),
        OptionError,
        "/var_power",
        "var_power must lie strictly between 1 and 2; got 2.0",
    ),
    (
        lambda: glm(VISITS, family="poisson", var_power=1.5),
        OptionError,
        "/var_power",
        "var_power applies to the tweedie family only, not 'poisson'",
    ),
    (
        lambda: glm(VISITS, family="poisson", columns=cols(y=VISITS, n=VISITS + 1), trials="n"),
        OptionError,
        "/trials",
        "trials apply to the binomial family only, not 'poisson'",
    ),
    (
        lambda: glm(BOUGHT, missing="pairwise"),
        OptionError,
        "/missing",
        "must be 'reject' or 'drop_rows' for a model fit, which needs complete rows",
    ),
    (
        lambda: fit_glm(np.c_[AREA, DIST], BOUGHT, family="binomial", max_iter=0),
        OptionError,
        "/max_iter",
        "max_iter must be a positive integer; got 0",
    ),
    (
        lambda: summarize_glm(cols(), response="y", family="binomial"),
        InputError,
        "/response",
        "response names 'y', which is not a numeric column of the table",
    ),
    (
        lambda: glm(_replace(BOUGHT, 3, 2.0)),
        InputError,
        "/columns/y",
        "a binomial response must be 0 or 1; row 3 is 2. For proportions of successes, give "
        "the number of trials as well",
    ),
    (
        lambda: glm(_replace(BOUGHT, 4, 0.5)),
        InputError,
        "/columns/y",
        "a binomial response must be 0 or 1; row 4 is 0.5",
    ),
    (
        lambda: glm(
            _replace(BOUGHT, 5, 1.5), columns=cols(y=_replace(BOUGHT, 5, 1.5), n=AGE), trials="n"
        ),
        InputError,
        "/columns/y",
        "with trials, a binomial response is the proportion of successes and must lie in "
        "[0, 1]; row 5 is 1.5",
    ),
    (
        lambda: glm(BOUGHT, columns=cols(y=BOUGHT, n=_replace(AGE, 6, 0.0)), trials="n"),
        InputError,
        "/columns/n",
        "trials must be positive; row 6 is 0",
    ),
    (
        lambda: glm(_replace(VISITS, 7, -1.0), family="poisson"),
        InputError,
        "/columns/y",
        "a poisson response counts events and cannot be negative; row 7 is -1",
    ),
    (
        lambda: glm(_replace(SPEND, 8, 0.0), family="gamma"),
        InputError,
        "/columns/y",
        "a gamma response must be positive; row 8 is 0",
    ),
    (
        lambda: glm(_replace(SPEND, 9, -2.0), family="tweedie", var_power=1.5),
        InputError,
        "/columns/y",
        "a tweedie response cannot be negative; row 9 is -2",
    ),
    (
        lambda: glm(BOUGHT, columns=cols(y=BOUGHT, w=_replace(AGE, 2, -1.0)), weights="w"),
        InputError,
        "/columns/w",
        "weights must be non-negative; row 2 is negative",
    ),
    (
        lambda: glm(np.ones(N)),
        FitError,
        "/columns/y",
        "every row is a success (the response is 1 throughout); a binomial model needs both "
        "outcomes",
    ),
    (
        lambda: glm(np.zeros(N), family="poisson"),
        FitError,
        "/columns/y",
        "the response is 0 in every row, so the fitted mean would be 0: no finite estimate",
    ),
    (
        lambda: glm(SEPARATED),
        FitError,
        "/columns/area",
        "'area' separates the outcomes (no failure where it exceeds 49.",
    ),
    (
        lambda: glm(QUASI, categorical={"region": REGION}),
        FitError,
        "/categorical/region",
        "level 'east' of 'region' has only successes (40 rows), so its coefficient grows "
        "without bound and no finite estimate exists; merge the level with another or leave its "
        "rows out",
    ),
    (
        lambda: glm(COMBINED),
        FitError,
        "/columns/y",
        "the fitted probabilities reached 0 or 1 for",
    ),
    (
        lambda: glm(ZERO_EAST, family="poisson", categorical={"region": REGION}),
        FitError,
        "/categorical/region",
        "level 'east' of 'region' has response 0 in every row (40 rows), so its coefficient "
        "grows without bound",
    ),
    (
        lambda: fit_glm(np.c_[AREA, EAST], ZERO_EAST, family="poisson", names=["area", "east"]),
        FitError,
        "/columns/east",
        "the response is 0 in every row where 'east' is not 0, so its coefficient grows without "
        "bound and no finite estimate exists; drop the column or merge its rare values or "
        "categories",
    ),
    (
        lambda: fit_glm(np.c_[AREA, EAST], QUASI, family="binomial", names=["area", "east"]),
        FitError,
        "/columns/east",
        "'east' separates the outcomes (no failure where it exceeds 0, no success where it is "
        "below 0)",
    ),
    (
        lambda: glm(BOUGHT, max_iter=2),
        FitError,
        "/columns/y",
        "the fit did not converge in 2 iterations; raise the iteration limit, or check the "
        "response and predictors for extreme values",
    ),
    (
        lambda: glm(_replace(BOUGHT, 1, np.nan)),
        MissingValuesError,
        "/columns/y",
        "1 of 120 values missing",
    ),
    (
        lambda: fit_glm(np.c_[AREA, DIST], _replace(BOUGHT, 10, np.nan), family="binomial"),
        MissingValuesError,
        "/response",
        "row 10 is missing; a model fit needs complete rows (drop them first)",
    ),
    (
        lambda: fit_glm(np.c_[AREA, DIST], BOUGHT[:-1], family="binomial"),
        InputError,
        "/response",
        "has 119 values while the design has 120 rows; the response needs one value per row",
    ),
    (
        lambda: fit_glm(np.c_[AREA, DIST][:3], BOUGHT[:3], family="binomial"),
        TooFewDataError,
        "/columns",
        "3 rows (with positive weight) for 3 coefficients; the fit needs more rows than "
        "coefficients",
    ),
]


@pytest.mark.parametrize(("build", "cls", "pointer", "fragment"), CASES)
def test_error_names_field_and_reason(build, cls, pointer, fragment) -> None:
    assert_names_field(build, cls, pointer, fragment)


def test_separation_by_a_combination_names_the_growing_coefficients() -> None:
    with pytest.raises(FitError) as info:
        glm(COMBINED)
    reason = info.value.problems[0].reason
    assert "a combination of predictors separates them, so coefficients grow without bound" in (
        reason
    )
    assert "(those of 'area', 'dist')" in reason  # age plays no part in the separation
    assert "drop or combine those predictors" in reason


def test_fit_error_is_an_input_error_with_its_own_kind() -> None:
    assert issubclass(FitError, InputError)
    assert FitError.kind == "fit-failed"


# ---------------------------------------------------------------------------------------------
# The fit


def _mu(fit: GlmFit, x: np.ndarray, offset=0.0) -> np.ndarray:
    eta = fit.coefficients[0] + x @ fit.coefficients[1:] + offset
    return expit(eta) if fit.link == "logit" else (eta if fit.link == "identity" else np.exp(eta))


FAMILY_CASES = [
    ("binomial", BOUGHT, None, lambda mu: mu * (1 - mu)),
    ("poisson", VISITS, None, lambda mu: mu),
    ("gamma", SPEND, None, lambda mu: np.ones_like(mu)),
    ("tweedie", SPEND, 1.5, lambda mu: mu**0.5),
    ("gaussian", SPEND, None, lambda mu: np.ones_like(mu)),
]


@pytest.mark.parametrize(("family", "y", "power", "weight"), FAMILY_CASES)
def test_working_weights_are_the_family_formula_at_the_fit(family, y, power, weight) -> None:
    # McCullagh & Nelder (1989): w = 1 / (V(mu) g'(mu)^2), times the prior weights.
    x = np.c_[AREA, DIST, AGE]
    prior = np.linspace(0.5, 2.0, N)
    fit = fit_glm(x, y, family=family, var_power=power, prior_weights=prior)
    assert fit.converged and fit.n == N and fit.n_coefficients == 4 and fit.rank == 4
    assert fit.names == (INTERCEPT_NAME, "x0", "x1", "x2")
    # Same function at the same coefficients up to the IRLS tolerance on eta (1e-9).
    assert_allclose(fit.weights, prior * weight(_mu(fit, x)), rtol=1e-8)


@pytest.mark.parametrize(("family", "y", "power", "weight"), FAMILY_CASES)
def test_working_response_reproduces_the_coefficients(family, y, power, weight) -> None:
    # At convergence the weighted least-squares fit of z on X is the GLM fit (IRLS fixed point).
    x = np.c_[AREA, DIST, AGE]
    fit = fit_glm(x, y, family=family, var_power=power)
    design = np.c_[np.ones(N), x]
    root = np.sqrt(fit.weights)
    wls, *_ = np.linalg.lstsq(design * root[:, None], fit.working_response * root, rcond=None)
    # Two solvers on the same weighted problem: agreement to rounding times its conditioning.
    assert_allclose(wls, fit.coefficients, rtol=1e-7, atol=1e-10)


def test_binomial_trials_weigh_like_repeated_rows() -> None:
    # A proportion k/m with m trials carries the likelihood of m Bernoulli rows (k ones).
    rng = np.random.default_rng(5)
    x = rng.normal(size=(40, 2))
    m = rng.integers(1, 6, 40).astype(float)
    k = rng.binomial(m.astype(int), expit(0.3 + x[:, 0])).astype(float)
    grouped = fit_glm(x, k / m, family="binomial", trials=m)
    rows = np.repeat(np.arange(40), m.astype(int))
    ones = np.concatenate(
        [np.r_[np.ones(int(a)), np.zeros(int(b - a))] for a, b in zip(k, m, strict=True)]
    )
    expanded = fit_glm(x[rows], ones, family="binomial")
    # Different row sets, the same likelihood up to a constant: the same optimum.
    assert_allclose(grouped.coefficients, expanded.coefficients, rtol=1e-8)
    eta = grouped.coefficients[0] + x @ grouped.coefficients[1:]
    assert_allclose(grouped.weights, m * expit(eta) * expit(-eta), rtol=1e-8)


def test_offset_shifts_the_linear_predictor() -> None:
    x = np.c_[AREA, DIST]
    exposure = np.linspace(1.0, 3.0, N)
    with_offset = fit_glm(x, VISITS, family="poisson", offset=np.log(exposure))
    mu = _mu(with_offset, x, np.log(exposure))
    assert_allclose(with_offset.weights, mu, rtol=1e-8)
    # Score equations: X'(y - mu) = 0 at the fit (canonical link), to the IRLS tolerance.
    score = np.c_[np.ones(N), x].T @ (VISITS - mu)
    assert np.max(np.abs(score)) < 1e-6 * np.sum(VISITS)


def test_zero_prior_weight_rows_are_left_out() -> None:
    x = np.c_[AREA, DIST, AGE]
    prior = np.ones(N)
    prior[:20] = 0.0
    fit = fit_glm(x, VISITS, family="poisson", prior_weights=prior)
    sub = fit_glm(x[20:], VISITS[20:], family="poisson")
    # The same rows and the same arithmetic on them.
    assert_allclose(fit.coefficients, sub.coefficients, rtol=1e-12)
    assert fit.n == N - 20 and np.all(fit.weights[:20] == 0)
    s, t = glm_summary(fit, x), glm_summary(sub, x[20:])
    assert s.n == t.n == N - 20
    assert_allclose(s.R, t.R, rtol=1e-12)


def test_exact_dependency_fits_and_the_diagnostics_report_it() -> None:
    x = np.c_[AREA, DIST, AREA - 2 * DIST]
    fit = fit_glm(x, VISITS, family="poisson")
    assert fit.rank == 3 and fit.n_coefficients == 4
    result = assess(glm_summary(fit, x), VIF_ONLY)
    assert all(v.aliased for v in result.variables)
    assert any(w.code == "exact_dependency" for w in result.warnings)


def test_near_dependency_converges() -> None:
    # VIF about 1e6: the coefficients are poorly determined, eta is not, so IRLS converges.
    rng = np.random.default_rng(11)
    x = np.c_[AREA, DIST, AREA - 2 * DIST + rng.normal(0, 4e-3, N)]
    fit = fit_glm(x, VISITS, family="poisson")
    vifs = [v.vif for v in assess(glm_summary(fit, x), VIF_ONLY).variables]
    assert fit.rank == 4 and max(vifs) > 1e5


def test_large_means_do_not_disturb_the_fit() -> None:
    x = np.c_[AREA, DIST, AGE]
    base = fit_glm(x, BOUGHT, family="binomial")
    shifted = fit_glm(x + 1e6, BOUGHT, family="binomial")
    # Slopes are invariant to a shift of the columns; centring inside the fit keeps the
    # Gram matrix well conditioned, so only rounding of the shifted values (1e6 * eps) differs.
    assert_allclose(shifted.coefficients[1:], base.coefficients[1:], rtol=1e-7)
    a = [v.vif for v in assess(glm_summary(base, x), VIF_ONLY).variables]
    b = [v.vif for v in assess(glm_summary(shifted, x + 1e6), VIF_ONLY).variables]
    assert_allclose(b, a, rtol=1e-7)


def test_fit_stops_at_a_checkpoint() -> None:
    calls = []

    def stop() -> bool:
        calls.append(1)
        return len(calls) > 2  # two iterations, then stop

    x = np.c_[AREA, DIST, AGE]
    with stop_when(stop), pytest.raises(Interrupted):
        fit_glm(x, BOUGHT, family="binomial")
    assert len(calls) == 3
    assert fit_glm(x, BOUGHT, family="binomial").converged


def test_no_intercept() -> None:
    x = np.c_[AREA, DIST, AGE]
    fit = fit_glm(x, VISITS, family="poisson", intercept=False)
    assert fit.names == ("x0", "x1", "x2") and fit.n_coefficients == 3
    assert_allclose(fit.weights, np.exp(x @ fit.coefficients), rtol=1e-8)


# ---------------------------------------------------------------------------------------------
# The summary


def test_summary_is_the_weighted_centred_design() -> None:
    x = np.c_[AREA, DIST, AGE]
    prior = np.linspace(0.5, 2.0, N)
    fit = fit_glm(x, VISITS, family="poisson", prior_weights=prior)
    s = glm_summary(fit, x)
    assert s.n == N and s.rows == N and s.input_kind == "table" and s.response is None
    # numpy: R_w is the correlation matrix of W^(1/2) (X - weighted mean).
    w = fit.weights
    xc = x - (w @ x) / w.sum()
    g = (xc * w[:, None]).T @ xc
    d = np.sqrt(np.diag(g))
    assert_allclose(s.R, g / np.outer(d, d), rtol=1e-12, atol=1e-14)
    # VIF_j = [R_w^-1]_jj.
    vifs = [v.vif for v in assess(s, VIF_ONLY).variables]
    assert_allclose(vifs, np.diag(np.linalg.inv(g / np.outer(d, d))), rtol=1e-10)
    # The weights are rescaled to sum to n, so the design cross-products stay consistent.
    cross, names = s.design_crossproducts(intercept=True)
    ones = np.c_[np.ones(N), x]
    expected = (ones * w[:, None]).T @ ones * (N / w.sum())
    assert names == (INTERCEPT_NAME, "x0", "x1", "x2")
    assert_allclose(cross, expected, rtol=1e-10)


def test_every_diagnostic_runs_on_the_summary() -> None:
    g = glm(BOUGHT, categorical={"region": REGION})
    result = assess(g.weighted, Options())
    assert result.n == N and result.p == 5
    assert [t.name for t in result.terms] == ["region"]
    assert result.conditioning is not None and result.conditioning.basis == "scaled_with_intercept"
    assert result.removal is not None and result.tests is not None


def test_working_response_as_the_response() -> None:
    x = np.c_[AREA, DIST, AGE]
    fit = fit_glm(x, VISITS, family="poisson")
    s = glm_summary(fit, x, response="visits")
    assert s.response == "visits" and s.p == 3
    result = assess(s, Options(sections=["variables", "components"]))
    # The weighted least-squares fit of the working response is the GLM fit itself (the IRLS
    # fixed point): the standardized least-squares coefficients, put back in original units,
    # are the GLM slopes (two solvers: rounding times the conditioning).
    assert result.components is not None and result.components.ols_coefficients is not None
    assert s.sds is not None and s.response_sd is not None
    slopes = np.asarray(result.components.ols_coefficients) * s.response_sd / s.sds
    assert_allclose(slopes, fit.coefficients[1:], rtol=1e-8)


def test_terms_are_kept_for_gvif() -> None:
    g = glm(VISITS, family="poisson", categorical={"region": REGION})
    assert g.weighted.terms == g.design.terms
    assert g.weighted.names == g.design.names
    assert g.weighted.names[-2:] == ("region[north]", "region[south]")
    terms = assess(g.weighted, VIF_ONLY).terms
    assert terms[0].name == "region" and terms[0].df == 2 and terms[0].gvif >= 1


def test_design_summary_is_the_plain_table_summary() -> None:
    x = np.c_[AREA, DIST, AGE]
    names = ["area", "dist", "age"]
    plain = design_summary(x, names)
    table = from_table(dict(zip(names, x.T, strict=True)))
    # The same function on the same input: identical bits.
    assert np.array_equal(plain.R, table.R) and plain.n == table.n
    weighted = design_summary(x, names, prior_weights=AGE)
    with_w = from_table({**dict(zip(names, x.T, strict=True)), "w": AGE}, weights="w")
    assert np.array_equal(weighted.R, with_w.R)


def test_gaussian_family_gives_the_table_vifs() -> None:
    g = glm(SPEND, family="gaussian")
    weighted = [v.vif for v in assess(g.weighted, VIF_ONLY).variables]
    plain = [v.vif for v in assess(g.design, VIF_ONLY).variables]
    # Gaussian working weights are 1: the same moments by two code paths (weighted kernel with
    # unit weights vs the unweighted one-pass kernel), so equal up to rounding.
    assert_allclose(weighted, plain, rtol=1e-12)


def test_drop_rows_drops_incomplete_rows_of_every_column() -> None:
    exposure = np.log(np.linspace(1.0, 3.0, N))
    exposure[[3, 5]] = np.nan
    area = AREA.copy()
    area[7] = np.nan
    columns = {"area": area, "dist": DIST, "age": AGE, "y": VISITS, "off": exposure}
    g = summarize_glm(columns, response="y", family="poisson", offset="off", missing="drop_rows")
    assert g.fit.n == N - 3 and g.weighted.n == N - 3 and g.design.rows == N - 3
    codes = [w.code for w in g.weighted.notes]
    assert codes == ["rows_dropped"]
    assert "3 of 120 rows had missing values and were dropped" in g.weighted.notes[0].message
    keep = np.ones(N, dtype=bool)
    keep[[3, 5, 7]] = False
    direct = fit_glm(
        np.c_[AREA, DIST, AGE][keep], VISITS[keep], family="poisson", offset=exposure[keep]
    )
    # Same rows, same arithmetic.
    assert_allclose(g.fit.coefficients, direct.coefficients, rtol=1e-12)


def test_missing_values_are_counted_per_column() -> None:
    y = BOUGHT.copy()
    y[:2] = np.nan
    area = AREA.copy()
    area[4] = np.nan
    with pytest.raises(MissingValuesError) as info:
        summarize_glm(cols(y=y, area=area), response="y", family="binomial")
    assert info.value.message.startswith("3 missing values in 2 column(s); fill them, or set")
    assert {(p.pointer, p.reason) for p in info.value.problems} == {
        ("/columns/area", "1 of 120 values missing"),
        ("/columns/y", "2 of 120 values missing"),
    }
