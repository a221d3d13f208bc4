"""Local summaries: exact against outside references, and in the service core's conventions."""

from __future__ import annotations

import itertools
from fractions import Fraction

import msgspec
import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from exact_rational import exact_comoments, exact_vifs
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from kc_support import REGIONS, bakery_frame
from numpy.testing import assert_allclose

from knotwork_client import (
    DataError,
    MissingValuesError,
    Summary,
    merge_summaries,
    summarize,
)

PREDICTORS = ["oven_hours", "flour_kg", "staff_shifts", "van_trips", "market_stalls"]


def dummies(frame: pd.DataFrame, var: str, levels) -> pd.DataFrame:
    """Indicator columns named var[level], built independently of the client."""
    out = pd.DataFrame(index=frame.index)
    for level in levels:
        col = (frame[var] == level).astype(float)
        col[frame[var].isna()] = np.nan
        out[f"{var}[{level}]"] = col
    return out


# --- against numpy and pandas ---------------------------------------------------------------


def test_covariance_equals_numpy(bakery):
    s = summarize(bakery[[*PREDICTORS, "loaves"]], response="loaves")
    assert s.names == (*PREDICTORS, "loaves")
    assert s.n == len(bakery)
    # Reference: numpy.cov (two-pass, denominator n - 1).
    expected = np.cov(bakery[[*PREDICTORS, "loaves"]].to_numpy(), rowvar=False)
    assert_allclose(s.covariance, expected, rtol=1e-12)
    assert_allclose(s.means, bakery[[*PREDICTORS, "loaves"]].mean().to_numpy(), rtol=1e-13)


def test_categorical_expansion_against_sorted_first_level(bakery):
    s = summarize(bakery.drop(columns="weeks"), response="loaves")
    levels = sorted(REGIONS)
    # Reference level is the first in sorted order and is not sent.
    assert s.levels["region"] == tuple(levels)
    assert s.terms == {"region": [f"region[{lv}]" for lv in levels[1:]]}
    assert s.predictors == (*PREDICTORS, *[f"region[{lv}]" for lv in levels[1:]])
    design = pd.concat([bakery[PREDICTORS], dummies(bakery, "region", levels[1:])], axis=1)
    design["loaves"] = bakery["loaves"]
    assert_allclose(s.covariance, np.cov(design.to_numpy(), rowvar=False), rtol=1e-11, atol=1e-14)


def test_frequency_weights_equal_repeated_rows(bakery):
    weighted = summarize(bakery, response="loaves", weights="weeks")
    repeated = bakery.loc[bakery.index.repeat(bakery["weeks"].astype(int))].drop(columns="weeks")
    plain = summarize(repeated, response="loaves")
    # Frequency-weight convention: n = sum of weights, denominator n - 1, exactly as if each
    # row were repeated w times. (Exact: sums of whole-number weights, exact in any order.)
    assert weighted.n == bakery["weeks"].sum() == plain.n
    assert weighted.names == plain.names
    assert_allclose(weighted.covariance, plain.covariance, rtol=1e-11, atol=1e-12)
    # numpy's frequency weights agree too (np.cov(fweights=...)).
    cols = list(plain.names)
    design = pd.concat(
        [bakery[PREDICTORS], dummies(bakery, "region", sorted(REGIONS)[1:]), bakery[["loaves"]]],
        axis=1,
    )[cols]
    expected = np.cov(design.to_numpy(), rowvar=False, fweights=bakery["weeks"].astype(int))
    assert_allclose(weighted.covariance, expected, rtol=1e-11, atol=1e-12)


def test_drop_rows_equals_dropna():
    frame = bakery_frame(missing=True)
    s = summarize(frame.drop(columns="weeks"), response="loaves", missing="drop_rows")
    complete = frame.drop(columns="weeks").dropna()
    expected = summarize(complete, response="loaves")
    assert s.n == len(complete)
    assert s.rows_read == len(frame) and s.rows_complete == len(complete)
    assert_allclose(s.covariance, expected.covariance, rtol=1e-12)
    assert any("rows dropped" in note for note in s.notes)


def test_reject_counts_missing_per_column():
    frame = bakery_frame(missing=True)
    with pytest.raises(MissingValuesError) as info:
        summarize(frame, response="loaves", weights="weeks")
    assert info.value.counts == {"flour_kg": 40, "van_trips": 20, "region": 16}
    assert str(info.value).startswith("missing values in 'flour_kg' (40), 'van_trips' (20)")
    assert "missing='drop_rows'" in str(info.value)
    assert isinstance(info.value, ValueError)


def test_reject_counts_total_over_every_block():
    frame = bakery_frame(missing=True)
    chunks = [frame.iloc[i : i + 37] for i in range(0, len(frame), 37)]
    with pytest.raises(MissingValuesError) as info:
        summarize(iter(chunks), response="loaves")
    assert info.value.counts == {"flour_kg": 40, "van_trips": 20, "region": 16}


def test_pairwise_equals_pandas_pairwise_correlation():
    frame = bakery_frame(missing=True)[[*PREDICTORS, "loaves"]]
    s = summarize(frame, response="loaves", missing="pairwise")
    # Reference: pandas DataFrame.corr() (Pearson on pairwise-complete observations).
    assert_allclose(s.correlation, frame.corr().to_numpy(), rtol=1e-12)
    counts = frame.notna().astype(int)
    assert s.n == (counts.T @ counts).to_numpy().min()
    doc = s.to_input()
    assert doc["kind"] == "correlation"
    assert doc["names"] == PREDICTORS
    assert doc["response"]["name"] == "loaves"
    assert_allclose(doc["response"]["correlations"], frame.corr().to_numpy()[-1, :-1], rtol=1e-12)
    assert any("pairwise" in note for note in s.notes)


def test_pairwise_with_categorical_merges_exactly():
    frame = bakery_frame(missing=True)[["oven_hours", "flour_kg", "region"]]
    whole = summarize(frame, missing="pairwise", categorical=["region"])
    # Chunks of 13 rows: many chunks miss some region entirely.
    parts = [summarize(frame.iloc[i : i + 13], missing="pairwise") for i in range(0, 400, 13)]
    merged = merge_summaries(parts)
    assert merged.names == whole.names
    assert_allclose(merged.correlation, whole.correlation, rtol=1e-12, atol=1e-15)
    assert merged.n == whole.n  # exact: the smallest pairwise count, a whole number
    reference = pd.concat(
        [frame[["oven_hours", "flour_kg"]], dummies(frame, "region", sorted(REGIONS)[1:])], axis=1
    )
    assert_allclose(whole.correlation, reference.corr().to_numpy(), rtol=1e-12, atol=1e-15)


def test_pairwise_without_gaps_sends_moments(bakery):
    s = summarize(bakery[PREDICTORS], missing="pairwise")
    full = summarize(bakery[PREDICTORS])
    doc = s.to_input()
    assert doc["kind"] == "moments"
    assert_allclose(doc["covariance"], full.covariance, rtol=1e-11)


# --- exactness on ill-conditioned data ---------------------------------------------------


def _exact_comoments(rows: list[list[float]]) -> list[list[Fraction]]:
    """Exact co-moments of the doubles themselves (each converted to Fraction without rounding)."""
    return exact_comoments([[Fraction(v) for v in row] for row in rows])


@pytest.fixture(scope="module")
def longley_shifted() -> pd.DataFrame:
    # Source: statsmodels.datasets.longley (the NIST StRD Longley data).
    from statsmodels.datasets import longley

    frame = longley.load_pandas().data
    return frame.drop(columns="TOTEMP") + 1e6


def test_longley_shifted_merge_matches_exact_arithmetic(longley_shifted):
    rows = longley_shifted.to_numpy().tolist()
    exact = np.array([[float(v) for v in row] for row in _exact_comoments(rows)])
    chunks = [longley_shifted.iloc[i : i + 3] for i in range(0, 16, 3)]
    forward = merge_summaries(summarize(c) for c in chunks)
    backward = summarize(chunks[-1])
    for c in reversed(chunks[:-1]):
        backward = backward.merge(summarize(c))
    streamed = summarize(iter(chunks))
    for s in (forward, backward, streamed):
        assert s.n == 16
        # Reference: exact rational arithmetic (fractions.Fraction) on the same doubles.
        # The floor is the rounding of part means of magnitude 1e6 (1e6 * 2.2e-16 against
        # spreads of about 10 to 1e5), about 1e-11 relative; raw sums of squares lose about
        # five digits more (test_naive_sums_of_squares_would_fail_here).
        assert_allclose(s.comoments, exact, rtol=3e-11)


def test_longley_shifted_vifs_match_exact_and_published(longley_shifted):
    rows = longley_shifted.to_numpy().tolist()
    exact_vif = [float(v) for v in exact_vifs(_exact_comoments(rows))]
    s = merge_summaries(summarize(longley_shifted.iloc[i : i + 4]) for i in range(0, 16, 4))
    vif = np.diag(np.linalg.inv(s.correlation))
    # Reference 1: exact rational arithmetic on the shifted data.
    assert_allclose(vif, exact_vif, rtol=1e-9)
    # Reference 2: widely cited Longley VIFs (from memory, and in docs/numerics.md), 6 significant
    # digits; a shift cannot change a VIF.
    assert_allclose(vif, [135.532, 1788.51, 33.6189, 3.58893, 399.151, 758.981], rtol=5e-6)


def test_naive_sums_of_squares_would_fail_here(longley_shifted):
    """Why centred co-moments: raw sums of squares lose about six digits on this input."""
    x = longley_shifted.to_numpy()
    naive = x.T @ x - len(x) * np.outer(x.mean(0), x.mean(0))
    exact = np.array([[float(v) for v in r] for r in _exact_comoments(x.tolist())])
    assert np.max(np.abs(naive - exact) / np.abs(exact)) > 1e-7


# --- every way in gives the same summary -------------------------------------------------


def _same(a: Summary, b: Summary) -> None:
    assert a.names == b.names
    assert a.n == b.n  # exact: a row count
    assert_allclose(a.means, b.means, rtol=1e-12)
    assert_allclose(a.covariance, b.covariance, rtol=1e-10, atol=1e-12)


def test_every_input_form_agrees(tmp_path, bakery):
    frame = bakery.drop(columns="weeks")
    reference = summarize(frame, response="loaves")
    table = pa.Table.from_pandas(frame, preserve_index=False)
    pq.write_table(table, tmp_path / "bakery.parquet", row_group_size=50)
    folder = tmp_path / "dataset"
    folder.mkdir()
    for i in range(0, 400, 100):
        pq.write_table(table.slice(i, 100), folder / f"part-{i:04d}.parquet")
    with (
        pa.OSFile(str(tmp_path / "bakery.arrow"), "wb") as sink,
        pa.ipc.new_file(sink, table.schema) as writer,
    ):
        writer.write_table(table, max_chunksize=64)
    frame.to_csv(tmp_path / "bakery.csv", index=False)
    numeric = frame[[*PREDICTORS, "loaves"]]
    num_ref = summarize(numeric, response="loaves")
    forms = {
        "arrow table": summarize(table, response="loaves"),
        "record batches": summarize(iter(table.to_batches(max_chunksize=33)), response="loaves"),
        "reader": summarize(
            pa.RecordBatchReader.from_batches(table.schema, table.to_batches(max_chunksize=70)),
            response="loaves",
        ),
        "frame chunks": summarize(
            (frame.iloc[i : i + 51] for i in range(0, 400, 51)), response="loaves"
        ),
        "parquet file": summarize(tmp_path / "bakery.parquet", response="loaves"),
        "parquet folder": summarize(folder, response="loaves"),
        "arrow file": summarize(str(tmp_path / "bakery.arrow"), response="loaves"),
        "csv file": summarize(tmp_path / "bakery.csv", response="loaves"),
    }
    for name, s in forms.items():
        try:
            _same(s, reference)
        except AssertionError as exc:  # pragma: no cover - names the failing form
            raise AssertionError(f"{name}: {exc}") from None
    arrays = {
        "(array, names)": summarize((numeric.to_numpy(), list(numeric.columns)), response="loaves"),
        "array with names=": summarize(
            numeric.to_numpy(), names=list(numeric.columns), response="loaves"
        ),
        "structured": summarize(numeric.to_records(index=False), response="loaves"),
        "mapping": summarize({c: numeric[c].to_numpy() for c in numeric}, response="loaves"),
    }
    for name, s in arrays.items():
        try:
            _same(s, num_ref)
        except AssertionError as exc:  # pragma: no cover
            raise AssertionError(f"{name}: {exc}") from None


def test_columns_selects_and_keeps_response(tmp_path, bakery):
    pq.write_table(pa.Table.from_pandas(bakery), tmp_path / "b.parquet")
    s = summarize(tmp_path / "b.parquet", columns=["oven_hours", "flour_kg"], response="loaves")
    assert s.names == ("oven_hours", "flour_kg", "loaves")


def test_numeric_codes_as_categorical(bakery):
    frame = bakery[["oven_hours", "flour_kg"]].assign(crew=np.arange(400) % 3)
    s = summarize(frame, categorical=["crew"])
    assert s.terms == {"crew": ["crew[1]", "crew[2]"]}


# --- matching the service core's conventions ---------------------------------------------


def _core():
    return pytest.importorskip("knotwork.core", reason="the service core is part of this repo")


@pytest.mark.parametrize("missing", ["reject", "drop_rows", "pairwise"])
@pytest.mark.parametrize("weighted", [False, True])
def test_matches_the_service_core(missing, weighted):
    core = _core()
    frame = bakery_frame(missing=missing != "reject")
    weights = "weeks" if weighted else None
    columns = {c: frame[c].to_numpy(dtype=float) for c in frame if c != "region"}
    labels = {"region": [None if pd.isna(v) else str(v) for v in frame["region"]]}
    theirs = core.from_table(
        columns, categorical=labels, response="loaves", weights=weights, missing=missing
    )
    ours = summarize(frame, response="loaves", weights=weights, missing=missing)
    assert ours.predictors == theirs.names
    assert ours.n == pytest.approx(theirs.n, rel=1e-15)
    assert [(t.name, list(t.columns)) for t in theirs.terms] == list(ours.terms.items())
    assert_allclose(ours.correlation, theirs.correlation, rtol=1e-11, atol=1e-14)
    if theirs.comoments is not None:
        assert_allclose(ours.comoments, theirs.comoments, rtol=1e-11, atol=1e-9)
        assert_allclose(ours.means, theirs.means, rtol=1e-13)
    # What we send is read back by the core into the same summary.
    doc = msgspec.json.decode(msgspec.json.encode(ours.to_input()))
    if doc["kind"] == "moments":
        back = core.from_moments(
            [*doc["names"][:-1], doc["names"][-1]],
            doc["n"],
            doc["means"],
            doc["covariance"],
            response=doc["response"],
            terms=doc["terms"],
        )
    else:
        r = doc["response"]
        back = core.from_correlation(
            doc["names"],
            doc["matrix"],
            doc["n"],
            response=(r["name"], r["correlations"]),
            terms=doc["terms"],
        )
    assert back.names == theirs.names
    assert_allclose(back.correlation, theirs.correlation, rtol=1e-10, atol=1e-13)


# --- what leaves the zone ----------------------------------------------------------------


def test_no_row_value_appears_in_the_input_document(bakery):
    frame = bakery.drop(columns="weeks").copy()
    distinctive = 987654.3210123
    frame.loc[17, "oven_hours"] = distinctive
    body = msgspec.json.encode(summarize(frame, response="loaves").to_input())
    assert b"987654.3210123" not in body
    assert b"9876543210123" not in body.replace(b".", b"")
    # No value of any row, written as the encoder would write it, appears either (the
    # continuous columns, whose values have 15-17 significant digits; small integers such as
    # a count of 4 could match a digit run of any number).
    continuous = ["oven_hours", "flour_kg", "staff_shifts", "van_trips", "loaves"]
    for value in frame[continuous].to_numpy().ravel():
        assert msgspec.json.encode(float(value)) not in body
    for level in REGIONS:  # level names are sent (as column names), never per-row labels
        assert body.count(f"[{level}]".encode()) <= 2


# --- errors ------------------------------------------------------------------------------


@pytest.mark.parametrize(
    ("build", "message"),
    [
        (lambda f: summarize(f.assign(oven_hours=np.inf)), "column 'oven_hours' has 400 infinite"),
        (
            lambda f: summarize(f.assign(weeks=-1.0), weights="weeks"),
            "weights column 'weeks' has 400 negative",
        ),
        (lambda f: summarize(f, response="region"), "the response column 'region' must be numeric"),
        (lambda f: summarize(f, response="nope"), "the response column 'nope' is not among"),
        (lambda f: summarize(f, missing="guess"), "missing must be one of"),
        (lambda f: summarize(f.to_numpy()), "a plain 2-D array has no column names"),
        (lambda f: summarize(f, columns=["absent"]), "columns not found: ['absent']"),
        (
            lambda f: summarize(f.assign(when=pd.Timestamp("2024-01-01"))),
            "holds dates or durations",
        ),
        (lambda f: summarize(f, response="loaves", weights="loaves"), "cannot be both"),
        (lambda f: summarize(42), "cannot read a table from int"),
    ],
)
def test_error_messages(bakery, build, message):
    with pytest.raises((DataError, ValueError)) as info:
        build(bakery)
    assert message in str(info.value)


def test_merge_refuses_different_columns(bakery):
    a = summarize(bakery[["oven_hours", "flour_kg"]])
    b = summarize(bakery[["oven_hours", "van_trips"]])
    with pytest.raises(DataError, match="cannot merge summaries with different numeric"):
        a.merge(b)


def test_to_input_refuses_unusable_summaries(bakery):
    one_level = bakery.assign(region="hill")[["oven_hours", "region"]]
    with pytest.raises(DataError, match="'region' has 1 observed level"):
        summarize(one_level).to_input()
    with pytest.raises(DataError, match="constant columns"):
        summarize(bakery[["oven_hours"]].assign(flat=1.0)).to_input()
    with pytest.raises(DataError, match="n = 1 observations"):
        summarize(bakery[PREDICTORS].iloc[:1]).to_input()


def test_summary_pickles(bakery):
    import pickle

    s = summarize(bakery, response="loaves")
    back = pickle.loads(pickle.dumps(s))
    _same(back, s)


def test_reading_ahead_stops_cleanly_on_a_late_error(tmp_path, bakery):
    import threading

    frame = bakery[PREDICTORS].copy()
    big = pd.concat([frame] * 300, ignore_index=True)  # 120k rows: several batches
    big.loc[len(big) - 5, "flour_kg"] = np.inf
    pq.write_table(pa.Table.from_pandas(big), tmp_path / "late.parquet", row_group_size=10_000)
    before = threading.active_count()
    with pytest.raises(DataError, match="column 'flour_kg' has 1 infinite values"):
        summarize(tmp_path / "late.parquet")
    assert not any(t.name == "knotwork-read-ahead" for t in threading.enumerate())
    assert threading.active_count() <= before
    # A reader that fails half-way hands its error over, too.

    def failing():
        yield from pa.Table.from_pandas(frame).to_batches(max_chunksize=100)
        raise OSError("the disk went away")

    table = pa.Table.from_pandas(frame)
    reader = pa.RecordBatchReader.from_batches(table.schema, failing())
    with pytest.raises(OSError, match="the disk went away"):
        summarize(reader)


# --- invariants (hypothesis) ---------------------------------------------------------------


@settings(max_examples=40, deadline=None)
@given(
    cuts=st.lists(st.integers(min_value=1, max_value=119), max_size=6, unique=True),
    seed=st.integers(min_value=0, max_value=2**32 - 1),
    weighted=st.booleans(),
    pairwise=st.booleans(),
)
def test_any_split_merges_to_the_whole(cuts, seed, weighted, pairwise):
    rng = np.random.default_rng(seed)
    frame = pd.DataFrame(
        {
            "a": rng.normal(1e3, 1.0, 120),
            "b": rng.normal(size=120),
            "g": pd.Series(rng.choice(["p", "q", "r"], 120, p=[0.8, 0.15, 0.05]), dtype="str"),
            "w": rng.integers(0, 3, 120).astype(float),
        }
    )
    frame["c"] = frame["a"] * 0.5 + rng.normal(size=120)
    if pairwise:
        frame.loc[rng.choice(120, 10, replace=False), "b"] = np.nan
    kwargs = {"weights": "w" if weighted else None, "missing": "pairwise" if pairwise else "reject"}
    whole = summarize(frame, **kwargs)
    # Weights can be 0, so a column can lack any weighted variance: g[r] (5% of the rows) when
    # every r row weighs 0, or, under pairwise deletion, on the rows where b is observed (the
    # rows of every correlation with b). Its correlations are then 0 / 0: NaN, inf or rounding
    # noise that depends on the order of summation (-2.5e-9 one way, 7e-11 another), which no
    # tolerance can compare, so such draws are left out. A real variance here is at least 0.5
    # (an indicator with integer weights has co-moment W_r (W - W_r) / W, both weights >= 1;
    # the continuous columns about 100); a missing one is rounding noise far below 1e-6.
    assume(bool(np.all(np.diag(whole.comoments) > 1e-6)))
    if pairwise:
        observed = summarize(frame.dropna(subset=["b"]), **kwargs)
        assume(observed.columns == whole.columns)
        assume(bool(np.all(np.diag(observed.comoments) > 1e-6)))
    bounds = [0, *sorted(cuts), 120]
    parts = [summarize(frame.iloc[i:j], **kwargs) for i, j in itertools.pairwise(bounds)]
    merged = merge_summaries(reversed(parts))
    shuffled = summarize(frame.sample(frac=1.0, random_state=seed % 1000), **kwargs)
    for other in (merged, shuffled):
        assert other.columns == whole.columns
        assert other.n == pytest.approx(whole.n, rel=1e-12)
        assert_allclose(other.correlation, whole.correlation, rtol=1e-9, atol=1e-12)
        assert_allclose(other.comoments, whole.comoments, rtol=1e-9, atol=1e-9)
