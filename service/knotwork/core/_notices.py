"""Warnings carried in results, with stable codes, and the fixed cautions."""

from __future__ import annotations

from knotwork_contract import Notice

# Notice is the contract's record, re-exported for the core's modules that build warnings.
__all__ = ["CAUTIONS", "CODES", "Notice", "notice"]

#: Every warning code the core emits, with its meaning. Codes are API: never rename one.
CODES: dict[str, str] = {
    "exact_dependency": "some predictors are exact linear combinations of others (aliased)",
    "severe_conditioning": "the condition number exceeds 100: severe near-dependence",
    "moderate_conditioning": "the condition number lies between 30 and 100",
    "correlation_basis": "conditioning was computed on the correlation matrix (no moments)",
    "above_threshold": "some predictors or terms have inflation above the threshold",
    "rows_dropped": "rows with missing values were dropped",
    "pairwise_deletion": "correlations were computed from pairwise-complete rows",
    "matrix_repaired": "the correlation matrix was replaced by the nearest valid one",
    "repair_not_converged": "the nearest-matrix iteration stopped before converging",
    "rounded_matrix": "the matrix looks rounded, and rounding can move its small eigenvalues",
    "large_sample_tests": "with large n the significance tests reject at trivial collinearity",
    "near_singular": "the smallest eigenvalue is tiny: results are sensitive to the data",
    "glm_remedies_omitted": "ridge, components and the comparison are not given for a GLM family",
    "skipped_without_n": "sections that need the number of observations were skipped (no n)",
    "skipped_without_response": "sections that need a response or rows were skipped",
}

CAUTIONS: tuple[str, ...] = (
    "Thresholds for VIF (5 or 10), tolerance and condition indices (30, with proportions 0.5) "
    "are rules of thumb from common practice, not tests; no cut-off is authoritative "
    "(O'Brien 2007, Quality & Quantity 41, 673-690).",
    "High inflation says a coefficient is imprecise, not that the model is wrong; whether to "
    "drop, combine or regularise depends on what the model is for.",
    "Decisions on regulated models follow local rules and qualified review; these diagnostics "
    "are evidence for that review, not a substitute for it.",
)


def notice(code: str, message: str) -> Notice:
    """Build a notice, checking that its code is a registered one."""
    if code not in CODES:  # pragma: no cover - a programming error, caught by the tests
        raise KeyError(f"unregistered notice code {code!r}")
    return Notice(code=code, message=message)
