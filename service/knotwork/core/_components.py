"""Principal components of the predictors and principal-component regression."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np

from knotwork_contract import Components

from ._dependencies import Spectrum
from ._errors import InputError, OptionError
from ._regression import Regression

VIF_THRESHOLD = "vif_threshold"
CONDITION_INDEX = "condition_index"
CUMULATIVE = "cumulative"
#: Every rule, the default first.
RULES = (VIF_THRESHOLD, CONDITION_INDEX, CUMULATIVE)

#: The VIF threshold of the ``vif_threshold`` rule when the caller gives none (common practice:
#: 5 or 10; the same default as the assessment's ``threshold``).
DEFAULT_THRESHOLD = 5.0

#: Default limits: condition index 30 (common practice after Belsley, Kuh & Welsch 1980) and a
#: cumulative share of 0.95 (a common choice, not a published cut-off). The ``vif_threshold``
#: rule has no limit of its own: its limit is the VIF threshold.
DEFAULT_LIMITS = {CONDITION_INDEX: 30.0, CUMULATIVE: 0.95}

_RULE_TEXT = {
    VIF_THRESHOLD: (
        "keep the largest set of leading components whose regression has every VIF, "
        "diag(V_S L_S^-1 V_S'), at or below the threshold {limit:g} (a rule of thumb from "
        "common practice), drop the rest"
    ),
    CONDITION_INDEX: (
        "keep the components whose condition index sqrt(l_1 / l_k) is at most {limit:g} "
        "(30 is common practice after Belsley, Kuh & Welsch), drop the rest"
    ),
    CUMULATIVE: (
        "keep the fewest leading components whose cumulative share of the variance is at "
        "least {limit:g}, drop the rest"
    ),
}


_NOTES = (
    "Regression on a subset of components constrains the coefficients to the span of the kept "
    "components: they are biased unless the dropped components carry no effect, and each "
    "coefficient no longer means the effect of its variable with the others held fixed.",
    "A low-variance component can still matter for the response (Jolliffe 1982); compare "
    "r_squared_by_component before dropping one.",
    "The VIF threshold (5 or 10), the condition-index limit 30 and the cumulative share 0.95 "
    "are rules of thumb from common practice; decisions on regulated models follow local rules "
    "and qualified review.",
)

#: Why a ``limit`` is refused with the ``vif_threshold`` rule (pinned in the tests).
LIMIT_WITH_VIF_THRESHOLD = (
    "the vif_threshold rule takes its limit from threshold; set threshold instead of "
    "components.limit, or choose rule condition_index or cumulative"
)


def _check_rule(rule: str, limit: float | None, threshold: float) -> float:
    if rule not in _RULE_TEXT:
        raise OptionError.at("/components/rule", f"unknown rule {rule!r}; choose from {RULES}")
    if rule == VIF_THRESHOLD:
        if limit is not None:
            raise OptionError.at("/components/limit", LIMIT_WITH_VIF_THRESHOLD)
        return float(threshold)
    value = DEFAULT_LIMITS[rule] if limit is None else float(limit)
    if rule == CUMULATIVE and not (0.0 < value <= 1.0):
        raise OptionError.at(
            "/components/limit", f"a cumulative share must lie in (0, 1], got {limit}"
        )
    if rule == CONDITION_INDEX and not (math.isfinite(value) and value >= 1.0):
        raise OptionError.at(
            "/components/limit", f"a condition-index limit must be a number >= 1, got {limit}"
        )
    return value


def principal_components(
    M: np.ndarray,
    names: Sequence[str],
    *,
    regression: Regression | None = None,
    rule: str = VIF_THRESHOLD,
    limit: float | None = None,
    threshold: float = DEFAULT_THRESHOLD,
    spectrum: Spectrum | None = None,
    tables: bool = True,
) -> Components:
    """Principal components, a rule for which to keep, and the regression on the kept ones.

    ``tables=False`` leaves the p x p loadings and variable correlations out (empty).

    Parameters
    ----------
    M
        The predictors' correlation matrix (p, p), or their cosine matrix without intercept.
    names
        Predictor names in matrix order.
    regression
        The regression on the kept components: the sample size, whether the model has an
        intercept (residual df n - p - 1, else n - p), the response's correlations with the
        predictors, and the scales and means for coefficients, variances and the intercept in
        original units. None (or one without the response's correlations): the components
        alone, without a regression.
    rule
        ``"vif_threshold"`` (default: keep the most leading components whose regression has
        every VIF at or below ``threshold``), ``"condition_index"`` (drop components whose
        condition index exceeds ``limit``, default 30) or ``"cumulative"`` (keep the fewest
        leading components whose cumulative share reaches ``limit``, default 0.95).
    limit
        The limit of ``"condition_index"`` or ``"cumulative"``; None for its default. Refused
        with ``"vif_threshold"``, whose limit is ``threshold`` (one threshold for every
        remedy, so they aim at the same goal).
    threshold
        The VIF threshold of the ``"vif_threshold"`` rule (a rule of thumb: 5 or 10; default 5,
        as the assessment's); ignored by the other rules.
    spectrum
        The eigen-decomposition of ``M`` when already computed.

    Returns
    -------
    Components

    Raises
    ------
    OptionError
        An unknown rule, a limit out of range, a limit given with ``"vif_threshold"``, or a
        threshold below 1.

    Notes
    -----
    With :math:`R = V \\Lambda V^\\top` (eigenvalues :math:`l_1 \\ge \\dots \\ge l_p`) and the kept
    set S, the regression of the standardized response on the kept components, mapped back to
    the variables (Massy 1965), is

    .. math::

        b = V_S \\Lambda_S^{-1} V_S^\\top r_{xy}, \\qquad
        \\mathrm{Var}(b) = s^2\\, V_S \\Lambda_S^{-1} V_S^\\top, \\qquad
        R_S^2 = \\sum_{k \\in S} (v_k^\\top r_{xy})^2 / l_k .

    Keeping every component gives ordinary least squares exactly. The diagonal of
    :math:`V_S \\Lambda_S^{-1} V_S^\\top` is :math:`\\sum_{k \\in S} v_{jk}^2 / l_k`, the PCR
    analogue of the VIF: it grows with every component added and equals the OLS VIF with all of
    them. The ``vif_threshold`` rule keeps the leading m components for the largest m whose
    diagonal is at most the threshold T everywhere; since the diagonal only grows with m, the
    kept set is the largest qualifying leading set and one more component would exceed T.
    Edge cases: one component always qualifies when T >= 1, since
    :math:`v_{j1}^2 / l_1 \\le 1/l_1 \\le 1` (the largest eigenvalue of a matrix with unit
    diagonal is at least the mean eigenvalue, 1), so the kept set is never empty; when every
    OLS VIF is already at most T, every component is kept and the fit is OLS; components with a
    zero eigenvalue (exact dependencies) are never kept, under any rule. Condition indices are
    :math:`\\sqrt{l_1 / l_k}` (the centred variant of Belsley, Kuh & Welsch's indices, from the
    correlation matrix). Original units: :math:`\\beta_j = b_j s_y/s_j`,
    :math:`\\mathrm{Var}(\\beta_j) = \\mathrm{Var}(b_j) (s_y/s_j)^2`.

    Verification: Longley (statsmodels.datasets) with every component kept reproduces the NIST
    StRD certified coefficients to 1e-7 relative and statsmodels' OLS standard errors; the
    diagonal and the ``vif_threshold`` choice equal an independent computation from
    scikit-learn's ``PCA`` of the standardized columns (Longley, diabetes, copper); the
    kept-component fit equals scikit-learn's ``PCA`` followed by ``LinearRegression`` on
    standardized data to 1e-8 (diabetes, Longley); eigenvalues equal docs/numerics.md's Longley
    check values.

    Implementation: the symmetric eigen-decomposition shared with the other diagnostics
    (LAPACK ``syevd`` through numpy); everything else is O(p^2).

    References
    ----------
    .. [1] Massy, W. F. (1965). Principal components regression in exploratory statistical
       research. JASA 60, 234-256 (details from memory).
    .. [2] Jolliffe, I. T. (1982). A note on the use of principal components in regression.
       Applied Statistics 31(3), 300-303.
    .. [3] Jolliffe, I. T. (2002). Principal Component Analysis, 2nd ed., ch. 8. Springer.
    .. [4] Belsley, D. A., Kuh, E. & Welsch, R. E. (1980). Regression Diagnostics. Wiley, ch. 3.
    """
    m = np.asarray(M, dtype=float)
    p = len(names)
    if m.shape != (p, p):
        raise InputError.at("/matrix", f"expected a {p} x {p} matrix, got shape {m.shape}")
    value = _check_rule(rule, limit, threshold)
    spec = spectrum if spectrum is not None else Spectrum.of(m)
    nonnull = p - spec.null_dim
    lam = np.where(np.arange(p) < nonnull, spec.values, 0.0)
    vecs = spec.vectors.copy()
    # Deterministic signs: the largest entry of each loading vector (first on ties) positive.
    big = np.argmax(np.abs(vecs), axis=0)
    vecs *= np.where(vecs[big, np.arange(p)] < 0, -1.0, 1.0)
    total = float(lam.sum())
    explained = lam / total
    cumulative = np.cumsum(explained)
    indices: list[float | None] = [
        math.sqrt(lam[0] / lam[k]) if k < nonnull else None for k in range(p)
    ]
    # running[j, m - 1] = sum_{k < m} v_jk^2 / l_k, the diagonal of V_S L_S^-1 V_S' for the
    # leading m components: non-negative terms, so it never decreases with m (in floating point
    # too), and the reported VIFs are the very numbers the rule compared.
    running = np.cumsum(vecs[:, :nonnull] ** 2 / lam[:nonnull], axis=1)
    if rule == VIF_THRESHOLD:
        fits = np.flatnonzero(running.max(axis=0) <= value)
        count = int(fits[-1]) + 1 if fits.size else 0
    elif rule == CONDITION_INDEX:
        count = sum(1 for k in range(nonnull) if math.sqrt(lam[0] / lam[k]) <= value)
    else:
        reach = np.flatnonzero(cumulative >= value * (1.0 - 1e-12))
        count = min(int(reach[0]) + 1 if reach.size else p, nonnull)
    kept = list(range(count))
    vs = vecs[:, kept]
    ls = lam[kept]
    g = (vs / ls) @ vs.T  # V_S L_S^-1 V_S'
    vif = running[:, count - 1].copy() if count else np.zeros(p)
    notes = list(_NOTES)
    if rule == VIF_THRESHOLD and count == nonnull:
        notes.append(
            f"Every component meets the VIF threshold {value:g}: the regression on all of them "
            "is ordinary least squares, with the ordinary VIFs."
            if nonnull == p
            else f"Every component with a non-zero eigenvalue meets the VIF threshold {value:g}; "
            "those of the exact dependencies are never kept."
        )

    coef = var = ocoef = ovar = icpt = r2 = r2_full = by_comp = ols = resvar = None
    basis: str | None = None
    if regression is not None and regression.r_xy is not None:
        r = regression.r_xy
        c = vecs.T @ r
        share = np.zeros(p)
        share[:nonnull] = c[:nonnull] ** 2 / lam[:nonnull]
        by_comp = tuple(share.tolist())
        b = g @ r
        coef = tuple(b.tolist())
        r2 = float(share[kept].sum())
        r2_full = float(share.sum())
        dof = regression.dof
        if spec.null_dim == 0:
            ols = tuple((((vecs / lam) @ vecs.T) @ r).tolist())
        if spec.null_dim == 0 and dof - p > 0:
            s2 = (1.0 - r2_full) / (dof - p)
            basis = "full_model"
        elif dof - len(kept) > 0:
            s2 = (1.0 - r2) / (dof - len(kept))
            basis = "kept_components"
        else:
            s2 = math.nan
        v = None
        if math.isfinite(s2):
            v = s2 * vif
            var = tuple(v.tolist())
            resvar = float(s2 * dof)
        units = regression.original(b)
        if units is not None:
            beta, intercept = units
            ocoef = tuple(beta.tolist())
            scaled = None if v is None else regression.original_variances(v)
            if scaled is not None:
                ovar = tuple(scaled.tolist())
            if intercept is not None:
                icpt = float(intercept)
        dropped = [k for k in range(nonnull) if k not in kept]
        if dropped and kept:
            floor = float(share[kept].min())
            matter = [k for k in dropped if share[k] > floor]
            if matter:
                listed = ", ".join(f"{k} ({share[k]:.3g})" for k in matter)
                notes.append(
                    f"Dropped components {listed} explain more of the response than the least "
                    f"useful kept one ({floor:.3g}): dropping them costs fit (Jolliffe 1982)."
                )
    return Components(
        eigenvalues=tuple(spec.values.tolist()),
        explained=tuple(explained.tolist()),
        cumulative=tuple(cumulative.tolist()),
        condition_indices=tuple(indices),
        loadings=tuple(tuple(vecs[:, k].tolist()) for k in range(p)) if tables else (),
        variable_correlations=tuple(
            tuple((vecs[:, k] * math.sqrt(lam[k])).tolist()) for k in range(p)
        )
        if tables
        else (),
        kept=tuple(kept),
        rule=rule,
        limit=value,
        rule_text=_RULE_TEXT[rule].format(limit=value),
        vif=tuple(vif.tolist()),
        max_vif=float(vif.max()) if vif.size else 0.0,
        coefficients=coef,
        coefficient_variances=var,
        original_coefficients=ocoef,
        original_variances=ovar,
        original_intercept=icpt,
        r_squared=r2,
        r_squared_full=r2_full,
        r_squared_by_component=by_comp,
        ols_coefficients=ols,
        residual_variance=resvar,
        variance_basis=basis,
        notes=tuple(notes),
    )
