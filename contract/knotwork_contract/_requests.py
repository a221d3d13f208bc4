"""The JSON request schema: msgspec Structs, frozen, keyword-only, unknown fields rejected.

These Structs are the single declaration of what a request may contain; the OpenAPI document
is generated from them. Limits that depend on settings (cells, columns, batch items) are
checked after decoding, in :mod:`knotwork.codecs._json`; limits that do not are here as
``Meta`` constraints.

Columns of a table, categorical columns and term lists are decoded as raw JSON first and then
column by column, so an error names its column (msgspec reports dictionary values only as
``[...]``); ``extra_json_schema`` documents their real shape.
"""

from __future__ import annotations

import sys
from collections.abc import Mapping
from typing import Annotated, Any, Literal, get_args

import msgspec
from msgspec import Meta, Raw, Struct

from ._pointers import msgspec_fault

__all__ = [
    "DETAILS",
    "FAMILIES",
    "REPLICATES_MAX",
    "REPLICATES_MIN",
    "SECTIONS",
    "SEED_MAX",
    "AssessOptions",
    "AssessRequest",
    "BatchRequest",
    "ComponentsOptions",
    "CorrelationInput",
    "CorrelationResponse",
    "EstimatesInput",
    "Input",
    "MomentsInput",
    "MomentsPart",
    "Name",
    "OptionsError",
    "RidgeOptions",
    "TableInput",
    "UncertaintyOptions",
    "check_options",
]


Name = Annotated[
    str,
    Meta(
        min_length=1,
        max_length=256,
        description="A variable, column or term name (1 to 256 characters).",
    ),
]
Count = Annotated[
    float,
    Meta(gt=0, description="Number of observations, or the sum of frequency weights (> 0)."),
]
Section = Literal[
    "variables",
    "terms",
    "conditioning",
    "tests",
    "dependencies",
    "removal",
    "ridge",
    "components",
    "comparison",
]

Detail = Literal["summary", "full"]
Family = Literal["gaussian", "binomial", "poisson", "gamma", "tweedie"]
#: The model families a table may be assessed under; the first is the default.
FAMILIES: tuple[str, ...] = get_args(Family)
#: How much an answer carries; the first is the default.
DETAILS: tuple[str, ...] = get_args(Detail)

#: The parts of an assessment a client may ask for (all of them by default), in answer order;
#: the core computes exactly these (``variables`` and ``dependencies`` always).
SECTIONS: tuple[str, ...] = get_args(Section)

_NUMBER_OR_NULL = {"anyOf": [{"type": "number"}, {"type": "null"}]}
NumericColumn = Annotated[
    Raw,
    Meta(
        extra_json_schema={
            "type": "array",
            "items": _NUMBER_OR_NULL,
            "description": "Values in row order; null marks a missing value.",
        }
    ),
]
CategoricalColumn = Annotated[
    Raw,
    Meta(
        extra_json_schema={
            "type": "array",
            "items": {"anyOf": [{"type": "string"}, {"type": "null"}]},
            "description": "Levels in row order; null marks a missing value.",
        }
    ),
]
TermColumns = Annotated[
    Raw,
    Meta(
        extra_json_schema={
            "type": "array",
            "items": {"type": "string", "minLength": 1, "maxLength": 256},
            "minItems": 1,
            "description": "The columns (names) that together form this term.",
        }
    ),
]
Terms = Annotated[
    dict[Name, TermColumns],
    Meta(
        description=(
            "Multi-column terms for GVIF: term name -> the names of its columns "
            "(for example the indicator columns of one categorical variable)."
        )
    ),
]


class _Wire(Struct, frozen=True, kw_only=True, forbid_unknown_fields=True):
    """Base of every request Struct: immutable, keyword-only, unknown fields rejected.

    Subclasses inherit these settings; they repeat ``frozen=True`` for type checkers.
    """


class TableInput(_Wire, frozen=True, tag="table", tag_field="kind"):
    """Rows of data, column by column."""

    columns: Annotated[
        dict[Name, NumericColumn],
        Meta(description="Numeric columns: name -> values, all of the same length."),
    ]
    categorical: (
        Annotated[
            dict[Name, CategoricalColumn],
            Meta(
                description=(
                    "Categorical columns: name -> levels. Each is expanded to indicator "
                    "columns against a reference level and treated as one term (GVIF)."
                )
            ),
        ]
        | None
    ) = None
    response: (
        Annotated[Name, Meta(description="Response column, excluded from predictors.")] | None
    ) = None
    weights: (
        Annotated[
            Name,
            Meta(
                description=(
                    "Column of non-negative frequency or survey weights (prior weights of a "
                    "GLM family; rows of weight 0 are left out of a fit)."
                )
            ),
        ]
        | None
    ) = None
    offset: (
        Annotated[
            Name,
            Meta(
                description=(
                    "A non-gaussian family only: column added to the linear predictor with a "
                    "coefficient fixed at 1 (for example log exposure), not a predictor."
                )
            ),
        ]
        | None
    ) = None
    trials: (
        Annotated[
            Name,
            Meta(
                description=(
                    "The binomial family only: column of positive numbers of trials; the "
                    "response is then the proportion of successes, in [0, 1]."
                )
            ),
        ]
        | None
    ) = None


class CorrelationResponse(_Wire, frozen=True):
    """The response variable of a correlation input: its correlation with each predictor."""

    name: Name
    correlations: Annotated[
        list[float], Meta(description="Correlation of the response with each name, in order.")
    ]


class CorrelationInput(_Wire, frozen=True, tag="correlation", tag_field="kind"):
    """A correlation matrix of the predictors and the number of observations behind it."""

    names: Annotated[list[Name], Meta(min_length=1, description="Predictor names, in order.")]
    matrix: Annotated[
        list[list[float]],
        Meta(description="Square, symmetric correlation matrix with unit diagonal, row by row."),
    ]
    n: Count
    response: CorrelationResponse | None = None
    terms: Terms | None = None


class MomentsPart(_Wire, frozen=True):
    """Summary moments of one part of the data."""

    n: Count
    means: Annotated[list[float], Meta(description="Mean of each name, in order.")]
    covariance: Annotated[
        list[list[float]],
        Meta(description="Sample covariance matrix (denominator n - 1), row by row."),
    ]


class MomentsInput(_Wire, frozen=True, tag="moments", tag_field="kind"):
    """Summary moments: n, means and covariance, or a list of parts merged by the service."""

    names: Annotated[
        list[Name],
        Meta(min_length=1, description="Variable names, in order (response included, if any)."),
    ]
    n: Count | None = None
    means: Annotated[list[float], Meta(description="Mean of each name, in order.")] | None = None
    covariance: (
        Annotated[
            list[list[float]],
            Meta(description="Sample covariance matrix (denominator n - 1), row by row."),
        ]
        | None
    ) = None
    parts: (
        Annotated[
            list[MomentsPart],
            Meta(
                min_length=1,
                description="Partial summaries, merged exactly; instead of n/means/covariance.",
            ),
        ]
        | None
    ) = None
    response: (
        Annotated[Name, Meta(description="One of names: the response, excluded from predictors.")]
        | None
    ) = None
    terms: Terms | None = None


class EstimatesInput(_Wire, frozen=True, tag="estimates", tag_field="kind"):
    """A fitted model's estimates: the covariance of its coefficients and their names.

    For any model already fitted elsewhere (least squares, a GLM, a survival or mixed model,
    with model-based, robust or clustered standard errors), and for settings where not even
    moments of the data may leave. The diagnostics follow Fox & Monette (1992): VIFs and GVIFs
    from the correlation of the estimates, the intercept left out.
    """

    names: Annotated[
        list[Name],
        Meta(
            min_length=1,
            description="Coefficient names, in the order of the covariance's rows (intercept "
            "included, if the model has one).",
        ),
    ]
    covariance: Annotated[
        list[list[float]],
        Meta(
            description="Covariance matrix of the estimated coefficients, row by row: square, "
            "symmetric, positive definite, with positive variances."
        ),
    ]
    intercept: Annotated[
        Name | None,
        Meta(
            description="The name (one of names) of the intercept coefficient, left out of the "
            "diagnostics; null when the model has no intercept. Required, so that a forgotten "
            "intercept cannot silently change the diagnostics."
        ),
    ]
    terms: Terms | None = None
    n: (
        Annotated[
            float,
            Meta(
                gt=0,
                description="Observations behind the fit (optional); without it the tests "
                "are skipped with a warning.",
            ),
        ]
        | None
    ) = None


Input = TableInput | CorrelationInput | MomentsInput | EstimatesInput


class RidgeOptions(_Wire, frozen=True):
    """Settings of the ridge trace."""

    grid: (
        Annotated[
            list[Annotated[float, Meta(ge=0)]],
            Meta(
                min_length=1,
                max_length=1000,
                description="Values of k >= 0 on the correlation scale; default: a built-in grid.",
            ),
        ]
        | None
    ) = None


class ComponentsOptions(_Wire, frozen=True):
    """Settings of principal components."""

    rule: Annotated[
        Literal["vif_threshold", "condition_index", "cumulative"],
        Meta(
            description=(
                "How to choose the kept components: by the VIF threshold (default: keep the "
                "most leading components whose regression has every VIF at or below "
                "`threshold`), by condition index (drop those above the limit) or by "
                "cumulative share of variance (keep until the limit is reached)."
            )
        ),
    ] = "vif_threshold"
    limit: (
        Annotated[
            float,
            Meta(
                gt=0,
                description=(
                    "The limit of condition_index (a condition index) or cumulative (a share "
                    "of variance in (0, 1]); default: the core's rule-of-thumb value, reported "
                    "in the result. Refused with vif_threshold, whose limit is `threshold`."
                ),
            ),
        ]
        | None
    ) = None


#: Fewest and most bootstrap replicates. Each replicate costs one weighted Gram product over the
#: rows (O(n p^2), batched) plus one removal sequence when some inflation is near the threshold
#: or above it; 1,000 replicates at n = 10,000, p = 20 take well under 2 s (docs/numerics.md),
#: and the time grows linearly with the replicates. At 100 each end of a 95% percentile
#: interval rests on 2.5 replicates; beyond 10,000 the Monte Carlo error of an end is far below
#: its sampling error, so more replicates only cost time.
REPLICATES_MIN = 100
REPLICATES_MAX = 10_000
#: Largest seed (numpy's generators take any non-negative integer; this keeps it an int64).
SEED_MAX = 2**63 - 1


class UncertaintyOptions(_Wire, frozen=True):
    """How to measure the sampling uncertainty of the VIFs (absent: no intervals)."""

    method: Annotated[
        Literal["normal", "bootstrap"],
        Meta(
            description=(
                "normal: exact intervals from the distribution of R_j^2 under jointly normal "
                "predictors (any input with n); bootstrap: resampling rows (tables only), with "
                "GVIF intervals, shares above the threshold and the stability of the removal."
            )
        ),
    ] = "normal"
    level: Annotated[
        float,
        Meta(gt=0, lt=1, description="Confidence level of the intervals, strictly in (0, 1)."),
    ] = 0.95
    replicates: Annotated[
        int,
        Meta(
            ge=REPLICATES_MIN,
            le=REPLICATES_MAX,
            description=(
                f"Bootstrap replicates, {REPLICATES_MIN} to {REPLICATES_MAX}; the time grows "
                "linearly with them (ignored by normal)."
            ),
        ),
    ] = 1000
    seed: Annotated[
        int,
        Meta(
            ge=0,
            le=SEED_MAX,
            description=(
                "Seed of the bootstrap's random generator: the same seed and input give the "
                "same answer (ignored by normal)."
            ),
        ),
    ] = 0


class AssessOptions(_Wire, frozen=True):
    """What to compute and how; every field has a safe default."""

    threshold: Annotated[
        float,
        Meta(
            gt=1,
            le=sys.float_info.max,
            description=(
                "VIF above which a variable counts as redundant (finite, above 1: every VIF is "
                "at least 1). A rule of thumb: common practice is 5 or 10."
            ),
        ),
    ] = 5.0
    protect: Annotated[
        list[Name], Meta(max_length=10_000, description="Names never proposed for removal.")
    ] = msgspec.field(default_factory=list)
    intercept: Annotated[
        bool,
        Meta(
            description=(
                "true: centred diagnostics (a model with an intercept); false: regression "
                "through the origin, uncentred VIF."
            )
        ),
    ] = True
    missing: Annotated[
        Literal["reject", "drop_rows", "pairwise"],
        Meta(
            description=(
                "Missing values in a table: reject (with counts per column), drop_rows "
                "(complete cases) or pairwise (each correlation from the rows where both exist)."
            )
        ),
    ] = "reject"
    repair: Annotated[
        Literal["reject", "nearest"],
        Meta(
            description=(
                "An inconsistent correlation matrix: reject, or repair it to the nearest valid "
                "one and report how far it moved."
            )
        ),
    ] = "reject"
    sections: (
        Annotated[
            list[Section],
            Meta(min_length=1, description="Which parts to compute; default: all of them."),
        ]
        | None
    ) = None
    ridge: Annotated[RidgeOptions, Meta(description="Settings of the ridge trace.")] | None = None
    components: (
        Annotated[ComponentsOptions, Meta(description="Settings of principal components.")] | None
    ) = None
    detail: Annotated[
        Detail,
        Meta(
            description=(
                "How much the answer carries: summary (everything per variable and term, and "
                "O(p) of every section: the high-index rows of the proportions, the strongest "
                "partial correlations) or full (every p x p table as well)."
            )
        ),
    ] = "summary"
    family: Annotated[
        Family,
        Meta(
            description=(
                "The model the diagnostics are for (tables only): gaussian (least squares, the "
                "default), or a generalized linear model fitted to the response, whose "
                "diagnostics are those of the design weighted at the fit: binomial (logit "
                "link), poisson (log), gamma (log) or tweedie (log, with var_power)."
            )
        ),
    ] = "gaussian"
    var_power: (
        Annotated[
            float,
            Meta(
                gt=1,
                lt=2,
                description=(
                    "The tweedie family's variance power v (variance proportional to mean^v), "
                    "strictly between 1 and 2; required with tweedie, refused otherwise."
                ),
            ),
        ]
        | None
    ) = None
    uncertainty: (
        Annotated[
            UncertaintyOptions,
            Meta(
                description=(
                    "Sampling uncertainty of the VIFs: intervals, p-values against the "
                    "threshold, and (bootstrap) the stability of the removal; absent: none."
                )
            ),
        ]
        | None
    ) = None


class AssessRequest(_Wire, frozen=True):
    """One assessment: the input and, optionally, options."""

    input: Annotated[
        Input,
        Meta(
            description=(
                "The data: a table, a correlation matrix, moments or the estimates of a fitted "
                "model, tagged by kind."
            )
        ),
    ]
    options: Annotated[
        AssessOptions, Meta(description="What to compute and how (all optional).")
    ] = msgspec.field(default_factory=AssessOptions)


class BatchRequest(_Wire, frozen=True):
    """Many assessments, each answered on its own."""

    items: Annotated[
        list[AssessRequest],
        Meta(min_length=1, description="The assessments; at most the configured batch limit."),
    ]


class OptionsError(ValueError):
    """An options document breaks the contract: where (a JSON pointer) and why.

    The reason is msgspec's own sentence for the rule (for example "Expected `float` > 1.0"),
    the same one the service answers with for the same value in a request.
    """

    def __init__(self, pointer: str, reason: str) -> None:
        super().__init__(f"{reason} (at {pointer})")
        self.pointer = pointer
        self.reason = reason


def check_options(document: Mapping[str, Any]) -> AssessOptions:
    """Check an options document against :class:`AssessOptions` and return the Struct.

    Raises
    ------
    OptionsError
        The first rule it breaks, with a pointer such as ``/options/threshold``.
    """
    try:
        return msgspec.convert(document, AssessOptions)
    except msgspec.ValidationError as exc:
        pointer, reason = msgspec_fault(exc, "/options")
        raise OptionsError(pointer, reason) from None
