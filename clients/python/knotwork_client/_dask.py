"""The local summary as a Dask graph: summaries per partition, merged by a tree.

Only the summaries (a few kilobytes each) move between workers; rows stay in their partitions.
"""

from __future__ import annotations

from collections.abc import Sequence
from typing import Any

from ._summary import MissingPolicy, Summary, _finish, _make_spec, _Spec, _summarize_unchecked

__all__ = ["summarize_dask"]


def _partition_summary(frame: Any, spec: _Spec) -> Summary:
    # Missing values are only counted here; the check runs once, on the total, so that the
    # error reports counts over every partition.
    return _summarize_unchecked(frame, spec)


def _merge_group(*parts: Summary) -> Summary:
    total = parts[0]
    for part in parts[1:]:
        total = total.merge(part)
    return total


def summarize_dask(
    ddf: Any,
    *,
    response: str | None = None,
    weights: str | None = None,
    categorical: Sequence[str] | None = None,
    missing: MissingPolicy = "reject",
    columns: Sequence[str] | None = None,
    split_every: int = 8,
    compute: bool = True,
) -> Any:
    """Summarize a Dask dataframe where its partitions live; only summaries are moved.

    Parameters
    ----------
    ddf
        A ``dask.dataframe.DataFrame``.
    response, weights, categorical, missing, columns
        As for :func:`knotwork_client.summarize`.
    split_every
        How many partial summaries each merge task combines (the fan-in of the tree).
    compute
        Compute now with the current scheduler (a ``distributed.Client`` if one is active)
        and return the :class:`Summary`; ``False`` returns the ``dask.delayed`` object.

    Returns
    -------
    Summary or dask.delayed.Delayed

    Notes
    -----
    The graph has one summary task per partition and a tree of merge tasks of fan-in
    ``split_every`` above them, so its depth grows as log(partitions) / log(split_every).
    Merging is exact (see :meth:`Summary.merge`), so the result equals :func:`summarize` on
    the whole table computed in pandas, up to rounding.
    """
    try:
        from dask.delayed import delayed
    except ImportError as exc:
        raise ImportError("summarize_dask needs dask: pip install 'knotwork-client[dask]'") from exc
    if split_every < 2:
        raise ValueError(f"split_every must be at least 2, got {split_every}")
    spec = _make_spec(response, weights, categorical, missing, columns)
    if spec.columns is not None:
        ddf = ddf[list(spec.columns)]
    summarize_part = delayed(_partition_summary, pure=True)
    merge = delayed(_merge_group, pure=True)
    level = [summarize_part(part, spec) for part in ddf.to_delayed()]
    while len(level) > 1:
        level = [merge(*level[i : i + split_every]) for i in range(0, len(level), split_every)]
    result = delayed(_finish, pure=True)(level[0])
    return result.compute() if compute else result
