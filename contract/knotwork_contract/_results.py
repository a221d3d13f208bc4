"""The answer of an assessment: one msgspec Struct per record, stated once for every party.

The service's core builds these records, the service encodes them (the JSON object's keys come
in the order of the fields here) and documents them in its OpenAPI document (each field's
description is its one-line meaning in the ``Attributes`` section below), and the client
decodes them.

Sequences are annotated ``Sequence[...]``. The core builds tuples, so its records are immutable
and hashable; msgspec encodes any sequence as a JSON array and decodes an array as a list, so a
decoded record compares equal to plain lists (``dependency.weights == [1.0, -11.0]``) and the
core needs no conversion.

Every field but the one that names a record has a default, so a client can decode an answer
that lacks a field (from an older service, or a shortened document): a missing number reads
NaN, a count 0, a flag False (``intercept`` True, the service's default), a text "", a list
empty and an optional part None. The service always sends every field, and its OpenAPI
document marks every field required; the core sets every field explicitly. Unknown fields are
ignored on decoding (msgspec's default), so a newer service may add fields.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from typing import Any

import msgspec


class _Result(msgspec.Struct, frozen=True, kw_only=True):
    """Base of every result record: immutable, keyword-only, unknown fields ignored.

    Subclasses inherit these settings; they repeat ``frozen=True`` for type checkers.
    """


class Notice(_Result, frozen=True):
    """A warning about the input or the numerics, carried in the result (not raised).

    Attributes
    ----------
    code
        Stable machine-readable code (see ``CODES``); safe to branch on.
    message
        One human-readable sentence; wording may improve between releases.
    """

    code: str
    message: str = ""


class VariableInflation(_Result, frozen=True):
    """Inflation of one predictor's coefficient variance.

    Attributes
    ----------
    name
        The predictor.
    vif
        Variance inflation factor :math:`1/(1 - R_j^2)`; None when the predictor is aliased
        (in an exact dependency, where the VIF is infinite).
    tolerance
        :math:`1 - R_j^2 = 1/\\mathrm{VIF}_j` (0 when aliased).
    r_squared
        :math:`R_j^2` of the predictor regressed on all the others (1 when aliased).
    se_inflation
        :math:`\\sqrt{\\mathrm{VIF}_j}`: how many times wider the coefficient's standard error
        and confidence interval are than with an orthogonal design; None when aliased.
    above_threshold
        Whether the VIF exceeds the threshold (always True when aliased).
    aliased
        Whether the predictor takes part in an exact linear dependency.
    design_vif
        Under a GLM family, the VIF of the plain design (unweighted, as least squares would
        see it), beside ``vif``, which is weighted at the fit; None for the gaussian family
        and when aliased in the plain design.
    vif_interval
        ``[low, high]``: interval for the VIF at ``uncertainty.level`` (normal: for the
        population VIF, by inverting the distribution of R_j^2; bootstrap: percentile
        interval); None without ``options.uncertainty``, or when aliased.
    threshold_p_value
        normal only: one-sided p-value for "the population VIF is at most the threshold",
        :math:`P(R_j^2 \\ge \\text{observed} \\mid \\rho_j^2 = 1 - 1/\\text{threshold})`; small
        values are evidence that it is above (0 when aliased). None otherwise.
    share_above_threshold
        bootstrap only: share of the usable replicates in which the VIF exceeds the
        threshold (1 when aliased). None otherwise.
    share_dropped
        bootstrap only: share of the usable replicates in which the removal sequence drops
        this predictor (or the term it belongs to). None otherwise.
    """

    name: str
    vif: float | None = None
    tolerance: float = math.nan
    r_squared: float = math.nan
    se_inflation: float | None = None
    above_threshold: bool = False
    aliased: bool = False
    design_vif: float | None = None
    vif_interval: Sequence[float] | None = None
    threshold_p_value: float | None = None
    share_above_threshold: float | None = None
    share_dropped: float | None = None


class TermInflation(_Result, frozen=True):
    """Generalized variance inflation of a multi-column term (Fox & Monette 1992).

    Attributes
    ----------
    name
        The term.
    columns
        Its columns.
    df
        Number of columns (degrees of freedom of the term).
    gvif
        :math:`\\det R_{TT} \\det R_{OO} / \\det R`; None when the term is aliased.
    gvif_scaled
        The scaled GVIF, :math:`\\mathrm{GVIF}^{1/(2\\,df)}` (Fox & Monette 1992), comparable
        across terms of different size; compare it with the square root of the VIF threshold.
        None when aliased.
    above_threshold
        Whether ``gvif_scaled`` exceeds the square root of the threshold (True when aliased).
    aliased
        Whether any of its columns takes part in an exact dependency.
    design_gvif
        Under a GLM family, the GVIF of the plain design (unweighted), beside ``gvif``, which
        is weighted at the fit; None for the gaussian family and when aliased in the plain
        design.
    gvif_interval
        bootstrap only: ``[low, high]``, percentile interval of the GVIF at
        ``uncertainty.level``; None otherwise, or when aliased.
    gvif_scaled_interval
        bootstrap only: the same interval for the scaled GVIF (compare with the square root
        of the threshold).
    share_above_threshold
        bootstrap only: share of the usable replicates in which the scaled GVIF exceeds the
        square root of the threshold (1 when aliased).
    share_dropped
        bootstrap only: share of the usable replicates in which the removal sequence drops
        the term.
    """

    name: str
    columns: Sequence[str] = ()
    df: int = 0
    gvif: float | None = None
    gvif_scaled: float | None = None
    above_threshold: bool = False
    aliased: bool = False
    design_gvif: float | None = None
    gvif_interval: Sequence[float] | None = None
    gvif_scaled_interval: Sequence[float] | None = None
    share_above_threshold: float | None = None
    share_dropped: float | None = None


class Tangle(_Result, frozen=True):
    """A near dependency: one component with a high index and two or more large proportions.

    Attributes
    ----------
    index
        The condition index of the component.
    variables
        Columns whose variance-decomposition proportion on this component exceeds the
        proportion threshold, in column order.
    proportions
        Their proportions, in the same order.
    """

    index: float = math.nan
    variables: Sequence[str] = ()
    proportions: Sequence[float] = ()


class ProportionRow(_Result, frozen=True):
    """The larger variance-decomposition proportions of one component with a high index.

    Attributes
    ----------
    component
        Its position in ``eigenvalues`` (0 is the largest).
    index
        Its condition index.
    variables
        The columns whose share on this component is at least 0.1, in the order of ``names``
        (smaller shares are in the full table only). A column has at most ten such shares over
        all components, so these rows stay O(p) together.
    proportions
        Their shares of coefficient variance due to this component, in the same order.
    """

    component: int = 0
    index: float = math.nan
    variables: Sequence[str] = ()
    proportions: Sequence[float] = ()


class Conditioning(_Result, frozen=True):
    """Conditioning of a design: eigenvalues, condition indices, proportions, tangled sets.

    Attributes
    ----------
    basis
        Which matrix was decomposed: ``"scaled_with_intercept"`` (the uncentred cross-products
        of the constant and the predictors, every column scaled to unit length),
        ``"scaled_uncentred"`` (the same without a constant column) or ``"correlation"`` (the
        predictors centred and scaled: the correlation matrix) or ``"estimates"`` (the
        inverse of the estimates' covariance scaled to unit diagonal, the intercept first when
        the model has one: for least squares the cross-products of the design with every column
        scaled to unit length, as ``"scaled_with_intercept"``).
    names
        The columns the proportions refer to, in matrix order; ``"<constant>"`` comes first
        when the constant column is included.
    eigenvalues
        Eigenvalues of the unit-diagonal cross-product matrix, largest first (the squared
        singular values of the scaled design).
    condition_number
        The largest condition index; None when a null eigenvalue makes it infinite.
    indices
        Condition indices :math:`\\sqrt{\\lambda_1 / \\lambda_k}`, in eigenvalue order; None for
        a null eigenvalue.
    proportions
        ``proportions[k][j]``: the share of column *j*'s coefficient variance that is due to
        component *k* (each column's shares sum to 1 over the non-null components); a null
        component's row is all None.
    tangles
        Components with an index above ``index_threshold`` and at least two proportions above
        ``proportion_threshold``, largest index first.
    index_threshold
        The condition index above which a component counts as a near dependency (30 is common
        practice, a rule of thumb).
    proportion_threshold
        The proportion above which a column counts as involved in a component (0.5 is common
        practice, a rule of thumb).
    null_rtol
        Eigenvalues at or below ``null_rtol`` times the largest were treated as null.
    null_dim
        How many eigenvalues are null (exact dependencies, reported separately).
    high_index_rows
        The rows of ``proportions`` whose condition index is above ``index_threshold``, largest
        index first, each with its shares of at least 0.1: the part of the table that says
        which columns a near dependency ties together. Always given; with ``detail``
        ``"summary"`` the whole ``proportions`` table is left out (empty) and these rows stand
        for it.
    """

    basis: str = ""
    names: Sequence[str] = ()
    eigenvalues: Sequence[float] = ()
    condition_number: float | None = None
    indices: Sequence[float | None] = ()
    proportions: Sequence[Sequence[float | None]] = ()
    tangles: Sequence[Tangle] = ()
    index_threshold: float = math.nan
    proportion_threshold: float = math.nan
    null_rtol: float = math.nan
    null_dim: int = 0
    high_index_rows: Sequence[ProportionRow] = ()


class FarrarGlauber(_Result, frozen=True):
    """Overall test that the predictors are uncorrelated (Bartlett's sphericity statistic).

    Attributes
    ----------
    chi_square
        :math:`-[n - 1 - (2p + 5)/6] \\ln\\det R`; None when R is singular (the statistic is
        infinite) or when there are fewer than two predictors.
    df
        Degrees of freedom, :math:`p(p - 1)/2`.
    p_value
        Upper-tail chi-square probability of the statistic; None when the statistic is None.
    """

    chi_square: float | None = None
    df: int = 0
    p_value: float | None = None


class VariableF(_Result, frozen=True):
    """Per-variable F test of the regression of one predictor on the others.

    Attributes
    ----------
    name
        The predictor.
    f
        :math:`(\\mathrm{VIF}_j - 1)(n - p)/(p - 1)`; None when the VIF is not finite
        (aliased variable) or the degrees of freedom are not positive.
    df1
        Numerator degrees of freedom, :math:`p - 1`.
    df2
        Denominator degrees of freedom, :math:`n - p` (an int when n is a whole number, a
        float when n is a non-integral sum of weights).
    p_value
        Upper-tail F probability of the statistic; None when ``f`` is None.
    """

    name: str
    f: float | None = None
    df1: int = 0
    df2: float = math.nan
    p_value: float | None = None


class PartialPair(_Result, frozen=True):
    """One of the strongest partial correlations between two predictors.

    Attributes
    ----------
    first, second
        The two predictors, in predictor order.
    correlation
        Their correlation given all the other predictors.
    t
        Its t statistic on ``partial_df`` degrees of freedom; None when the correlation is
        :math:`\\pm 1`.
    p_value
        Two-sided t probability of ``t``; None when ``t`` is None.
    """

    first: str
    second: str = ""
    correlation: float = math.nan
    t: float | None = None
    p_value: float | None = None


class Tests(_Result, frozen=True):
    """Determinant of R, Farrar-Glauber tests and partial correlations, with caveats.

    Attributes
    ----------
    determinant
        :math:`\\det R`, between 0 and 1 (0.0 when R is singular; it can underflow to 0.0 for
        a nonsingular R with many predictors, so read ``log_determinant``).
    log_determinant
        :math:`\\ln\\det R`; None when R is singular.
    farrar_glauber
        The overall chi-square test.
    variable_f
        The per-variable F tests, in predictor order.
    partial_correlations
        ``[i][j]``: the correlation of predictors *i* and *j* given all the others,
        :math:`r_{ij \\cdot \\mathrm{rest}}`, p x p with a unit diagonal; None where undefined
        (either variable is aliased).
    partial_t
        ``[i][j]``: the t statistic of that partial correlation on ``partial_df`` degrees of
        freedom; None on the diagonal and where the partial correlation is None or is
        :math:`\\pm 1`.
    partial_p_values
        ``[i][j]``: two-sided t probability of ``partial_t``; None where it is None.
    partial_df
        Degrees of freedom of the partial t statistics, :math:`n - p` plus the number of exact
        dependencies (each one removes a dimension from the conditioning set).
    notes
        Caveats on reading the tests, and what was left undefined and why.
    strongest_partials
        The five largest partial correlations in absolute value (fewer when there are fewer
        pairs), strongest first. Always given; with ``detail`` ``"summary"`` the three p x p partial
        tables are left out (empty) and these pairs stand for them.
    """

    __test__ = False  # not a pytest test class, despite its name

    determinant: float = math.nan
    log_determinant: float | None = None
    farrar_glauber: FarrarGlauber = msgspec.field(default_factory=FarrarGlauber)
    variable_f: Sequence[VariableF] = ()
    partial_correlations: Sequence[Sequence[float | None]] = ()
    partial_t: Sequence[Sequence[float | None]] = ()
    notes: Sequence[str] = ()
    partial_p_values: Sequence[Sequence[float | None]] = ()
    partial_df: float = math.nan
    strongest_partials: Sequence[PartialPair] = ()


class Dependency(_Result, frozen=True):
    """One exact linear relation among predictors.

    Attributes
    ----------
    variables
        The variables in the relation; the first is the one it expresses through the others.
    weights
        Weights on the standardized variables, in the order of ``variables``:
        ``sum_j weights[j] * (x_j - mean_j) / sd_j = 0`` in every row; the first weight is 1.
    raw_weights
        The same relation in original units, ``sum_j raw_weights[j] * x_j + raw_constant = 0``,
        scaled so the first weight is 1 (None when only a correlation matrix is known).
    raw_constant
        The constant term of the original-unit relation (None without means).
    """

    variables: Sequence[str] = ()
    weights: Sequence[float] = ()
    raw_weights: Sequence[float] | None = None
    raw_constant: float | None = None


class RemovalStep(_Result, frozen=True):
    """One drop in a removal sequence.

    Attributes
    ----------
    drop
        The predictor or term dropped.
    columns
        The predictor columns it removes (one, or a term's columns).
    reason
        ``"aliased"`` (it was in an exact dependency), ``"largest_inflation"`` or
        ``"least_response_correlation"`` (the rule of the sequence chose it).
    vif
        Its inflation at the moment of the drop on the VIF scale: the VIF of a predictor, or
        the squared scaled GVIF of a term; None when it was aliased (the VIF is then infinite).
    gvif
        The generalized VIF of a multi-column term at that moment (None for one column or
        when aliased).
    df
        Number of columns dropped.
    max_vif_after
        Largest inflation (VIF scale, as ``vif``) left among the remaining predictors and terms
        after the drop; None while an exact dependency remains.
    vifs
        The table the decision was made on: the inflation (VIF scale) of every predictor and
        term in ``Removal.units`` order before this drop; None for those dropped at earlier
        steps. None for the whole table at an aliased step (those are decided by the relation).
    relation
        For an aliased drop, the variables of the exact dependency it resolves, the first one
        being expressed through the others; None otherwise.
    relation_weights
        Weights of that relation on the standardized variables (``sum w_j z_j = 0``).
    r_squared_after
        R^2 of the response on the remaining predictors after the drop (None without a
        response or while an exact dependency remains).
    response_correlation
        |r| of the dropped predictor with the response, or the multiple correlation of the
        response with a dropped term's columns (None without a response).
    skipped
        Protected predictors or terms that the rule would have chosen before this one.
    """

    drop: str
    columns: Sequence[str] = ()
    reason: str = ""
    vif: float | None = None
    gvif: float | None = None
    df: int = 0
    max_vif_after: float | None = None
    vifs: Sequence[float | None] | None = None
    relation: Sequence[str] | None = None
    relation_weights: Sequence[float] | None = None
    r_squared_after: float | None = None
    response_correlation: float | None = None
    skipped: Sequence[str] = ()


class StillHigh(_Result, frozen=True):
    """A predictor or term left above the threshold when the sequence stops.

    Attributes
    ----------
    name
        The predictor or term.
    vif
        Its inflation (VIF scale: VIF, or the squared scaled GVIF of a term); None when it is
        still in an exact dependency.
    protected
        Whether it is protected (then the sequence could not drop it).
    partner
        The remaining predictor or term whose removal alone would lower its inflation the most
        (None when nothing else remains or it is aliased).
    partner_protected
        Whether that partner is protected.
    vif_without_partner
        Its inflation if the partner alone were dropped.
    """

    name: str
    vif: float | None = None
    protected: bool = False
    partner: str | None = None
    partner_protected: bool = False
    vif_without_partner: float | None = None


class Removal(_Result, frozen=True):
    """A greedy removal sequence and where it ends.

    Attributes
    ----------
    threshold
        The VIF threshold (echoed; a rule of thumb, 5 or 10 in common practice).
    ordering
        ``"largest_inflation"`` or ``"least_response_correlation"``.
    rule
        The exact rule that chose each drop, in words.
    tie_break
        How ties are broken.
    units
        Every predictor and multi-column term, in input order (the order of ``vifs`` tables).
    protected
        The protected predictors and terms.
    steps
        The drops in order: exactly aliased ones first, then the rule's choices.
    kept
        The predictors and terms left, in input order.
    kept_indices
        Columns of the input matrix left, in input order.
    max_vif_before
        Largest inflation (VIF scale) before any drop; None when an exact dependency exists.
    max_vif_left
        Largest inflation left at the end; None while an exact dependency remains.
    stopped_by_protection
        Whether the sequence ended with some predictor or term still above the threshold
        because the ones it would need to drop are protected.
    still_high
        Names of the predictors and terms left above the threshold (empty when the sequence
        reached its goal).
    blocking
        The protected predictors and terms that hold the sequence up: every protected one left
        above the threshold and every protected main partner of one left above it.
    holds
        For each of ``still_high``: its inflation and the partner that keeps it high.
    r_squared_full
        R^2 of the response on all predictors (None without a response).
    refactorizations
        How many times the remaining matrix was inverted again during the sequence (the
        accuracy test of the downdate, see ``GROWTH_LIMIT``).
    alternative
        With a response, the sequence under ``"least_response_correlation"`` side by side with
        this one (None otherwise, and None inside the alternative itself).
    notes
        How to read the result.
    """

    threshold: float = math.nan
    ordering: str = ""
    rule: str = ""
    tie_break: str = ""
    units: Sequence[str] = ()
    protected: Sequence[str] = ()
    steps: Sequence[RemovalStep] = ()
    kept: Sequence[str] = ()
    kept_indices: Sequence[int] = ()
    max_vif_before: float | None = None
    max_vif_left: float | None = None
    stopped_by_protection: bool = False
    still_high: Sequence[str] = ()
    blocking: Sequence[str] = ()
    holds: Sequence[StillHigh] = ()
    r_squared_full: float | None = None
    refactorizations: int = 0
    alternative: Removal | None = None
    notes: Sequence[str] = ()


class RidgePoint(_Result, frozen=True):
    """The ridge fit at one value of k.

    Attributes
    ----------
    k
        The ridge constant on the correlation scale.
    vif
        Ridge VIFs, diag((R + kI)^-1 R (R + kI)^-1), in variable order; they can fall below 1.
        At k = 0 they are the ordinary VIFs, None for a variable in an exact dependency.
    max_vif
        The largest of them (None when one is not finite).
    effective_df
        Effective number of parameters besides the intercept, sum_i l_i / (l_i + k).
    coefficients
        Standardized coefficients b(k) = (R + kI)^-1 r_xy in variable order (None without a
        response, and at k = 0 when an exact dependency makes them not unique).
    r_squared
        Share of the response's sum of squares the fit explains, 1 - RSS(k)/SST.
    residual_variance
        Residual variance as a share of the response's variance: RSS(k)/(n - 1 - edf) divided by
        SST/(n - 1) (n in place of n - 1 without intercept); 1 - adjusted R^2 at k = 0.
    original_coefficients
        Coefficients in the variables' own units, b_j sd_y / sd_j (None unless standard
        deviations are given).
    original_intercept
        mean_y - sum_j beta_j mean_j (None unless means are given, or without intercept).
    """

    k: float
    vif: Sequence[float | None] = ()
    max_vif: float | None = None
    effective_df: float = math.nan
    coefficients: Sequence[float] | None = None
    r_squared: float | None = None
    residual_variance: float | None = None
    original_coefficients: Sequence[float] | None = None
    original_intercept: float | None = None


class RidgeChoice(_Result, frozen=True):
    """One published rule for choosing k, and where it lands.

    Attributes
    ----------
    rule
        ``vif_threshold``, ``gcv``, ``hoerl_kennard_baldwin`` or ``lawless_wang``.
    k
        The chosen k on the correlation scale (None when the rule is not defined here; see
        ``note``).
    max_vif
        Largest ridge VIF at that k.
    effective_df
        Effective number of parameters at that k.
    r_squared
        Share of the response's sum of squares explained at that k (None without a response).
    coefficients
        Standardized coefficients at that k (None without a response).
    original_coefficients
        The same in the variables' own units (None unless standard deviations are given).
    reference
        Where the rule comes from.
    note
        Why ``k`` is None, or how to read it; None otherwise.
    """

    rule: str
    k: float | None = None
    max_vif: float | None = None
    effective_df: float | None = None
    r_squared: float | None = None
    coefficients: Sequence[float] | None = None
    original_coefficients: Sequence[float] | None = None
    reference: str = ""
    note: str | None = None


class Ridge(_Result, frozen=True):
    """Ridge trace over a grid of k and the choices of k.

    Attributes
    ----------
    k_scale
        ``"correlation"``: every k is for Z'Z = R (unit-length centred columns).
    unit_variance_factor
        Multiply a k by this to get the penalty for columns scaled to unit variance
        (Z'Z = (n - 1) R, so n - 1; n without intercept), e.g. scikit-learn's ``alpha``.
    threshold
        The VIF threshold used by the ``vif_threshold`` rule (a rule of thumb).
    grid_rule
        How the grid was made (the default rule, or ``"given"``).
    trace
        The fit at every k of the grid, in grid order.
    choices
        The four rules: ``vif_threshold`` (the caller's threshold) first, then ``gcv``,
        ``hoerl_kennard_baldwin`` and ``lawless_wang``.
    residual_df
        n - p - 1 (n - p without intercept): the degrees of freedom of the OLS residual variance
        s^2 = (1 - R^2) / residual_df used by the Hoerl-Kennard-Baldwin and Lawless-Wang rules.
    notes
        How to read the result.
    """

    k_scale: str = ""
    unit_variance_factor: float = math.nan
    threshold: float = math.nan
    grid_rule: str = ""
    trace: Sequence[RidgePoint] = ()
    choices: Sequence[RidgeChoice] = ()
    residual_df: float = math.nan
    notes: Sequence[str] = ()


class Components(_Result, frozen=True):
    """Principal components of the predictors and, with a response, the regression on them.

    Attributes
    ----------
    eigenvalues
        Eigenvalues l_k of the matrix (variances of the standardized components), largest first.
    explained
        Share of the total variance each component carries, l_k / sum l.
    cumulative
        Running sum of ``explained``.
    condition_indices
        sqrt(l_1 / l_k); None for a component with a zero eigenvalue (an exact dependency).
    loadings
        ``loadings[k]`` is component k's unit-length weight vector over the variables (variable
        order); the sign makes its largest entry (in absolute value) positive.
    variable_correlations
        ``variable_correlations[k][j]`` = loading times sqrt(l_k): the correlation of variable
        j with component k (with a cosine matrix, the cosine).
    kept
        Indices (into ``eigenvalues``, largest first) of the components the rule keeps: always
        the leading ones, 0 to m - 1.
    rule
        ``"vif_threshold"``, ``"condition_index"`` or ``"cumulative"``.
    limit
        The limit of the rule (echoed): the VIF threshold for ``"vif_threshold"``.
    rule_text
        The rule in words.
    vif
        Variance inflation of the regression coefficients on the kept components,
        diag(V_S L_S^-1 V_S'): the variance relative to an orthogonal design, as the VIF is for
        OLS (they are equal when every component is kept); the ``"vif_threshold"`` rule keeps
        them at or below its limit.
    max_vif
        The largest of them.
    coefficients
        Standardized coefficients b = V_S L_S^-1 V_S' r_xy in variable order (None without a
        response).
    coefficient_variances
        Their variances, s^2 diag(V_S L_S^-1 V_S'), with s^2 as in ``variance_basis``, on the
        standardized scale.
    original_coefficients
        Coefficients in the variables' own units, b_j sd_y / sd_j (None unless standard
        deviations are given).
    original_variances
        Their variances, times (sd_y / sd_j)^2.
    original_intercept
        mean_y - sum_j beta_j mean_j (None unless means are given, or without intercept).
    r_squared
        Share of the response's sum of squares explained by the kept components.
    r_squared_full
        The same for all predictors (ordinary least squares).
    r_squared_by_component
        Share of the response's sum of squares each component explains alone,
        (v_k' r_xy)^2 / l_k, for every component (they sum to ``r_squared_full``); it shows
        when a dropped low-variance component matters for the response.
    ols_coefficients
        Standardized OLS coefficients R^-1 r_xy for comparison (None when an exact dependency
        makes them not unique).
    residual_variance
        The residual variance s^2 used for ``coefficient_variances``, as a share of the
        response's variance (1 - adjusted R^2 of the model it comes from).
    variance_basis
        ``"full_model"``: s^2 from the OLS fit on all predictors, (1 - R^2)/(n - p - 1), unbiased
        when that model holds; ``"kept_components"``: s^2 = (1 - R_S^2)/(n - |S| - 1), used when
        the full fit is not available (exact dependency or no residual df). n - 1 becomes n
        without intercept.
    notes
        How to read the result.
    """

    eigenvalues: Sequence[float] = ()
    explained: Sequence[float] = ()
    cumulative: Sequence[float] = ()
    condition_indices: Sequence[float | None] = ()
    loadings: Sequence[Sequence[float]] = ()
    variable_correlations: Sequence[Sequence[float]] = ()
    kept: Sequence[int] = ()
    rule: str = ""
    limit: float = math.nan
    rule_text: str = ""
    vif: Sequence[float] = ()
    max_vif: float = math.nan
    coefficients: Sequence[float] | None = None
    coefficient_variances: Sequence[float] | None = None
    original_coefficients: Sequence[float] | None = None
    original_variances: Sequence[float] | None = None
    original_intercept: float | None = None
    r_squared: float | None = None
    r_squared_full: float | None = None
    r_squared_by_component: Sequence[float] | None = None
    ols_coefficients: Sequence[float] | None = None
    residual_variance: float | None = None
    variance_basis: str | None = None
    notes: Sequence[str] = ()


class RemedyRow(_Result, frozen=True):
    """One remedy in the comparison.

    Attributes
    ----------
    remedy
        ``"none"``, ``"removal"``, ``"ridge"`` or ``"components"``.
    setting
        What was done, in words (which predictors were dropped, which k, which components).
    parameters
        Coefficients left besides the intercept (for ridge the effective degrees of freedom).
    max_vif
        Largest VIF left (ridge VIF for ridge; diag(V_S L_S^-1 V_S') for components); None when
        an exact dependency leaves it infinite.
    r_squared
        Share of the response's sum of squares explained (None without a response).
    r_squared_lost
        The full model's R^2 minus this one's (None without a response).
    residual_variance
        Residual variance as a share of the response's variance,
        (1 - R^2)(n - 1)/(n - 1 - parameters) (n in place of n - 1 without intercept).
    meaning
        What the remedy does to the meaning of the coefficients.
    """

    remedy: str
    setting: str = ""
    parameters: float = math.nan
    max_vif: float | None = None
    r_squared: float | None = None
    r_squared_lost: float | None = None
    residual_variance: float | None = None
    meaning: str = ""


class Comparison(_Result, frozen=True):
    """Remedies side by side.

    Attributes
    ----------
    threshold
        The VIF threshold (echoed; a rule of thumb).
    rows
        One row per remedy computed: none first, then removal, ridge and components.
    r_squared_full
        R^2 of the full model (None without a response).
    ridge_rule
        Which choice of k the ridge row uses (None without a ridge row).
    ridge_k
        That k, on the correlation scale.
    cautions
        Each remedy changes what the coefficients mean; read them before choosing.
    """

    threshold: float = math.nan
    rows: Sequence[RemedyRow] = ()
    r_squared_full: float | None = None
    ridge_rule: str | None = None
    ridge_k: float | None = None
    cautions: Sequence[str] = ()


class RepairReport(_Result, frozen=True):
    """How far a correlation matrix was moved to make it valid (Higham 2002).

    Attributes
    ----------
    distance
        Frobenius norm of the change.
    iterations
        Iterations of the alternating projections.
    converged
        Whether the iteration met its tolerance.
    min_eigenvalue_before, min_eigenvalue_after
        Smallest eigenvalue of the matrix as given and as repaired.
    singular
        Whether the repaired matrix is (numerically) singular, as it often is.
    """

    distance: float = math.nan
    iterations: int = 0
    converged: bool = False
    min_eigenvalue_before: float = math.nan
    min_eigenvalue_after: float = math.nan
    singular: bool = False


class ModelFit(_Result, frozen=True):
    """The generalized linear model fitted by IRLS whose weighted design was assessed.

    Attributes
    ----------
    family
        ``"binomial"``, ``"poisson"``, ``"gamma"`` or ``"tweedie"``.
    link
        The link function: ``"logit"`` (binomial) or ``"log"`` (the others).
    var_power
        The tweedie variance power (variance proportional to mean^v); None for other families.
    converged
        Whether IRLS met its criterion (an answer is only given for a converged fit).
    iterations
        IRLS iterations used (one weighted least-squares solve each).
    tolerance
        The convergence criterion: no linear predictor moved by more than ``tolerance`` times
        (1 + the largest absolute linear predictor) in the last iteration.
    deviance
        Deviance at the fit (sum over rows of prior weight times unit deviance; not divided by
        the dispersion).
    dispersion
        The dispersion used for the coefficients' covariance: 1 for binomial and poisson,
        Pearson chi-square over (n - rank) for gamma and tweedie. The diagnostics do not
        depend on it.
    n
        Observations used by the fit (rows with a positive prior weight), not a sum of weights.
    n_coefficients
        Coefficients fitted, the intercept included.
    """

    family: str = ""
    link: str = ""
    var_power: float | None = None
    converged: bool = False
    iterations: int = 0
    tolerance: float = math.nan
    deviance: float = math.nan
    dispersion: float = math.nan
    n: int = 0
    n_coefficients: int = 0


class Uncertainty(_Result, frozen=True):
    """How the intervals of ``variables`` and ``terms`` were made, and how stable the removal is.

    Attributes
    ----------
    method
        ``"normal"`` or ``"bootstrap"`` (echoed).
    level
        Confidence level of the intervals (echoed).
    threshold
        The VIF threshold of the p-values and shares (a rule of thumb, common practice).
    n
        The observations behind the VIFs (the summary's n), which the normal distribution of
        R_j^2 assumes.
    rank
        The independent predictors behind the finite VIFs (p, or fewer when exact dependencies
        leave fewer); in the normal distribution each R_j^2 has rank - 1 others.
    approximate
        normal: columns whose interval is an approximation because they cannot be normal
        (indicator columns of a categorical variable, columns of a multi-column term).
    replicates
        bootstrap: replicates drawn (echoed); None for normal.
    seed
        bootstrap: the seed (echoed); the same seed and input give the same answer.
    usable_replicates
        bootstrap: replicates whose resampled design was not singular; every interval and
        share counts these only.
    singular_replicates
        bootstrap: replicates left out because the resampled design was singular (a column
        constant in the resample, such as a rare category drawn no time, or a new exact
        dependency).
    kept
        bootstrap: the predictors and terms the removal sequence keeps on the full sample.
    share_same_kept
        bootstrap: share of the usable replicates whose removal sequence keeps exactly that set.
    notes
        How to read the intervals, p-values and shares.
    """

    method: str = ""
    level: float = math.nan
    threshold: float = math.nan
    n: float = math.nan
    rank: int = 0
    approximate: Sequence[str] = ()
    replicates: int | None = None
    seed: int | None = None
    usable_replicates: int | None = None
    singular_replicates: int | None = None
    kept: Sequence[str] | None = None
    share_same_kept: float | None = None
    notes: Sequence[str] = ()


class Provenance(_Result, frozen=True):
    """Where an answer comes from: the service, the input's fingerprint and the options used.

    Attributes
    ----------
    service_version
        The version of the service that computed the answer.
    fingerprint
        ``sha256:`` and the hex SHA-256 digest of a canonical form of the summary the
        diagnostics were computed from (n, the names in order, the response, the terms, the
        means and standard deviations when known, the correlation matrix, each number rounded
        to a stated precision) together with ``options``: the same data sent as JSON rows,
        Arrow or Parquet gives the same fingerprint, and a change to the data or to an option
        gives another (docs/contract.md states the canonical form).
    options
        The options in force after defaults: every option of the request, by its wire name,
        with the value used (a null section setting means the service's default rule).
    """

    service_version: str = ""
    fingerprint: str = ""
    options: dict[str, Any] = msgspec.field(default_factory=dict)


class Assessment(_Result, frozen=True):
    """The full collinearity assessment of one design.

    Attributes
    ----------
    input_kind
        ``"table"``, ``"correlation"``, ``"moments"`` or ``"estimates"``.
    n
        Observations (or sum of weights) behind the summary; None for estimates sent without
        n.
    p
        Number of predictors (intercept not counted; categorical variables expanded).
    response
        The response's name, if one was given.
    intercept
        Whether the diagnostics assume a model with an intercept (centred) or not; for
        estimates, whether the fitted model has one.
    threshold
        The VIF threshold the flags use (echoed).
    variables
        Per predictor: VIF, tolerance, R_j^2, standard-error inflation, flags.
    terms
        Per multi-column term: GVIF and scaled GVIF.
    conditioning
        Condition indices, variance-decomposition proportions and tangled sets.
    tests
        Determinant of R, Farrar-Glauber chi-square, per-variable F, partial correlations.
    dependencies
        Exact linear relations among the predictors, by name.
    removal
        Proposed removal sequence.
    ridge
        Ridge trace and choices of k.
    components
        Principal components and, with a response, principal-component regression.
    comparison
        Remedies side by side.
    repair
        What the nearest-matrix repair did, when it was used.
    warnings
        Numerical and input warnings, each with a stable code.
    cautions
        How to read these numbers: thresholds are rules of thumb; regulated models follow
        local rules and qualified review.
    detail
        How much the answer carries: ``"full"``, or ``"summary"`` (the default option), which
        keeps everything per variable and term and O(p) of every section, leaving out (empty
        or null) the p x p tables of proportions and partial correlations, each removal step's
        VIF vector and the second ordering, the ridge trace's per-variable vectors (the trace
        keeps max VIF, effective df and R^2 at eight k, the first and the last included) and
        the choices' original-unit coefficients, and the components' loadings, variable
        correlations, variances, original-unit and OLS coefficients and R^2 by component.
    model
        The generalized linear model fitted for a non-gaussian ``family``: every diagnostic
        is then that of the design weighted at its fit. None for the gaussian family.
    uncertainty
        How the intervals, p-values and shares in ``variables`` and ``terms`` were made, and
        (bootstrap) the stability of the removal; None without ``options.uncertainty``.
    provenance
        The service version, the input's fingerprint and the options in force (kept at every
        detail).
    """

    input_kind: str = ""
    n: float | None = None
    p: int = 0
    response: str | None = None
    intercept: bool = True
    threshold: float = math.nan
    variables: Sequence[VariableInflation] = ()
    terms: Sequence[TermInflation] = ()
    conditioning: Conditioning | None = None
    tests: Tests | None = None
    dependencies: Sequence[Dependency] = ()
    removal: Removal | None = None
    ridge: Ridge | None = None
    components: Components | None = None
    comparison: Comparison | None = None
    repair: RepairReport | None = None
    warnings: Sequence[Notice] = ()
    cautions: Sequence[str] = ()
    detail: str = "full"
    model: ModelFit | None = None
    uncertainty: Uncertainty | None = None
    provenance: Provenance | None = None


#: Every record an answer can contain, the answer itself last.
RESULT_TYPES: tuple[type[msgspec.Struct], ...] = (
    Notice,
    VariableInflation,
    TermInflation,
    Tangle,
    ProportionRow,
    Conditioning,
    FarrarGlauber,
    VariableF,
    PartialPair,
    Tests,
    Dependency,
    RemovalStep,
    StillHigh,
    Removal,
    RidgePoint,
    RidgeChoice,
    Ridge,
    Components,
    RemedyRow,
    Comparison,
    RepairReport,
    ModelFit,
    Uncertainty,
    Provenance,
    Assessment,
)
