"""Summarizing a Parquet file larger than the memory the process may use.

A child process gets a hard address-space limit (RLIMIT_AS) of 64 MiB above what it uses
after imports and a warm-up, then summarizes a file of 256 MB of values whose row groups are
128 MB each. It can only finish by streaming. Allocation is made plain and predictable for the
check: Arrow uses the system allocator and glibc one arena, so no allocator reserves address
space ahead of need (mimalloc and per-thread glibc arenas reserve far more than they touch,
which would make the limit meaningless or spuriously tight).
"""

from __future__ import annotations

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import numpy as np
import pytest

pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")
resource = pytest.importorskip("resource")

ROWS, COLS, ROW_GROUP = 4_000_000, 8, 2_000_000
BUDGET_MIB = 64

CHILD = textwrap.dedent(
    """
    import json, os, resource, sys
    import numpy as np
    import pyarrow as pa, pyarrow.compute, pyarrow.parquet as pq
    from knotwork_client import summarize

    def address_space():
        return int(open("/proc/self/statm").read().split()[0]) * os.sysconf("SC_PAGE_SIZE")

    warm = sys.argv[2]
    rng = np.random.default_rng(0)
    pq.write_table(pa.table({f"w{j}": rng.random(70_000) for j in range(8)}), warm)
    summarize(warm)  # thread pools and lazily loaded modules come up before the limit
    limit = address_space() + int(sys.argv[3]) * 2**20
    resource.setrlimit(resource.RLIMIT_AS, (limit, limit))
    s = summarize(sys.argv[1])
    print(json.dumps({
        "n": s.n,
        "means": s.means.tolist(),
        "covariance": s.covariance.tolist(),
        "arrow_peak": pa.default_memory_pool().max_memory(),
    }))
    """
)


@pytest.fixture(scope="module")
def tall_parquet(tmp_path_factory) -> tuple[Path, np.ndarray, np.ndarray]:
    path = tmp_path_factory.mktemp("memory") / "tall.parquet"
    rng = np.random.default_rng(2024)
    writer = None
    blocks = []
    for _ in range(ROWS // ROW_GROUP):
        x = rng.random((ROW_GROUP, COLS))
        x[:, 1] += 0.5 * x[:, 0]  # some correlation, so the covariance is not diagonal
        table = pa.table({f"c{j}": x[:, j] for j in range(COLS)})
        if writer is None:
            writer = pq.ParquetWriter(path, table.schema, compression="none")
        writer.write_table(table, row_group_size=ROW_GROUP)
        blocks.append(x)
    writer.close()
    # Reference: numpy's mean and covariance of the whole table, held here in the parent.
    whole = np.concatenate(blocks)
    return path, whole.mean(axis=0), np.cov(whole, rowvar=False)


def run_child(code: str, path: Path, tmp_path: Path) -> subprocess.CompletedProcess[str]:
    """Run ``code`` in a child under the budget, with the plain allocation described above."""
    env = {
        **os.environ,
        "ARROW_DEFAULT_MEMORY_POOL": "system",
        "MALLOC_ARENA_MAX": "1",
        "OPENBLAS_NUM_THREADS": "1",
    }
    return subprocess.run(
        [sys.executable, "-c", code, str(path), str(tmp_path / "warm.parquet"), str(BUDGET_MIB)],
        capture_output=True,
        text=True,
        env=env,
        timeout=300,
    )


@pytest.mark.slow
@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="uses /proc and RLIMIT_AS")
def test_file_larger_than_the_memory_limit_is_summarized(tall_parquet, tmp_path):
    path, means, covariance = tall_parquet
    values_bytes = ROWS * COLS * 8
    assert values_bytes > 3 * BUDGET_MIB * 2**20
    meta = pq.ParquetFile(path).metadata
    assert meta.row_group(0).num_rows * COLS * 8 > BUDGET_MIB * 2**20  # one row group > limit
    done = run_child(CHILD, path, tmp_path)
    assert done.returncode == 0, done.stderr[-2000:]
    import json

    result = json.loads(done.stdout)
    assert result["n"] == ROWS
    np.testing.assert_allclose(result["means"], means, rtol=1e-12)
    np.testing.assert_allclose(result["covariance"], covariance, rtol=1e-9, atol=1e-14)
    assert result["arrow_peak"] < BUDGET_MIB * 2**20


@pytest.mark.slow
def test_the_limit_is_real(tall_parquet, tmp_path):
    """The same child, asked to read the whole file at once, fails under the same limit."""
    path, _, _ = tall_parquet
    greedy = CHILD.replace(
        "s = summarize(sys.argv[1])",
        "pq.ParquetFile(sys.argv[1], pre_buffer=False).read(use_threads=False); "
        "raise SystemExit(0)",
    )
    done = run_child(greedy, path, tmp_path)
    assert done.returncode != 0
    assert "MemoryError" in done.stderr or "memory" in done.stderr.lower()
