"""The numerical core of knotwork: pure numpy/scipy, no web imports.

Build a :class:`Summary` with :func:`from_table`, :func:`from_frame`, :func:`from_correlation`,
:func:`from_moments` or :func:`merge_moments`, then call :func:`assess`.
"""

from ._assess import SECTIONS, Assessment, Options, assess, check_options
from ._conditioning import Conditioning, Tangle, condition_diagnostics
from ._dependencies import (
    Dependency,
    DependencyReport,
    Spectrum,
    find_dependencies,
)
from ._errors import (
    InputError,
    KnotworkError,
    MatrixError,
    MissingValuesError,
    OptionError,
    Problem,
    TooFewDataError,
)
from ._inflation import (
    TermInflation,
    VariableInflation,
    generalized_inflation,
    variance_inflation,
)
from ._notices import CAUTIONS, CODES, Notice
from ._significance import FarrarGlauber, Tests, VariableF, collinearity_tests
from ._summary import (
    INTERCEPT_NAME,
    MISSING_POLICIES,
    REPAIR_POLICIES,
    RepairReport,
    Summary,
    Term,
    from_correlation,
    from_frame,
    from_moments,
    from_table,
    merge_moments,
)

__all__ = [
    "CAUTIONS",
    "CODES",
    "INTERCEPT_NAME",
    "MISSING_POLICIES",
    "REPAIR_POLICIES",
    "SECTIONS",
    "Assessment",
    "Conditioning",
    "Dependency",
    "DependencyReport",
    "FarrarGlauber",
    "InputError",
    "KnotworkError",
    "MatrixError",
    "MissingValuesError",
    "Notice",
    "OptionError",
    "Options",
    "Problem",
    "RepairReport",
    "Spectrum",
    "Summary",
    "Tangle",
    "Term",
    "TermInflation",
    "Tests",
    "TooFewDataError",
    "VariableF",
    "VariableInflation",
    "assess",
    "check_options",
    "collinearity_tests",
    "condition_diagnostics",
    "find_dependencies",
    "from_correlation",
    "from_frame",
    "from_moments",
    "from_table",
    "generalized_inflation",
    "merge_moments",
    "variance_inflation",
]
