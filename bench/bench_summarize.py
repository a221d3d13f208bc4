"""Local summary of a large Parquet file, read in batches, against reading it with pyarrow alone.

One run prints, side by side, for the same file:

* ``pyarrow stream``: pyarrow reading every batch with the reader settings the client uses
  (buffered column streams, no pre-buffering), doing nothing with them: the floor;
* ``pyarrow read_table``: ``pyarrow.parquet.read_table`` on the whole file (all threads, the
  whole table in memory): what a user would write first;
* ``summarize``: ``knotwork_client.summarize(path)``: batches -> centred co-moments -> merge.

Each is timed in its own process (best of ``--repeat``, the three interleaved), so each peak
resident memory (``VmHWM``) is its own. The file is read once beforehand, so every run reads
from the page cache (this measures decoding and arithmetic, not the disk), and each process
first warms up on a small file (lazy imports and first-use set-up are not timed: the goal is
throughput). The goal: summarize at least half as fast as the pyarrow stream, with peak memory
under 500 MB. This machine is shared: read the ratios, not the seconds.

    .venv/bin/python bench/bench_summarize.py                  # a ~200 MB file (quick)
    .venv/bin/python bench/bench_summarize.py --size-mb 2048   # the 2 GB case
    .venv/bin/python bench/bench_summarize.py --path my.parquet
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from _timing import table_header

CHILD = r"""
import json, resource, sys, time
mode, path = sys.argv[1], sys.argv[2]
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import knotwork_client
from knotwork_client._tables import block_rows

def peak_mb():
    # VmHWM is this process's own high-water mark; ru_maxrss would carry over the parent's
    # peak across fork and exec on Linux.
    for line in open("/proc/self/status"):
        if line.startswith("VmHWM:"):
            return int(line.split()[1]) / 1024
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024

# Warm up on a small file first, so lazy imports and first-use set-up are not timed: the
# goal is about throughput, which is what a large file sees.
warm = path + ".warm.parquet"
names = pq.ParquetFile(path).schema_arrow.names
pq.write_table(pa.table({n: np.arange(5000.0) * (i + 1) % 7 for i, n in enumerate(names)}), warm)
for _ in pq.ParquetFile(warm).iter_batches():
    pass
pq.read_table(warm)
knotwork_client.summarize(warm)
before = peak_mb()
def cpu():
    u = resource.getrusage(resource.RUSAGE_SELF)
    return u.ru_utime + u.ru_stime
c0 = cpu()
t0 = time.perf_counter()
if mode == "stream":
    handle = pq.ParquetFile(path, buffer_size=1 << 18, pre_buffer=False)
    step = block_rows(len(handle.schema_arrow.names))
    rows = 0
    for batch in handle.iter_batches(batch_size=step):
        rows += batch.num_rows
elif mode == "table":
    rows = pq.read_table(path).num_rows
elif mode == "summarize":
    rows = int(knotwork_client.summarize(path).n)
else:
    raise SystemExit(f"unknown mode {mode}")
seconds = time.perf_counter() - t0
print(json.dumps({
    "seconds": seconds,
    "cpu": cpu() - c0,
    "rows": rows,
    "peak_mb": peak_mb(),
    "imports_mb": before,
    "arrow_peak_mb": pa.default_memory_pool().max_memory() / 2**20,
}))
"""

LABELS = {
    "stream": "pyarrow stream (floor)",
    "table": "pyarrow read_table",
    "summarize": "knotwork_client.summarize",
}


def make_file(path: Path, size_mb: int, columns: int, seed: int = 5) -> None:
    """A Parquet file of correlated float64 columns (latent factors plus noise, large means)."""
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    rng = np.random.default_rng(seed)
    rows = size_mb * 2**20 // (8 * columns)
    chunk = 250_000
    factors = max(2, columns // 5)
    mixing = rng.normal(size=(factors, columns))
    shift = np.where(np.arange(columns) % 3 == 0, 1e4, 0.0)
    writer = None
    done = 0
    while done < rows:
        n = min(chunk, rows - done)
        x = rng.normal(size=(n, factors)) @ mixing + 0.3 * rng.normal(size=(n, columns)) + shift
        table = pa.table({f"x{j:03d}": x[:, j] for j in range(columns)})
        if writer is None:
            writer = pq.ParquetWriter(path, table.schema, compression="snappy")
        writer.write_table(table)  # one row group per chunk of 250k rows
        done += n
    assert writer is not None
    writer.close()


def run_child(mode: str, path: Path) -> dict:
    env = {**os.environ, "OPENBLAS_NUM_THREADS": os.environ.get("OPENBLAS_NUM_THREADS", "1")}
    done = subprocess.run(
        [sys.executable, "-c", CHILD, mode, str(path)],
        capture_output=True,
        text=True,
        env=env,
        check=False,
    )
    if done.returncode != 0:
        raise SystemExit(f"{mode} failed:\n{done.stderr[-3000:]}")
    return json.loads(done.stdout)


def warm_cache(path: Path) -> None:
    with path.open("rb") as fh:
        while fh.read(1 << 24):
            pass


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--size-mb", type=int, default=200, help="file size to generate (MB)")
    parser.add_argument("--columns", type=int, default=50)
    parser.add_argument("--path", type=Path, help="summarize this existing file instead")
    parser.add_argument("--repeat", type=int, default=5)
    parser.add_argument("--keep", action="store_true", help="keep the generated file")
    args = parser.parse_args()

    tmp = None
    if args.path is None:
        tmp = tempfile.TemporaryDirectory(prefix="knotwork-bench-")
        path = Path(tmp.name) / f"bench-{args.size_mb}mb.parquet"
        t0 = time.perf_counter()
        make_file(path, args.size_mb, args.columns)
        print(f"generated {path} in {time.perf_counter() - t0:.1f} s")
    else:
        path = args.path
    size = path.stat().st_size
    warm_cache(path)

    # Rounds interleave the three, so a burst of load from elsewhere hits all of them alike.
    modes = ("stream", "table", "summarize")
    runs: dict[str, list[dict]] = {m: [] for m in modes}
    for _ in range(args.repeat):
        for mode in modes:
            runs[mode].append(run_child(mode, path))
    results: dict[str, dict] = {}
    for mode in modes:
        best = dict(min(runs[mode], key=lambda r: r["seconds"]))
        best["peak_mb"] = max(r["peak_mb"] for r in runs[mode])
        best["cpu"] = min(r["cpu"] for r in runs[mode])
        results[mode] = best

    rows = results["stream"]["rows"]
    assert results["summarize"]["rows"] == rows == results["table"]["rows"]
    print(
        f"\nfile: {size / 2**20:.0f} MiB on disk, {rows:,} rows x {args.columns} columns; "
        f"best of {args.repeat}, page cache warm, BLAS on one thread"
    )
    floor = results["stream"]["seconds"]
    table_header(
        f"{'':28} {'seconds':>8} {'cpu s':>7} {'MiB/s':>8} {'speed vs stream':>16} {'peak RSS':>9}"
    )
    for mode, r in results.items():
        print(
            f"{LABELS[mode]:28} {r['seconds']:8.2f} {r['cpu']:7.2f} "
            f"{size / 2**20 / r['seconds']:8.0f} "
            f"{floor / r['seconds']:16.2f} {r['peak_mb']:7.0f} MB"
        )
    speed = floor / results["summarize"]["seconds"]
    peak = results["summarize"]["peak_mb"]
    print(
        f"\nsummarize runs at {speed:.2f}x the speed of pyarrow streaming the same batches "
        f"(goal >= 0.5) and {results['table']['seconds'] / results['summarize']['seconds']:.2f}x "
        f"that of read_table; its peak memory is {peak:.0f} MB (goal < 500 MB; after imports "
        f"{results['summarize']['imports_mb']:.0f} MB, Arrow's pool peaked at "
        f"{results['summarize']['arrow_peak_mb']:.0f} MB), against "
        f"{results['table']['peak_mb']:.0f} MB for read_table"
    )
    if tmp is not None:
        if args.keep:
            kept = Path.cwd() / path.name
            path.replace(kept)
            print(f"kept {kept}")
        tmp.cleanup()


if __name__ == "__main__":
    main()
