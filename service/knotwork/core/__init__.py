"""The numerical core of knotwork: pure numpy/scipy, no web imports.

Build a :class:`Summary` with :func:`from_table`, :func:`from_frame`, :func:`from_correlation`,
:func:`from_moments`, :func:`merge_moments` or :func:`from_estimates` (a fitted model's
estimates), then call :func:`assess` (:func:`design_from_table` also keeps the design's rows,
for the bootstrap). The result records (:class:`~knotwork_contract.Assessment` and its parts)
are the shared contract's: import them from :mod:`knotwork_contract`.
"""

from knotwork_contract import SECTIONS

from ._assess import GLM_OMITTED, Options, assess, assess_glm, check_model, check_options
from ._components import principal_components
from ._conditioning import condition_diagnostics
from ._dependencies import DependencyReport, Spectrum, find_dependencies
from ._detail import summary_detail
from ._errors import (
    FitError,
    InputError,
    KnotworkError,
    MatrixError,
    MissingValuesError,
    OptionError,
    Problem,
    TooFewDataError,
)
from ._estimates import from_estimates
from ._glm import FAMILIES, GlmFit, GlmSummaries, summarize_glm
from ._inflation import generalized_inflation, variance_inflation
from ._interrupt import Interrupted, checkpoint, stop_when
from ._matrices import from_correlation, from_moments, merge_moments
from ._notices import CAUTIONS, CODES
from ._regression import Regression
from ._remedies import compare_remedies
from ._removal import removal_sequence
from ._repair import Repair, nearest_correlation
from ._ridge import default_grid, ridge_analysis
from ._rows import DesignRows, design_from_table, from_frame, from_table
from ._significance import collinearity_tests
from ._summary import INTERCEPT_NAME, Summary, Term
from ._uncertainty import bootstrap_intervals, normal_intervals, r2_cdf, r2_sf
from ._validation import MISSING_POLICIES, REPAIR_POLICIES

__all__ = [
    "CAUTIONS",
    "CODES",
    "FAMILIES",
    "GLM_OMITTED",
    "INTERCEPT_NAME",
    "MISSING_POLICIES",
    "REPAIR_POLICIES",
    "SECTIONS",
    "DependencyReport",
    "DesignRows",
    "FitError",
    "GlmFit",
    "GlmSummaries",
    "InputError",
    "Interrupted",
    "KnotworkError",
    "MatrixError",
    "MissingValuesError",
    "OptionError",
    "Options",
    "Problem",
    "Regression",
    "Repair",
    "Spectrum",
    "Summary",
    "Term",
    "TooFewDataError",
    "assess",
    "assess_glm",
    "bootstrap_intervals",
    "check_model",
    "check_options",
    "checkpoint",
    "collinearity_tests",
    "compare_remedies",
    "condition_diagnostics",
    "default_grid",
    "design_from_table",
    "find_dependencies",
    "from_correlation",
    "from_estimates",
    "from_frame",
    "from_moments",
    "from_table",
    "generalized_inflation",
    "merge_moments",
    "nearest_correlation",
    "normal_intervals",
    "principal_components",
    "r2_cdf",
    "r2_sf",
    "removal_sequence",
    "ridge_analysis",
    "stop_when",
    "summarize_glm",
    "summary_detail",
    "variance_inflation",
]
