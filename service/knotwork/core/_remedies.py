"""Remedies for collinearity side by side: none, removal, ridge and principal components."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import scipy.linalg

from knotwork_contract import Comparison, Components, RemedyRow, Removal, Ridge

from ._dependencies import Spectrum
from ._regression import Regression
from ._ridge import GCV, HKB, LAWLESS_WANG, VIF_THRESHOLD, _Eigen

NONE = "none"
REMOVAL = "removal"
RIDGE = "ridge"
COMPONENTS = "components"

#: What each remedy does to the meaning of the coefficients.
MEANINGS = {
    NONE: (
        "Ordinary least squares on every predictor: unbiased, but the coefficients of inflated "
        "predictors are imprecise (standard errors grow by sqrt(VIF))."
    ),
    REMOVAL: (
        "Dropping predictors changes what the kept coefficients mean: each now also carries the "
        "part of the dropped predictors' effects it is correlated with (omitted-variable bias)."
    ),
    RIDGE: (
        "Ridge keeps every predictor but shrinks the coefficients toward zero: they are biased "
        "on purpose, ridge VIFs are not ordinary VIFs, and least-squares standard errors and "
        "tests do not apply."
    ),
    COMPONENTS: (
        "Regression on the kept components confines the coefficients to their span: each is a "
        "blend of effects rather than the effect of its variable with the others held fixed, "
        "and a dropped low-variance component can still matter for the response (Jolliffe 1982)."
    ),
}

_GENERAL = (
    "Every remedy answers a different question from the full model; choose by what the model "
    "is for, not by the numbers in this table alone.",
    "Thresholds are rules of thumb from common practice; decisions on regulated models follow "
    "local rules and qualified review.",
)

#: Which ridge choice the comparison uses, in order of preference: the k that meets the same
#: VIF threshold as the removal sequence makes the rows comparable.
RIDGE_PREFERENCE = (VIF_THRESHOLD, HKB, LAWLESS_WANG, GCV)


def _max_vif_of(m: np.ndarray) -> float | None:
    if m.shape[0] == 0:
        return None
    try:
        c, lower = scipy.linalg.cho_factor(m)
    except np.linalg.LinAlgError:
        return None
    inv = scipy.linalg.cho_solve((c, lower), np.eye(m.shape[0]))
    return float(np.max(np.diag(inv)))


def _r2_of(m: np.ndarray, r: np.ndarray) -> float | None:
    if m.shape[0] == 0:
        return 0.0
    try:
        c, lower = scipy.linalg.cho_factor(m)
    except np.linalg.LinAlgError:
        return None
    return float(r @ scipy.linalg.cho_solve((c, lower), r))


def _short(names: Sequence[str], limit: int = 6) -> str:
    if len(names) <= limit:
        return ", ".join(names)
    return ", ".join(names[:limit]) + f" and {len(names) - limit} more"


def compare_remedies(
    M: np.ndarray,
    names: Sequence[str],
    *,
    regression: Regression,
    threshold: float,
    removal: Removal | None,
    ridge: Ridge | None,
    components: Components | None,
    spectrum: Spectrum | None = None,
) -> Comparison:
    """Parameters left, largest VIF left and fit lost for each remedy, against the full model.

    Parameters
    ----------
    M
        The predictors' correlation matrix (or cosine matrix without intercept).
    names
        Predictor names in matrix order.
    regression
        The sample size, whether the model has an intercept, and the response's correlations
        with the predictors (for the fit columns), as the remedies were computed with.
    threshold
        The VIF threshold (echoed).
    removal, ridge, components
        The remedies as computed for the same matrix; None leaves a row out.
    spectrum
        The eigen-decomposition of ``M`` when already computed.

    Returns
    -------
    Comparison

    Notes
    -----
    R^2 of a remedy, on the correlation scale: OLS on a kept set K, :math:`r_K^\\top
    M_{KK}^{-1} r_K`; ridge at k, :math:`\\sum_i c_i^2 (l_i + 2k)/(l_i + k)^2`
    (:math:`c = V^\\top r_{xy}`); components S, :math:`\\sum_{i \\in S} c_i^2 / l_i`; the full
    model :math:`\\sum_i c_i^2 / l_i` over the non-zero eigenvalues. The fit lost is the full
    R^2 minus the remedy's; the residual variance share is
    :math:`(1 - R^2)(n - 1)/(n - 1 - \\text{parameters})`. The ridge row uses the first available
    choice in ``RIDGE_PREFERENCE`` (the k meeting the threshold first, so the rows aim at the
    same goal); the components row reports the components as given, which under their default
    ``vif_threshold`` rule (with the same threshold, as :func:`assess` computes them) keep the
    most leading components whose VIFs meet the threshold.

    Verification: tests compare each row's R^2 with statsmodels OLS on the kept predictors,
    with the ridge trace's own R^2 at the same k and with the components' R^2 (Longley and
    random designs).

    Implementation: one Cholesky factorization of the kept submatrix for the removal row; the
    shared eigen-decomposition for the others; O(p^2) beyond those.

    References
    ----------
    .. [1] Hoerl, A. E. & Kennard, R. W. (1970). Ridge regression: biased estimation for
       nonorthogonal problems. Technometrics 12(1), 55-67.
    .. [2] Jolliffe, I. T. (1982). A note on the use of principal components in regression.
       Applied Statistics 31(3), 300-303.
    """
    m = np.asarray(M, dtype=float)
    p = len(names)
    r = regression.r_xy
    spec = spectrum if spectrum is not None else Spectrum.of(m)
    eig = _Eigen(m, spec, r)
    dof = regression.dof
    r2_full = None
    if eig.c2 is not None:
        r2_full = float(np.sum(eig.c2[eig.pos] / eig.l[eig.pos]))

    def row(
        remedy: str, setting: str, params: float, max_vif: float | None, r2: float | None
    ) -> RemedyRow:
        lost = resvar = None
        if r2 is not None and r2_full is not None:
            lost = float(r2_full - r2)
            if dof - params > 0:
                resvar = float((1.0 - r2) * dof / (dof - params))
        return RemedyRow(
            remedy=remedy,
            setting=setting,
            parameters=float(params),
            max_vif=None if max_vif is None or not math.isfinite(max_vif) else float(max_vif),
            r_squared=r2,
            r_squared_lost=lost,
            residual_variance=resvar,
            meaning=MEANINGS[remedy],
        )

    rows = []
    full_max = None if spec.null_dim else float(np.max(eig.vifs(np.array([0.0]))))
    everything = f"all {p} predictors" if p != 1 else "the one predictor"
    rows.append(row(NONE, everything, p - spec.null_dim, full_max, r2_full))

    if removal is not None:
        keep = list(removal.kept_indices)
        dropped = [s.drop for s in removal.steps]
        sub = m[np.ix_(keep, keep)]
        setting = f"drop {_short(dropped)}" if dropped else "nothing dropped"
        r2 = _r2_of(sub, r[keep]) if r is not None else None
        rows.append(row(REMOVAL, setting, len(keep), _max_vif_of(sub), r2))

    ridge_rule = ridge_k = None
    if ridge is not None:
        by_rule = {c.rule: c for c in ridge.choices}
        for rule in RIDGE_PREFERENCE:
            choice = by_rule.get(rule)
            if choice is not None and choice.k is not None:
                ridge_rule, ridge_k = rule, choice.k
                break
        if ridge_k is not None:
            kk = np.array([ridge_k])
            aliased_at_zero = ridge_k == 0.0 and spec.null_dim > 0
            mv = None if aliased_at_zero else float(np.max(eig.vifs(kk)))
            r2 = float(1.0 - eig.rss(kk)[0]) if eig.c2 is not None else None
            setting = f"k = {ridge_k:.6g} ({ridge_rule}, correlation scale)"
            rows.append(row(RIDGE, setting, float(eig.edf(kk)[0]), mv, r2))

    if components is not None:
        kept = list(components.kept)
        setting = (
            f"keep {len(kept)} of {p} components ({components.rule} limit {components.limit:g})"
        )
        r2 = None
        if eig.c2 is not None:
            r2 = float(np.sum(eig.c2[kept] / eig.l[kept]))
        rows.append(row(COMPONENTS, setting, len(kept), components.max_vif, r2))

    cautions = tuple(MEANINGS[x.remedy] for x in rows) + _GENERAL
    return Comparison(
        threshold=float(threshold),
        rows=tuple(rows),
        r_squared_full=r2_full,
        ridge_rule=ridge_rule,
        ridge_k=None if ridge_k is None else float(ridge_k),
        cautions=cautions,
    )
