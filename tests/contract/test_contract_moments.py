"""The contract's moments kernel against outside references: numpy's weighted covariance, exact
rational arithmetic on Longley (statsmodels.datasets), pandas' pairwise correlation and its
dummy coding. The service and the client both summarize rows with these functions."""

from __future__ import annotations

import itertools
from fractions import Fraction

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

import knotwork_contract as contract
import knotwork_contract._moments as moments_module


def _columns(x: np.ndarray) -> list[np.ndarray]:
    return [np.ascontiguousarray(x[:, j]) for j in range(x.shape[1])]


def _exact(rows: np.ndarray) -> tuple[list[Fraction], list[list[Fraction]]]:
    """Means and centred co-moments in exact rational arithmetic (the floats taken as exact)."""
    data = [[Fraction(float(v)) for v in row] for row in rows]
    n, q = len(data), len(data[0])
    mean = [sum(r[j] for r in data) / n for j in range(q)]
    com = [
        [sum((r[i] - mean[i]) * (r[j] - mean[j]) for r in data) for j in range(q)] for i in range(q)
    ]
    return mean, com


@pytest.mark.parametrize("optimistic", [True, False])
def test_longley_shifted_by_a_million_keeps_its_digits(longley, optimistic) -> None:
    # Longley (statsmodels.datasets.longley) plus 1e6: means a million times some spreads.
    # Reference: exact rational arithmetic. Naive raw sums lose every digit here; the shifted,
    # corrected two-pass kernel keeps about 12 (rounding of the shifted products).
    x = longley.to_numpy(dtype=float) + 1e6
    mean, com = _exact(x)
    got = contract.comoments(_columns(x), optimistic=optimistic)
    assert got.n == len(x)
    assert_allclose(got.mean, [float(m) for m in mean], rtol=1e-15)
    exact = np.array([[float(v) for v in row] for row in com])
    scale = np.sqrt(np.outer(np.diag(exact), np.diag(exact)))
    assert np.max(np.abs(got.comoments - exact) / scale) < 1e-11


def test_weights_equal_numpys_frequency_weighted_covariance(rng) -> None:
    # numpy.cov with fweights (denominator sum(w) - 1) times sum(w) - 1 is the co-moment
    # matrix; a different summation order, so agreement to rounding (1e-12 relative).
    x = rng.normal(size=(500, 4)) * [1.0, 1e3, 1e-3, 5.0] + [0.0, 1e5, 3.0, -7.0]
    w = rng.integers(0, 4, size=500).astype(float)
    got = contract.comoments(_columns(x), w)
    total = w.sum()
    assert got.n == total
    # Column 0's mean is near 0: compared on the scale of its spread (sd 1).
    assert_allclose(got.mean, np.average(x, axis=0, weights=w), rtol=1e-13, atol=1e-14)
    expected = np.cov(x, rowvar=False, fweights=w.astype(int)) * (total - 1)
    assert_allclose(got.comoments, expected, rtol=1e-12, atol=1e-12 * np.abs(expected).max())


def test_keep_leaves_rows_out(rng) -> None:
    x = rng.normal(size=(300, 3)) + 10.0
    keep = rng.random(300) > 0.3
    got = contract.comoments(_columns(x), keep=keep)
    # Same kernel on the kept rows given directly: the same arithmetic, the same bits.
    direct = contract.comoments(_columns(x[keep]))
    assert got.n == keep.sum()
    assert np.array_equal(got.comoments, direct.comoments)
    centred = x[keep] - x[keep].mean(axis=0)
    assert_allclose(got.comoments, centred.T @ centred, rtol=1e-12)


@pytest.mark.parametrize("bad", [np.nan, np.inf, -np.inf])
def test_optimistic_reports_a_value_that_is_not_finite(rng, bad) -> None:
    x = rng.normal(size=(100, 3))
    x[77, 1] = bad
    calls = []
    with pytest.raises(contract.NotFinite):
        contract.comoments(
            _columns(x),
            optimistic=True,
            block_bytes=10 * 8 * 4,
            between_blocks=lambda: calls.append(1),
        )
    assert len(calls) == 8  # stopped at the end of the block holding row 77 (rows 70-79)


def test_a_small_block_gives_the_same_moments_and_calls_back_per_block(rng) -> None:
    x = rng.normal(size=(1000, 3)) * [1.0, 1e3, 1e-3] + [0.0, 1e6, 5.0]
    x = x[np.argsort(x[:, 1])]  # sorted: the worst order for a first-block shift
    calls = []
    small = contract.comoments(
        _columns(x), optimistic=True, block_bytes=50 * 8 * 4, between_blocks=lambda: calls.append(1)
    )
    assert len(calls) == 20
    whole = contract.comoments(_columns(x))
    # The shift differs (first block's mean against the full mean): rounding only, on the
    # scale of each column's spread (column 0's mean is near 0 against an sd of 1).
    assert_allclose(small.mean, whole.mean, rtol=1e-15, atol=1e-14)
    assert_allclose(small.comoments, whole.comoments, rtol=1e-11, atol=1e-12)


def test_merging_parts_equals_the_whole(rng) -> None:
    # The pairwise update is exact in exact arithmetic; in floats the parts' and the whole's
    # rounding differ (1e-12 relative on well-scaled data).
    x = rng.normal(size=(700, 4)) @ rng.normal(size=(4, 4)) + [1e4, 0.0, -3.0, 8.0]
    w = rng.gamma(2.0, size=700)
    cuts = [0, 1, 90, 90, 333, 600, 700]  # an empty part and a one-row part among them
    parts = [
        contract.comoments(_columns(x[a:b]), w[a:b]) if b > a else contract.Moments.empty(4)
        for a, b in itertools.pairwise(cuts)
    ]
    whole = contract.comoments(_columns(x), w)
    for merged in (contract.merge_all(parts), contract.merge_all(parts[::-1])):
        assert merged.n == pytest.approx(whole.n, rel=1e-14)
        assert_allclose(merged.mean, whole.mean, rtol=1e-13, atol=1e-13)  # sds near 1
        assert_allclose(merged.comoments, whole.comoments, rtol=1e-11, atol=1e-9)
    assert contract.Moments.empty(4).merge(whole).n == whole.n


def test_correlation_from_comoments_equals_numpy_and_zeroes_a_constant_column(rng) -> None:
    x = rng.normal(size=(200, 3))
    x[:, 2] = 4.0
    got = contract.correlation_from_comoments(contract.comoments(_columns(x)).comoments)
    # numpy.corrcoef on the two varying columns; rounding only.
    assert_allclose(got[:2, :2], np.corrcoef(x[:, :2], rowvar=False), rtol=1e-13)
    assert np.array_equal(got[2], [0.0, 0.0, 1.0])


def test_pairwise_correlations_equal_pandas(rng) -> None:
    # pandas' DataFrame.corr() uses pairwise-complete observations (its documented default).
    # It centres each pair by that pair's means, we each column by its own mean: with a mean
    # 1e4 times the spread either rounds at about (mean / sd) * eps, so 1e-10 is rounding.
    x = rng.normal(size=(400, 4)) @ rng.normal(size=(4, 4)) + [0.0, 1e4, 0.0, 5.0]
    x[rng.random(x.shape) < 0.15] = np.nan
    got = contract.pairwise_comoments(x)
    r = got.correlation()
    np.fill_diagonal(r, 1.0)
    assert_allclose(r, pd.DataFrame(x).corr().to_numpy(), rtol=1e-10, atol=1e-11)
    present = ~np.isnan(x)
    assert np.array_equal(got.n, present.T.astype(float) @ present.astype(float))
    assert not got.complete


def test_weighted_pairwise_moments_are_each_pairs_complete_rows(rng) -> None:
    # For each pair, numpy on the rows where both are observed (fweights): rounding only.
    x = rng.normal(size=(300, 3)) + np.array([2.0, -1e3, 0.0])
    x[rng.random(x.shape) < 0.2] = np.nan
    w = rng.integers(0, 3, size=300).astype(float)
    got = contract.pairwise_comoments(x, w)
    for i in range(3):
        for j in range(3):
            both = ~np.isnan(x[:, i]) & ~np.isnan(x[:, j])
            wi = w[both]
            assert got.n[i, j] == wi.sum()
            expected = np.average(x[both, i], weights=wi)
            assert got.mean[i, j] == pytest.approx(expected, rel=1e-13, abs=1e-13)  # sds 1
            cov = np.cov(x[both][:, [i, j]], rowvar=False, fweights=wi.astype(int)) * (wi.sum() - 1)
            assert got.comoments[i, j] == pytest.approx(cov[0, 1], rel=1e-11, abs=1e-10)
            assert got.squares[i, j] == pytest.approx(cov[0, 0], rel=1e-11)


def test_pairwise_blocks_merge_to_the_whole(rng) -> None:
    # Blocks as the client reads them, one of them with a column never observed (its pairs
    # have no rows there and must merge as nothing, without a warning).
    x = rng.normal(size=(240, 3)) + np.array([0.0, 50.0, -2.0])
    x[rng.random(x.shape) < 0.2] = np.nan
    x[100:160, 2] = np.nan
    blocks = [contract.pairwise_comoments(x[a : a + 60]) for a in range(0, 240, 60)]
    merged = contract.merge_all(blocks)
    whole = contract.pairwise_comoments(x)
    assert np.array_equal(merged.n, whole.n)
    assert_allclose(merged.mean, whole.mean, rtol=1e-13, atol=1e-13)  # sds 1
    assert_allclose(merged.comoments, whole.comoments, rtol=1e-11, atol=1e-11)
    assert_allclose(merged.squares, whole.squares, rtol=1e-11)
    assert contract.PairwiseMoments.empty(3).merge(whole).n.sum() == whole.n.sum()


def test_indicator_columns_follow_dummy_coding_with_the_first_sorted_level_left_out() -> None:
    labels = ["shore", None, "hills", "plains", "hills", "lakes", None, "shore"]
    levels = contract.sorted_levels(labels)
    assert levels == ("hills", "lakes", "plains", "shore")
    # pandas.get_dummies(drop_first=True) drops the first of the sorted categories too.
    dummies = pd.get_dummies(pd.Series(labels).dropna(), drop_first=True)
    assert contract.indicator_columns("region", levels) == tuple(
        contract.indicator_name("region", str(c)) for c in dummies.columns
    )
    assert contract.indicator_name("region", "hills") == "region[hills]"


def test_the_default_block_size_is_the_modules(monkeypatch, rng) -> None:
    x = rng.normal(size=(100, 2))
    calls = []
    monkeypatch.setattr(moments_module, "_BLOCK_BYTES", 10 * 8 * 3)
    contract.comoments(_columns(x), between_blocks=lambda: calls.append(1))
    assert len(calls) == 10
