"""Comparing answers that come from different code paths: exact for labels, close for numbers.

Two computations of the same quantity by different routes (another encoding of the input, a
summary instead of the rows, merged parts, permuted columns, another BLAS kernel) agree to
rounding, not bit for bit, so their answers are compared with :func:`assert_close_answers`:
strings, integers, booleans and None must be equal, floats must agree to a tolerance the
caller states with its reason. Exact equality (``==``) stays for the cases where the code
promises identical bits: the same function on the same input (DEVELOPERS.md, Conventions).
"""

from __future__ import annotations

import dataclasses
import math
from collections.abc import Mapping
from typing import Any

import msgspec
import numpy as np

__all__ = ["assert_close_answers", "plain"]


def plain(value: Any) -> Any:
    """The value as JSON-like builtins: dicts, lists, str, int, float, bool and None.

    msgspec Structs, dataclasses (the core's frozen results), tuples and numpy arrays and
    scalars are converted; dictionaries keep their keys.
    """
    if isinstance(value, np.ndarray | np.generic):  # before float: np.float64 is a float
        return plain(value.tolist())
    if value is None or isinstance(value, str | bool | int | float):
        return value
    if isinstance(value, Mapping):
        return {key: plain(item) for key, item in value.items()}
    if isinstance(value, list | tuple):
        return [plain(item) for item in value]
    if isinstance(value, msgspec.Struct):
        return {name: plain(getattr(value, name)) for name in value.__struct_fields__}
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return {f.name: plain(getattr(value, f.name)) for f in dataclasses.fields(value)}
    raise TypeError(f"cannot compare a value of type {type(value).__name__}")


def _rtol_at(path: str, rtol: float, looser: Mapping[str, float]) -> float:
    """The tolerance for the float at ``path``: that of the longest prefix in ``looser``."""
    best = ""
    for prefix in looser:
        if (path == prefix or path.startswith(prefix + "/")) and len(prefix) > len(best):
            best = prefix
    return looser[best] if best else rtol


def _mismatches(
    actual: Any,
    expected: Any,
    rtol: float,
    atol: float,
    looser: Mapping[str, float],
    path: str,
    out: list[str],
) -> None:
    if isinstance(actual, dict) and isinstance(expected, dict):
        if actual.keys() != expected.keys():  # in any order, as for ==
            only = sorted(actual.keys() - expected.keys())
            missing = sorted(expected.keys() - actual.keys())
            out.append(f"{path or '/'}: extra keys {only}, missing keys {missing}")
            return
        for key in expected:
            _mismatches(actual[key], expected[key], rtol, atol, looser, f"{path}/{key}", out)
        return
    if isinstance(actual, list) and isinstance(expected, list):
        if len(actual) != len(expected):
            out.append(f"{path or '/'}: length {len(actual)} != {len(expected)}")
            return
        for index, (a, e) in enumerate(zip(actual, expected, strict=True)):
            _mismatches(a, e, rtol, atol, looser, f"{path}/{index}", out)
        return
    if type(actual) is not type(expected):
        kinds = f"{type(actual).__name__} vs {type(expected).__name__}"
        out.append(f"{path or '/'}: {actual!r} != {expected!r} ({kinds})")
        return
    if isinstance(actual, float):
        if actual == expected or (math.isnan(actual) and math.isnan(expected)):
            return
        tol = _rtol_at(path, rtol, looser)
        finite = math.isfinite(actual) and math.isfinite(expected)
        if finite and abs(actual - expected) <= atol + tol * abs(expected):
            return
        out.append(f"{path or '/'}: {actual!r} != {expected!r} (rtol={tol:g}, atol={atol:g})")
        return
    if actual != expected:
        out.append(f"{path or '/'}: {actual!r} != {expected!r}")


def assert_close_answers(
    actual: Any,
    expected: Any,
    *,
    rtol: float,
    atol: float = 0.0,
    looser: Mapping[str, float] | None = None,
) -> None:
    """Assert two answers are the same up to a tolerance on their floats.

    Both are walked together (JSON documents, msgspec Structs, dataclasses, tuples, lists,
    numpy arrays): keys, lengths, strings, integers, booleans and None must be equal and of the
    same type; two floats ``a`` and ``e`` must satisfy ``|a - e| <= atol + rtol * |e|``
    (numpy's ``assert_allclose`` rule; NaN matches NaN, an infinity only itself). The caller
    gives ``rtol`` (and ``atol`` for values that are zero up to rounding) with a comment saying
    why the tolerance holds for the two routes compared. ``looser`` maps a path prefix (such as
    ``"/ridge/choices"``) to the relative tolerance of the floats under it, for values that
    settle less tightly than rounding, such as the result of a minimiser.

    Raises
    ------
    AssertionError
        Listing every mismatch by its JSON-pointer-like path (the first 20).
    """
    out: list[str] = []
    _mismatches(plain(actual), plain(expected), rtol, atol, looser or {}, "", out)
    if out:
        more = f"\n... and {len(out) - 20} more" if len(out) > 20 else ""
        raise AssertionError(f"{len(out)} mismatches:\n" + "\n".join(out[:20]) + more)
