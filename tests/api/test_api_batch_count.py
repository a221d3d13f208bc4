"""Batch items are counted from the bytes before any is built (bounded memory)."""

from __future__ import annotations

import json
import random

import pytest

import knotwork.codecs._json as codec_json
from knotwork.codecs._json import _count_elements


def _value(rng: random.Random, depth: int = 0) -> object:
    choice = rng.random()
    if depth > 3 or choice < 0.3:
        # Strings with commas, brackets, escaped quotes and backslashes must not confuse it.
        return rng.choice([1, 2.5, None, True, "a,b", 'q"uo\\\\"te', "\\\\", "[{,}]", ""])
    if choice < 0.6:
        return [_value(rng, depth + 1) for _ in range(rng.randint(0, 4))]
    return {f'k{i},"': _value(rng, depth + 1) for i in range(rng.randint(0, 3))}


@pytest.mark.parametrize("chunk", [1, 3, 7, 1 << 20])
def test_count_equals_json_length(monkeypatch, chunk: int) -> None:
    # Reference: the length of the list that the standard library's json module decodes.
    monkeypatch.setattr(codec_json, "_SCAN_CHUNK", chunk)
    rng = random.Random(chunk)
    for trial in range(200):
        items = [_value(rng) for _ in range(rng.randint(0, 6))]
        spaced = (", ", ": ") if trial % 2 else (",", ":")
        text = json.dumps(items, separators=spaced).encode()
        assert _count_elements(text) == len(json.loads(text))


def test_millions_of_tiny_items_are_refused_before_they_are_built() -> None:
    import tracemalloc

    from knotwork.codecs import decode_batch
    from knotwork.codecs._errors import TooLarge
    from knotwork.codecs._prepared import Limits

    body = b'{"items": [' + b"{}," * 999_999 + b"{}]}"
    limits = Limits(max_cells=10_000_000, max_columns=1000, max_batch_items=500)
    tracemalloc.start()
    with pytest.raises(TooLarge) as info:
        decode_batch(body, limits)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    assert "1000000 items is more than the limit of 500" in str(info.value)
    assert peak < 40 * (1 << 20), peak  # a few scan chunks, not 57 bytes an item (57 MB here)
