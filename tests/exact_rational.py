"""Exact rational arithmetic (fractions.Fraction) for references: co-moments and VIFs.

The callers choose what the exact values are (the doubles themselves, or the published
decimals); nothing here rounds.
"""

from __future__ import annotations

from collections.abc import Sequence
from fractions import Fraction


def exact_comoments(rows: Sequence[Sequence[Fraction]]) -> list[list[Fraction]]:
    """Centred cross-products sum_i (x_ij - mean_j)(x_ik - mean_k) of rows of rationals."""
    n = len(rows)
    q = len(rows[0])
    means = [sum((r[j] for r in rows), Fraction(0)) / n for j in range(q)]
    return [
        [sum(((r[i] - means[i]) * (r[j] - means[j]) for r in rows), Fraction(0)) for j in range(q)]
        for i in range(q)
    ]


def exact_vifs(com: Sequence[Sequence[Fraction]]) -> list[Fraction]:
    """VIF_j = C_jj [C^-1]_jj on the co-moment matrix C, by Gauss-Jordan elimination.

    The inverse is formed on the co-moments; scaling by the variances cannot change the VIF,
    the diagonal of the inverse correlation matrix.
    """
    q = len(com)
    a = [list(row) + [Fraction(int(i == j)) for j in range(q)] for i, row in enumerate(com)]
    for c in range(q):
        pivot = next(r for r in range(c, q) if a[r][c] != 0)
        a[c], a[pivot] = a[pivot], a[c]
        inv = 1 / a[c][c]
        a[c] = [v * inv for v in a[c]]
        for r in range(q):
            if r != c and a[r][c] != 0:
                f = a[r][c]
                a[r] = [x - f * y for x, y in zip(a[r], a[c], strict=True)]
    return [com[j][j] * a[j][q + j] for j in range(q)]
