"""Rows, correlation and moments give the same answer; partial moments merge exactly."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from knotwork.core import (
    InputError,
    Options,
    TooFewDataError,
    assess,
    from_correlation,
    from_frame,
    from_moments,
    from_table,
    merge_moments,
)

CORE = Options(sections=["variables", "tests", "dependencies"])


def _vifs(summary) -> np.ndarray:
    return np.array([v.vif for v in assess(summary, CORE).variables])


def test_rows_correlation_and_moments_agree_on_longley(longley: pd.DataFrame) -> None:
    # Longley (statsmodels.datasets.longley): the three ways in must agree to 1e-9.
    exog = longley.drop(columns="TOTEMP")
    rows = from_frame(longley, response="TOTEMP")
    corr = from_correlation(
        list(exog.columns),
        exog.corr().to_numpy(),  # pandas' Pearson correlation, an outside computation
        len(exog),
        response=("TOTEMP", exog.corrwith(longley["TOTEMP"]).to_numpy()),
    )
    mom = from_moments(
        list(longley.columns),
        len(longley),
        longley.mean().to_numpy(),
        longley.cov().to_numpy(),  # pandas' sample covariance (denominator n - 1)
        response="TOTEMP",
    )
    base = _vifs(rows)
    assert_allclose(_vifs(corr), base, rtol=1e-9)
    assert_allclose(_vifs(mom), base, rtol=1e-9)
    assert_allclose(rows.r_xy, corr.r_xy, rtol=1e-12)
    a, b = assess(rows, CORE).tests, assess(mom, CORE).tests
    assert_allclose(a.farrar_glauber.chi_square, b.farrar_glauber.chi_square, rtol=1e-9)


def test_merged_parts_equal_the_whole(longley: pd.DataFrame) -> None:
    whole = from_frame(longley)
    parts = [longley.iloc[:5], longley.iloc[5:6], longley.iloc[6:11], longley.iloc[11:]]
    summaries = []
    for part in parts:
        x = part.to_numpy()
        centred = x - x.mean(axis=0)
        cov = centred.T @ centred / max(len(x) - 1, 1)  # a one-row part has zero covariance
        summaries.append((len(x), x.mean(axis=0), cov))
    merged = merge_moments(summaries, list(longley.columns))
    # Exact: n counts rows, a whole number, exact in floating point in any order.
    assert merged.n == whole.n
    assert_allclose(merged.means, whole.means, rtol=1e-14)
    assert_allclose(merged.comoments, whole.comoments, rtol=1e-11)
    assert_allclose(_vifs(merged), _vifs(whole), rtol=1e-9)
    # Summary.merge gives the same, in any grouping.
    halves = from_frame(longley.iloc[:8]).merge(from_frame(longley.iloc[8:]))
    assert_allclose(_vifs(halves), _vifs(whole), rtol=1e-9)


def test_merge_is_stable_when_means_dwarf_spreads(longley: pd.DataFrame) -> None:
    # Longley shifted by 1e6: raw sums of squares would lose every digit of YEAR's spread.
    shifted = longley + 1e6
    whole = _vifs(from_frame(longley))
    merged = from_frame(shifted.iloc[:7]).merge(from_frame(shifted.iloc[7:]))
    assert_allclose(_vifs(merged), whole, rtol=1e-7)
    assert_allclose(_vifs(from_frame(shifted)), whole, rtol=1e-7)


def test_integer_weights_equal_repeated_rows(rng: np.random.Generator) -> None:
    x = rng.normal(size=(40, 4))
    x[:, 3] += x[:, 0] + 0.5 * x[:, 1]
    w = rng.integers(1, 4, size=40).astype(float)
    cols = {f"x{j}": x[:, j] for j in range(4)}
    weighted = from_table({**cols, "w": w}, weights="w")
    repeated = from_table({k: np.repeat(v, w.astype(int)) for k, v in cols.items()})
    # Exact: n sums whole-number weights, exact in floating point in any order.
    assert weighted.n == repeated.n == w.sum()
    assert_allclose(_vifs(weighted), _vifs(repeated), rtol=1e-12)


def test_weighted_vif_equals_statsmodels_wls(rng: np.random.Generator) -> None:
    # Source: statsmodels WLS of x_j on the others with a constant; weighted R^2.
    import statsmodels.api as sm

    x = rng.normal(size=(60, 3))
    x[:, 2] += 0.8 * x[:, 0]
    w = rng.uniform(0.2, 3.0, size=60)
    s = from_table({"a": x[:, 0], "b": x[:, 1], "c": x[:, 2], "w": w}, weights="w")
    expected = []
    for j in range(3):
        others = sm.add_constant(np.delete(x, j, axis=1))
        r2 = sm.WLS(x[:, j], others, weights=w).fit().rsquared
        expected.append(1 / (1 - r2))
    assert_allclose(_vifs(s), expected, rtol=1e-10)


def test_pairwise_correlations_equal_pandas(rng: np.random.Generator) -> None:
    # Source: pandas DataFrame.corr(), which uses pairwise-complete observations.
    x = rng.normal(size=(200, 4))
    x[:, 1] += x[:, 0]
    x[rng.random(size=x.shape) < 0.1] = np.nan
    frame = pd.DataFrame(x, columns=list("abcd"))
    s = from_frame(frame, missing="pairwise")
    assert_allclose(s.R, frame.corr().to_numpy(), rtol=1e-12)
    present = frame.notna().astype(int)
    assert s.n == (present.T @ present).to_numpy().min()
    assert not s.has_moments
    assert "pairwise_deletion" in {n.code for n in s.notes}


def test_pairwise_needs_more_joint_rows_than_predictors() -> None:
    # 'a' and 'b' share one row: the pair is named, with its count of joint rows.
    nan = np.nan
    columns = {
        "a": [1.0, 2.0, 3.0, nan, nan, nan, 1.5],
        "b": [nan, nan, nan, 1.0, 2.0, 3.0, 2.5],
        "c": [1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0],
    }
    with pytest.raises(TooFewDataError) as caught:
        from_table(columns, missing="pairwise")
    assert caught.value.problems[0].pointer == "/columns/b"
    assert "only 1 rows have both 'a' and 'b'" in caught.value.problems[0].reason


def test_drop_rows_equals_complete_cases(rng: np.random.Generator) -> None:
    x = rng.normal(size=(100, 3))
    x[3, 0] = x[10, 2] = np.nan
    frame = pd.DataFrame(x, columns=list("abc"))
    dropped = from_frame(frame, missing="drop_rows")
    complete = from_frame(frame.dropna())
    assert dropped.rows == 98
    assert_allclose(_vifs(dropped), _vifs(complete), rtol=1e-13)
    assert "rows_dropped" in {n.code for n in dropped.notes}


def test_table_and_frame_agree_and_categorical_is_expanded(rng: np.random.Generator) -> None:
    n = 90
    region = rng.choice(["north", "south", "west"], size=n)
    x = rng.normal(size=n) + (region == "south")
    frame = pd.DataFrame({"x": x, "z": rng.normal(size=n), "region": region})
    s = from_frame(frame)
    assert s.names == ("x", "z", "region[south]", "region[west]")
    assert [(t.name, t.columns) for t in s.terms] == [("region", ("region[south]", "region[west]"))]
    t = from_table({"x": x, "z": frame["z"].to_numpy()}, categorical={"region": list(region)})
    assert_allclose(t.correlation, s.correlation, rtol=1e-14)


def test_response_is_excluded_from_predictors(longley: pd.DataFrame) -> None:
    s = from_frame(longley, response="TOTEMP")
    assert "TOTEMP" not in s.names
    assert s.response == "TOTEMP"
    assert s.p == 6
    assert_allclose(s.response_mean, longley["TOTEMP"].mean(), rtol=1e-14)
    assert_allclose(s.response_sd, longley["TOTEMP"].std(), rtol=1e-12)


@pytest.mark.parametrize("block", [1, 7, 1 << 20])
def test_block_size_does_not_change_the_moments(monkeypatch, rng, block) -> None:
    import knotwork_contract._moments as moments_module

    x = rng.normal(size=(50, 3)) * [1, 1e3, 1e-3] + [0, 1e6, 5]
    ref = from_table({f"c{j}": x[:, j] for j in range(3)})
    monkeypatch.setattr(moments_module, "_BLOCK_BYTES", block * 8 * 3)
    got = from_table({f"c{j}": x[:, j] for j in range(3)})
    assert_allclose(got.comoments, ref.comoments, rtol=1e-10)
    assert_allclose(got.means, ref.means, rtol=1e-13, atol=1e-15)


def _small_blocks(monkeypatch: pytest.MonkeyPatch, rows: int, columns: int) -> None:
    """Row blocks of ``rows`` rows for ``columns`` summarized columns (plus the ones column)."""
    import knotwork_contract._moments as moments_module

    monkeypatch.setattr(moments_module, "_BLOCK_BYTES", rows * 8 * (columns + 1))


def test_one_pass_over_sorted_rows_keeps_its_digits(monkeypatch, rng) -> None:
    # Rows sorted by a column whose mean is a million times its spread: the worst order for
    # the one-pass summary, whose shift is the mean of the first row block (here 50 of 1000
    # rows). Reference: the exactly rounded mean (math.fsum) subtracted first, then numpy's
    # cross-products of the centred values; and the checked path (weights of one).
    import math

    _small_blocks(monkeypatch, 50, 3)
    mix = np.array([[1.0, 0.5, 0.0], [0.0, 1.0, 0.3], [0.0, 0.0, 1.0]])
    x = rng.normal(size=(1000, 3)) @ mix + [1e6, -3e4, 2.5]
    x = x[np.argsort(x[:, 0])]
    cols = {f"c{j}": x[:, j] for j in range(3)}
    got = from_table(cols)
    mean = np.array([math.fsum(x[:, j]) / len(x) for j in range(3)])
    centred = x - mean
    assert_allclose(got.means, mean, rtol=1e-15)
    assert_allclose(got.comoments, centred.T @ centred, rtol=1e-12)
    checked = from_table({**cols, "w": np.ones(len(x))}, weights="w")
    assert_allclose(got.comoments, checked.comoments, rtol=1e-12)
    assert_allclose(_vifs(got), _vifs(checked), rtol=1e-12)


@pytest.mark.parametrize("row", [3, 777])  # in the first row block, and in a later one
def test_a_missing_value_anywhere_gives_the_checked_answer(monkeypatch, rng, row) -> None:
    from knotwork.core import MissingValuesError

    _small_blocks(monkeypatch, 50, 3)
    x = rng.normal(size=(1000, 3))
    x[row, 1] = np.nan
    cols = {f"c{j}": x[:, j] for j in range(3)}
    with pytest.raises(MissingValuesError) as info:
        from_table(cols)
    assert [(p.pointer, p.reason) for p in info.value.problems] == [
        ("/columns/c1", "1 of 1000 values missing")
    ]
    dropped = from_table(cols, missing="drop_rows")
    complete = from_table({k: np.delete(v, row) for k, v in cols.items()})
    assert dropped.rows == 999
    assert_allclose(dropped.comoments, complete.comoments, rtol=1e-12)


def test_an_infinite_value_in_a_later_block_is_named(monkeypatch, rng) -> None:
    from knotwork.core import InputError

    _small_blocks(monkeypatch, 50, 3)
    x = rng.normal(size=(1000, 3))
    x[900, 2] = -np.inf
    with pytest.raises(InputError) as info:
        from_table({f"c{j}": x[:, j] for j in range(3)})
    assert info.value.problems[0].pointer == "/columns/c2"
    assert "row 900 is infinite" in info.value.problems[0].reason


def test_variables_alone_skip_the_spectrum_and_answer_the_same(longley: pd.DataFrame) -> None:
    # A request for VIFs alone skips the eigen-decomposition when a bound proves the matrix
    # regular; its VIFs come from the same inverse_spd call on the same matrix, so they are
    # the very bits of the full assessment's (identical computation, no tolerance needed).
    rows = from_frame(longley.drop(columns="TOTEMP"))
    full = assess(rows)
    alone = assess(rows, Options(sections=["variables"]))
    assert [v.vif for v in alone.variables] == [v.vif for v in full.variables]
    assert alone.dependencies == ()


def test_clearly_regular_inverse_refuses_what_it_cannot_prove() -> None:
    # Pure linear algebra, checked against numpy: lambda_min >= 1 / trace(M^-1).
    from knotwork.core._dependencies import clearly_regular_inverse

    regular = np.array([[1.0, 0.5], [0.5, 1.0]])
    inverse = clearly_regular_inverse(regular)
    assert inverse is not None
    assert_allclose(inverse, np.linalg.inv(regular), rtol=1e-14)
    eps = 1e-10  # correlation 1 - eps: VIF about 5e9, smallest eigenvalue 1e-10
    near = np.array([[1.0, 1.0 - eps], [1.0 - eps, 1.0]])
    assert clearly_regular_inverse(near) is None
    singular = np.ones((2, 2))
    assert clearly_regular_inverse(singular) is None


def test_variables_alone_still_warn_of_near_singularity() -> None:
    # The bound fails for a near-singular matrix, so the spectrum is computed and the warning
    # is the same with or without the other sections.
    eps = 1e-9  # smallest eigenvalue 1e-9: near-singular, above the exact-dependency cut
    c = 0.0123456789  # a full-precision entry, so the matrix does not look rounded
    r = np.array([[1.0, 1.0 - eps, 0.0], [1.0 - eps, 1.0, 0.0], [0.0, 0.0, 1.0]])
    r[0, 2] = r[2, 0] = c
    r[1, 2] = r[2, 1] = c
    summary = from_correlation(["a", "b", "c"], r, 500)
    codes = {w.code for w in assess(summary, Options(sections=["variables"])).warnings}
    assert "near_singular" in codes
    assert codes == {w.code for w in assess(summary).warnings} & codes


def test_summary_depth_computes_what_the_summary_keeps(longley: pd.DataFrame) -> None:
    # Options(detail="summary") skips the p x p tables instead of building and dropping them;
    # every value a summary keeps comes from the same computation, so the encoded answers are
    # the same bytes (identical code path for the kept values, no tolerance needed).
    import msgspec

    from knotwork.core import summary_detail

    rows = from_frame(longley, response="TOTEMP")
    dropped = summary_detail(assess(rows))
    skipped = summary_detail(assess(rows, Options(detail="summary")))
    assert msgspec.json.encode(skipped) == msgspec.json.encode(dropped)
    assert skipped.removal is not None and skipped.removal.alternative is None


def test_values_near_the_overflow_edge_give_the_vifs_of_the_rescaled_data(
    rng: np.random.Generator,
) -> None:
    # VIFs do not depend on the units (a property of R^2). Columns scaled to about 1e150 and
    # 1e-140 square to within reach of double precision's limits (1.8e308, 2.2e-308); the VIFs
    # must match those of the same data in ordinary units, to 1e-10 (a few roundings of the
    # scaled sums, far below the statistical error). The unscaled VIFs are themselves checked
    # against statsmodels in test_weighted_vif_equals_statsmodels_wls's way.
    x = rng.normal(size=(80, 3))
    x[:, 2] += 0.9 * x[:, 0]
    plain = _vifs(from_table({"a": x[:, 0], "b": x[:, 1], "c": x[:, 2]}))
    scaled = {"a": x[:, 0] * 1e150, "b": x[:, 1] * 1e-140, "c": x[:, 2] * 1e150 + 3e150}
    assert_allclose(_vifs(from_table(scaled)), plain, rtol=1e-10)
    holes = {k: v.copy() for k, v in scaled.items()}
    holes["b"][5] = np.nan
    pair = from_table(holes, missing="pairwise")
    assert np.isfinite(_vifs(pair)).all()


def test_values_too_large_to_square_are_refused_by_name() -> None:
    with pytest.raises(InputError) as caught:
        from_table({"a": [1.0, 2.0, 3.0, 5.0], "b": [1e200, 2.0, 1.0, 4.0], "c": [1, 2, 2, 1]})
    assert [p.pointer for p in caught.value.problems] == ["/columns/b"]
    assert "overflow" in caught.value.problems[0].reason
    # Deviations whose squares are subnormal numbers lose their digits; a constant column
    # keeps its own message.
    tiny = {"a": [1.0, 2.0, 3.0, 5.0], "b": [1e-160, 2e-160, 0.0, 4e-160], "c": [1, 2, 2, 1]}
    with pytest.raises(InputError) as caught:
        from_table(tiny)
    assert [p.pointer for p in caught.value.problems] == ["/columns/b"]
    assert "underflow" in caught.value.problems[0].reason
    with pytest.raises(InputError, match="constant"):
        from_table({**tiny, "b": [1e-160] * 4}).check()
    with pytest.raises(InputError) as caught:
        from_table({**tiny, "b": [1e-160, None, 0.0, 4e-160]}, missing="pairwise")
    assert [p.pointer for p in caught.value.problems] == ["/columns/b"]
