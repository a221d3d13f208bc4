"""Removal sequence: the O(p^3) downdate against the naive re-inversion, side by side.

Run: ``.venv/bin/python bench/bench_removal.py [--quick] [--threads N] [--repeat R]``

Data: strongly collinear synthetic designs (latent factors plus noise): n = 2p rows,
p / 20 factors with standard normal loadings, noise sd 0.3, threshold 10. Methods, each on the
same correlation matrix:

- ``inverse``: one ``numpy.linalg.inv`` of the p x p matrix (LU), and one Cholesky inverse
  (LAPACK potrf + potri), the yardsticks;
- ``sequence``: ``removal_sequence`` (lazy downdate: one Cholesky inverse, then per drop one
  matrix-vector product over the stored rank-one terms), without and with the per-step tables;
- ``full downdate``: the same greedy sequence updating the whole inverse in place after every
  drop (O(p^2) per drop);
- ``naive``: re-invert the remaining matrix after every drop (``numpy.linalg.inv``). For p above
  ``--naive-max`` (default 300) it is not run to the end: the inversions at 24 evenly spaced
  steps of the sequence are timed and the total is the trapezoidal sum over all steps
  (marked ``~``).

Times are the best of ``--repeat`` runs (the machine is shared). BLAS threads are fixed with
threadpoolctl. The goal (issue 3): at p = 1000 the sequence takes at most 3x one inverse and is at
least 100x faster than the naive loop.
"""

from __future__ import annotations

import numpy as np
import scipy.linalg
from _timing import best, size_parser, sizes_and_repeat, table_header
from threadpoolctl import threadpool_limits

from knotwork.core._removal import removal_sequence

THRESHOLD = 10.0


def design(p: int, seed: int = 20261201) -> np.ndarray:
    rng = np.random.default_rng(seed)
    n, f = 2 * p, max(2, p // 20)
    x = rng.standard_normal((n, f)) @ rng.standard_normal((f, p))
    x += 0.3 * rng.standard_normal((n, p))
    return np.corrcoef(x, rowvar=False)


def chol_inverse(m: np.ndarray) -> np.ndarray:
    c, _ = scipy.linalg.lapack.dpotrf(m, lower=False)
    inv, _ = scipy.linalg.lapack.dpotri(c, lower=False)
    return inv


def naive(m: np.ndarray, threshold: float) -> list[int]:
    """Recompute every VIF from a fresh inverse after each drop; ties go to the later column."""
    active = list(range(m.shape[0]))
    drops = []
    while True:
        vif = np.diag(np.linalg.inv(m[np.ix_(active, active)]))
        top = vif.max()
        if top <= threshold:
            return drops
        i = int(np.flatnonzero(vif >= top * (1 - 1e-9)).max())
        drops.append(active.pop(i))


def full_downdate(m: np.ndarray, threshold: float) -> list[int]:
    """The same sequence with the whole inverse updated in place after every drop."""
    a = np.linalg.inv(m)
    on = np.ones(m.shape[0], dtype=bool)
    drops = []
    while True:
        vif = np.where(on, np.diag(a), -np.inf)
        top = vif.max()
        if top <= threshold:
            return drops
        j = int(np.flatnonzero(vif >= top * (1 - 1e-9)).max())
        col = a[:, j].copy()
        a -= np.outer(col, col / col[j])
        a[j, :] = 0.0
        a[:, j] = 0.0
        on[j] = False
        drops.append(j)


def naive_estimate(m: np.ndarray, drops: list[int], samples: int = 24) -> float:
    """Trapezoidal estimate of the naive loop's time from inversions at sampled steps."""
    p = m.shape[0]
    steps = np.unique(np.linspace(0, len(drops), samples).astype(int))
    times = []
    for s in steps:
        keep = np.setdiff1d(np.arange(p), drops[:s])
        sub = m[np.ix_(keep, keep)]
        times.append(best(lambda sub=sub: np.diag(np.linalg.inv(sub)), 2))
    return float(np.trapezoid(times, steps) + times[-1])


def main() -> None:
    parser = size_parser(__doc__.splitlines()[0])
    parser.add_argument("--naive-max", type=int, default=300, help="largest p run naively")
    args = parser.parse_args()
    sizes, repeat = sizes_and_repeat(args, quick_repeat=3, full_repeat=7)

    print(
        f"removal sequence, threshold {THRESHOLD:g}, BLAS threads {args.threads}, best of {repeat}"
    )
    table_header(
        f"{'p':>5} {'drops':>5} {'np.inv':>8} {'chol-inv':>8} {'sequence':>9} {'+tables':>9} "
        f"{'full-dd':>8} {'naive':>10} | {'seq/inv':>7} {'seq/chol':>8} {'naive/seq':>9} "
        f"{'full/seq':>8}"
    )
    with threadpool_limits(limits=args.threads):
        for p in sizes:
            m = design(p)
            names = [f"x{j}" for j in range(p)]
            t_inv = best(lambda m=m: np.linalg.inv(m), repeat)
            t_chol = best(lambda m=m: chol_inverse(m), repeat)
            result = removal_sequence(m, names, threshold=THRESHOLD, tables=False)
            drops = [names.index(s.drop) for s in result.steps]
            t_seq = best(
                lambda m=m, names=names: removal_sequence(
                    m, names, threshold=THRESHOLD, tables=False
                ),
                repeat,
            )
            t_tab = best(
                lambda m=m, names=names: removal_sequence(m, names, threshold=THRESHOLD),
                max(1, repeat // 2),
            )
            t_full = best(lambda m=m: full_downdate(m, THRESHOLD), max(1, repeat // 3))
            if full_downdate(m, THRESHOLD) != drops:
                raise SystemExit(f"p={p}: full downdate disagrees with the sequence")
            if p <= args.naive_max:
                t_naive = best(lambda m=m: naive(m, THRESHOLD), 1)
                if naive(m, THRESHOLD) != drops:
                    raise SystemExit(f"p={p}: naive sequence disagrees with the sequence")
                naive_txt = f"{t_naive * 1e3:9.1f} "
            else:
                t_naive = naive_estimate(m, drops)
                naive_txt = f"~{t_naive * 1e3:9.0f}"
            print(
                f"{p:5d} {len(drops):5d} {t_inv * 1e3:8.1f} {t_chol * 1e3:8.1f} "
                f"{t_seq * 1e3:9.1f} {t_tab * 1e3:9.1f} {t_full * 1e3:8.1f} {naive_txt} | "
                f"{t_seq / t_inv:7.2f} {t_seq / t_chol:8.2f} {t_naive / t_seq:9.0f} "
                f"{t_full / t_seq:8.1f}"
            )
            if p == 1000:
                ok_inv = t_seq <= 3 * t_inv
                ok_naive = t_naive >= 100 * t_seq
                print(
                    f"goal at p=1000: sequence <= 3x np.inv: {'met' if ok_inv else 'missed'} "
                    f"({t_seq / t_inv:.2f}x); >= 100x faster than naive: "
                    f"{'met' if ok_naive else 'missed'} ({t_naive / t_seq:.0f}x)"
                )
    print("times in ms; ~ = naive loop estimated from sampled steps (see the module docstring)")


if __name__ == "__main__":
    main()
