"""How much an answer carries: the summary detail leaves out every p x p table.

A full assessment holds several tables that grow as p^2 (variance-decomposition proportions,
three partial-correlation tables, component loadings and variable correlations) and others
that grow as p times their length (each removal step's VIF vector, the ridge trace's VIF and
coefficient vectors at every k). At p = 1,000 they are over a hundred megabytes of JSON, and
what a reader decides on is O(p): every VIF and GVIF, the indices and the tangled sets, the
removal steps, the ridge choices and the kept components. :func:`summary_detail` keeps that
and leaves the tables out; the rows of the proportions with a high index and the strongest
partial correlations, computed in every answer, stand for them.
"""

from __future__ import annotations

from msgspec.structs import replace

from knotwork_contract import Assessment

__all__ = ["TRACE_POINTS", "summary_detail"]


#: The summary's ridge trace keeps about this many points of the grid (the first and the last
#: included): enough to see the curve of max VIF, effective df and R^2 against k.
TRACE_POINTS = 8


def _thinned(n: int) -> list[int]:
    """About TRACE_POINTS indices spread evenly over n, the first and the last included."""
    if n <= TRACE_POINTS:
        return list(range(n))
    step = -(-(n - 1) // (TRACE_POINTS - 1))  # ceiling division
    kept = list(range(0, n - 1, step))
    return [*kept, n - 1]


def summary_detail(a: Assessment) -> Assessment:
    """The same assessment with its p x p tables and per-step, per-k vectors left out.

    Kept: every field per variable and per term; conditioning's eigenvalues, indices, condition
    number, tangled sets and high-index rows; the determinant, Farrar-Glauber and per-variable
    F tests and the strongest partial correlations; each removal step's drop, VIF, largest VIF
    left and R^2 after (the second ordering only in full); the ridge trace's max VIF, effective
    df and R^2 at eight k spread over the grid, first and last included, and every choice with its
    standardized coefficients; the components' eigenvalues, shares, indices, kept set, VIFs
    and standardized coefficients; the comparison, dependencies, warnings and cautions.
    """
    conditioning = a.conditioning
    if conditioning is not None:
        conditioning = replace(conditioning, proportions=())
    tests = a.tests
    if tests is not None:
        tests = replace(tests, partial_correlations=(), partial_t=(), partial_p_values=())
    removal = a.removal
    if removal is not None:
        steps = tuple(replace(step, vifs=None) for step in removal.steps)
        removal = replace(removal, steps=steps, alternative=None)
    ridge = a.ridge
    if ridge is not None:
        trace = tuple(
            replace(
                ridge.trace[i],
                vif=(),
                coefficients=None,
                residual_variance=None,
                original_coefficients=None,
                original_intercept=None,
            )
            for i in _thinned(len(ridge.trace))
        )
        choices = tuple(replace(c, original_coefficients=None) for c in ridge.choices)
        ridge = replace(ridge, trace=trace, choices=choices)
    components = a.components
    if components is not None:
        components = replace(
            components,
            loadings=(),
            variable_correlations=(),
            coefficient_variances=None,
            original_coefficients=None,
            original_variances=None,
            r_squared_by_component=None,
            ols_coefficients=None,
        )
    return replace(
        a,
        conditioning=conditioning,
        tests=tests,
        removal=removal,
        ridge=ridge,
        components=components,
        detail="summary",
    )
