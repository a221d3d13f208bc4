"""Estimates input against a correlation input of the same design, side by side in one run.

For each p: a random positive-definite design correlation R (latent factors plus noise) and the
covariance of least-squares estimates it implies (with an intercept). Timed: the summary and
the diagnostics from the estimates (two Cholesky inverses, then the usual path) and from R
itself (the floor: the same diagnostics with nothing to invert first). The ratio is what the
estimates input costs on top; the last column is the largest relative VIF difference between
the two (another route to the same quantity). BLAS threads as given.

    .venv/bin/python bench/bench_estimates.py            # p in {100, 300, 1000}
    .venv/bin/python bench/bench_estimates.py --quick    # p in {100, 300}
"""

from __future__ import annotations

import numpy as np
from _timing import best, size_parser, sizes_and_repeat, table_header
from threadpoolctl import threadpool_limits

from knotwork.core import Options, assess, from_correlation, from_estimates

SECTIONS = Options(sections=["variables", "conditioning", "dependencies", "removal"])


def problem(p: int, seed: int = 3) -> tuple[np.ndarray, list[str], np.ndarray]:
    """A design correlation and the covariance of least-squares estimates with an intercept."""
    rng = np.random.default_rng(seed)
    n = 5 * p
    k = max(2, p // 5)
    x = rng.normal(size=(n, k)) @ rng.normal(size=(k, p)) + 0.5 * rng.normal(size=(n, p))
    design = np.column_stack([np.ones(n), x])
    cov = np.linalg.inv(design.T @ design)
    r = np.corrcoef(x, rowvar=False)
    return r, [f"x{j}" for j in range(p)], cov


def main() -> None:
    args = size_parser(__doc__.splitlines()[0]).parse_args()
    sizes, repeat = sizes_and_repeat(args, quick_repeat=3, full_repeat=5)
    table_header(
        f"{'p':>5}", f"{'estimates ms':>13}", f"{'correlation ms':>15}", f"{'ratio':>6}",
        f"{'max rel VIF diff':>17}",
    )  # fmt: skip
    with threadpool_limits(limits=args.threads):
        for p in sizes:
            r, names, cov = problem(p)
            n = 5 * p

            def by_estimates(cov=cov, names=names, n=n):
                return assess(from_estimates(["c", *names], cov, "c", n=n), SECTIONS)

            def by_correlation(r=r, names=names, n=n):
                return assess(from_correlation(names, r, n), SECTIONS)

            est = best(by_estimates, repeat)
            cor = best(by_correlation, repeat)
            a = np.array([v.vif for v in by_estimates().variables])
            b = np.array([v.vif for v in by_correlation().variables])
            diff = float(np.max(np.abs(a - b) / b))
            print(
                f"{p:>5} {est * 1e3:>13.1f} {cor * 1e3:>15.1f} {est / cor:>6.2f} {diff:>17.1e}",
                flush=True,
            )


if __name__ == "__main__":
    main()
