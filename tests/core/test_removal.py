"""Removal sequences against recomputation from scratch, statsmodels and published check values."""

from __future__ import annotations

import warnings

import numpy as np
import pytest
import statsmodels.api as sm
from hypothesis import given, settings
from hypothesis import strategies as st
from nist_longley import longley_rows, summary
from numpy.testing import assert_allclose
from sklearn.datasets import load_diabetes
from statsmodels.stats.outliers_influence import variance_inflation_factor

from knotwork.core._dependencies import Spectrum, find_dependencies
from knotwork.core._errors import InputError, OptionError
from knotwork.core._removal import (
    ALIASED,
    LARGEST_INFLATION,
    LEAST_RESPONSE_CORRELATION,
    removal_sequence,
)

# ------------------------------------------------------------------------------------------
# A reference that recomputes everything from scratch at every step (no downdates).


def unit_list(p, terms):
    owner = {}
    for name, cols in terms:
        for c in cols:
            owner[c] = name
    units = []
    for j in range(p):
        if j not in owner:
            units.append((f"x{j}", (j,)))
    units += [(name, tuple(sorted(cols))) for name, cols in terms]
    units.sort(key=lambda u: u[1][0])
    return units


def scratch_inflation(m, units, active):
    """VIF (one column) or squared scaled GVIF (term) of each active unit, from determinants."""
    cols = [c for u in active for c in units[u][1]]
    sub = m[np.ix_(cols, cols)]
    inv = np.linalg.inv(sub)
    pos = {c: i for i, c in enumerate(cols)}
    out = {}
    _, logdet_all = np.linalg.slogdet(sub)
    for u in active:
        t = list(units[u][1])
        if len(t) == 1:
            out[u] = inv[pos[t[0]], pos[t[0]]]
            continue
        others = [c for c in cols if c not in t]
        _, ld_t = np.linalg.slogdet(m[np.ix_(t, t)])
        _, ld_o = np.linalg.slogdet(m[np.ix_(others, others)]) if others else (1, 0.0)
        out[u] = np.exp((ld_t + ld_o - logdet_all) / len(t))  # Fox & Monette (1992)
    return out


def scratch_sequence(m, threshold, terms=(), protect=(), r_xy=None, by_response=False):
    """Greedy removal with a fresh inverse at every step; returns (names, vifs, tables)."""
    units = unit_list(m.shape[0], terms)
    active = list(range(len(units)))
    resp = None
    if r_xy is not None:
        resp = []
        for _, cols in units:
            c = list(cols)
            rt = r_xy[c]
            resp.append(np.sqrt(rt @ np.linalg.solve(m[np.ix_(c, c)], rt)))
    drops, vifs, tables, conds = [], [], [], []
    while True:
        infl = scratch_inflation(m, units, active)
        cols = [c for u in active for c in units[u][1]]
        cand = [u for u in active if units[u][0] not in protect and infl[u] > threshold]
        if not cand:
            return drops, vifs, tables, [units[u][0] for u in active], conds
        if by_response:
            low = min(resp[u] for u in cand)
            tied = [u for u in cand if resp[u] <= low + 1e-12]
            top = max(infl[u] for u in tied)
            u = max(u for u in tied if infl[u] >= top * (1 - 1e-9))
        else:
            top = max(infl[u] for u in cand)
            u = max(u for u in cand if infl[u] >= top * (1 - 1e-9))
        tables.append([infl.get(v) for v in range(len(units))])
        conds.append(np.linalg.cond(m[np.ix_(cols, cols)]))
        drops.append(units[u][0])
        vifs.append(infl[u])
        active.remove(u)


def latent_design(rng, n, p, factors, noise):
    x = rng.standard_normal((n, factors)) @ rng.standard_normal((factors, p))
    return x + noise * rng.standard_normal((n, p))


def names_of(p):
    return [f"x{j}" for j in range(p)]


def tolerance(cond):
    """1e-9, widened to the accuracy any inverse has at this conditioning (about eps * cond)."""
    return 1e-9 + 1e-15 * cond


def check_against_scratch(m, threshold, **kw):
    p = m.shape[0]
    result = removal_sequence(m, names_of(p), threshold=threshold, **kw)
    drops, vifs, tables, kept, conds = scratch_sequence(
        m, threshold, terms=kw.get("terms", ()), protect=kw.get("protect", ())
    )
    assert [s.drop for s in result.steps] == drops
    for step, vif, table, cond in zip(result.steps, vifs, tables, conds, strict=True):
        assert step.vif == pytest.approx(vif, rel=tolerance(cond))
        got = np.array([np.nan if v is None else v for v in step.vifs])
        want = np.array([np.nan if v is None else v for v in table])
        assert_allclose(got, want, rtol=tolerance(cond))
    assert list(result.kept) == kept
    return result


# ------------------------------------------------------------------------------------------
# Real designs


@pytest.fixture(scope="module")
def longley_data():
    x, y, names = longley_rows()
    return x, y, names, *summary(x, y)


def test_longley_threshold_10_matches_check_values(longley_data):
    _, _, names, r, _ = longley_data
    result = removal_sequence(r, names, threshold=10)
    # docs/numerics.md check values (computed with numpy/statsmodels): GNP (1788.51),
    # YEAR (271.190), GNPDEFL (35.9708); kept UNEMP, ARMED, POP.
    assert [s.drop for s in result.steps] == ["GNP", "YEAR", "GNPDEFL"]
    assert_allclose([s.vif for s in result.steps], [1788.51, 271.190, 35.9708], rtol=5e-6)
    assert result.kept == ("UNEMP", "ARMED", "POP")
    assert result.kept_indices == (2, 3, 4)
    assert result.threshold == 10.0
    assert result.max_vif_before == pytest.approx(1788.51, rel=5e-6)
    assert result.steps[-1].max_vif_after == pytest.approx(result.max_vif_left)
    assert not result.stopped_by_protection and result.still_high == ()
    assert all(s.reason == LARGEST_INFLATION for s in result.steps)


def test_longley_tables_match_statsmodels_vif_at_every_step(longley_data):
    x, _, names, r, _ = longley_data
    result = removal_sequence(r, names, threshold=2)
    remaining = list(range(len(names)))
    for step in result.steps:
        design = np.column_stack([np.ones(len(x)), x[:, remaining]])
        with warnings.catch_warnings():
            # statsmodels warns about Longley's conditioning; the value is what we compare.
            warnings.simplefilter("ignore", UserWarning)
            ref = [
                variance_inflation_factor(design, i + 1, standardize=True)
                for i in range(len(remaining))
            ]
        table = [step.vifs[j] for j in remaining]
        # statsmodels 0.15 variance_inflation_factor(standardize=True), design with a constant.
        assert_allclose(table, ref, rtol=1e-7)
        remaining.remove(names.index(step.drop))
        assert step.vifs[names.index(step.drop)] == pytest.approx(step.vif)
    check_against_scratch(r, 2)


@pytest.mark.parametrize("threshold", [1.5, 5.0, 10.0])
def test_real_designs_equal_scratch(longley_data, threshold):
    x_long = longley_data[0]
    diabetes = load_diabetes(scaled=False).data  # scikit-learn's bundled diabetes data
    copper = sm.datasets.copper.load_pandas().exog.to_numpy(dtype=float)
    for x in (x_long, diabetes, copper):
        check_against_scratch(np.corrcoef(x, rowvar=False), threshold)


def test_diabetes_first_step_is_largest_published_vif():
    x = load_diabetes(scaled=False).data
    result = removal_sequence(np.corrcoef(x, rowvar=False), names_of(10), threshold=5)
    # docs/numerics.md check values: VIF of s1 59.2025 is the largest in the diabetes data.
    assert result.steps[0].drop == "x4"
    assert result.steps[0].vif == pytest.approx(59.2025, rel=5e-6)


# ------------------------------------------------------------------------------------------
# Random designs, terms, protection


@pytest.mark.parametrize("p", [5, 30, 80])
def test_random_latent_designs_equal_scratch(rng, p):
    for noise in (0.05, 0.3, 1.0):
        m = np.corrcoef(latent_design(rng, 3 * p, p, max(2, p // 6), noise), rowvar=False)
        check_against_scratch(m, 5.0)


@settings(max_examples=40, deadline=None)
@given(
    seed=st.integers(0, 2**32 - 1),
    p=st.integers(2, 25),
    factors=st.integers(1, 6),
    noise=st.floats(0.01, 2.0),
    threshold=st.sampled_from([1.5, 2.0, 5.0, 10.0]),
)
def test_property_sequence_equals_scratch(seed, p, factors, noise, threshold):
    rng = np.random.default_rng(seed)
    m = np.corrcoef(latent_design(rng, 4 * p + 10, p, factors, noise), rowvar=False)
    check_against_scratch(m, threshold)


def test_downdate_paths_agree_and_refactor_on_ill_conditioned(rng):
    # A near-dependency with VIF around 1e7 forces the accuracy test to re-invert.
    n, p = 200, 25
    x = latent_design(rng, n, p, 4, 0.2)
    x[:, 7] = x[:, 1] + x[:, 2] - x[:, 3] + 3e-4 * rng.standard_normal(n)
    m = np.corrcoef(x, rowvar=False)
    result = check_against_scratch(m, 5.0)
    assert result.steps[0].vif > 1e6
    assert result.refactorizations >= 1
    naive = removal_sequence(m, names_of(p), threshold=5.0, growth_limit=1.0)
    assert [s.drop for s in naive.steps] == [s.drop for s in result.steps]
    assert_allclose([s.vif for s in naive.steps], [s.vif for s in result.steps], rtol=1e-8)


def test_protected_ill_conditioned_pair_does_not_force_reinversion(rng):
    # The pair stays (protected) with VIFs near 1e7; a fresh inverse carries the same error
    # scale, so the accuracy test must not re-invert after every drop.
    n, p = 300, 40
    x = latent_design(rng, n, p, 5, 0.3)
    x[:, 1] = x[:, 0] + 3e-4 * rng.standard_normal(n)
    m = np.corrcoef(x, rowvar=False)
    result = check_against_scratch(m, 5.0, protect=("x0", "x1"))
    assert len(result.steps) > 10
    assert result.refactorizations <= 1
    assert result.still_high == ("x0", "x1") and result.holds[0].partner == "x1"


def make_term_design(rng, n=300):
    """Three continuous predictors and a 4-level factor tied to them (treatment coding)."""
    z = rng.standard_normal((n, 4))
    level = np.digitize(z[:, 0] + 0.3 * rng.standard_normal(n), [-0.7, 0.0, 0.7])
    dummies = np.eye(4)[level][:, 1:]
    x = np.column_stack(
        [z[:, 0], dummies, z[:, 1], z[:, 1] + 0.2 * z[:, 2] + 0.1 * z[:, 3], z[:, 2]]
    )
    return x, level


def test_terms_judged_by_scaled_gvif_equal_scratch(rng):
    x, _ = make_term_design(rng)
    m = np.corrcoef(x, rowvar=False)
    terms = [("factor", (1, 2, 3))]
    for threshold in (1.2, 2.0, 4.0):
        for protect in ((), ("x0",)):
            result = check_against_scratch(m, threshold, terms=terms, protect=protect)
            assert "factor" in result.units and "x1" not in result.units
    result = removal_sequence(m, names_of(7), threshold=1.2, terms=terms, protect=["x0"])
    step = next(s for s in result.steps if s.drop == "factor")
    assert step.df == 3 and step.columns == ("x1", "x2", "x3")
    assert step.gvif == pytest.approx(step.vif**3)


def test_term_coding_does_not_change_the_sequence(rng):
    # GVIF is invariant to the coding of a term (Fox & Monette 1992): treatment vs sum coding.
    x, level = make_term_design(rng)
    sum_coded = np.eye(4)[level][:, 1:] - np.eye(4)[level][:, :1]
    y = x.copy()
    y[:, 1:4] = sum_coded
    terms = [("factor", (1, 2, 3))]
    kw = {"threshold": 1.2, "terms": terms, "protect": ["x0"]}
    a = removal_sequence(np.corrcoef(x, rowvar=False), names_of(7), **kw)
    b = removal_sequence(np.corrcoef(y, rowvar=False), names_of(7), **kw)
    assert "factor" in [s.drop for s in a.steps]
    assert [s.drop for s in a.steps] == [s.drop for s in b.steps]
    assert_allclose([s.vif for s in a.steps], [s.vif for s in b.steps], rtol=1e-9)


def test_protected_variable_is_skipped(longley_data):
    _, _, names, r, _ = longley_data
    result = removal_sequence(r, names, threshold=10, protect=["GNP"])
    assert "GNP" not in [s.drop for s in result.steps]
    assert result.steps[0].skipped == ("GNP",)
    assert result.protected == ("GNP",)
    drops, vifs, _, _, _ = scratch_sequence(r, 10, protect=("x1",))
    assert [names.index(s.drop) for s in result.steps] == [int(d[1:]) for d in drops]
    assert_allclose([s.vif for s in result.steps], vifs, rtol=1e-9)


def test_protection_that_stops_the_sequence_names_what_holds_it(longley_data):
    _, _, names, r, _ = longley_data
    result = removal_sequence(r, names, threshold=10, protect=["GNP", "YEAR"])
    assert result.stopped_by_protection
    assert result.still_high == ("GNP", "YEAR")
    assert set(result.blocking) == {"GNP", "YEAR"}
    kept = [names.index(k) for k in result.kept]
    inv = np.linalg.inv(r[np.ix_(kept, kept)])
    for hold in result.holds:
        j = kept.index(names.index(hold.name))
        assert hold.vif == pytest.approx(inv[j, j], rel=1e-9)
        assert hold.protected and hold.partner_protected
        # Recompute the partner's effect from scratch: drop the partner, invert again.
        rest = [c for c in kept if names[c] != hold.partner]
        inv2 = np.linalg.inv(r[np.ix_(rest, rest)])
        k = rest.index(names.index(hold.name))
        assert hold.vif_without_partner == pytest.approx(inv2[k, k], rel=1e-9)
        target = names.index(hold.name)
        others = []
        for c in kept:
            if c != target:
                rest = [d for d in kept if d != c]
                others.append(
                    np.linalg.inv(r[np.ix_(rest, rest)])[rest.index(target)][rest.index(target)]
                )
        assert hold.vif_without_partner == pytest.approx(min(others), rel=1e-9)


def test_protecting_a_term_column_protects_the_term(rng):
    x, _ = make_term_design(rng)
    m = np.corrcoef(x, rowvar=False)
    result = removal_sequence(
        m, names_of(7), threshold=1.01, terms=[("f", (1, 2, 3))], protect=["x2"]
    )
    assert result.protected == ("f",)
    assert "f" not in [s.drop for s in result.steps]


def test_equal_vifs_drop_the_later_listed_first():
    # Equicorrelated predictors: every VIF is equal, so only the tie-break decides.
    p, rho = 6, 0.9
    m = np.full((p, p), rho) + (1 - rho) * np.eye(p)
    result = removal_sequence(m, names_of(p), threshold=2.0)
    dropped = [s.drop for s in result.steps]
    assert dropped == [f"x{j}" for j in range(p - 1, p - 1 - len(dropped), -1)]
    assert result.kept == tuple(f"x{j}" for j in range(p - len(dropped)))
    # VIF of equicorrelation: 1 + k rho^2 / (1 - rho)(1 + (k - 1) rho) with k others... check
    # against the direct inverse instead of a formula.
    assert result.steps[0].vif == pytest.approx(np.linalg.inv(m)[0, 0])


def test_permuting_columns_permutes_the_sequence(rng):
    m = np.corrcoef(latent_design(rng, 120, 12, 3, 0.4), rowvar=False)
    perm = rng.permutation(12)
    names = np.array(names_of(12))
    a = removal_sequence(m, list(names), threshold=5)
    b = removal_sequence(m[np.ix_(perm, perm)], list(names[perm]), threshold=5)
    assert [s.drop for s in a.steps] == [s.drop for s in b.steps]
    assert sorted(a.kept) == sorted(b.kept)


def test_cosine_matrix_for_no_intercept_matches_statsmodels_uncentred(rng):
    x = latent_design(rng, 60, 5, 2, 0.5) + 3.0
    norms = np.linalg.norm(x, axis=0)
    cosine = (x.T @ x) / np.outer(norms, norms)
    result = removal_sequence(cosine, names_of(5), threshold=1.0 + 1e-9)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", UserWarning)
        # statsmodels 0.15, standardize=False and no constant column: the uncentred VIF.
        ref = [variance_inflation_factor(x, j, standardize=False) for j in range(5)]
    assert_allclose(result.steps[0].vifs, ref, rtol=1e-8)


# ------------------------------------------------------------------------------------------
# Exact dependencies


def aliased_design(rng, n=80):
    x = rng.standard_normal((n, 5))
    x[:, 2] = x[:, 0] + 2 * x[:, 1]  # exact: x2 = x0 + 2 x1
    x[:, 4] = x[:, 3] + 0.1 * rng.standard_normal(n)
    return x


@pytest.mark.parametrize("given", [True, False])
def test_aliased_variable_goes_first_with_its_relation(rng, given):
    x = aliased_design(rng)
    m = np.corrcoef(x, rowvar=False)
    deps = find_dependencies(Spectrum.of(m), names_of(5)) if given else None
    result = removal_sequence(m, names_of(5), threshold=5, dependencies=deps)
    first = result.steps[0]
    assert first.reason == ALIASED and first.vif is None and first.vifs is None
    assert set(first.relation) == {"x0", "x1", "x2"}
    assert first.drop in first.relation
    rest = [j for j in range(5) if f"x{j}" != first.drop]
    drops, vifs, _, _, _ = scratch_sequence(m[np.ix_(rest, rest)], 5)
    tail = [s.drop for s in result.steps[1:]]
    assert tail == [f"x{rest[int(d[1:])]}" for d in drops]
    assert_allclose([s.vif for s in result.steps[1:]], vifs, rtol=1e-9)
    assert result.max_vif_before is None
    assert first.max_vif_after is not None


def test_protected_redundant_variable_swaps_for_another_member(rng):
    x = aliased_design(rng)
    m = np.corrcoef(x, rowvar=False)
    plain = removal_sequence(m, names_of(5), threshold=5)
    chosen = plain.steps[0].drop
    result = removal_sequence(m, names_of(5), threshold=5, protect=[chosen])
    assert result.steps[0].reason == ALIASED
    assert result.steps[0].drop != chosen
    assert result.steps[0].drop in {"x0", "x1", "x2"}
    assert all(s.drop != chosen for s in result.steps)


def test_dependency_among_protected_stops_the_sequence(rng):
    x = aliased_design(rng)
    m = np.corrcoef(x, rowvar=False)
    result = removal_sequence(m, names_of(5), threshold=5, protect=["x0", "x1", "x2"])
    assert result.stopped_by_protection
    assert set(result.still_high) == {"x0", "x1", "x2"}
    assert set(result.blocking) == {"x0", "x1", "x2"}
    assert result.max_vif_left is None
    assert result.steps == ()


def test_term_in_an_exact_dependency_is_dropped_whole(rng):
    x, _ = make_term_design(rng)
    x = np.column_stack([x, x[:, 1] + x[:, 2]])  # x7 = sum of two of the factor's columns
    m = np.corrcoef(x, rowvar=False)
    terms = [("factor", (1, 2, 3))]
    for protect in ((), ("x7",), ("factor",)):
        result = removal_sequence(m, names_of(8), threshold=5, terms=terms, protect=protect)
        first = result.steps[0]
        assert first.reason == ALIASED and first.drop in {"x7", "factor"}
        assert first.drop not in protect
        assert set(first.relation) == {"x1", "x2", "x7"}
        assert first.max_vif_after is not None  # what is left has no exact dependency


def test_near_dependency_is_not_aliased(rng):
    # A relation that holds in every row but one gives a large finite VIF (docs/numerics.md).
    x = aliased_design(rng)
    x[0, 2] += 1e-3
    m = np.corrcoef(x, rowvar=False)
    result = removal_sequence(m, names_of(5), threshold=5)
    assert result.steps[0].reason == LARGEST_INFLATION
    assert result.steps[0].vif > 1e5
    check_against_scratch(m, 5)


# ------------------------------------------------------------------------------------------
# The response-aware ordering


def test_response_ordering_follows_its_rule_and_tracks_r_squared(longley_data):
    x, y, names, r, r_xy = longley_data
    result = removal_sequence(r, names, threshold=10, r_xy=r_xy)
    assert result.ordering == LARGEST_INFLATION
    alt = result.alternative
    assert alt is not None and alt.ordering == LEAST_RESPONSE_CORRELATION
    assert alt.alternative is None and "least correlated" in alt.rule
    drops, vifs, _, _, _ = scratch_sequence(r, 10, r_xy=r_xy, by_response=True)
    assert [names.index(s.drop) for s in alt.steps] == [int(d[1:]) for d in drops]
    assert_allclose([s.vif for s in alt.steps], vifs, rtol=1e-9)
    # R^2 after each step equals statsmodels OLS on the remaining columns with a constant.
    for seq in (result, alt):
        remaining = list(range(len(names)))
        for step in seq.steps:
            remaining.remove(names.index(step.drop))
            fit = sm.OLS(y, sm.add_constant(x[:, remaining])).fit()
            assert step.r_squared_after == pytest.approx(fit.rsquared, rel=1e-9)
            assert step.response_correlation == pytest.approx(
                abs(r_xy[names.index(step.drop)]), rel=1e-12
            )
    full = sm.OLS(y, sm.add_constant(x)).fit().rsquared
    assert result.r_squared_full == pytest.approx(full, rel=1e-10)


def test_response_ordering_on_random_designs_with_terms(rng):
    x, _ = make_term_design(rng)
    y = x @ rng.standard_normal(7) + rng.standard_normal(len(x))
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    m, r_xy = c[:-1, :-1], c[:-1, -1]
    terms = [("factor", (1, 2, 3))]
    result = removal_sequence(m, names_of(7), threshold=1.2, terms=terms, r_xy=r_xy)
    drops, vifs, _, _, _ = scratch_sequence(m, 1.2, terms=terms, r_xy=r_xy, by_response=True)
    assert [s.drop for s in result.alternative.steps] == drops
    assert_allclose([s.vif for s in result.alternative.steps], vifs, rtol=1e-9)


# ------------------------------------------------------------------------------------------
# Options and contract


@pytest.mark.parametrize(
    ("threshold", "reason"),
    [
        (0.5, "Expected `float` > 1.0"),
        (1.0, "Expected `float` > 1.0"),
        (float("nan"), "Expected `float` > 1.0"),
        (float("inf"), "Expected `float` <= 1.7976931348623157e+308"),
    ],
)
def test_bad_threshold_names_the_option(threshold, reason):
    # Checked once, where options enter the core, by the contract's rule (finite, above 1);
    # the removal kernel trusts what passes.
    from knotwork.core import Options, assess, from_correlation

    with pytest.raises(OptionError) as err:
        assess(from_correlation(names_of(3), np.eye(3), 20), Options(threshold=threshold))
    assert (err.value.problems[0].pointer, err.value.problems[0].reason) == ("/threshold", reason)


def test_unknown_protected_name_is_an_option_error():
    with pytest.raises(OptionError) as err:
        removal_sequence(np.eye(3), names_of(3), threshold=5, protect=["x1", "nope"])
    assert [p.pointer for p in err.value.problems] == ["/protect/1"]
    assert "'nope' is not a predictor or term" in err.value.problems[0].reason


def test_overlapping_terms_are_rejected():
    with pytest.raises(InputError) as err:
        removal_sequence(np.eye(4), names_of(4), threshold=5, terms=[("a", (0, 1)), ("b", (1, 2))])
    assert err.value.problems[0].pointer == "/terms/1"


def test_fields_are_plain_values(longley_data):
    _, _, names, r, r_xy = longley_data
    result = removal_sequence(r, names, threshold=10, r_xy=r_xy, protect=["GNP"])

    def walk(obj):
        if hasattr(obj, "__struct_fields__"):
            for f in obj.__struct_fields__:
                walk(getattr(obj, f))
        elif isinstance(obj, tuple):
            for v in obj:
                walk(v)
        else:
            assert obj is None or type(obj) in (float, int, str, bool), type(obj)

    walk(result)


def test_no_tables_gives_the_same_sequence(longley_data):
    _, _, names, r, _ = longley_data
    a = removal_sequence(r, names, threshold=2)
    b = removal_sequence(r, names, threshold=2, tables=False)
    assert [s.drop for s in a.steps] == [s.drop for s in b.steps]
    assert all(s.vifs is None for s in b.steps)


def test_threshold_just_above_one_keeps_one_predictor() -> None:
    # Found by contract fuzzing: the smallest threshold the schema allows. Rounding can leave a
    # lone predictor's VIF at 1 + 1e-16; the sequence must stop with one predictor kept.
    rng = np.random.default_rng(3)
    x = rng.normal(size=(40, 4))
    x[:, 3] += x[:, 0]
    r = np.corrcoef(x, rowvar=False)
    removal = removal_sequence(r, ["a", "b", "c", "d"], threshold=1.0000000000000002)
    assert len(removal.kept) == 1
    assert len(removal.steps) == 3


def test_a_rank_one_design_with_a_term_keeps_one_predictor():
    # Six columns driven by one factor (five exact relations at the 1e-10 tolerance), a
    # two-column term and a response: the aliased drops must leave a predictor. The second
    # ordering (least response correlation) once took the term after four single columns,
    # every column, and failed.
    from knotwork.core import Options, assess, from_correlation

    rng = np.random.default_rng(42)
    p, n = 6, 17
    rng.integers(3, 40)  # the draws of the generator that first found the case, kept as they were
    x = rng.standard_normal((n, 1)) @ rng.standard_normal((1, p))
    x = x + rng.choice([0.3, 1e-3, 1e-6]) * rng.standard_normal((n, p))
    y = x[:, :2].sum(axis=1) + rng.standard_normal(n)
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    names = names_of(p)
    summary = from_correlation(
        names, c[:-1, :-1], n, response=("y", c[:-1, -1].tolist()), terms={"t": names[1:3]}
    )
    result = assess(summary, Options(threshold=10.0, sections=("removal",)))
    assert result.removal is not None
    for removal in (result.removal, result.removal.alternative):
        assert removal is not None
        assert len(removal.kept) >= 1
