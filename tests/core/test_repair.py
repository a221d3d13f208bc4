"""Nearest correlation matrix against a published example and an independent optimiser."""

from __future__ import annotations

import numpy as np
import pytest
import scipy.optimize
from numpy.testing import assert_allclose
from statsmodels.datasets import longley

from knotwork.core._repair import nearest_correlation

# Higham (2002), IMA J. Numer. Anal. 22(3), 329-343, worked example.
HIGHAM_A = np.array([[1.0, 1.0, 0.0], [1.0, 1.0, 1.0], [0.0, 1.0, 1.0]])


def minimise_over_correlations(target: np.ndarray, seed: int = 0) -> np.ndarray:
    """Nearest correlation matrix by direct minimisation (scipy.optimize), as a reference.

    Every correlation matrix is L L' for a lower-triangular L with unit-norm rows, so the
    Frobenius distance is minimised over the free entries of L, from several starting points;
    the problem is convex in C, so every start should reach the same C.
    """
    p = target.shape[0]
    rows, cols = np.tril_indices(p)

    def build(theta: np.ndarray) -> np.ndarray:
        lower = np.zeros((p, p))
        lower[rows, cols] = theta
        lower /= np.linalg.norm(lower, axis=1, keepdims=True)
        return lower @ lower.T

    def objective(theta: np.ndarray) -> float:
        return float(np.sum((build(theta) - target) ** 2))

    rng = np.random.default_rng(seed)
    best = None
    for _ in range(8):
        start = rng.normal(size=rows.size)
        start[rows == cols] = np.abs(start[rows == cols]) + 1.0
        fit = scipy.optimize.minimize(objective, start, method="BFGS", options={"gtol": 1e-12})
        if best is None or fit.fun < best.fun:
            best = fit
    assert best is not None
    return build(best.x)


def assert_valid_correlation(matrix: np.ndarray) -> None:
    # Exact: the repair promises these bits, it returns 0.5 * (A + A.T) with the diagonal set
    # to 1 (floating-point addition commutes, so the halves are equal).
    assert np.array_equal(matrix, matrix.T)
    assert np.all(np.diag(matrix) == 1.0)
    assert np.linalg.eigvalsh(matrix)[0] >= -1e-12


def test_higham_worked_example():
    repaired, repair = nearest_correlation(HIGHAM_A)
    assert_valid_correlation(repaired)
    # Off-diagonals about 0.7607 and 0.1573 (Higham 2002, from memory; verified below).
    assert repaired[0, 1] == pytest.approx(0.7607, abs=5e-5)
    assert repaired[1, 2] == pytest.approx(0.7607, abs=5e-5)
    assert repaired[0, 2] == pytest.approx(0.1573, abs=5e-5)
    assert repair.converged
    assert repair.min_eigenvalue_before == pytest.approx(1 - np.sqrt(2), rel=1e-12)
    assert repair.singular
    assert repair.distance == pytest.approx(np.linalg.norm(repaired - HIGHAM_A), rel=1e-15)


def test_higham_example_is_optimal_by_independent_minimisation():
    repaired, repair = nearest_correlation(HIGHAM_A)
    reference = minimise_over_correlations(HIGHAM_A)
    assert_allclose(repaired, reference, atol=1e-6)
    assert repair.distance == pytest.approx(np.linalg.norm(reference - HIGHAM_A), abs=1e-9)


def test_random_indefinite_matrix_is_optimal_by_independent_minimisation():
    rng = np.random.default_rng(20240615)  # a seed whose matrix is clearly indefinite
    target = rng.uniform(-1.0, 1.0, size=(4, 4))
    target = 0.5 * (target + target.T)
    np.fill_diagonal(target, 1.0)
    assert np.linalg.eigvalsh(target)[0] < 0
    repaired, _ = nearest_correlation(target)
    assert_valid_correlation(repaired)
    assert_allclose(repaired, minimise_over_correlations(target, seed=3), atol=1e-6)


@pytest.fixture(scope="module")
def longley_r() -> np.ndarray:
    x = longley.load_pandas().exog.to_numpy(dtype=float)
    corr = np.corrcoef(x, rowvar=False)
    # np.corrcoef is symmetric only up to rounding; a valid input is exactly symmetric.
    return 0.5 * (corr + corr.T)


def test_valid_matrix_is_returned_unchanged(longley_r):
    repaired, repair = nearest_correlation(longley_r)
    # Exact: a valid input is returned as is (its symmetric part is itself, bit for bit), and
    # the eigenvalue after is the eigenvalue before, not a second computation.
    assert np.array_equal(repaired, longley_r)
    assert repair.distance == 0.0
    assert repair.iterations in (0, 1)
    assert repair.converged
    assert not repair.singular
    assert repair.min_eigenvalue_after == repair.min_eigenvalue_before > 0


def test_rounded_longley_matrix_is_repaired(longley_r):
    # docs/numerics.md: Longley's R rounded to 2 decimals is indefinite.
    rounded = np.round(longley_r, 2)
    assert np.linalg.eigvalsh(rounded)[0] < 0
    repaired, repair = nearest_correlation(rounded)
    assert_valid_correlation(repaired)
    assert repair.converged
    assert repair.min_eigenvalue_before < 0
    assert repair.min_eigenvalue_after >= -1e-12
    assert repair.singular
    # Optimality against a cheap competitor: clipping eigenvalues and rescaling to unit
    # diagonal also gives a correlation matrix, but never a nearer one.
    values, vectors = np.linalg.eigh(rounded)
    clipped = (vectors * np.maximum(values, 0.0)) @ vectors.T
    scale = 1.0 / np.sqrt(np.diag(clipped))
    clipped = clipped * np.outer(scale, scale)
    assert repair.distance <= np.linalg.norm(clipped - rounded)
    # The repair moves the entries by about the rounding, not more.
    assert np.abs(repaired - rounded).max() < 0.01


def test_bounded_iterations_report_non_convergence():
    repaired, repair = nearest_correlation(HIGHAM_A, max_iterations=2)
    assert repair.iterations == 2
    assert not repair.converged
    # Still a valid correlation matrix, only not the nearest one.
    assert_valid_correlation(repaired)


def test_asymmetric_input_uses_its_symmetric_part():
    skewed = HIGHAM_A + np.array([[0.0, 0.1, 0.0], [-0.1, 0.0, 0.0], [0.0, 0.0, 0.0]])
    repaired, _ = nearest_correlation(skewed)
    assert_allclose(repaired, nearest_correlation(HIGHAM_A)[0], atol=1e-12)


@pytest.mark.parametrize(
    ("matrix", "message"),
    [(np.ones((2, 3)), "square"), (np.array([[1.0, np.nan], [np.nan, 1.0]]), "finite")],
)
def test_bad_matrix_is_refused(matrix, message):
    with pytest.raises(ValueError, match=message):
        nearest_correlation(matrix)


def test_result_fields_are_plain_python_values():
    _, repair = nearest_correlation(HIGHAM_A)
    assert type(repair.distance) is float
    assert type(repair.iterations) is int
    assert type(repair.min_eigenvalue_before) is float
    assert type(repair.min_eigenvalue_after) is float
    assert type(repair.singular) is bool
    assert type(repair.converged) is bool
