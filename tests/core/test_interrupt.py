"""A computation stops at the next checkpoint once its caller gives up."""

from __future__ import annotations

import threading

import numpy as np
import pytest

from knotwork.core import Interrupted, Options, assess, from_table, stop_when


def test_assess_stops_when_asked(rng: np.random.Generator) -> None:
    x = rng.normal(size=(200, 5))
    summary = from_table({f"x{j}": x[:, j] for j in range(5)})
    calls = []

    def stop() -> bool:
        calls.append(1)
        return len(calls) > 2  # let two stages run, then stop

    with stop_when(stop), pytest.raises(Interrupted):
        assess(summary, Options())
    # Outside the block the same call runs to the end.
    assert assess(summary, Options()).variables


def test_summary_stops_between_row_blocks(monkeypatch, rng: np.random.Generator) -> None:
    import knotwork_contract._moments as moments_module

    monkeypatch.setattr(moments_module, "_BLOCK_BYTES", 8 * 3 * 10)  # 10 rows a block
    x = rng.normal(size=(1000, 2))
    blocks = []

    def stop() -> bool:
        blocks.append(1)
        return len(blocks) > 5

    with stop_when(stop), pytest.raises(Interrupted):
        from_table({"a": x[:, 0], "b": x[:, 1]})
    assert len(blocks) == 6


def test_the_check_is_per_thread(rng: np.random.Generator) -> None:
    x = rng.normal(size=(100, 3))
    summary = from_table({f"x{j}": x[:, j] for j in range(3)})
    done = []

    def other() -> None:
        done.append(assess(summary, Options()))

    with stop_when(lambda: True):
        worker = threading.Thread(target=other)
        worker.start()
        worker.join()
    assert done and done[0].variables
