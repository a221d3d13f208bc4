"""Condition indices and variance-decomposition proportions against outside references."""

from __future__ import annotations

import numpy as np
import pytest
from numeric import assert_close_answers
from numpy.testing import assert_allclose
from statsmodels.datasets import longley

from knotwork.core._conditioning import condition_diagnostics
from knotwork.core._dependencies import Spectrum

INTERCEPT = "<constant>"


@pytest.fixture(scope="module")
def longley_x() -> tuple[np.ndarray, tuple[str, ...]]:
    frame = longley.load_pandas().exog
    return frame.to_numpy(dtype=float), tuple(frame.columns)


def svd_reference(design: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Indices and proportions (k, j) from an SVD of the design scaled to unit-length columns.

    Belsley, Kuh & Welsch (1980), ch. 3: eta_k = mu_1 / mu_k, phi_jk = v_jk^2 / mu_k^2,
    pi_kj = phi_jk / sum_k phi_jk. Computed from the rows, not from the cross-products.
    """
    z = design / np.linalg.norm(design, axis=0)
    _, mu, vt = np.linalg.svd(z, full_matrices=False)
    phi = vt.T**2 / mu**2
    return mu[0] / mu, (phi / phi.sum(axis=1, keepdims=True)).T


def as_array(rows: tuple[tuple[float | None, ...], ...]) -> np.ndarray:
    return np.array([[np.nan if v is None else v for v in row] for row in rows], dtype=float)


def assert_matches_svd(result, design, *, index_rtol, share_atol):
    """Indices to ``index_rtol``, proportions to 1e-6 relative plus ``share_atol`` absolute.

    The reference is :func:`svd_reference` of ``design``; each caller states why its
    tolerances hold.
    """
    indices, shares = svd_reference(design)
    assert_allclose(result.indices, indices, rtol=index_rtol)
    assert_allclose(as_array(result.proportions), shares, rtol=1e-6, atol=share_atol)


def test_longley_intercept_basis_matches_published_indices(longley_x):
    x, names = longley_x
    design = np.column_stack([np.ones(len(x)), x])
    result = condition_diagnostics(design.T @ design, (INTERCEPT, *names), "scaled_with_intercept")

    # Longley BKW indices, docs/numerics.md check values (computed with numpy/statsmodels).
    assert_allclose(
        result.indices,
        [1.0, 9.14172, 12.2557, 25.3366, 230.424, 1048.08, 43275.0],
        rtol=5e-6,
    )
    assert result.condition_number == pytest.approx(43275.0, rel=5e-6)
    assert result.basis == "scaled_with_intercept"
    assert result.names[0] == INTERCEPT
    assert result.null_dim == 0

    # Tangled sets at the default rules of thumb (index 30, proportion 0.5; common practice),
    # docs/numerics.md: {GNPDEFL, POP} at 1048.08 and {const, GNP, UNEMP, YEAR} at 43275.0.
    assert [t.variables for t in result.tangles] == [
        (INTERCEPT, "GNP", "UNEMP", "YEAR"),
        ("GNPDEFL", "POP"),
    ]
    assert [t.index for t in result.tangles] == pytest.approx([43275.0, 1048.08], rel=5e-6)
    for tangle in result.tangles:
        # Exact: a tangle copies its index and proportions from the same result's tables.
        k = result.indices.index(tangle.index)
        assert tangle.proportions == tuple(
            result.proportions[k][result.names.index(v)] for v in tangle.variables
        )
        assert all(p > 0.5 for p in tangle.proportions)


def test_longley_intercept_basis_matches_svd_of_scaled_design(longley_x):
    x, names = longley_x
    design = np.column_stack([np.ones(len(x)), x])
    result = condition_diagnostics(design.T @ design, (INTERCEPT, *names), "scaled_with_intercept")

    # The Gram route squares the condition number: eigenvalue k carries a relative error of
    # about eps * eta_k^2 (4e-7 at eta = 43275), so rtol 1e-6 is what it can promise; proportions
    # are compared with an absolute floor because several are ~1e-8 and carry the same error.
    assert_matches_svd(result, design, index_rtol=1e-6, share_atol=1e-9)
    assert_allclose(
        result.eigenvalues,
        np.linalg.svd(design / np.linalg.norm(design, axis=0))[1] ** 2,
        rtol=1e-6,
    )


def test_proportions_sum_to_one_per_column(longley_x):
    x, names = longley_x
    design = np.column_stack([np.ones(len(x)), x])
    result = condition_diagnostics(design.T @ design, (INTERCEPT, *names), "scaled_with_intercept")
    assert_allclose(as_array(result.proportions).sum(axis=0), 1.0, rtol=1e-12)


def test_weighted_cross_products_match_svd_of_weighted_design(longley_x):
    # [1, X]'W[1, X] is the cross-product of sqrt(W)[1, X]; the reference is that design's SVD.
    x, names = longley_x
    weights = np.random.default_rng(20240601).uniform(0.5, 2.0, size=len(x))
    design = np.column_stack([np.ones(len(x)), x])
    cross = design.T @ (weights[:, None] * design)
    result = condition_diagnostics(cross, (INTERCEPT, *names), "scaled_with_intercept")
    # The Gram route again: eps * eta^2 is about 5.5e-7 at this design's largest index (49849).
    assert_matches_svd(result, np.sqrt(weights)[:, None] * design, index_rtol=1e-6, share_atol=1e-9)


def test_uncentred_basis_without_intercept_matches_svd(longley_x):
    x, names = longley_x
    result = condition_diagnostics(x.T @ x, names, "scaled_uncentred")
    assert result.names == names
    # The Gram route again: eps * eta^2 is about 2.6e-10 at the largest index here (1086).
    assert_matches_svd(result, x, index_rtol=1e-6, share_atol=1e-9)


def test_correlation_basis_centred_index(longley_x):
    x, names = longley_x
    corr = np.corrcoef(x, rowvar=False)
    result = condition_diagnostics(corr, names, "correlation")
    # docs/numerics.md: sqrt(lambda_max / lambda_min) of Longley's R = sqrt(12220.0) = 110.544.
    assert result.condition_number == pytest.approx(110.544, rel=5e-6)
    lam = np.linalg.eigvalsh(corr)[::-1]
    assert_allclose(result.eigenvalues, lam, rtol=1e-10)
    # Reference: SVD of the centred, unit-length columns (the rows again, not R).
    assert_matches_svd(result, x - x.mean(axis=0), index_rtol=1e-8, share_atol=1e-10)


def test_precomputed_spectrum_gives_the_same_answer(longley_x):
    x, names = longley_x
    corr = np.corrcoef(x, rowvar=False)
    direct = condition_diagnostics(corr, names, "correlation")
    shared = condition_diagnostics(corr, names, "correlation", spectrum=Spectrum.of(corr))
    # Two eigen-decompositions, not one: the direct path first rescales R to an exactly
    # symmetric unit diagonal, and np.corrcoef's R (whose last digits depend on the BLAS
    # kernel) is symmetric only to 1 ulp, so the two matrices can differ in the last bit
    # (they do on SkylakeX, Sandybridge and Prescott kernels, not on Haswell). Eigenvalue k then
    # moves by about eps * lambda_1, relatively about eps * cond(R) = 2.2e-16 * 12220 =
    # 2.7e-12; indices and proportions (ratios of v^2 / lambda) inherit that, and eigenvector
    # entries carry an absolute error of about eps * |R| / gap (5e-13) that atol covers for
    # proportions near zero. Seen across OpenBLAS kernels: up to 7e-13 relative, 2e-13 absolute.
    # Names, basis, null_dim and the variables of each tangle must be identical.
    assert_close_answers(shared, direct, rtol=1e-10, atol=1e-12)


def test_spectrum_is_refused_for_other_bases(longley_x):
    x, names = longley_x
    with pytest.raises(ValueError, match="only for the correlation basis"):
        condition_diagnostics(x.T @ x, names, "scaled_uncentred", spectrum=Spectrum.of(x.T @ x))


def test_unknown_basis_is_refused():
    with pytest.raises(ValueError, match="basis must be one of"):
        condition_diagnostics(np.eye(2), ("a", "b"), "centred")


def test_exactly_singular_design_gives_none_and_no_crash():
    rng = np.random.default_rng(7)
    x1, x2 = rng.normal(size=(2, 40))
    x3 = x1 + 2.0 * x2  # exact dependency
    x4 = rng.normal(size=40)
    design = np.column_stack([np.ones(40), x1, x2, x3, x4])
    names = (INTERCEPT, "x1", "x2", "x3", "x4")
    result = condition_diagnostics(design.T @ design, names, "scaled_with_intercept")

    assert result.null_dim == 1
    assert result.condition_number is None
    assert result.indices[-1] is None
    assert all(i is not None for i in result.indices[:-1])
    assert result.proportions[-1] == (None,) * 5
    # Over the non-null components every column's shares still sum to 1.
    live = as_array(result.proportions[:-1])
    assert_allclose(live.sum(axis=0), 1.0, rtol=1e-12)
    assert all(t.index is not None for t in result.tangles)

    # The same on the correlation basis, with and without the shared spectrum.
    corr = np.corrcoef(design[:, 1:], rowvar=False)
    for spectrum in (None, Spectrum.of(corr)):
        centred = condition_diagnostics(corr, names[1:], "correlation", spectrum=spectrum)
        assert centred.condition_number is None
        assert centred.indices[-1] is None
        assert centred.null_dim == 1


def test_orthogonal_design_has_unit_indices_and_no_tangles():
    result = condition_diagnostics(np.diag([4.0, 9.0, 0.25]), ("a", "b", "c"), "scaled_uncentred")
    # Exact: scaled to a unit diagonal (set, not computed) this is the identity, whose
    # eigen-decomposition involves no rounding on any kernel.
    assert result.indices == (1.0, 1.0, 1.0)
    assert result.condition_number == 1.0
    assert result.tangles == ()


def test_result_fields_are_plain_python_values(longley_x):
    x, names = longley_x
    design = np.column_stack([np.ones(len(x)), x])
    result = condition_diagnostics(design.T @ design, (INTERCEPT, *names), "scaled_with_intercept")
    assert type(result.condition_number) is float
    assert all(type(v) is float for v in result.eigenvalues)
    assert all(type(v) is float for v in result.indices)
    assert all(type(v) is float for row in result.proportions for v in row)
    assert all(type(t.index) is float for t in result.tangles)
