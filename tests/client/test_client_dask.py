"""summarize_dask on a distributed cluster in this process equals the pandas summary."""

from __future__ import annotations

import numpy as np
import pytest
from kc_support import bakery_frame
from numpy.testing import assert_allclose

from knotwork_client import MissingValuesError, summarize, summarize_dask

dd = pytest.importorskip("dask.dataframe")
distributed = pytest.importorskip("distributed")


@pytest.fixture(scope="module")
def dask_client():
    # processes=False keeps workers in this process (in-process transport, no sockets); the
    # dashboard stays off, so nothing listens on any port.
    with (
        distributed.LocalCluster(
            n_workers=1, threads_per_worker=2, processes=False, dashboard_address=None
        ) as cluster,
        distributed.Client(cluster) as client,
    ):
        yield client


def test_equals_pandas_on_a_cluster(dask_client):
    frame = bakery_frame(rows=2000, seed=11)
    # Partitions of uneven size; several miss some region levels, which the merge must add.
    ddf = dd.from_pandas(frame.sort_values("oven_hours"), npartitions=13)
    got = summarize_dask(ddf, response="loaves", weights="weeks", split_every=3)
    expected = summarize(frame, response="loaves", weights="weeks")
    assert got.names == expected.names
    assert got.n == expected.n  # exact: sums of whole-number weights, in any order
    assert got.rows_read == len(frame)
    assert_allclose(got.means, expected.means, rtol=1e-12)
    assert_allclose(got.covariance, expected.covariance, rtol=1e-10, atol=1e-12)
    assert got.to_input()["terms"] == expected.to_input()["terms"]


def test_graph_is_a_tree_of_merges(dask_client):
    frame = bakery_frame(rows=600)
    ddf = dd.from_pandas(frame, npartitions=20)
    lazy = summarize_dask(ddf, response="loaves", split_every=4, compute=False)
    keys = [str(k) for k in lazy.__dask_graph__()]
    # 20 partition summaries, ceil(20/4) + ceil(5/4) + 1 = 5 + 2 + 1 merges, one final check.
    assert sum("_partition_summary" in k for k in keys) == 20
    assert sum("_merge_group" in k for k in keys) == 8
    result = lazy.compute()
    assert_allclose(result.covariance, summarize(frame, response="loaves").covariance, rtol=1e-10)


def test_pairwise_and_missing_counts_over_partitions(dask_client):
    frame = bakery_frame(rows=800, missing=True)
    ddf = dd.from_pandas(frame, npartitions=7)
    with pytest.raises(MissingValuesError) as info:
        summarize_dask(ddf, response="loaves")
    assert info.value.counts == summarize_counts(frame)
    got = summarize_dask(ddf, response="loaves", missing="pairwise")
    expected = summarize(frame, response="loaves", missing="pairwise")
    assert_allclose(got.correlation, expected.correlation, rtol=1e-11, atol=1e-15)
    assert got.n == expected.n  # exact: the smallest pairwise count, a whole number


def summarize_counts(frame):
    counts = frame.isna().sum()
    return {k: int(v) for k, v in counts.items() if v}


def test_rejects_a_bad_fan_in():
    ddf = dd.from_pandas(bakery_frame(rows=50), npartitions=2)
    with pytest.raises(ValueError, match="split_every must be at least 2"):
        summarize_dask(ddf, split_every=1)


def test_columns_subset(dask_client):
    frame = bakery_frame(rows=300)
    ddf = dd.from_pandas(frame, npartitions=3)
    got = summarize_dask(ddf, columns=["oven_hours", "flour_kg"], response="loaves")
    assert got.names == ("oven_hours", "flour_kg", "loaves")
    np.testing.assert_allclose(
        got.covariance, np.cov(frame[["oven_hours", "flour_kg", "loaves"]].T), rtol=1e-11
    )
