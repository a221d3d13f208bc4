"""Admission control in process: slots, the short queue, 503 beyond it, the time limit."""

from __future__ import annotations

import threading
import time

import anyio
import pytest

from knotwork.api import ApiError
from knotwork.api._work import WorkPool

pytestmark = pytest.mark.anyio


@pytest.fixture
def anyio_backend() -> str:
    return "asyncio"


async def test_beyond_slots_and_queue_answers_503_with_retry_after() -> None:
    pool = WorkPool(concurrency=1, queue=1, timeout_s=10, retry_after_s=3)
    release = threading.Event()
    results: list[str] = []

    async def occupy(tag: str) -> None:
        value, _, _ = await pool.run(lambda: (release.wait(5), tag)[1])
        results.append(value)

    async with anyio.create_task_group() as group:
        group.start_soon(occupy, "running")
        group.start_soon(occupy, "queued")
        await anyio.sleep(0.1)
        assert pool.in_flight == 2
        with pytest.raises(ApiError) as info:
            await pool.run(lambda: "refused")
        assert info.value.status == 503
        assert info.value.kind == "saturated"
        assert info.value.headers == {"Retry-After": "3"}
        release.set()
    assert sorted(results) == ["queued", "running"]
    assert pool.in_flight == 0
    value, queue_s, compute_s = await pool.run(lambda: "again")
    assert value == "again" and queue_s >= 0 and compute_s >= 0


async def test_time_limit_answers_503_but_keeps_the_slot_until_the_work_ends() -> None:
    pool = WorkPool(concurrency=1, queue=0, timeout_s=0.05)
    finished = threading.Event()

    def slow() -> None:
        time.sleep(0.4)
        finished.set()

    with pytest.raises(ApiError) as info:
        await pool.run(slow)
    assert info.value.status == 503 and info.value.kind == "time-limit"
    # The thread still runs: its slot is not given away, so a new request is refused.
    assert pool.in_flight == 1
    with pytest.raises(ApiError) as busy:
        await pool.run(lambda: None)
    assert busy.value.kind == "saturated"
    with anyio.fail_after(5):
        while pool.in_flight:
            await anyio.sleep(0.02)
    assert finished.is_set()


async def test_queued_work_past_its_time_limit_never_starts() -> None:
    pool = WorkPool(concurrency=1, queue=1, timeout_s=0.1)
    release = threading.Event()
    started: list[str] = []

    def first() -> None:
        started.append("first")
        release.wait(5)

    def second() -> None:
        started.append("second")

    async with anyio.create_task_group() as group:

        async def run_first() -> None:
            with pytest.raises(ApiError):
                await pool.run(first)

        group.start_soon(run_first)
        await anyio.sleep(0.02)
        with pytest.raises(ApiError) as info:
            await pool.run(second)
        assert info.value.kind == "time-limit"
        release.set()
    with anyio.fail_after(5):
        while pool.in_flight:
            await anyio.sleep(0.02)
    assert started == ["first"]


async def test_errors_of_the_work_reach_the_caller() -> None:
    pool = WorkPool(concurrency=1, queue=0, timeout_s=5)

    def fail() -> None:
        raise ValueError("bad input")

    with pytest.raises(ValueError, match="bad input"):
        await pool.run(fail)
    assert pool.in_flight == 0


async def test_a_glm_fit_past_its_time_limit_stops_at_its_next_checkpoint() -> None:
    # A binomial fit on a table large enough to take several IRLS iterations: the pool's
    # time limit sets the stop flag, and the fit ends at its next checkpoint (between
    # iterations or row blocks) with Interrupted instead of running to the end.
    import numpy as np
    from scipy.special import expit

    from knotwork.codecs import Prepared, TableData, run
    from knotwork.core import Interrupted
    from knotwork_contract import AssessOptions

    rng = np.random.default_rng(8)
    x = rng.normal(size=(200_000, 20))
    y = (rng.random(200_000) < expit(x @ rng.normal(0, 0.3, 20))).astype(float)
    columns = {f"x{j}": x[:, j] for j in range(20)} | {"y": y}
    prepared = Prepared(
        data=TableData(columns=columns, categorical={}, response="y"),
        options=AssessOptions(family="binomial"),
    )
    outcome: list[str] = []

    def fit() -> None:
        try:
            run(prepared)
            outcome.append("finished")
        except Interrupted:
            outcome.append("stopped")

    pool = WorkPool(concurrency=1, queue=0, timeout_s=0.01)
    with pytest.raises(ApiError) as info:
        await pool.run(fit)
    assert info.value.kind == "time-limit"
    with anyio.fail_after(30):
        while pool.in_flight:
            await anyio.sleep(0.02)
    assert outcome == ["stopped"]
