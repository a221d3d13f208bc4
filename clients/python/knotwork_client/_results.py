"""Typed results mirroring the service's JSON answers.

Every class is a frozen msgspec Struct whose fields carry the wire names. Unknown fields are
ignored on decoding, so a newer service may add fields without breaking an older client; parts
whose layout is not pinned by the contract are kept as plain JSON values (``Any``). A VIF that
is not finite (an aliased variable) arrives as ``None`` together with ``aliased=True``.

The ``to_frame()`` helpers need pandas (``pip install knotwork-client[pandas]``).
"""

from __future__ import annotations

import math
from typing import Any

import msgspec

__all__ = [
    "Assessment",
    "Component",
    "Conditioning",
    "Dependency",
    "FarrarGlauber",
    "FieldError",
    "ProblemDetails",
    "Removal",
    "RemovalStep",
    "ResultWarning",
    "Ridge",
    "RidgeChoice",
    "RidgePoint",
    "Tangle",
    "Term",
    "Tests",
    "Variable",
]


def _pandas() -> Any:
    try:
        import pandas
    except ImportError as exc:  # pragma: no cover - exercised only without pandas
        raise ImportError("to_frame() needs pandas: pip install 'knotwork-client[pandas]'") from exc
    return pandas


class _Record(msgspec.Struct, frozen=True, kw_only=True):
    """Base of every result record: immutable, keyword-only, unknown fields ignored."""


class Variable(_Record, frozen=True, kw_only=True):
    """Inflation diagnostics of one predictor column.

    Attributes
    ----------
    name
        Column name (an indicator column of a categorical variable is ``var[level]``).
    vif
        Variance inflation factor 1 / (1 - R_j^2); None when the column is aliased.
    tolerance
        1 / VIF, i.e. 1 - R_j^2 (0 when aliased, or None if the service omits it).
    r_squared
        R_j^2 of the column regressed on the other predictors.
    se_inflation
        sqrt(VIF): the factor by which the coefficient's standard error is inflated.
    above_threshold
        Whether the VIF exceeds the threshold in force (a rule of thumb).
    aliased
        Whether the column is part of an exact linear dependency (VIF not finite).
    """

    name: str
    vif: float | None = None
    tolerance: float | None = None
    r_squared: float | None = None
    se_inflation: float | None = None
    above_threshold: bool = False
    aliased: bool = False


class Term(_Record, frozen=True, kw_only=True):
    """Generalized inflation of a multi-column term (Fox & Monette 1992).

    Attributes
    ----------
    name
        Term name (for an expanded categorical variable, the variable's name).
    columns
        The predictor columns that make up the term.
    df
        Number of columns (degrees of freedom) of the term.
    gvif
        Generalized VIF; None when not finite.
    gvif_scaled
        Scaled GVIF (GVIF to the power 1/(2 df)), comparable to sqrt(threshold).
    above_threshold
        Whether the scaled GVIF exceeds sqrt(threshold) (a rule of thumb).
    aliased
        Whether a column of the term is in an exact dependency (GVIF not finite).
    """

    name: str
    columns: list[str] = []
    df: int = 0
    gvif: float | None = None
    gvif_scaled: float | None = None
    above_threshold: bool = False
    aliased: bool = False


class Tangle(_Record, frozen=True, kw_only=True):
    """A set of variables tangled in one near-dependency.

    Attributes
    ----------
    index
        The condition index of the dimension.
    variables
        Variables with a large variance-decomposition proportion on that dimension.
    """

    index: float | None = None
    variables: list[str] = []


class Conditioning(_Record, frozen=True, kw_only=True):
    """Condition indices and variance-decomposition proportions (Belsley, Kuh & Welsch 1980).

    Attributes
    ----------
    basis
        Which matrix was decomposed (the scaled design with an uncentred intercept, or the
        correlation matrix); see the service documentation.
    names
        The columns of that matrix (``<constant>`` first when it is included).
    eigenvalues
        Eigenvalues of that matrix, largest first.
    condition_number
        Largest condition index; None when not finite.
    indices
        Condition index of each dimension.
    proportions
        Variance-decomposition proportions, as the service lays them out.
    tangles
        Near-dependencies: high index with two or more large proportions.
    """

    basis: str | None = None
    names: list[str] = []
    eigenvalues: list[float | None] = []
    condition_number: float | None = None
    indices: list[float | None] = []
    proportions: Any = None
    tangles: list[Tangle] = []


class FarrarGlauber(_Record, frozen=True, kw_only=True):
    """Farrar-Glauber (Bartlett) chi-square test of orthogonality.

    Attributes
    ----------
    chi_square
        The statistic -[n - 1 - (2p + 5)/6] ln det R.
    df
        Degrees of freedom p(p - 1)/2.
    p_value
        Upper-tail probability under a normal population with orthogonal predictors.
    """

    chi_square: float | None = None
    df: float | None = None
    p_value: float | None = None


class Tests(_Record, frozen=True, kw_only=True):
    """Significance-style diagnostics; read them with their caveats (large n rejects easily).

    Attributes
    ----------
    determinant
        Determinant of the predictor correlation matrix (1 for orthogonal predictors).
    farrar_glauber
        The overall chi-square test.
    variable_f
        Per-variable F statistics, as the service lays them out.
    """

    __test__ = False  # not a pytest test class, despite the name

    determinant: float | None = None
    farrar_glauber: FarrarGlauber | None = None
    variable_f: Any = None


class Dependency(_Record, frozen=True, kw_only=True):
    """An exact linear relation among predictors.

    Attributes
    ----------
    variables
        The variables involved.
    weights
        Their weights in the relation (same order).
    """

    variables: list[str] = []
    weights: list[float] = []


class RemovalStep(_Record, frozen=True, kw_only=True):
    """One drop in the removal sequence.

    Attributes
    ----------
    drop
        The variable (or term) dropped at this step.
    vif
        Its VIF (or GVIF) when dropped; None when it was aliased.
    max_vif_after
        The largest VIF left after the drop; None when something is still aliased.
    """

    drop: str
    vif: float | None = None
    max_vif_after: float | None = None


class Removal(_Record, frozen=True, kw_only=True):
    """Greedy removal sequence until every VIF is at most the threshold (common practice).

    Attributes
    ----------
    threshold
        The threshold in force (a rule of thumb, echoed).
    steps
        The drops, in order.
    kept
        Variables left at the end.
    stopped_by_protection
        Whether protected variables stopped the sequence while some VIF was still high.
    still_high
        What is still above the threshold when the sequence stops.
    """

    threshold: float | None = None
    steps: list[RemovalStep] = []
    kept: list[str] = []
    stopped_by_protection: bool | None = None
    still_high: list[str] = []

    def to_frame(self) -> Any:
        """The steps as a pandas DataFrame (columns ``drop``, ``vif``, ``max_vif_after``)."""
        pd = _pandas()
        return pd.DataFrame(
            {
                "drop": [s.drop for s in self.steps],
                "vif": [_f(s.vif) for s in self.steps],
                "max_vif_after": [_f(s.max_vif_after) for s in self.steps],
            },
            index=pd.RangeIndex(1, len(self.steps) + 1, name="step"),
        )


class RidgePoint(_Record, frozen=True, kw_only=True):
    """The ridge trace at one value of k (correlation scale).

    Attributes
    ----------
    k
        The ridge constant.
    vif
        Ridge VIFs, in the order of ``Assessment.variables``.
    max_vif
        Their maximum.
    effective_df
        Effective degrees of freedom tr[(R + kI)^-1 R].
    coefficients
        Standardized coefficients (only with a response).
    original_coefficients
        The same coefficients on the variables' own scales (only with a response and moments).
    """

    k: float
    vif: list[float | None] = []
    max_vif: float | None = None
    effective_df: float | None = None
    coefficients: list[float | None] | None = None
    original_coefficients: list[float | None] | None = None


class RidgeChoice(_Record, frozen=True, kw_only=True):
    """A value of k chosen by a published rule.

    Attributes
    ----------
    rule
        ``hoerl_kennard_baldwin``, ``lawless_wang``, ``gcv`` or ``vif_threshold``.
    k
        The chosen k, or None when the rule does not apply.
    """

    rule: str
    k: float | None = None


class Ridge(_Record, frozen=True, kw_only=True):
    """Ridge remedy: the trace over a grid of k and the k chosen by each rule.

    Attributes
    ----------
    k_scale
        The scale k is expressed on (``correlation``).
    trace
        One point per k of the grid.
    choices
        The k chosen by each rule.
    """

    k_scale: str | None = None
    trace: list[RidgePoint] = []
    choices: list[RidgeChoice] = []

    def to_frame(self, names: list[str] | None = None) -> Any:
        """The trace as a DataFrame indexed by k.

        Columns ``max_vif`` and ``effective_df``, then ``vif[<name>]`` per variable and, with a
        response, ``coef[<name>]``; ``names`` default to ``v0, v1, ...`` (pass
        ``[v.name for v in assessment.variables]``, as ``Assessment.ridge_frame()`` does).
        """
        pd = _pandas()
        width = max((len(t.vif) for t in self.trace), default=0)
        labels = list(names) if names is not None else [f"v{i}" for i in range(width)]
        rows = []
        for t in self.trace:
            row: dict[str, Any] = {"max_vif": _f(t.max_vif), "effective_df": _f(t.effective_df)}
            row.update({f"vif[{n}]": _f(v) for n, v in zip(labels, t.vif, strict=False)})
            if t.coefficients is not None:
                row.update(
                    {f"coef[{n}]": _f(c) for n, c in zip(labels, t.coefficients, strict=False)}
                )
            rows.append(row)
        return pd.DataFrame(rows, index=pd.Index([t.k for t in self.trace], name="k"))


class Component(_Record, frozen=True, kw_only=True):
    """Principal components of the correlation matrix and the regression on the kept ones.

    Attributes
    ----------
    eigenvalues
        Component variances, largest first.
    explained
        Share of the total variance per component.
    cumulative
        Cumulative share.
    condition_indices
        sqrt(lambda_1 / lambda_k) per component.
    loadings
        Eigenvectors, as the service lays them out.
    kept
        Indices (into ``eigenvalues``) of the components kept by ``rule``.
    rule
        The rule used to keep components.
    coefficients
        Regression on the kept components mapped back to the variables (with a response).
    """

    eigenvalues: list[float | None] = []
    explained: list[float | None] = []
    cumulative: list[float | None] = []
    condition_indices: list[float | None] = []
    loadings: Any = None
    kept: list[int] = []
    rule: Any = None
    coefficients: Any = None


class ResultWarning(_Record, frozen=True, kw_only=True):
    """Numerical trouble reported alongside the result.

    Attributes
    ----------
    code
        Stable machine-readable code.
    message
        What happened, in words.
    """

    code: str
    message: str = ""


class Assessment(_Record, frozen=True, kw_only=True):
    """The service's answer to one model: every diagnostic that was asked for.

    Attributes
    ----------
    variables
        Per-predictor inflation diagnostics, in the order of the predictors.
    terms
        Per multi-column term: GVIF and scaled GVIF.
    conditioning
        Condition indices and proportions (None if not computed).
    tests
        Determinant, Farrar-Glauber chi-square and per-variable F (None if not computed).
    dependencies
        Exact linear relations among the predictors.
    removal
        The greedy removal sequence (None if not computed).
    ridge
        Ridge trace and chosen k (None if not computed).
    components
        Principal components (None if not computed).
    warnings
        Numerical trouble, with stable codes.
    cautions
        How to read the numbers: thresholds are rules of thumb, and decisions on regulated
        models follow local rules and qualified review.
    n
        Number of observations (or the sum of the weights).
    p
        Number of predictors.
    input_kind
        ``table``, ``correlation`` or ``moments``: what the service received.
    response
        The response's name, or None.
    intercept
        Whether centred diagnostics (a model with an intercept) were computed.
    threshold
        The VIF threshold in force (a rule of thumb, echoed).
    comparison
        Remedies side by side, as the service lays them out.
    repair
        How far an inconsistent correlation matrix was moved, when repair was asked for.
    """

    variables: list[Variable] = []
    terms: list[Term] = []
    conditioning: Conditioning | None = None
    tests: Tests | None = None
    dependencies: list[Dependency] = []
    removal: Removal | None = None
    ridge: Ridge | None = None
    components: Component | None = None
    warnings: list[ResultWarning] = []
    cautions: Any = None
    n: float | None = None
    p: int | None = None
    input_kind: str | None = None
    response: str | None = None
    intercept: bool | None = None
    threshold: float | None = None
    comparison: Any = None
    repair: Any = None

    @property
    def max_vif(self) -> float:
        """The largest VIF (``inf`` when any variable is aliased, ``nan`` if none)."""
        if any(v.aliased or v.vif is None for v in self.variables):
            return math.inf
        return max((v.vif for v in self.variables if v.vif is not None), default=math.nan)

    def to_frame(self) -> Any:
        """Per-variable table as a DataFrame indexed by name (``vif`` NaN when aliased)."""
        pd = _pandas()
        frame = pd.DataFrame(
            {
                "vif": [_f(v.vif) for v in self.variables],
                "tolerance": [_f(v.tolerance) for v in self.variables],
                "r_squared": [_f(v.r_squared) for v in self.variables],
                "se_inflation": [_f(v.se_inflation) for v in self.variables],
                "above_threshold": [v.above_threshold for v in self.variables],
                "aliased": [v.aliased for v in self.variables],
            },
            index=pd.Index([v.name for v in self.variables], name="name"),
        )
        return frame

    def removal_frame(self) -> Any:
        """The removal steps as a DataFrame (empty when removal was not computed)."""
        return (self.removal or Removal()).to_frame()

    def ridge_frame(self) -> Any:
        """The ridge trace as a DataFrame indexed by k, columns labelled by variable."""
        return (self.ridge or Ridge()).to_frame([v.name for v in self.variables])


class FieldError(_Record, frozen=True, kw_only=True):
    """One field the service objected to.

    Attributes
    ----------
    pointer
        JSON pointer (RFC 6901) into the request, or a column name.
    reason
        What was expected, what came, and how to fix it.
    """

    pointer: str = ""
    reason: str = ""


class ProblemDetails(_Record, frozen=True, kw_only=True):
    """A problem document (RFC 9457) as the service sends it for every error.

    Attributes
    ----------
    type
        Stable URI naming the kind of error.
    title
        Short summary of the kind of error.
    status
        HTTP status code.
    detail
        Explanation specific to this occurrence.
    errors
        The fields at fault, each with a pointer and a reason.
    """

    type: str = "about:blank"
    title: str = ""
    status: int | None = None
    detail: str | None = None
    errors: list[FieldError] = []


def _f(value: float | None) -> float:
    return math.nan if value is None else float(value)
