"""A GLM fit plus every diagnostic against statsmodels' GLM fit alone, side by side in one run.

For each family (binomial, then gaussian beside it) on the same generated data: ours is the
IRLS fit, the summary weighted at the fit, ``assess()`` with default options (every section)
and the plain design's VIFs beside them; statsmodels is its GLM fit alone (the floor: the fit
every answer needs). The ``request`` rows time what the service computes for a decoded table
request (``knotwork.codecs.run``: the model rules, the missing-value scan, the plain design's
summary, the fit, the weighted summary, every diagnostic a GLM answer carries, the design
VIFs, the summary detail) with ``family`` binomial, and with the default family (gaussian: no
fit, every section, today's answer). Goal: the binomial request within 3x of statsmodels' fit.
BLAS is pinned to one thread for every timing; the fastest of several runs is kept (the
machine is shared and noisy).

    .venv/bin/python bench/bench_glm.py            # n = 100k, p = 50
    .venv/bin/python bench/bench_glm.py --quick    # n = 20k, p = 50
"""

from __future__ import annotations

import argparse
import warnings

import numpy as np
from _timing import best, table_header
from scipy.special import expit
from threadpoolctl import threadpool_limits

from knotwork.codecs import Prepared, TableData, run
from knotwork.core import Options, assess, from_table
from knotwork.core._glm import design_summary, fit_glm, glm_summary
from knotwork_contract import AssessOptions

GOAL = 3.0


def data(n: int, p: int, seed: int = 1) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Latent factors plus noise (some collinearity), a 0/1 response and a continuous one."""
    rng = np.random.default_rng(seed)
    k = max(2, p // 5)
    x = rng.normal(size=(n, k)) @ rng.normal(size=(k, p)) * 0.3 + rng.normal(size=(n, p))
    x[:, ::3] += 100.0  # large means on some columns: the fit must centre
    beta = rng.normal(0.0, 0.05, p)
    eta = (x - x.mean(axis=0)) @ beta - 0.5
    binary = (rng.random(n) < expit(eta)).astype(float)
    continuous = eta + rng.normal(size=n)
    return np.ascontiguousarray(x), binary, continuous


def ours(x: np.ndarray, y: np.ndarray, family: str) -> object:
    names = [f"x{j}" for j in range(x.shape[1])]
    fit = fit_glm(x, y, family=family, names=names)
    weighted = assess(glm_summary(fit, x))
    plain = assess(design_summary(x, names), Options(sections=["variables"]))
    return fit, weighted, plain


def statsmodels_fit(x: np.ndarray, y: np.ndarray, family: str) -> object:
    import statsmodels.api as sm

    fam = sm.families.Binomial() if family == "binomial" else sm.families.Gaussian()
    return sm.GLM(y, sm.add_constant(x, has_constant="add"), family=fam).fit()


def table_path(x: np.ndarray) -> object:
    return assess(from_table({f"x{j}": x[:, j] for j in range(x.shape[1])}))


def request(x: np.ndarray, y: np.ndarray, family: str) -> object:
    """What the service computes for a decoded table request (JSON or Arrow alike)."""
    columns = {f"x{j}": x[:, j] for j in range(x.shape[1])}
    columns["y"] = y
    data = TableData(columns=columns, categorical={}, response="y")
    return run(Prepared(data=data, options=AssessOptions(family=family)))  # type: ignore[arg-type]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="n = 20k instead of 100k")
    parser.add_argument("--repeat", type=int, default=3, help="runs per timing (best kept)")
    args = parser.parse_args()
    n, p = (20_000, 50) if args.quick else (100_000, 50)
    warnings.simplefilter("ignore")
    x, binary, continuous = data(n, p)
    table_header(
        f"{'family':>9} {'n':>8} {'p':>3} {'iters':>5} {'fit ms':>8} {'ours ms':>8} "
        f"{'sm fit ms':>10} {'ours/sm':>8} {'fit/sm':>7}  goal"
    )
    with threadpool_limits(limits=1):
        statsmodels_fit(x[:500], binary[:500], "binomial")  # imports and first-call set-up
        for family, y in (("binomial", binary), ("gaussian", continuous)):
            fit = fit_glm(x, y, family=family)
            t_fit = best(lambda y=y, f=family: fit_glm(x, y, family=f), args.repeat)
            t_ours = best(lambda y=y, f=family: ours(x, y, f), args.repeat)
            t_sm = best(lambda y=y, f=family: statsmodels_fit(x, y, f), max(1, args.repeat - 1))
            goal = f"<= {GOAL:g}x" if family == "binomial" else "(beside it)"
            print(
                f"{family:>9} {n:>8} {p:>3} {fit.iterations:>5} {t_fit * 1e3:>8.0f} "
                f"{t_ours * 1e3:>8.0f} {t_sm * 1e3:>10.0f} {t_ours / t_sm:>8.2f} "
                f"{t_fit / t_sm:>7.2f}  {goal}",
                flush=True,
            )
        t_table = best(lambda: table_path(x), args.repeat)
        print(
            f"\ngaussian today (from_table + assess, no fit): {t_table * 1e3:.0f} ms; "
            f"ours/sm counts the fit, the weighted summary, assess() with every section and "
            f"the plain design's VIFs.\n"
        )
        table_header(
            f"{'request':>9} {'n':>8} {'p':>3} {'ms':>8} {'sm fit ms':>10} {'ratio':>7}  goal"
        )
        for family, y in (("binomial", binary), ("gaussian", continuous)):
            t_req = best(lambda y=y, f=family: request(x, y, f), args.repeat)
            t_sm = best(lambda y=y, f=family: statsmodels_fit(x, y, f), max(1, args.repeat - 1))
            goal = f"<= {GOAL:g}x" if family == "binomial" else "(no fit, every section)"
            print(
                f"{family:>9} {n:>8} {p:>3} {t_req * 1e3:>8.0f} {t_sm * 1e3:>10.0f} "
                f"{t_req / t_sm:>7.2f}  {goal}",
                flush=True,
            )


if __name__ == "__main__":
    main()
