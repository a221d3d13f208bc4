"""options.uncertainty through assess(): every input kind, the rows behind the bootstrap.

Outside sources, named beside each check: scipy.stats.beta (the null distribution of R^2),
numpy (correlation and moments of the same rows). The core-level checks of the intervals
themselves (coverage by simulation, Brent's method, the F limit) are in test_uncertainty.py.
"""

from __future__ import annotations

import math

import msgspec
import numpy as np
import pytest
from numeric import assert_close_answers
from scipy import stats

from knotwork.core import (
    Interrupted,
    KnotworkError,
    Options,
    assess,
    bootstrap_intervals,
    design_from_table,
    from_correlation,
    from_moments,
    from_table,
    normal_intervals,
    stop_when,
    summary_detail,
)
from knotwork_contract import UncertaintyOptions

NORMAL = UncertaintyOptions(method="normal")
NEW_FIELDS = ("vif_interval", "threshold_p_value", "share_above_threshold", "share_dropped")


def garden(n: int = 150, seed: int = 2) -> tuple[dict[str, np.ndarray], dict[str, list[str]]]:
    """Generated beds of a plant nursery: two related soil readings, shade, a bed label."""
    rng = np.random.default_rng(seed)
    clay = rng.standard_normal(n)
    silt = 0.9 * clay + 0.45 * rng.standard_normal(n)
    shade = rng.standard_normal(n)
    water = clay + silt + 0.8 * rng.standard_normal(n)
    beds = [("east", "north", "west")[i % 3] for i in range(n)]
    return {"clay": clay, "silt": silt, "shade": shade, "water": water}, {"bed": beds}


def test_without_the_option_the_answer_is_unchanged_and_the_new_fields_null() -> None:
    columns, labels = garden()
    summary = from_table(columns, categorical=labels)
    plain = assess(summary)
    with_intervals = assess(summary, Options(uncertainty=NORMAL))
    assert plain.uncertainty is None
    assert all(getattr(v, f) is None for v in plain.variables for f in NEW_FIELDS)
    # The same functions on the same summary: every existing field has identical bits.
    strip = {f: None for f in NEW_FIELDS}
    assert [msgspec.structs.replace(v, **strip) for v in with_intervals.variables] == list(
        plain.variables
    )
    assert (
        msgspec.structs.replace(with_intervals, variables=plain.variables, uncertainty=None)
        == plain
    )


def test_normal_intervals_are_the_same_from_rows_correlation_and_moments() -> None:
    columns, _ = garden()
    names = list(columns)
    x = np.column_stack([columns[c] for c in names])
    n = x.shape[0]
    options = Options(uncertainty=UncertaintyOptions(level=0.9), sections=("variables",))
    answers = [
        assess(from_table(columns), options),
        assess(from_correlation(names, np.corrcoef(x, rowvar=False), n), options),
        assess(from_moments(names, n, x.mean(axis=0), np.cov(x, rowvar=False)), options),
    ]
    rows = answers[0]
    assert rows.uncertainty is not None
    assert (rows.uncertainty.n, rows.uncertainty.rank) == (n, 4)
    # The same rows summarized three ways (the moments kernel, np.corrcoef, np.cov); rounding
    # of R amplified through the root search stays below 1e-9.
    for other in answers[1:]:
        assert_close_answers(other.variables, rows.variables, rtol=1e-9, atol=1e-12)
    # The answer is normal_intervals on the assessment's VIFs (same function, same input).
    direct = normal_intervals([v.vif for v in rows.variables], n, 4, level=0.9)
    assert [v.vif_interval for v in rows.variables] == [d.vif_interval for d in direct.variables]


def test_normal_interval_at_the_null_agrees_with_the_central_beta() -> None:
    # Source: scipy.stats.beta(k/2, (n-1-k)/2), the distribution of R^2 when rho = 0. The
    # lower bound is VIF 1 exactly when the observed R^2 is below the beta's 1 - alpha/2
    # quantile, and the p-value at a threshold is the mixture's tail; with the threshold's
    # rho^2 far above the observed R^2 it is close to 1.
    n, k = 40, 3
    x = stats.beta(k / 2, (n - 1 - k) / 2).ppf(0.5)  # a median R^2 under the null
    result = normal_intervals([1.0 / (1.0 - x)], n, k + 1)
    (v,) = result.variables
    assert v.vif_interval is not None and v.vif_interval[0] == 1.0
    assert v.p_value > 0.99


def test_aliased_predictors_and_the_rank() -> None:
    columns, _ = garden()
    columns["clay_and_silt"] = columns["clay"] + columns["silt"]
    a = assess(from_table(columns), Options(uncertainty=NORMAL))
    assert a.uncertainty is not None and a.uncertainty.rank == 4
    by_name = {v.name: v for v in a.variables}
    for name in ("clay", "silt", "clay_and_silt"):
        v = by_name[name]
        assert (v.vif_interval, v.threshold_p_value) == (None, 0.0)
    low, high = by_name["shade"].vif_interval
    assert low <= by_name["shade"].vif <= high


def test_bootstrap_through_assess_is_bootstrap_intervals_on_the_rows() -> None:
    columns, labels = garden()
    summary, rows = design_from_table(columns, categorical=labels)
    assert rows is not None and rows.x.shape == (150, summary.p)
    unc = UncertaintyOptions(method="bootstrap", replicates=150, seed=9, level=0.9)
    a = assess(summary, Options(uncertainty=unc, protect=("shade",)), rows)
    direct = bootstrap_intervals(
        rows.x,
        rows.names,
        terms={t.name: t.columns for t in summary.terms},
        protect=("shade",),
        replicates=150,
        seed=9,
        level=0.9,
    )
    # The same function on the same rows: identical bits.
    assert [v.vif_interval for v in a.variables] == [d.vif_interval for d in direct.variables]
    assert [v.share_dropped for v in a.variables] == [d.share_dropped for d in direct.variables]
    assert [t.gvif_interval for t in a.terms] == [d.gvif_interval for d in direct.terms]
    assert a.uncertainty is not None
    assert a.uncertainty.kept == direct.kept and a.uncertainty.share_same_kept == (
        direct.share_same_kept
    )
    # The full sample's kept set is the assessment's own removal proposal.
    assert a.removal is not None and list(a.uncertainty.kept) == list(a.removal.kept)
    # Summary detail keeps every new field and the record.
    slim = summary_detail(a)
    assert slim.variables == a.variables and slim.terms == a.terms
    assert slim.uncertainty == a.uncertainty


def test_bootstrap_rows_follow_the_missing_value_policy_and_weights() -> None:
    columns, _ = garden(80)
    columns["silt"] = columns["silt"].copy()
    columns["silt"][[3, 40]] = np.nan
    columns["visits"] = np.arange(80) % 4 + 1.0
    summary, rows = design_from_table(columns, missing="drop_rows", weights="visits")
    assert rows is not None and rows.weights is not None
    assert rows.x.shape == (78, 4) and summary.n == rows.weights.sum()
    kept = np.ones(80, dtype=bool)
    kept[[3, 40]] = False
    # Copies of the kept values (exact).
    assert np.array_equal(rows.x[:, 1], columns["silt"][kept])
    assert np.array_equal(rows.weights, columns["visits"][kept])
    # Pairwise deletion with missing values keeps no complete design.
    _, none = design_from_table(columns, missing="pairwise")
    assert none is None


def test_same_seed_same_bits_and_a_different_seed_differs() -> None:
    columns, labels = garden()
    summary, rows = design_from_table(columns, categorical=labels)

    def answer(seed: int) -> bytes:
        unc = UncertaintyOptions(method="bootstrap", replicates=100, seed=seed)
        return msgspec.json.encode(assess(summary, Options(uncertainty=unc), rows))

    # The same function on the same input: identical bytes.
    assert answer(5) == answer(5)
    assert answer(5) != answer(6)


def test_the_stop_applies_between_replicates_through_assess() -> None:
    columns, _ = garden(300)
    summary, rows = design_from_table(columns)
    calls = []

    def stop() -> bool:
        calls.append(1)
        return len(calls) > 40

    unc = UncertaintyOptions(method="bootstrap", replicates=2000)
    with stop_when(stop), pytest.raises(Interrupted):
        assess(summary, Options(uncertainty=unc, sections=("variables",)), rows)
    assert len(calls) == 41


def test_p_value_is_in_the_answer_for_a_vif_at_the_threshold() -> None:
    # A sample VIF exactly at the threshold has R^2 = rho^2 at the boundary, so the p-value
    # is P(R^2 >= rho^2 | rho^2); R^2 is biased upwards, so above one half.
    result = normal_intervals([5.0], 100, 3, threshold=5.0)
    assert 0.5 < result.variables[0].p_value < 1.0
    assert math.isfinite(result.variables[0].vif_interval[1])


def test_tiny_tables_give_an_answer_or_a_named_error_never_a_crash() -> None:
    # Found by the contract fuzzer: six rows with a three-level label, where a resampled
    # correlation matrix passed its Cholesky factor and then failed to invert. Such replicates
    # are singular (counted and left out), never an exception.
    columns = {
        "a": np.array([1.0, 2, 3, 4, 5, 6]),
        "b": np.array([2.0, 1, 4, 3, 6, 5.5]),
        "c": np.array([1.0, 3, 2, 5, 4, 7]),
    }
    summary, rows = design_from_table(columns, categorical={"g": list("xyxyxz")})
    unc = UncertaintyOptions(method="bootstrap", replicates=200)
    a = assess(summary, Options(uncertainty=unc), rows)
    assert a.uncertainty is not None
    assert a.uncertainty.usable_replicates + a.uncertainty.singular_replicates == 200
    # Random small tables with rounded values, copies and rare levels.
    for seed in range(30):
        rng = np.random.default_rng(seed)
        n, p = int(rng.integers(3, 14)), int(rng.integers(1, 4))
        cols = {
            f"x{j}": np.round(rng.standard_normal(n), int(rng.integers(0, 3))) for j in range(p)
        }
        labels = {"g": [str(v) for v in rng.choice(list("xyz"), n, p=[0.6, 0.3, 0.1])]}
        for method in ("bootstrap", "normal"):
            try:
                s, r = design_from_table(cols, categorical=labels)
                options = Options(uncertainty=UncertaintyOptions(method=method, replicates=100))
                assess(s, options, r)
            except KnotworkError:
                pass  # a named error (too few rows, a constant label): the answer is a 4xx


def test_a_level_seen_only_in_dropped_rows_is_no_column() -> None:
    # Found by a random search over small tables: the level "z" occurs only in a row that
    # drop_rows leaves out; it was looked up among the kept rows' levels and failed.
    columns = {
        "x0": np.array([1.0, 2, 3, 4, 5, 6, 7, 8]),
        "x1": np.array([1.0, 3, 2, 5, 4, np.nan, 6, 9]),
    }
    labels = {"g": ["a", "a", "b", "b", "a", "z", "b", "a"]}
    summary, rows = design_from_table(columns, categorical=labels, missing="drop_rows")
    assert summary.names == ("x0", "x1", "g[b]") and rows is not None
    kept = [0, 1, 2, 3, 4, 6, 7]
    alone = from_table(
        {k: v[kept] for k, v in columns.items()},
        categorical={"g": [labels["g"][i] for i in kept]},
    )
    # The same rows, with and without the dropped one in the arrays: the kernel's blocks
    # differ, so rounding only (1e-12).
    np.testing.assert_allclose(summary.correlation, alone.correlation, rtol=1e-12, atol=1e-14)
    assert np.array_equal(rows.x[:, 2], np.array([0.0, 0, 1, 1, 0, 1, 0]))


def test_replicates_without_any_weighted_row_are_singular(rng: np.random.Generator) -> None:
    # Six rows of weight 1 among sixty: a replicate draws none of them with probability
    # (54/60)^60 = 0.2%, and few of them often; such replicates are counted as singular
    # (pytest turns a division by zero into an error here).
    x = rng.standard_normal((60, 2))
    w = np.zeros(60)
    w[:6] = 1.0
    result = bootstrap_intervals(x, ["a", "b"], weights=w, replicates=2000, seed=0)
    assert result.singular_replicates > 0
    assert result.usable_replicates + result.singular_replicates == 2000


def test_bootstrap_of_rows_near_the_overflow_edge_matches_ordinary_units(
    rng: np.random.Generator,
) -> None:
    # VIFs do not depend on the units; rows scaled to 1e153 (whose squares come within a
    # factor ~100 of double precision's largest number) must give the intervals of the same rows
    # in ordinary units with the same seed, to 1e-8 (roundings of the scaled sums only).
    x = rng.normal(size=(120, 3))
    x[:, 1] += 0.8 * x[:, 0]
    names = ["a", "b", "c"]
    plain = bootstrap_intervals(x, names, replicates=200, seed=4)
    scaled = bootstrap_intervals(x * 1e153, names, replicates=200, seed=4)
    for u, v in zip(plain.variables, scaled.variables, strict=True):
        assert u.vif_interval is not None and v.vif_interval is not None
        np.testing.assert_allclose(v.vif_interval, u.vif_interval, rtol=1e-8)
