"""Ridge trace: the eigen form (one decomposition, O(p^2) per k) against direct solves per k.

Run: ``.venv/bin/python bench/bench_ridge.py [--quick] [--threads N] [--repeat R]``

Data: latent factors plus noise (n = 2p rows, p / 20 factors, noise sd 0.3) with a response
made from a few predictors, threshold 10, the default grid of 100 values of k. Methods:

- ``eigh``: the symmetric eigen-decomposition of R (shared with the other diagnostics);
- ``trace``: ``ridge_analysis`` given that decomposition: ridge VIFs, effective df,
  coefficients and residuals at all 100 k, plus the four choices of k (including the
  bisection for the VIF-threshold k);
- ``direct``: per k, ``inv(R + kI)``, then ``diag(B R B)`` and ``B r_xy`` (O(p^3) per k). For p
  above ``--direct-max`` (default 300) only 5 values of k are timed and the total is scaled
  to 100 (marked ``~``).

Times are the best of ``--repeat`` runs (the machine is shared); BLAS threads are fixed with
threadpoolctl. Expected shape (issue 3): the trace costs one decomposition plus O(p^2) per k.
"""

from __future__ import annotations

import numpy as np
from _timing import best, size_parser, sizes_and_repeat, table_header
from threadpoolctl import threadpool_limits

from knotwork.core._dependencies import Spectrum
from knotwork.core._regression import Regression
from knotwork.core._ridge import default_grid, ridge_analysis

THRESHOLD = 10.0


def problem(p: int, seed: int = 20261201) -> tuple[np.ndarray, np.ndarray, int]:
    rng = np.random.default_rng(seed)
    n, f = 2 * p, max(2, p // 20)
    x = rng.standard_normal((n, f)) @ rng.standard_normal((f, p))
    x += 0.3 * rng.standard_normal((n, p))
    y = x[:, :5].sum(axis=1) + rng.standard_normal(n)
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    return c[:-1, :-1], c[:-1, -1], n


def direct(r: np.ndarray, r_xy: np.ndarray, ks: np.ndarray) -> None:
    eye = np.eye(r.shape[0])
    for k in ks:
        b = np.linalg.inv(r + k * eye)
        np.einsum("ij,ji->i", b @ r, b)
        b @ r_xy


def main() -> None:
    parser = size_parser(__doc__.splitlines()[0])
    parser.add_argument("--direct-max", type=int, default=300, help="largest p solved per k")
    args = parser.parse_args()
    sizes, repeat = sizes_and_repeat(args, quick_repeat=3, full_repeat=5)

    print(f"ridge trace, 100 values of k, BLAS threads {args.threads}, best of {repeat}")
    table_header(
        f"{'p':>5} {'eigh':>8} {'trace':>8} {'per k':>8} {'direct':>10} {'per k':>8} | "
        f"{'trace/eigh':>10} {'direct/(eigh+trace)':>19} {'direct/trace per k':>18}"
    )
    with threadpool_limits(limits=args.threads):
        for p in sizes:
            r, r_xy, n = problem(p)
            names = [f"x{j}" for j in range(p)]
            spectrum = Spectrum.of(r)
            ks = default_grid(spectrum.values, THRESHOLD)
            t_eig = best(lambda r=r: Spectrum.of(r), repeat)
            t_trace = best(
                lambda r=r, r_xy=r_xy, n=n, names=names, spectrum=spectrum: ridge_analysis(
                    r,
                    names,
                    regression=Regression(n, r_xy=r_xy),
                    threshold=THRESHOLD,
                    spectrum=spectrum,
                ),
                repeat,
            )
            if p <= args.direct_max:
                t_direct = best(lambda r=r, r_xy=r_xy, ks=ks: direct(r, r_xy, ks), 1)
                direct_txt = f"{t_direct * 1e3:9.1f} "
            else:
                sample = ks[:: len(ks) // 5][:5]
                t_direct = best(lambda r=r, r_xy=r_xy, s=sample: direct(r, r_xy, s), 1)
                t_direct *= len(ks) / len(sample)
                direct_txt = f"~{t_direct * 1e3:9.0f}"
            per_k = t_trace / len(ks)
            per_k_direct = t_direct / len(ks)
            print(
                f"{p:5d} {t_eig * 1e3:8.1f} {t_trace * 1e3:8.1f} {per_k * 1e6:6.0f}us "
                f"{direct_txt} {per_k_direct * 1e3:6.2f}ms | {t_trace / t_eig:10.2f} "
                f"{t_direct / (t_eig + t_trace):19.1f} {per_k_direct / per_k:18.0f}"
            )
    print(
        "times in ms unless marked; 'trace' includes the four choices of k and building the "
        "result; ~ = direct solves timed at 5 values of k and scaled to 100"
    )


if __name__ == "__main__":
    main()
