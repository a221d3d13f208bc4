"""The codecs without HTTP: pointers, JSON and Arrow decoding, query options, origins."""

from __future__ import annotations

import decimal

import msgspec
import numpy as np
import pyarrow as pa
import pytest
from bodies_and_problems import arrow_file, arrow_stream, parquet
from numpy.testing import assert_array_equal

from knotwork.codecs import (
    ARROW_FILE,
    ARROW_STREAM,
    PARQUET,
    InvalidRequest,
    Limits,
    Origin,
    TableData,
    UnusableInput,
    decode_assess,
    decode_batch,
    decode_table_body,
    options_from_query,
)
from knotwork_contract import AssessOptions, join, msgspec_fault


def test_pointer_tokens_are_escaped() -> None:
    # RFC 6901, section 3: "~" becomes "~0" and "/" becomes "~1".
    assert join("columns", "a/b~c", 3) == "/columns/a~1b~0c/3"


@pytest.mark.parametrize(
    ("message", "pointer", "reason"),
    [
        ("Expected `int`, got `str` - at `$.input.n`", "/input/n", "Expected `int`, got `str`"),
        ("Expected `float` - at `$.a[3][1]`", "/a/3/1", "Expected `float`"),
        ("Object missing required field `kind` - at `$.input`", "/input/kind",
         "Object missing required field `kind`"),
        ("Object contains unknown field `x`", "/x", "Object contains unknown field `x`"),
        ("Expected `str` of length >= 1 - at `key` in `$.input.columns`", "/input/columns",
         "Expected `str` of length >= 1"),
        ("Expected `float` - at `$.input.columns[...][4]`", "/input/columns", "Expected `float`"),
        ("Expected `object`, got `array`", "", "Expected `object`, got `array`"),
    ],
)  # fmt: skip
def test_msgspec_paths_become_pointers(message: str, pointer: str, reason: str) -> None:
    assert msgspec_fault(msgspec.ValidationError(message)) == (pointer, reason)


def test_json_table_becomes_float_arrays_with_nan_for_null() -> None:
    body = b'{"input": {"kind": "table", "columns": {"a": [1, null, 2.5]}, "categorical": {"g": ["x", null, "y"]}}}'  # noqa: E501
    prepared = decode_assess(body, Limits())
    assert isinstance(prepared.data, TableData)
    column = prepared.data.columns["a"]
    assert column.dtype == np.float64
    # Exact: decoding converts numbers, it computes nothing (the same doubles must come out).
    assert_array_equal(column, [1.0, np.nan, 2.5])
    assert prepared.data.categorical == {"g": ["x", None, "y"]}
    assert prepared.options == AssessOptions()


def test_batch_items_are_split_raw_and_decoded_one_by_one() -> None:
    items = decode_batch(b'{"items": [{"input": {"kind": "rows"}}, {"x": 1}]}', Limits())
    assert len(items) == 2
    with pytest.raises(InvalidRequest) as info:
        decode_assess(items[0], Limits(), base="/items/0")
    assert info.value.problems[0].pointer == "/items/0/input/kind"


def test_arrow_types_map_to_numbers_and_labels() -> None:
    table = pa.table(
        {
            "i": pa.array([1, 2, None], pa.int32()),
            "u": pa.array([1, 2, 3], pa.uint8()),
            "f": pa.array([0.5, None, 1.5], pa.float32()),
            "d": pa.array(
                [decimal.Decimal("1.25"), None, decimal.Decimal("2")], pa.decimal128(5, 2)
            ),
            "b": pa.array([True, False, None]),
            "s": pa.array(["x", None, "y"]),
            "ls": pa.array(["p", "q", "p"], pa.large_string()),
            "dict": pa.array(["m", "n", None]).dictionary_encode(),
            "dnum": pa.array([4.0, 5.0, 4.0]).dictionary_encode(),
        }
    )
    for media, body in (
        (ARROW_STREAM, arrow_stream(table)),
        (ARROW_FILE, arrow_file(table)),
        (PARQUET, parquet(table)),
    ):
        data = decode_table_body(body, media, b"", Limits()).data
        assert isinstance(data, TableData)
        assert list(data.columns) == ["i", "u", "f", "d", "b", "dnum"]
        # Exact: every value here is representable, and decoding only converts it.
        assert_array_equal(data.columns["i"], [1.0, 2.0, np.nan])
        assert_array_equal(data.columns["d"], [1.25, np.nan, 2.0])
        assert_array_equal(data.columns["b"], [1.0, 0.0, np.nan])
        assert_array_equal(data.columns["dnum"], [4.0, 5.0, 4.0])
        assert data.categorical == {
            "s": ["x", None, "y"],
            "ls": ["p", "q", "p"],
            "dict": ["m", "n", None],
        }


def test_arrow_stream_of_several_batches() -> None:
    table = pa.concat_tables([pa.table({"a": [1.0, 2.0]}), pa.table({"a": [None, float("inf")]})])
    with pytest.raises(UnusableInput) as info:
        decode_table_body(arrow_stream(table), ARROW_STREAM, b"", Limits())
    assert info.value.problems[0].pointer == "/columns/a"
    assert "row 3 is infinite" in info.value.problems[0].reason


def test_duplicate_arrow_column_names_are_refused() -> None:
    table = pa.Table.from_arrays([pa.array([1.0]), pa.array([2.0])], names=["a", "a"])
    with pytest.raises(UnusableInput, match="two columns of this name"):
        decode_table_body(arrow_stream(table), ARROW_STREAM, b"", Limits())


def test_query_options_equal_json_options() -> None:
    options, response, weights = options_from_query(
        "threshold=10&protect=a,b&protect=c&intercept=false&missing=drop_rows&repair=nearest"
        "&sections=variables,removal&ridge_grid=0,0.05&components_rule=cumulative"
        "&components_limit=0.8&response=y&weights=w"
    )
    expected = msgspec.json.decode(
        b'{"threshold": 10, "protect": ["a", "b", "c"], "intercept": false,'
        b' "missing": "drop_rows", "repair": "nearest", "sections": ["variables", "removal"],'
        b' "ridge": {"grid": [0, 0.05]}, "components": {"rule": "cumulative", "limit": 0.8}}',
        type=AssessOptions,
    )
    assert options == expected
    assert (response, weights) == ("y", "w")


@pytest.mark.parametrize(
    ("scope", "pointer", "json_pointer", "query_pointer"),
    [
        ("input", "/columns/a", "/items/2/input/columns/a", "/columns/a"),
        ("input", "/response", "/items/2/input/response", "/query/response"),
        ("input", "/weights", "/items/2/input/weights", "/query/weights"),
        ("options", "/protect/1", "/items/2/options/protect/1", "/query/protect"),
        ("options", "/ridge/grid/0", "/items/2/options/ridge/grid/0", "/query/ridge_grid"),
        ("options", "/components/limit", "/items/2/options/components/limit",
         "/query/components_limit"),
        ("options", "/missing", "/items/2/options/missing", "/query/missing"),
    ],
)  # fmt: skip
def test_origins_translate_core_pointers(
    scope: str, pointer: str, json_pointer: str, query_pointer: str
) -> None:
    assert Origin(base="/items/2").locate(scope, pointer) == json_pointer
    assert Origin(query=True).locate(scope, pointer) == query_pointer
