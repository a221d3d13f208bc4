"""Sampling uncertainty of VIFs: normal-theory intervals and the row bootstrap, each beside one
plain assessment of the same data in the same run.

Run: ``.venv/bin/python bench/bench_uncertainty.py [--quick] [--coverage] [--repeat R]``

- ``bootstrap``: ``bootstrap_intervals`` with 1,000 replicates at n = 10,000, p = 20 (the
  goal of issue 15: within 2 s), beside ``assess()`` with default options on the same rows.
  The design (latent factors plus noise) has one VIF just above 5, so the removal sequence
  runs in every replicate: the expensive case. Without ``--quick`` also the replicates'
  weighted sums three ways: the counts of a block of replicates times the per-row products
  (what the core does), one weighted Gram product per replicate, and ``einsum``.
- ``normal``: ``normal_intervals`` for p = 200 (goal: within 50 ms) at n = 1,000, beside
  ``assess()`` on the same rows, and beside Brent's method (``scipy.optimize.brentq``) one
  bound at a time on the same series (the method the vectorised solver replaced). Two designs:
  moderate collinearity (40 latent factors, noise sd 3: VIF median about 5) and strong (noise
  sd 0.6: VIF median about 100, where every window is summed by quadrature). Without
  ``--quick`` also n = 2,000, n = 100,000 with p = 200 and n = 1,000,000 with p = 20.
- ``--coverage``: the large coverage checks behind the test suite's small ones: normal
  intervals at level 0.95 over 10,000 samples for n in {30, 200}, bootstrap percentile
  intervals over 1,000 samples of 1,000 replicates at n = 200, from a known covariance.

Times are the best of ``--repeat`` runs (the machine is shared); BLAS is pinned to one thread.
"""

from __future__ import annotations

import argparse
import math
import time

import numpy as np
from _timing import best
from scipy import optimize
from threadpoolctl import threadpool_limits

import knotwork.core._uncertainty as unc
from knotwork.core import Options, assess, design_from_table, from_table
from knotwork_contract import UncertaintyOptions

SIGMA = np.array(
    [
        [1.0, 0.6, 0.3, 0.2],
        [0.6, 1.0, 0.5, 0.1],
        [0.3, 0.5, 1.0, 0.4],
        [0.2, 0.1, 0.4, 1.0],
    ]
)


def design(n: int, p: int, noise: float, seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    k = max(2, p // 5)
    return rng.normal(size=(n, k)) @ rng.normal(size=(k, p)) + noise * rng.normal(size=(n, p))


def plain(x: np.ndarray) -> object:
    return assess(from_table({f"x{j}": x[:, j] for j in range(x.shape[1])}))


def wired(x: np.ndarray, uncertainty: UncertaintyOptions) -> object:
    """The whole assessment with ``options.uncertainty``, as the service runs it: the summary
    and the design's rows from the columns, then assess()."""
    summary, rows = design_from_table({f"x{j}": x[:, j] for j in range(x.shape[1])})
    return assess(summary, Options(uncertainty=uncertainty), rows)


def brent_one_at_a_time(vifs: np.ndarray, n: int, p: int, level: float = 0.95) -> np.ndarray:
    """Both bounds of every VIF by scipy.optimize.brentq, one bound at a time, on the same
    precomputed series (so only the root finder differs)."""
    y = 1.0 / vifs
    series = unc._Series(1.0 - y, y, float(n), p - 1, unc.SERIES_TAIL)
    target = (1.0 - level) / 2.0
    out = np.ones((vifs.shape[0], 2))
    for e in range(vifs.shape[0]):
        which = np.array([e])
        for col, upper_tail in ((0, True), (1, False)):
            start = series.s0[e] if upper_tail else series.f0[e]
            if (start >= target) if upper_tail else (start <= target):
                continue

            def gap(s: float, upper_tail: bool = upper_tail, which: np.ndarray = which) -> float:
                f, g, _ = series.evaluate(np.array([s]), which)
                return float((g if upper_tail else f)[0]) - target

            top = math.log(vifs[e]) + 1.0
            while (gap(top) < 0) if upper_tail else (gap(top) > 0):
                top *= 2.0
            out[e, col] = math.exp(optimize.brentq(gap, 1e-12, top, xtol=1e-13, rtol=1e-12))
    return out


def bench_bootstrap(repeat: int) -> None:
    n, p, reps = 10_000, 20, 1000
    x = design(n, p, 1.0, seed=0)
    names = [f"x{j}" for j in range(p)]
    result = unc.bootstrap_intervals(x, names, replicates=reps, seed=1)
    t_boot = best(lambda: unc.bootstrap_intervals(x, names, replicates=reps, seed=1), repeat)
    t_plain = best(lambda: plain(x), max(repeat, 3))
    ask = UncertaintyOptions(method="bootstrap", replicates=reps, seed=1)
    t_wired = best(lambda: wired(x, ask), repeat)
    top = max(v.vif for v in result.variables if v.vif is not None)
    print(f"bootstrap  n={n:,} p={p} replicates={reps} (largest VIF {top:.2f})")
    print(f"  bootstrap_intervals      {t_boot:8.3f} s   goal 2 s")
    print(f"  assess() with bootstrap  {t_wired:8.3f} s   (rows kept, every section)")
    print(f"  assess() default options {t_plain:8.3f} s   ratio {t_boot / t_plain:7.1f}x")
    print(
        f"  usable {result.usable_replicates}, kept set as proposed in "
        f"{result.share_same_kept:.1%} of replicates"
    )


def bench_gram(repeat: int) -> None:
    """The replicates' weighted sums three ways, for 1,000 replicates at n = 10,000, p = 20."""
    n, p, reps = 10_000, 20, 1000
    x = design(n, p, 1.0, seed=0)
    xc = x - x.mean(axis=0)
    counts = unc._draw_counts(np.random.default_rng(0), n, reps)
    sampler = unc._Resampler(x, None, x.mean(axis=0))
    block = 128

    def batched() -> None:
        for b0 in range(0, reps, block):
            sampler.sums(counts[b0 : b0 + block])

    def per_replicate() -> None:
        for c in counts:
            xc.T @ (xc * c[:, None])

    def einsum() -> None:
        for b0 in range(0, reps, block):
            np.einsum("bi,ij,ik->bjk", counts[b0 : b0 + block], xc, xc, optimize=True)

    t_b = best(batched, repeat)
    t_p = best(per_replicate, repeat)
    t_e = best(einsum, max(1, repeat // 2))
    print(f"replicate sums  n={n:,} p={p} replicates={reps}")
    print(f"  counts @ row products (blocks of {block})  {t_b:7.3f} s")
    print(f"  one X' diag(c) X per replicate        {t_p:7.3f} s   ratio {t_p / t_b:5.1f}x")
    print(f"  einsum over blocks of {block}            {t_e:7.3f} s   ratio {t_e / t_b:5.1f}x")


def bench_normal(n: int, p: int, repeat: int, brent: bool, noise: float = 3.0) -> None:
    x = design(n, p, noise, seed=2)
    a = plain(x)
    vifs = np.array([v.vif for v in a.variables], dtype=float)
    t_norm = best(lambda: unc.normal_intervals(vifs, n, p), repeat)
    t_plain = best(lambda: plain(x), repeat)
    t_wired = best(lambda: wired(x, UncertaintyOptions(method="normal")), repeat)
    print(f"normal     n={n:,} p={p} (VIF median {np.median(vifs):.2f}, max {vifs.max():.1f})")
    goal = "   goal 50 ms" if p == 200 else ""
    print(f"  normal_intervals         {t_norm * 1e3:8.1f} ms{goal}")
    print(
        f"  assess() with normal     {t_wired * 1e3:8.1f} ms   extra over plain "
        f"{(t_wired - t_plain) * 1e3:6.1f} ms"
    )
    print(f"  assess() default options {t_plain * 1e3:8.1f} ms   ratio {t_norm / t_plain:6.2f}x")
    if brent:
        got = np.array([v.vif_interval for v in unc.normal_intervals(vifs, n, p).variables])
        t0 = time.perf_counter()
        ref = brent_one_at_a_time(vifs, n, p)
        t_brent = time.perf_counter() - t0
        gap = float(np.max(np.abs(got / ref - 1.0)))
        print(
            f"  brentq one bound at once {t_brent * 1e3:8.1f} ms   ratio {t_brent / t_norm:6.2f}x"
            f" (bounds agree to {gap:.1e})"
        )


def coverage_normal(count: int) -> None:
    rng = np.random.default_rng(20261201)
    true = np.diag(np.linalg.inv(SIGMA))
    chol = np.linalg.cholesky(SIGMA)
    for n in (30, 200):
        hits = np.zeros(4)
        done = 0
        while done < count:
            batch = min(2000, count - done)
            x = rng.standard_normal((batch, n, 4)) @ chol.T
            xc = x - x.mean(axis=1, keepdims=True)
            c = xc.transpose(0, 2, 1) @ xc
            d = np.sqrt(np.einsum("sjj->sj", c))
            vifs = np.einsum("sjj->sj", np.linalg.inv(c / d[:, :, None] / d[:, None, :]))
            for j in range(4):
                res = unc.normal_intervals(vifs[:, j], n, 4)
                ends = np.array([v.vif_interval for v in res.variables])
                hits[j] += np.sum((ends[:, 0] <= true[j]) & (true[j] <= ends[:, 1]))
            done += batch
        cov = ", ".join(f"{h / count:.3f}" for h in hits)
        print(f"  normal, n = {n:3d}, {count:,} samples: coverage per VIF {cov}  (goal 0.93-0.97)")


def coverage_bootstrap(count: int, reps: int) -> None:
    rng = np.random.default_rng(7)
    true = np.diag(np.linalg.inv(SIGMA))
    chol = np.linalg.cholesky(SIGMA)
    hits = np.zeros(4)
    t0 = time.perf_counter()
    for s in range(count):
        x = rng.standard_normal((200, 4)) @ chol.T
        res = unc.bootstrap_intervals(x, list("abcd"), replicates=reps, seed=s)
        for j, v in enumerate(res.variables):
            assert v.vif_interval is not None
            hits[j] += v.vif_interval[0] <= true[j] <= v.vif_interval[1]
    cov = ", ".join(f"{h / count:.3f}" for h in hits)
    took = time.perf_counter() - t0
    print(
        f"  bootstrap, n = 200, {count:,} samples x {reps:,} replicates: coverage per VIF {cov}"
        f"  (goal >= 0.88; {took:.0f} s)"
    )


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="the goal cases only")
    parser.add_argument("--coverage", action="store_true", help="also the large coverage checks")
    parser.add_argument("--repeat", type=int, default=None, help="best of this many runs")
    args = parser.parse_args()
    repeat = args.repeat or (2 if args.quick else 5)
    with threadpool_limits(limits=1):
        bench_bootstrap(max(1, repeat // 2))
        if not args.quick:
            bench_gram(max(1, repeat // 2))
        bench_normal(1000, 200, repeat, brent=True)
        bench_normal(1000, 200, repeat, brent=False, noise=0.6)
        if not args.quick:
            bench_normal(2000, 200, repeat, brent=True)
            bench_normal(100_000, 200, repeat, brent=False)
            bench_normal(1_000_000, 20, repeat, brent=False)
        if args.coverage:
            print("coverage (known covariance, level 0.95)")
            coverage_normal(10_000)
            coverage_bootstrap(1000, 1000)


if __name__ == "__main__":
    main()
