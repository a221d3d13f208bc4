"""Local summaries: reduce rows to moments where the data live, so only the summary travels.

A :class:`Summary` holds, for every column it tracks, the number of observations (or the sum
of frequency weights), the means and the centred co-moments. Summaries of parts of the data
merge exactly, so a file read in batches, a stream of record batches and the partitions of a
Dask dataframe all reduce to the same numbers as the whole table at once. The arithmetic is
the service's own (the moments kernel of ``knotwork_contract``); this module reads the blocks,
counts missing values and keeps track of categorical levels.
"""

from __future__ import annotations

import contextlib
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

import knotwork_contract as contract

from ._exceptions import DataError, MissingValuesError
from ._tables import Block, iter_blocks

__all__ = ["MISSING_POLICIES", "Summary", "merge_summaries", "summarize"]

MissingPolicy = Literal["reject", "drop_rows", "pairwise"]
MISSING_POLICIES: tuple[str, ...] = ("reject", "drop_rows", "pairwise")


@dataclass(frozen=True, eq=False)
class Summary:
    """Moments of a table, ready to be sent to the service instead of its rows.

    Build one with :func:`summarize` (or :func:`knotwork_client.summarize_dask`); combine
    summaries of parts of the data with :meth:`merge`; send it with ``Client.assess`` or turn
    it into the service's input with :meth:`to_input`.

    Attributes
    ----------
    numeric
        Numeric columns tracked (the response included, the weights column excluded), in
        input order.
    levels
        Categorical column -> its observed levels, sorted. Each level is tracked as an
        indicator column ``<var>[<level>]``; the first level is the reference and is left out
        of the predictors sent.
    response
        The response column, or None.
    weights
        The frequency-weights column, or None.
    missing
        The missing-value policy used: ``reject``, ``drop_rows`` or ``pairwise``.
    rows_read
        Rows read, whatever their values.
    rows_complete
        Rows with no missing value among the columns used.
    missing_counts
        Column -> number of missing values found in it (weights column included).
    """

    numeric: tuple[str, ...]
    levels: Mapping[str, tuple[str, ...]]
    response: str | None
    weights: str | None
    missing: str
    rows_read: int
    rows_complete: int
    missing_counts: Mapping[str, int]
    _moments: contract.Moments | contract.PairwiseMoments = field(repr=False)

    # --- what the summary describes ----------------------------------------------------

    @property
    def columns(self) -> tuple[str, ...]:
        """Every tracked column: numeric, then one indicator per level of each categorical."""
        return self.numeric + tuple(
            contract.indicator_name(var, level) for var, lv in self.levels.items() for level in lv
        )

    @property
    def terms(self) -> dict[str, list[str]]:
        """Categorical variable -> its indicator columns sent (the reference level left out)."""
        return {var: list(contract.indicator_columns(var, lv)) for var, lv in self.levels.items()}

    @property
    def predictors(self) -> tuple[str, ...]:
        """The predictor names sent to the service, in order."""
        numeric = tuple(c for c in self.numeric if c != self.response)
        return numeric + tuple(c for cols in self.terms.values() for c in cols)

    @property
    def names(self) -> tuple[str, ...]:
        """Predictors, then the response if any: the order of ``means`` and ``covariance``."""
        return self.predictors + ((self.response,) if self.response is not None else ())

    @property
    def pairwise(self) -> bool:
        """Whether pairs of columns were summarized on different rows (missing="pairwise")."""
        return isinstance(self._moments, contract.PairwiseMoments)

    @property
    def n(self) -> float:
        """Observations (or the sum of weights); under pairwise deletion, the smallest pair's."""
        m = self._moments
        if isinstance(m, contract.Moments):
            return m.n
        idx = self._index(self.names)
        return float(m.n[np.ix_(idx, idx)].min()) if idx.size else 0.0

    @property
    def means(self) -> np.ndarray:
        """Means of ``names`` (under pairwise deletion, over each column's observed rows)."""
        m = self._moments
        idx = self._index(self.names)
        means: np.ndarray = (
            m.mean[idx].copy() if isinstance(m, contract.Moments) else m.mean[idx, idx].copy()
        )
        return means

    @property
    def comoments(self) -> np.ndarray:
        """Centred cross-products sum w (x_i - mean_i)(x_j - mean_j) over ``names``."""
        idx = self._index(self.names)
        com: np.ndarray = self._moments.comoments[np.ix_(idx, idx)].copy()
        return com

    @property
    def covariance(self) -> np.ndarray:
        """Sample covariance of ``names``: co-moments over n - 1 (frequency-weight convention)."""
        m = self._moments
        idx = self._index(self.names)
        if isinstance(m, contract.Moments):
            cov_all: np.ndarray = m.comoments[np.ix_(idx, idx)] / (m.n - 1.0)
            return cov_all
        cov: np.ndarray = m.comoments[np.ix_(idx, idx)] / (m.n[np.ix_(idx, idx)] - 1.0)
        return cov

    @property
    def correlation(self) -> np.ndarray:
        """Pearson correlations of ``names`` (pairwise-complete under pairwise deletion).

        Without pairwise deletion the service's rule applies: clipped to [-1, 1], and a column
        with no spread has zero correlations (:meth:`to_input` refuses such a column).
        """
        m = self._moments
        idx = self._index(self.names)
        if isinstance(m, contract.Moments):
            return contract.correlation_from_comoments(m.comoments[np.ix_(idx, idx)])
        r: np.ndarray = m.correlation()[np.ix_(idx, idx)]
        np.fill_diagonal(r, 1.0)
        return r

    @property
    def notes(self) -> list[str]:
        """Things to know when reading results computed from this summary."""
        notes = []
        if isinstance(self._moments, contract.PairwiseMoments) and not self._moments.complete:
            notes.append(
                "pairwise deletion: each correlation uses the rows where both columns are "
                "observed, n is the smallest pairwise count, and the matrix may not be positive "
                "semi-definite"
            )
        dropped = self.rows_read - self.rows_complete
        if self.missing == "drop_rows" and dropped:
            notes.append(f"{dropped} of {self.rows_read} rows dropped for missing values")
        return notes

    def _index(self, names: Sequence[str]) -> np.ndarray:
        where = {c: i for i, c in enumerate(self.columns)}
        return np.array([where[n] for n in names], dtype=np.intp)

    def __repr__(self) -> str:
        return (
            f"Summary(n={self.n:g}, predictors={list(self.predictors)}, "
            f"response={self.response!r}, weights={self.weights!r}, missing={self.missing!r})"
        )

    # --- combining ---------------------------------------------------------------------

    def merge(self, other: Summary) -> Summary:
        """The summary of both parts' rows together (exact; neither part is changed).

        Notes
        -----
        For parts A and B with weights n_A, n_B, means m_A, m_B and centred co-moments C_A,
        C_B, with delta = m_B - m_A:

        .. math::

            n = n_A + n_B, \\quad m = m_A + \\delta \\, n_B / n, \\quad
            C = C_A + C_B + \\delta \\delta^T \\, n_A n_B / n

        Under pairwise deletion the same update runs for every pair of columns on that pair's
        own weights and means. Categorical levels seen in only one part are added to the other
        as indicator columns that are zero on all its rows (zero means, zero co-moments).

        Implementation: the pairwise update of Chan, Golub & LeVeque (1979; 1983). No raw sums
        of squares are ever formed, so the merge keeps its accuracy when means are large
        against spreads (Longley shifted by 1e6 is a test).

        References
        ----------
        1. Chan, T. F., Golub, G. H., LeVeque, R. J. (1983). Algorithms for computing the
           sample variance: analysis and recommendations. The American Statistician 37(3),
           242-247.
        """
        if not isinstance(other, Summary):
            raise TypeError(f"can only merge a Summary, got {type(other).__name__}")
        self._check_compatible(other)
        levels = {
            var: contract.sorted_levels((*self.levels[var], *other.levels[var]))
            for var in self.levels
        }
        columns = self.numeric + tuple(
            contract.indicator_name(var, level) for var, lv in levels.items() for level in lv
        )
        mine = _embed(self._moments, *self._embedding(columns, levels))
        theirs = _embed(other._moments, *other._embedding(columns, levels))
        counts = dict(self.missing_counts)
        for k, v in other.missing_counts.items():
            counts[k] = counts.get(k, 0) + v
        return Summary(
            numeric=self.numeric,
            levels=levels,
            response=self.response,
            weights=self.weights,
            missing=self.missing,
            rows_read=self.rows_read + other.rows_read,
            rows_complete=self.rows_complete + other.rows_complete,
            missing_counts=counts,
            _moments=mine.merge(theirs),  # type: ignore[arg-type]
        )

    def _check_compatible(self, other: Summary) -> None:
        for attr in ("numeric", "response", "weights", "missing"):
            a, b = getattr(self, attr), getattr(other, attr)
            if a != b:
                raise DataError(
                    f"cannot merge summaries with different {attr}: {a!r} and {b!r}",
                    [(attr, "differs between the parts")],
                )
        if set(self.levels) != set(other.levels):
            raise DataError(
                "cannot merge summaries with different categorical columns: "
                f"{sorted(self.levels)} and {sorted(other.levels)}",
                [("categorical", "differs between the parts")],
            )

    def _embedding(
        self, columns: tuple[str, ...], levels: Mapping[str, tuple[str, ...]]
    ) -> tuple[np.ndarray, np.ndarray]:
        where = {c: i for i, c in enumerate(self.columns)}
        src = np.full(len(columns), -1, dtype=np.intp)
        zero = np.zeros(len(columns), dtype=bool)
        for i, name in enumerate(self.numeric):
            src[i] = where[name]
        k = len(self.numeric)
        for var, lv in levels.items():
            own = self.levels[var]
            stand_in = where[contract.indicator_name(var, own[0])] if own else -1
            for level in lv:
                if level in own:
                    src[k] = where[contract.indicator_name(var, level)]
                else:
                    src[k], zero[k] = stand_in, True
                k += 1
        return src, zero

    # --- the wire ----------------------------------------------------------------------

    def to_input(self, kind: Literal["auto", "moments", "correlation"] = "auto") -> dict[str, Any]:
        """The service's input document for this summary (no row-level value is in it).

        Parameters
        ----------
        kind
            ``moments`` (n, means, sample covariance), ``correlation`` (correlation matrix and
            n), or ``auto``: moments, except under pairwise deletion with missing values, where
            means and covariances come from different rows and only correlations are coherent.

        Returns
        -------
        dict
            A JSON-ready ``{"kind": ..., ...}`` document for ``POST /v1/assess``.
        """
        if kind not in ("auto", "moments", "correlation"):
            raise ValueError(f"kind must be 'auto', 'moments' or 'correlation', got {kind!r}")
        self._check_sendable()
        if kind == "auto":
            m = self._moments
            pairwise_gaps = isinstance(m, contract.PairwiseMoments) and not m.complete
            kind = "correlation" if pairwise_gaps else "moments"
        doc: dict[str, Any]
        if kind == "moments":
            doc = {
                "kind": "moments",
                "names": list(self.names),
                "n": self.n,
                "means": self.means.tolist(),
                "covariance": self.covariance.tolist(),
            }
            if self.response is not None:
                doc["response"] = self.response
        else:
            r = self.correlation
            p = len(self.predictors)
            doc = {
                "kind": "correlation",
                "names": list(self.predictors),
                "matrix": r[:p, :p].tolist(),
                "n": self.n,
            }
            if self.response is not None:
                doc["response"] = {"name": self.response, "correlations": r[p, :p].tolist()}
        if self.levels:
            doc["terms"] = self.terms
        return doc

    def _check_sendable(self) -> None:
        for var, lv in self.levels.items():
            if len(lv) < 2:
                raise DataError(
                    f"categorical column {var!r} has {len(lv)} observed level(s); it needs at "
                    "least two to be a predictor",
                    [(var, "fewer than two levels")],
                )
        if self.n <= 1:
            raise DataError(
                f"the summary covers n = {self.n:g} observations; at least two are needed "
                "(more than the number of predictors for any diagnostic)",
                [("n", "too few observations")],
            )
        variances = np.diag(self.comoments)
        flat = [nm for nm, v in zip(self.names, variances, strict=True) if not v > 0]
        if flat:
            raise DataError(
                f"constant columns cannot be summarized into a usable input: {flat}",
                [(nm, "constant column") for nm in flat],
            )


def _embed(
    m: contract.Moments | contract.PairwiseMoments, src: np.ndarray, zero: np.ndarray
) -> contract.Moments | contract.PairwiseMoments:
    """The moments over a wider set of columns: column ``k`` is this part's column ``src[k]``,
    or, where ``zero[k]``, an indicator of a level this part never saw (zero on its rows)."""
    keep = ~zero
    if isinstance(m, contract.Moments):
        mean = np.where(keep, m.mean[src], 0.0)
        com = np.where(keep[:, None] & keep[None, :], m.comoments[np.ix_(src, src)], 0.0)
        return contract.Moments(m.n, mean, com)
    # An indicator column absent from this part is 0 wherever its variable is observed, so
    # it shares the observation pattern of any other level of that variable (``src``) and
    # contributes zero means and zero co-moments; ``src < 0`` means never observed here.
    valid = src >= 0
    s = np.where(valid, src, 0)
    both = valid[:, None] & valid[None, :]
    rows_kept = keep[:, None] & both
    n = np.where(both, m.n[np.ix_(s, s)], 0.0)
    mean = np.where(rows_kept, m.mean[np.ix_(s, s)], 0.0)
    com = np.where(rows_kept & keep[None, :], m.comoments[np.ix_(s, s)], 0.0)
    sq = np.where(rows_kept, m.squares[np.ix_(s, s)], 0.0)
    return contract.PairwiseMoments(n, mean, com, sq)


# --- building summaries ----------------------------------------------------------------


@dataclass(frozen=True, slots=True)
class _Spec:
    response: str | None
    weights: str | None
    categorical: tuple[str, ...]
    missing: str
    columns: tuple[str, ...] | None


def _make_spec(
    response: str | None,
    weights: str | None,
    categorical: Sequence[str] | None,
    missing: str,
    columns: Sequence[str] | None,
) -> _Spec:
    if missing not in MISSING_POLICIES:
        raise ValueError(f"missing must be one of {list(MISSING_POLICIES)}, got {missing!r}")
    if isinstance(categorical, str):
        categorical = [categorical]
    cats = tuple(categorical or ())
    for role, name in (("response", response), ("weights", weights)):
        if name is not None and name in cats:
            raise DataError(
                f"the {role} column {name!r} must be numeric, not categorical",
                [(name, f"{role} listed as categorical")],
            )
    if response is not None and response == weights:
        raise DataError(f"{response!r} cannot be both the response and the weights")
    cols: tuple[str, ...] | None = None
    if columns is not None:
        extra = [c for c in (response, weights) if c is not None and c not in columns]
        cols = (*columns, *extra)
    return _Spec(response, weights, cats, missing, cols)


def _check_roles(block: Block, spec: _Spec) -> None:
    for role, name in (("response", spec.response), ("weights", spec.weights)):
        if name is None:
            continue
        if name in block.categorical:
            raise DataError(
                f"the {role} column {name!r} must be numeric, but it holds text",
                [(name, f"{role} is not numeric")],
            )
        if name not in block.numeric:
            raise DataError(
                f"the {role} column {name!r} is not among the columns "
                f"{list(block.numeric) + list(block.categorical)}",
                [(name, "no such column")],
            )


def _check_weights(w: np.ndarray, name: str) -> None:
    negative = int((w < 0).sum())
    if negative or np.isinf(w).any():
        raise DataError(
            f"weights column {name!r} has {negative} negative or infinite values; "
            "weights must be finite and non-negative",
            [(name, "negative or infinite weights")],
        )


def _missing_counts(
    block: Block, numeric_names: Sequence[str], xnum: np.ndarray, w: np.ndarray | None, spec: _Spec
) -> tuple[dict[str, int], np.ndarray]:
    """Per-column missing counts and the mask of complete rows; raises on infinite values."""
    counts: dict[str, int] = {}
    ok = np.ones(block.rows, dtype=bool)
    for j, name in enumerate(numeric_names):
        values = xnum[:, j]
        bad = np.isinf(values)
        if bad.any():
            raise DataError(
                f"column {name!r} has {int(bad.sum())} infinite values; only finite numbers "
                "(or missing values) can be summarized",
                [(name, "infinite values")],
            )
        gap = np.isnan(values)
        counts[name] = int(gap.sum())
        ok &= ~gap
    for name, (codes, _) in block.categorical.items():
        gap = codes < 0
        counts[name] = int(gap.sum())
        ok &= ~gap
    if w is not None and spec.weights is not None:
        gap = np.isnan(w)
        counts[spec.weights] = int(gap.sum())
        ok &= ~gap
    return {k: v for k, v in counts.items() if v}, ok


def _numeric_fast(
    block: Block, numeric_names: tuple[str, ...], w: np.ndarray | None
) -> contract.Moments | None:
    """Moments of a block of numbers only, taken to be complete; None when a value is missing
    or infinite (then the block takes the careful path).

    Without weights the values are not looked at beforehand: the kernel reads the rows once
    and raises :class:`~knotwork_contract.NotFinite` when one is not finite. With weights (whose
    sum is needed first anyway) the kernel runs and its result is checked.
    """
    if block.rows == 0:
        return None
    cols = [block.numeric[name] for name in numeric_names]
    if w is None:
        try:
            return contract.comoments(cols, optimistic=True)
        except contract.NotFinite:
            return None
    if not float(w.sum()) > 0.0:  # a missing weight, or none above zero
        return None
    with np.errstate(invalid="ignore", over="ignore"):  # the result is checked below
        m = contract.comoments(cols, w)
    finite = np.isfinite(m.mean).all() and np.isfinite(np.diagonal(m.comoments)).all()
    return m if finite else None


def _complete_moments(x: np.ndarray, w: np.ndarray | None) -> contract.Moments:
    """Moments of complete rows (the columns of ``x``); no rows (or no weight) gives none."""
    rows, q = x.shape
    if rows == 0 or (w is not None and not float(w.sum()) > 0.0):
        return contract.Moments.empty(q)
    return contract.comoments([x[:, j] for j in range(q)], w)


def _block_summary(block: Block, spec: _Spec) -> Summary:
    """The summary of one block of rows."""
    _check_roles(block, spec)
    numeric_names = tuple(c for c in block.numeric if c != spec.weights)
    rows = block.rows
    w = None
    if spec.weights is not None:
        w = block.numeric[spec.weights]
        _check_weights(w, spec.weights)
    if not block.categorical and spec.missing != "pairwise":
        fast = _numeric_fast(block, numeric_names, w)
        if fast is not None:
            return Summary(
                numeric=numeric_names,
                levels={},
                response=spec.response,
                weights=spec.weights,
                missing=spec.missing,
                rows_read=rows,
                rows_complete=rows,
                missing_counts={},
                _moments=fast,
            )
    # Column-major, so each column is copied in one contiguous run and summed contiguously.
    k = len(numeric_names)
    xnum = np.empty((rows, k), dtype=np.float64, order="F")
    for j, name in enumerate(numeric_names):
        xnum[:, j] = block.numeric[name]
    # Fast path: finite column sums mean no NaN and no infinity anywhere (a sum that overflows
    # merely sends the block down the careful path below).
    colsum = xnum.sum(axis=0)
    clean = bool(np.isfinite(colsum).all())
    clean = clean and not any(bool((c < 0).any()) for c, _ in block.categorical.values())
    clean = clean and (w is None or not np.isnan(w).any())
    if clean:
        counts: dict[str, int] = {}
        ok = None
        complete = rows
    else:
        counts, ok = _missing_counts(block, numeric_names, xnum, w, spec)
        complete = int(ok.sum())

    if spec.missing == "reject" and counts:
        # The summary is unusable; keep counting so the error reports totals.
        keep: np.ndarray | None = np.zeros(rows, dtype=bool)
    elif spec.missing == "pairwise" or ok is None:
        keep = None if w is None or clean else ~np.isnan(w)
    else:
        keep = ok
    every = keep is None or bool(keep.all())

    levels: dict[str, tuple[str, ...]] = {}
    positions: dict[str, np.ndarray] = {}
    for name, (codes, lv) in block.categorical.items():
        c = codes if every else codes[keep]
        present = np.bincount(c[c >= 0], minlength=len(lv)) > 0
        used = contract.sorted_levels(lv[i] for i in np.flatnonzero(present))
        rank = {level: i for i, level in enumerate(used)}
        position = np.array([rank.get(level, -1) for level in lv], dtype=np.intp)
        levels[name] = used
        positions[name] = np.where(c >= 0, position[np.maximum(c, 0)], -1) if len(lv) else c

    width_all = sum(len(v) for v in levels.values())
    if every and width_all == 0:
        x = xnum
    else:
        kept = rows if every else int(keep.sum())  # type: ignore[union-attr]
        x = np.empty((kept, k + width_all), dtype=np.float64, order="F")
        x[:, :k] = xnum if every else xnum[keep]
        col = k
        for name, used_levels in levels.items():
            width = len(used_levels)
            x[:, col : col + width] = 0.0
            pos = positions[name]
            observed = pos >= 0
            x[np.flatnonzero(observed), col + pos[observed]] = 1.0
            if spec.missing == "pairwise":
                x[~observed, col : col + width] = np.nan
            col += width
    wk = None if w is None else (w if every else w[keep])
    moments: contract.Moments | contract.PairwiseMoments = (
        contract.pairwise_comoments(x, wk)
        if spec.missing == "pairwise"
        else _complete_moments(x, wk)
    )
    return Summary(
        numeric=numeric_names,
        levels=levels,
        response=spec.response,
        weights=spec.weights,
        missing=spec.missing,
        rows_read=rows,
        rows_complete=complete,
        missing_counts=counts,
        _moments=moments,
    )


def _one_blas_thread() -> contextlib.AbstractContextManager[Any]:
    """Run BLAS on one thread while summarizing.

    Each block's Gram product is small (a few MFLOP to a few hundred), so extra BLAS threads
    gain little, and on a shared or busy machine OpenBLAS threads spinning for cores slowed
    the same product from 3 ms to over a second (measured here). Dask workers run several
    summaries at once and need one thread each anyway.
    """
    try:
        from threadpoolctl import threadpool_limits
    except ImportError:  # pragma: no cover - threadpoolctl is a declared dependency
        return contextlib.nullcontext()
    limiter: contextlib.AbstractContextManager[Any] = threadpool_limits(limits=1, user_api="blas")
    return limiter


def _summarize_unchecked(data: Any, spec: _Spec, names: Sequence[str] | None = None) -> Summary:
    total: Summary | None = None
    blocks = iter_blocks(data, categorical=spec.categorical, columns=spec.columns, names=names)
    with _one_blas_thread():
        for block in blocks:
            part = _block_summary(block, spec)
            total = part if total is None else total.merge(part)
    if total is None:
        raise DataError("the input holds no table (an empty iterator?)")
    return total


def _finish(summary: Summary) -> Summary:
    if summary.missing == "reject" and summary.missing_counts:
        raise MissingValuesError(dict(summary.missing_counts))
    return summary


def summarize(
    data: Any,
    *,
    response: str | None = None,
    weights: str | None = None,
    categorical: Sequence[str] | None = None,
    missing: MissingPolicy = "reject",
    columns: Sequence[str] | None = None,
    names: Sequence[str] | None = None,
) -> Summary:
    """Summarize a table locally: only these moments, never rows, need to leave the machine.

    Parameters
    ----------
    data
        A pandas DataFrame; a pyarrow Table, RecordBatch, RecordBatchReader or Dataset; a 2-D
        numpy array with ``names`` (or an ``(array, names)`` pair) or a structured array; a
        mapping of column -> values; a path to a CSV, Parquet or Arrow file or to a folder of
        Parquet files; or an iterable of DataFrame chunks or record batches. Files, readers,
        datasets and iterables are read one bounded block at a time.
    response
        Response column: summarized with the predictors, sent as the response.
    weights
        Column of non-negative frequency weights: n becomes their sum and the covariance
        denominator is ``sum(w) - 1``. Excluded from the predictors.
    categorical
        Further columns to treat as categorical (text, dictionary and pandas ``category``
        columns always are). Each becomes indicator columns ``<var>[<level>]`` against its
        first level in sorted order (the reference, left out), sent as one term.
    missing
        ``reject`` (default): raise :class:`MissingValuesError` with per-column counts;
        ``drop_rows``: use complete rows only; ``pairwise``: each pair of columns on the rows
        where both are observed (then only correlations are sent, with the smallest pair's n).
    columns
        Read only these columns (plus ``response`` and ``weights``).
    names
        Column names of a plain 2-D numpy array.

    Returns
    -------
    Summary

    Raises
    ------
    MissingValuesError
        Missing values under ``missing="reject"``, with counts per column.
    DataError
        Infinite values, negative weights, a response or weights column that is missing or
        not numeric, columns that cannot be read as numbers or categories.

    Notes
    -----
    Each block of rows is centred by a shift :math:`s`, with the corrected two-pass formula
    :math:`C = \\sum_r w_r (x_r - s)(x_r - s)^T - W d d^T`, where :math:`d` is the weighted
    mean of the shifted block, and blocks are combined with the exact pairwise update of
    :meth:`Summary.merge`. The covariance sent is :math:`C / (n - 1)` with
    :math:`n = \\sum w` (the frequency-weight convention the service uses).

    Verification: against numpy's covariance and pandas' pairwise correlation, against exact
    rational arithmetic on Longley shifted by 1e6 (tests/client).

    Implementation: the service's own moments kernel (``knotwork_contract.comoments``,
    ``pairwise_comoments`` and ``Moments.merge``): Chan, Golub & LeVeque (1983), corrected
    two-pass within a block and the pairwise update across blocks.
    """
    spec = _make_spec(response, weights, categorical, missing, columns)
    return _finish(_summarize_unchecked(data, spec, names))


def merge_summaries(parts: Iterable[Summary]) -> Summary:
    """Merge many summaries by a balanced tree of pairwise merges (exact, order-insensitive)."""
    level = list(parts)
    if not level:
        raise DataError("nothing to merge: no summaries given")
    return contract.merge_all(level)
