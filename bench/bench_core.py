"""The core against the loop a user would otherwise write, side by side in one run.

For each (n, p): the core (summary from columns plus every diagnostic of the core issue:
VIF, GVIF, conditioning, tests, dependencies), one X'X product on the same data (the floor),
and statsmodels' ``variance_inflation_factor`` over every column (the loop). Ratios are
printed, not absolute goals: this machine is shared and noisy. Where the loop would take
over a minute, it is timed on a few columns and extrapolated linearly (each column costs the
same OLS), and the table says so. BLAS is pinned to one thread for every timing.

    .venv/bin/python bench/bench_core.py            # n in {10k, 100k, 1M} x p in {10, 50, 200}
    .venv/bin/python bench/bench_core.py --quick    # n in {10k, 100k} x p in {10, 50}
"""

from __future__ import annotations

import argparse
import time
import tracemalloc
import warnings

import numpy as np
from _timing import best, table_header
from threadpoolctl import threadpool_limits

from knotwork.core import Options, assess, from_table

CORE_SECTIONS = Options(sections=["variables", "terms", "conditioning", "tests", "dependencies"])


def design(n: int, p: int, seed: int = 1) -> np.ndarray:
    """Latent factors plus noise, with a large mean on some columns (a hard case for centring)."""
    rng = np.random.default_rng(seed)
    k = max(2, p // 5)
    x = rng.normal(size=(n, k)) @ rng.normal(size=(k, p)) + 0.3 * rng.normal(size=(n, p))
    x[:, ::3] += 1e4
    return np.asfortranarray(x)


def run_core(x: np.ndarray) -> object:
    cols = {f"x{j}": x[:, j] for j in range(x.shape[1])}
    return assess(from_table(cols), CORE_SECTIONS)


def loop_time(x: np.ndarray, budget: float) -> tuple[float, str]:
    import statsmodels.api as sm
    from statsmodels.stats.outliers_influence import variance_inflation_factor

    design_c = sm.add_constant(x, has_constant="add")
    p = x.shape[1]
    # The first columns tell what the whole loop would cost (each column costs the same OLS):
    # within the budget every column is timed, beyond it the first ones stand for the rest.
    cols = min(p, 3)
    t0 = time.perf_counter()
    for j in range(1, cols + 1):
        variance_inflation_factor(design_c, j, standardize=False)
    first = time.perf_counter() - t0
    if first / cols * p <= budget:
        t0 = time.perf_counter()
        for j in range(cols + 1, p + 1):
            variance_inflation_factor(design_c, j, standardize=False)
        return first + time.perf_counter() - t0, "measured"
    return first / cols * p, f"extrapolated from {cols} columns"


def peak_ratio(x: np.ndarray) -> float:
    """Peak memory traced during the core call, over the size of the input array."""
    tracemalloc.start()
    tracemalloc.reset_peak()
    run_core(x)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return (peak + x.nbytes) / x.nbytes


def accuracy() -> float:
    """Largest relative VIF error on Longley shifted by 1e6 against the unshifted data."""
    import statsmodels.api as sm

    frame = sm.datasets.longley.load_pandas().exog
    base = [v.vif for v in run_core(frame.to_numpy()).variables]
    shifted = [v.vif for v in run_core(frame.to_numpy() + 1e6).variables]
    return float(np.max(np.abs(np.subtract(shifted, base)) / np.asarray(base)))


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller grid")
    parser.add_argument("--budget", type=float, default=60.0, help="seconds before extrapolating")
    args = parser.parse_args()
    ns = [10_000, 100_000] if args.quick else [10_000, 100_000, 1_000_000]
    ps = [10, 50] if args.quick else [10, 50, 200]
    warnings.simplefilter("ignore")
    table_header(
        f"{'n':>9} {'p':>4} {'core ms':>9} {'XtX ms':>8} {'core/XtX':>9} "
        f"{'loop s':>9} {'loop/core':>10} {'loop/XtX':>9} {'peak/in':>8}  loop timing"
    )
    with threadpool_limits(limits=1):
        for n in ns:
            for p in ps:
                x = design(n, p)
                # Best of several: the machine is shared, and a 20 ms timing catches every hiccup.
                repeat = 11 if n * p <= 5_000_000 else 3
                core = best(lambda x=x: run_core(x), repeat)
                gram = best(lambda x=x: x.T @ x, repeat)
                loop, how = loop_time(x, args.budget)
                print(
                    f"{n:>9} {p:>4} {core * 1e3:>9.1f} {gram * 1e3:>8.1f} {core / gram:>9.2f} "
                    f"{loop:>9.2f} {loop / core:>10.0f} {loop / gram:>9.0f} "
                    f"{peak_ratio(x):>8.2f}  {how}",
                    flush=True,
                )
                del x
    print(f"\nLongley + 1e6: largest relative VIF change {accuracy():.2e} (goal <= 1e-9)")
    print(
        "loop/XtX is the ceiling of loop/core: every exact method forms X'X or a factor of X"
        " (which costs more), so no core beats the loop by more than the loop beats one X'X."
    )


if __name__ == "__main__":
    main()
