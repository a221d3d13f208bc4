"""Shared by the core's remedy tests: reference values and small helpers."""

from __future__ import annotations

import numpy as np

# NIST StRD Longley certified values (docs/numerics.md, check values).
NIST_B = [
    -3482258.63459582,
    15.0618722713733,
    -0.0358191792925910,
    -2.02022980381683,
    -1.03322686717359,
    -0.0511041056535807,
    1829.15146461355,
]


def summary(x: np.ndarray, y: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Correlations of the predictors and their correlations with the response (numpy)."""
    c = np.corrcoef(np.column_stack([x, y]), rowvar=False)
    return c[:-1, :-1], c[:-1, -1]


def standardize(a: np.ndarray) -> np.ndarray:
    """Columns centred and scaled to unit sample variance."""
    return (a - a.mean(axis=0)) / a.std(axis=0, ddof=1)
