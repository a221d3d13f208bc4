"""Sampling uncertainty of VIFs: Fisher's distribution of R^2, normal-theory intervals, bootstrap.

Outside sources, named beside each check: simulation with numpy (regressions on normal
samples of a known covariance), scipy.stats (beta, kstest, f), scipy.optimize.brentq,
statsmodels 0.15.0 (variance_inflation_factor, WLS). The simulations are seeded; the sizes here
keep the file to a few seconds, and bench/bench_uncertainty.py --coverage runs them larger.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from numpy.testing import assert_allclose
from scipy import optimize, stats

import knotwork.core._uncertainty as unc
from knotwork.core import (
    InputError,
    Interrupted,
    OptionError,
    Options,
    TooFewDataError,
    assess,
    bootstrap_intervals,
    design_from_table,
    from_correlation,
    from_moments,
    from_table,
    normal_intervals,
    r2_cdf,
    r2_sf,
    removal_sequence,
    stop_when,
)
from knotwork_contract import REPLICATES_MAX, REPLICATES_MIN, UncertaintyOptions

# A known population: unit variances, so the population VIFs are the diagonal of the inverse.
SIGMA = np.array(
    [
        [1.0, 0.6, 0.3, 0.2],
        [0.6, 1.0, 0.5, 0.1],
        [0.3, 0.5, 1.0, 0.4],
        [0.2, 0.1, 0.4, 1.0],
    ]
)
TRUE_VIF = np.diag(np.linalg.inv(SIGMA))  # about 1.62, 1.98, 1.61, 1.26


def samples(rng: np.random.Generator, count: int, n: int, sigma: np.ndarray) -> np.ndarray:
    """``count`` samples of n rows from N(0, sigma), shape (count, n, p)."""
    chol = np.linalg.cholesky(sigma)
    return rng.standard_normal((count, n, sigma.shape[0])) @ chol.T


def regression_r2(x: np.ndarray, j: int) -> np.ndarray:
    """R^2 of column j on the others with an intercept, by least squares in every sample
    (numpy: the normal equations of [1, others], solved per sample)."""
    count, n, p = x.shape
    others = [c for c in range(p) if c != j]
    z = np.concatenate([np.ones((count, n, 1)), x[:, :, others]], axis=2)
    y = x[:, :, j]
    beta = np.linalg.solve(z.transpose(0, 2, 1) @ z, (z.transpose(0, 2, 1) @ y[:, :, None]))
    resid = y - (z @ beta)[:, :, 0]
    centred = y - y.mean(axis=1, keepdims=True)
    return 1.0 - (resid**2).sum(axis=1) / (centred**2).sum(axis=1)


def sample_vifs(x: np.ndarray) -> np.ndarray:
    """VIFs of every sample (numpy: diagonal of the inverse sample correlation matrix)."""
    xc = x - x.mean(axis=1, keepdims=True)
    c = xc.transpose(0, 2, 1) @ xc
    d = np.sqrt(np.einsum("sjj->sj", c))
    r = c / d[:, :, None] / d[:, None, :]
    return np.einsum("sjj->sj", np.linalg.inv(r))


def statsmodels_vifs(rows: np.ndarray) -> np.ndarray:
    """statsmodels 0.15.0 variance_inflation_factor on the rows with a constant column."""
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    design = sm.add_constant(rows, has_constant="add")
    return np.array(
        [variance_inflation_factor(design, j, standardize=True) for j in range(1, design.shape[1])]
    )


# --------------------------------------------------------------------------------------------
# Fisher's distribution


@pytest.mark.parametrize(("n", "k"), [(30, 3), (12, 1), (200, 9), (5000, 40)])
def test_cdf_at_rho_zero_is_the_central_beta(n: int, k: int) -> None:
    # Source: scipy.stats.beta(k/2, (n-1-k)/2), the null distribution of R^2.
    x = np.linspace(0.001, 0.999, 41)
    expected = stats.beta(k / 2, (n - 1 - k) / 2).cdf(x)
    assert_allclose(r2_cdf(x, 0.0, n, k), expected, rtol=0, atol=1e-13)
    # Through the series (rho^2 > 0): the limit must be continuous. The series' truncation
    # (1e-13) and rounding allow 1e-11; rho^2 = 1e-14 moves the CDF by about 1e-12.
    assert_allclose(r2_cdf(x, 1e-14, n, k), expected, rtol=0, atol=1e-11)
    assert_allclose(r2_sf(x, 1e-14, n, k), 1.0 - expected, rtol=0, atol=1e-11)


@pytest.mark.parametrize(
    ("n", "sigma", "large"),
    [
        (30, SIGMA, False),
        (200, SIGMA, False),
        # rho^2 near 1 and a long window: summed by quadrature, not term by term.
        (2000, np.array([[1.0, 0.99, 0.1], [0.99, 1.0, 0.1], [0.1, 0.1, 1.0]]), True),
    ],
)
def test_cdf_matches_simulated_r2(rng: np.random.Generator, n: int, sigma: np.ndarray, large: bool):
    # Source: direct simulation, numpy least squares of x0 on the others in 800-2000 samples.
    count = 800 if large else 2000
    x = samples(rng, count, n, sigma)
    r2 = regression_r2(x, 0)
    rho2 = 1.0 - 1.0 / np.linalg.inv(sigma)[0, 0]
    k = sigma.shape[0] - 1
    if large:
        series = unc._Series(
            np.array([np.median(r2)]), 1.0 - np.array([np.median(r2)]), n, k, 1e-13
        )
        assert series.quad.size == 1  # the quadrature path is the one checked here
    # The CDF at the simulated 10/50/90% quantiles: within 3.5 standard errors of the
    # empirical CDF (sqrt(q(1 - q)/count)).
    qs = np.array([0.1, 0.5, 0.9])
    at = r2_cdf(np.quantile(r2, qs), rho2, n, k)
    assert np.all(np.abs(at - qs) < 3.5 * np.sqrt(qs * (1 - qs) / count))
    # And the whole distribution: Kolmogorov-Smirnov (scipy.stats.kstest).
    assert stats.kstest(r2, lambda q: r2_cdf(q, rho2, n, k)).pvalue > 1e-3


def test_cdf_and_sf_are_complements_and_monotone() -> None:
    x = np.array([0.05, 0.3, 0.7, 0.95, 0.9999])
    rho2 = np.array([0.0, 0.2, 0.5, 0.9, 0.99, 0.999999])
    # (12, 9): two observations beyond the predictors; at x = 0.9999 the window starts at
    # term 0 and is 3e5 terms long (quadrature with a term-by-term start).
    for n, k in [(30, 3), (400, 20), (12, 9)]:
        f = r2_cdf(x[:, None], rho2[None, :], n, k)
        s = r2_sf(x[:, None], rho2[None, :], n, k)
        # Two sums over the same terms; each within 1e-13 of the truth plus rounding.
        assert_allclose(f + s, 1.0, rtol=0, atol=1e-12)
        # Monotone up to the accuracy of each value (1e-13 truncation plus rounding).
        assert np.all(np.diff(f, axis=1) <= 3e-13)  # decreasing in rho^2
        assert np.all(np.diff(f, axis=0) >= -3e-13)  # increasing in x


def test_quadrature_agrees_with_the_term_by_term_sum(monkeypatch) -> None:
    # Windows of a few thousand terms, summed both ways (the quadrature is forced); the
    # trapezoidal rule's error is far below the 1e-13 truncation, so 1e-11 is rounding.
    x = np.array([0.4, 2.0 / 3.0, 0.8, 11.0 / 12.0])
    rho2 = np.array([0.3, 0.6, 0.75, 0.9])
    exact = r2_cdf(x, rho2, 5000, 4)
    monkeypatch.setattr(unc, "EXACT_TERMS", 0)
    assert_allclose(r2_cdf(x, rho2, 5000, 4), exact, rtol=0, atol=1e-11)


# --------------------------------------------------------------------------------------------
# Normal-theory intervals


@pytest.mark.parametrize("n", [30, 200])
def test_normal_intervals_cover_the_true_vif(rng: np.random.Generator, n: int) -> None:
    # Source: simulation (numpy) from the known covariance SIGMA; 1,500 samples per variable,
    # so 93-97% is more than 3.5 standard errors (0.56%) either side of 95%.
    vifs = sample_vifs(samples(rng, 1500, n, SIGMA))
    for j, true in enumerate(TRUE_VIF):
        result = normal_intervals(vifs[:, j], n, 4, level=0.95)
        ends = np.array([v.vif_interval for v in result.variables])
        coverage = np.mean((ends[:, 0] <= true) & (true <= ends[:, 1]))
        assert 0.93 <= coverage <= 0.97, (j, coverage)


def test_normal_bounds_solve_the_cdf_equations_as_brent_finds_them() -> None:
    # Source: scipy.optimize.brentq on the same CDF (r2_cdf), one bound at a time. The
    # intervals come from a Newton iteration whose last step is below 1e-7 relative (so its
    # error is of order 1e-13), brentq stops at 1e-13, and the CDF is accurate to 1e-13: the
    # bounds agree to 1e-9.
    for n, p, vifs in [(30, 4, [1.3, 2.5, 7.0, 40.0]), (500, 12, [1.1, 3.0, 15.0])]:
        result = normal_intervals(vifs, n, p, level=0.9)
        for v, got in zip(vifs, result.variables, strict=True):
            expected = [brent_bound(1.0 - 1.0 / v, n, p - 1, t) for t in (0.95, 0.05)]
            assert got.vif_interval is not None
            assert_allclose(got.vif_interval, expected, rtol=1e-9)


def brent_bound(x: float, n: int, k: int, target: float) -> float:
    """The VIF where r2_cdf(x; rho^2) = target, by scipy.optimize.brentq in s = log VIF; 1
    when the CDF at rho = 0 is already past the target."""

    def gap(s: float) -> float:
        return float(r2_cdf(x, -math.expm1(-s), n, k)) - target

    if gap(0.0) <= 0:
        return 1.0
    return math.exp(optimize.brentq(gap, 0.0, 60.0, xtol=1e-14, rtol=1e-13))


def test_p_value_is_the_upper_tail_at_the_threshold_and_uniform_on_the_boundary(
    rng: np.random.Generator,
) -> None:
    n, thr = 60, 5.0
    result = normal_intervals([2.0, 5.0, 9.0], n, 4, threshold=thr)
    expected = r2_sf(1.0 - 1.0 / np.array([2.0, 5.0, 9.0]), 1.0 - 1.0 / thr, n, 3)
    # Same series, grouped differently in one array or three: 1e-12.
    assert_allclose([v.p_value for v in result.variables], expected, rtol=1e-12)
    # Source: simulation. With the population VIF exactly at the threshold the p-value is
    # uniform on (0, 1) (scipy.stats.kstest); x0 = sqrt(0.8) z + sqrt(0.2) u, with z the
    # standardized sum of three independent predictors, has rho^2 = 0.8, VIF 5.
    z = rng.standard_normal((1000, n, 3))
    u = rng.standard_normal((1000, n))
    x0 = math.sqrt(0.8) * z.sum(axis=2) / math.sqrt(3) + math.sqrt(0.2) * u
    vifs = sample_vifs(np.concatenate([x0[:, :, None], z], axis=2))[:, 0]
    pvals = [v.p_value for v in normal_intervals(vifs, n, 4, threshold=thr).variables]
    assert stats.kstest(pvals, "uniform").pvalue > 1e-3


def test_normal_edge_cases() -> None:
    result = normal_intervals([1.0, None, math.inf, 1.05], 30, 4, level=0.95)
    one, aliased, infinite, near_one = result.variables
    # Exact: these edge cases return fixed values (the bounds of rho^2 = 0, an aliased
    # predictor's None and 0), not results of a computation that rounding could move.
    assert (one.vif_interval, one.p_value) == ((1.0, 1.0), 1.0)  # R^2 = 0 exactly
    for v in (aliased, infinite):
        assert (v.vif, v.vif_interval, v.p_value, v.aliased) == (None, None, 0.0, True)
    # R^2 = 0.048 at n = 30, k = 3 is below the null median: the lower bound is VIF 1.
    assert near_one.vif_interval is not None and near_one.vif_interval[0] == 1.0
    assert near_one.vif_interval[1] > 1.05
    # A single predictor: k = 0, R^2 = 0 with certainty.
    lone = normal_intervals([1.0], 20, 1).variables[0]
    assert (lone.vif_interval, lone.p_value) == ((1.0, 1.0), 1.0)


def test_huge_vifs_follow_the_f_limit() -> None:
    # Derived here, not an outside source: as rho^2 -> 1, (VIF_sample - 1) / (VIF_pop - 1)
    # tends to chi2(n - 1) / chi2(n - p), an F(n - 1, n - p) times (n - 1)/(n - p), with
    # relative corrections of order 1/sqrt(n VIF); the quantiles from scipy.stats.f.
    n, p = 50, 5
    v = np.array([1e6, 1e8, 1e12])
    got = np.array([r.vif_interval for r in normal_intervals(v, n, p).variables])
    scale = (n - p) / (n - 1)
    lo = (v - 1) * stats.f.ppf(0.025, n - p, n - 1) * scale + 1
    hi = (v - 1) * stats.f.ppf(0.975, n - p, n - 1) * scale + 1
    assert_allclose(got[:, 0], lo, rtol=1e-5)
    assert_allclose(got[:, 1], hi, rtol=1e-5)


def test_indicator_columns_are_flagged_approximate() -> None:
    result = normal_intervals([2.0, 3.0], 80, 3, names=["area", "zone[b]"], indicators=["zone[b]"])
    assert [v.approximate for v in result.variables] == [False, True]
    assert "indicator columns" in result.notes[0]
    assert result.notes[-1] == "Intervals of indicator columns are approximate: zone[b]."


# --------------------------------------------------------------------------------------------
# Bootstrap


def design(rng: np.random.Generator, n: int) -> np.ndarray:
    """Four predictors; x3 = x0 + x1 + noise puts x0, x1 and x3 around VIF 5."""
    z = rng.standard_normal((n, 3))
    x3 = z[:, 0] + z[:, 1] + 0.7 * rng.standard_normal(n)
    return np.column_stack([z, x3])


def test_replicate_vifs_are_those_of_the_resampled_rows(rng: np.random.Generator) -> None:
    # Source: statsmodels 0.15.0 variance_inflation_factor on the explicitly resampled rows
    # (np.repeat by the counts). The replicates' VIFs come from weighted sums instead of rows,
    # a different order of operations: 1e-9.
    x = design(rng, 60) * [1.0, 10.0, 1e-3, 1.0] + [0.0, 1e3, 5.0, -2.0]
    counts = unc._draw_counts(np.random.default_rng(11), 60, 40)
    assert np.all(counts.sum(axis=1) == 60)
    sampler = unc._Resampler(x, None, x.mean(axis=0))
    com, constant = sampler.moments(sampler.sums(counts))
    vif, _, singular = unc._replicate_inflation(unc._correlations(com), np.arange(4), [])
    assert not constant.any() and not singular.any()
    for j in range(0, 40, 7):
        rows = np.repeat(x, counts[j].astype(int), axis=0)
        assert_allclose(vif[j], statsmodels_vifs(rows), rtol=1e-9)
    # End to end: the first block of bootstrap_intervals draws these same counts, so its
    # percentile interval is that of the statsmodels VIFs (inverted_cdf order statistics).
    reference = np.array([statsmodels_vifs(np.repeat(x, c.astype(int), axis=0)) for c in counts])
    result = bootstrap_intervals(x, list("abcd"), replicates=100, seed=11, level=0.9)
    counts100 = unc._draw_counts(np.random.default_rng(11), 60, 100)
    assert np.array_equal(counts100[:40], counts)
    full = np.array([statsmodels_vifs(np.repeat(x, c.astype(int), axis=0)) for c in counts100])
    assert_allclose(full[:40], reference, rtol=0)
    for j, v in enumerate(result.variables):
        ordered = np.sort(full[:, j])
        assert v.vif_interval is not None
        assert_allclose(v.vif_interval, (ordered[4], ordered[94]), rtol=1e-9)  # B a/2 = 5th
        assert v.share_above == pytest.approx(np.mean(full[:, j] > 5.0))


def test_weighted_replicates_match_weighted_least_squares(rng: np.random.Generator) -> None:
    # Source: statsmodels 0.15.0 WLS of each column on the others with a constant, weights =
    # count x prior weight; VIF = 1 / (1 - R^2). Different order of operations: 1e-9.
    import statsmodels.api as sm

    x = design(rng, 50)
    w = rng.uniform(0.2, 3.0, 50)
    counts = unc._draw_counts(np.random.default_rng(3), 50, 5)
    total = w.sum()
    sampler = unc._Resampler(x, w, (w @ x) / total)
    com, _ = sampler.moments(sampler.sums(counts))
    vif, _, _ = unc._replicate_inflation(unc._correlations(com), np.arange(4), [])
    for b in range(5):
        cw = counts[b] * w
        for j in range(4):
            others = sm.add_constant(np.delete(x, j, axis=1))
            r2 = sm.WLS(x[:, j], others, weights=cw).fit().rsquared
            assert vif[b, j] == pytest.approx(1.0 / (1.0 - r2), rel=1e-9)


def test_bootstrap_gvif_of_a_term(rng: np.random.Generator) -> None:
    # Source: the determinant formula of Fox & Monette (1992) with numpy (np.corrcoef,
    # np.linalg.det) on the explicitly resampled rows; different operations: 1e-9.
    n = 80
    level = rng.integers(0, 3, n)
    ind = np.column_stack([level == 1, level == 2]).astype(float)
    age = level + rng.standard_normal(n)
    size = rng.standard_normal(n)
    x = np.column_stack([age, ind, size])
    names = ["age", "zone[b]", "zone[c]", "size"]
    terms = {"zone": ["zone[b]", "zone[c]"]}
    counts = unc._draw_counts(np.random.default_rng(9), n, 6)
    sampler = unc._Resampler(x, None, x.mean(axis=0))
    com, _ = sampler.moments(sampler.sums(counts))
    sets = [(np.array([1, 2]), np.array([0, 3]))]
    _, log_gvif, _ = unc._replicate_inflation(unc._correlations(com), np.arange(4), sets)
    for b in range(6):
        r = np.corrcoef(np.repeat(x, counts[b].astype(int), axis=0), rowvar=False)
        t, o = [1, 2], [0, 3]
        gvif = np.linalg.det(r[np.ix_(t, t)]) * np.linalg.det(r[np.ix_(o, o)]) / np.linalg.det(r)
        assert math.exp(log_gvif[b, 0]) == pytest.approx(gvif, rel=1e-9)
    result = bootstrap_intervals(x, names, terms=terms, replicates=200, seed=2)
    (term,) = result.terms
    assert term.columns == ("zone[b]", "zone[c]") and term.gvif is not None
    assert term.gvif_interval is not None and term.gvif_scaled_interval is not None
    lo, hi = term.gvif_interval
    assert lo <= term.gvif <= hi
    assert term.gvif_scaled_interval == pytest.approx((lo ** (1 / 4), hi ** (1 / 4)))
    # The term's columns share its removal share.
    assert result.variables[1].share_dropped == result.variables[2].share_dropped


def test_removal_shares_match_sequences_run_one_replicate_at_a_time(
    rng: np.random.Generator,
) -> None:
    # The shares count what removal_sequence does on each replicate's correlation matrix
    # (np.corrcoef of the resampled rows); skipping replicates with nothing above the
    # threshold must not change them. Same decisions: exact shares.
    x = design(rng, 70)
    names = ["a", "b", "c", "d"]
    reps, thr = 100, 5.0
    result = bootstrap_intervals(x, names, threshold=thr, protect=["d"], replicates=reps, seed=4)
    full = removal_sequence(np.corrcoef(x, rowvar=False), names, threshold=thr, protect=["d"])
    assert result.kept == full.kept
    counts = unc._draw_counts(np.random.default_rng(4), 70, reps)
    dropped = np.zeros(4)
    same = 0
    for c in counts:
        r = np.corrcoef(np.repeat(x, c.astype(int), axis=0), rowvar=False)
        seq = removal_sequence(r, names, threshold=thr, protect=["d"], tables=False)
        for step in seq.steps:
            dropped[names.index(step.drop)] += 1
        same += seq.kept == full.kept
    assert [v.share_dropped for v in result.variables] == list(dropped / reps)
    assert result.share_same_kept == same / reps
    assert result.variables[3].share_dropped == 0.0  # protected
    assert 0.0 < result.share_same_kept < 1.0  # a design where the decision does vary


def test_bootstrap_coverage_at_n_200(rng: np.random.Generator) -> None:
    # Source: simulation (numpy) from SIGMA. The issue asks >= 88% of at least 1,000 samples
    # with 1,000 replicates; here 250 samples of 200 replicates (the full size runs in
    # bench/bench_uncertainty.py --coverage: about 94%). Pooled over the four VIFs (1,000
    # intervals, standard error about 0.8%), the bound has some 5 standard errors of room.
    x = samples(rng, 250, 200, SIGMA)
    hits = []
    for s in range(x.shape[0]):
        result = bootstrap_intervals(x[s], list("abcd"), replicates=200, seed=s)
        for v, true in zip(result.variables, TRUE_VIF, strict=True):
            assert v.vif_interval is not None
            hits.append(v.vif_interval[0] <= true <= v.vif_interval[1])
    assert np.mean(hits) >= 0.88


def test_bootstrap_is_reproducible_bit_for_bit(rng: np.random.Generator) -> None:
    x = design(rng, 90)
    names = ["a", "b", "c", "d"]
    first = bootstrap_intervals(x, names, replicates=150, seed=123)
    again = bootstrap_intervals(x, names, replicates=150, seed=123)
    other = bootstrap_intervals(x, names, replicates=150, seed=124)
    # Same function, same input: identical bits (dataclass equality compares every float).
    assert dataclasses.asdict(first) == dataclasses.asdict(again)
    assert first.variables != other.variables


def test_singular_replicates_are_counted_not_fatal(rng: np.random.Generator) -> None:
    # A category present in 2 of 40 rows is missing from about (38/40)^40 = 13% of resamples.
    x = rng.standard_normal((40, 3))
    rare = np.zeros(40)
    rare[[5, 17]] = 1.0
    x = np.column_stack([x, rare])
    result = bootstrap_intervals(x, ["a", "b", "c", "rare"], replicates=400, seed=1)
    assert 20 < result.singular_replicates < 100
    assert result.usable_replicates + result.singular_replicates == 400
    assert any("singular resampled design" in note for note in result.notes)
    assert all(v.vif_interval is not None for v in result.variables)


def test_aliased_predictors_stay_aliased(rng: np.random.Generator) -> None:
    z = rng.standard_normal((60, 3))
    x = np.column_stack([z[:, 0], z[:, 1], z[:, 0] + z[:, 1], z[:, 2]])
    result = bootstrap_intervals(x, ["a", "b", "ab", "c"], replicates=100, seed=0)
    a, b, ab, c = result.variables
    for v in (a, b, ab):
        assert (v.vif, v.vif_interval, v.share_above, v.aliased) == (None, None, 1.0, True)
    assert c.vif_interval is not None and not c.aliased
    assert result.singular_replicates == 0
    # Exactly one of the three goes in every replicate to resolve the relation (which one
    # follows the null vector's rounding); c, with VIF near 1, always stays.
    shares = {v.name: v.share_dropped for v in (a, b, ab, c)}
    assert shares["a"] + shares["b"] + shares["ab"] == pytest.approx(1.0)
    assert shares["c"] == 0.0
    (gone,) = {"a", "b", "ab"} - set(result.kept)
    assert result.share_same_kept == shares[gone]
    assert shares[gone] > 0.5


def test_bootstrap_stops_between_blocks(monkeypatch, rng: np.random.Generator) -> None:
    monkeypatch.setattr(unc, "_BLOCK_REPLICATES", 10)
    x = design(rng, 50)
    calls = []

    def stop() -> bool:
        calls.append(1)
        return len(calls) > 4

    with stop_when(stop), pytest.raises(Interrupted):
        bootstrap_intervals(x, list("abcd"), threshold=50.0, replicates=1000, seed=0)
    assert len(calls) == 5


# --------------------------------------------------------------------------------------------
# Bad input: the wording is pinned here.

X4 = np.random.default_rng(0).standard_normal((30, 4))

TABLE4 = {name: X4[:, j] for j, name in enumerate("abcd")}

# The bounds of level, replicates, seed and threshold are the contract's
# (knotwork_contract.UncertaintyOptions): msgspec's own sentences, the same a request gets.
ERRORS = [
    (
        lambda: normal_intervals([2.0], 30, 3, level=1.0),
        OptionError,
        "/uncertainty/level",
        "Expected `float` < 1.0",
    ),
    (
        lambda: normal_intervals([2.0], 30, 3, level=0),
        OptionError,
        "/uncertainty/level",
        "Expected `float` > 0.0",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), level="high"),
        OptionError,
        "/uncertainty/level",
        "Expected `float`, got `str`",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), replicates=99),
        OptionError,
        "/uncertainty/replicates",
        f"Expected `int` >= {REPLICATES_MIN}",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), replicates=10_001),
        OptionError,
        "/uncertainty/replicates",
        f"Expected `int` <= {REPLICATES_MAX}",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), replicates=500.0),
        OptionError,
        "/uncertainty/replicates",
        "Expected `int`, got `float`",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), replicates=True),
        OptionError,
        "/uncertainty/replicates",
        "Expected `int`, got `bool`",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), seed=-1),
        OptionError,
        "/uncertainty/seed",
        "Expected `int` >= 0",
    ),
    (
        lambda: assess(from_table(TABLE4), Options(uncertainty=UncertaintyOptions(method="x"))),
        OptionError,
        "/uncertainty/method",
        "Invalid enum value 'x'",
    ),
    (
        lambda: assess(
            from_correlation(["a", "b"], [[1.0, 0.5], [0.5, 1.0]], 30),
            Options(uncertainty=UncertaintyOptions(method="bootstrap")),
        ),
        OptionError,
        "/uncertainty/method",
        "the bootstrap resamples rows, and a correlation input has none; send the rows, or "
        "use method 'normal'",
    ),
    (
        lambda: assess(
            from_moments(["a", "b"], 30, [0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]]),
            Options(uncertainty=UncertaintyOptions(method="bootstrap")),
        ),
        OptionError,
        "/uncertainty/method",
        "the bootstrap resamples rows, and a moments input has none",
    ),
    (
        lambda: assess(
            from_table(TABLE4), Options(uncertainty=UncertaintyOptions(method="bootstrap"))
        ),
        OptionError,
        "/uncertainty/method",
        "the bootstrap needs the design's rows (design_from_table), not only its summary",
    ),
    (
        lambda: assess(
            *design_from_table(
                {**TABLE4, "a": np.where(np.arange(30) == 3, np.nan, X4[:, 0])}, missing="pairwise"
            )[:1],
            Options(uncertainty=UncertaintyOptions(method="bootstrap")),
        ),
        OptionError,
        "/uncertainty/method",
        "the bootstrap resamples complete rows, and pairwise deletion keeps none; use missing "
        "'drop_rows', or method 'normal'",
    ),
    (
        lambda: assess(
            from_table(TABLE4), Options(intercept=False, uncertainty=UncertaintyOptions())
        ),
        OptionError,
        "/uncertainty",
        "intervals are for centred VIFs (a model with an intercept)",
    ),
    (
        lambda: normal_intervals([2.0], 30, 3, threshold=1.0),
        OptionError,
        "/threshold",
        "Expected `float` > 1.0",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), protect=["e"]),
        OptionError,
        "/protect/0",
        "'e' is not a predictor or term of the input",
    ),
    (
        lambda: normal_intervals([2.0, 0.5], 30, 3),
        InputError,
        "/vifs/1",
        "a VIF is a number >= 1 (or null when aliased); got 0.5",
    ),
    (
        lambda: normal_intervals([2.0], 3, 3),
        TooFewDataError,
        "/n",
        "n = 3 observations for 3 predictors; the distribution of R^2 needs more "
        "observations than predictors",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abc")),
        InputError,
        "/columns",
        "the design must be an n x p array with one column per name (3); got shape (30, 4)",
    ),
    (
        lambda: bootstrap_intervals(np.where(np.eye(30, 4) > 0, np.nan, X4), list("abcd")),
        InputError,
        "/columns/a",
        "values must be finite; row 0 is not (the bootstrap needs complete rows)",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), weights=-np.ones(30)),
        InputError,
        "/weights",
        "weights must be finite and non-negative; row 0 is not",
    ),
    (
        lambda: bootstrap_intervals(X4, list("abcd"), terms={"t": ["a", "z"]}),
        InputError,
        "/terms/t/1",
        "term 't' names unknown column 'z'",
    ),
    (
        lambda: bootstrap_intervals(np.column_stack([X4, np.ones(30)]), list("abcde")),
        InputError,
        "/columns/e",
        "'e' is constant, so it carries no information; drop it",
    ),
    (
        lambda: bootstrap_intervals(X4[:4], list("abcd")),
        TooFewDataError,
        "/columns",
        "4 rows for 4 predictors; collinearity diagnostics need more rows than predictors",
    ),
]


@pytest.mark.parametrize(("build", "kind", "pointer", "fragment"), ERRORS)
def test_bad_input_names_the_field(build, kind, pointer, fragment) -> None:
    with pytest.raises(kind) as info:
        build()
    pointers = [p.pointer for p in info.value.problems]
    reasons = " ".join(p.reason for p in info.value.problems)
    assert pointer in pointers
    assert fragment in reasons
