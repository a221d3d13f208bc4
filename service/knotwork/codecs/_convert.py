"""Prepared requests -> core summaries and options (the only codec module that imports the core)."""

from __future__ import annotations

from dataclasses import replace

import msgspec

from knotwork.core import (
    DesignRows,
    KnotworkError,
    Options,
    Summary,
    assess,
    assess_glm,
    check_model,
    design_from_table,
    from_correlation,
    from_estimates,
    from_moments,
    from_table,
    merge_moments,
    summarize_glm,
    summary_detail,
)
from knotwork_contract import Assessment, AssessOptions, Problem

from ._errors import UnusableInput
from ._prepared import CorrelationData, EstimatesData, Prepared, TableData
from ._provenance import provenance

__all__ = ["core_options", "run", "summarize", "summarize_with_rows"]


def core_options(options: AssessOptions) -> Options:
    """The core's :class:`Options` for wire options (``missing`` and ``repair`` go elsewhere)."""
    ridge = options.ridge
    result = Options(
        threshold=options.threshold,
        protect=tuple(options.protect),
        intercept=options.intercept,
        sections=tuple(options.sections) if options.sections is not None else None,
        ridge_grid=tuple(ridge.grid) if ridge is not None and ridge.grid is not None else None,
        detail=options.detail,
        family=options.family,
        var_power=options.var_power,
    )
    components = options.components
    if components is not None:
        # Only what the client set: the core keeps its own defaults otherwise.
        result = replace(result, components_rule=components.rule, components_limit=components.limit)
    if options.uncertainty is not None:
        result = replace(result, uncertainty=options.uncertainty)
    return result


def _wants_rows(prepared: Prepared) -> bool:
    unc = prepared.options.uncertainty
    return unc is not None and unc.method == "bootstrap"


def summarize_with_rows(prepared: Prepared) -> tuple[Summary, DesignRows | None]:
    """The core summary and, when the request asks for the bootstrap and sends rows, the
    design's rows (after categorical expansion and the missing-value policy).

    The rows cost one (rows, p) float64 array beside the decoded columns, and only when the
    bootstrap is asked for; every other request keeps the one pass over the columns.
    """
    data = prepared.data
    if isinstance(data, TableData) and _wants_rows(prepared):
        return design_from_table(
            data.columns,
            categorical=data.categorical or None,
            response=data.response,
            weights=data.weights,
            missing=prepared.options.missing,
            repair=prepared.options.repair,
        )
    return summarize(prepared), None


def summarize(prepared: Prepared) -> Summary:
    """Build the core summary of a prepared request."""
    data = prepared.data
    repair = prepared.options.repair
    if isinstance(data, TableData):
        return from_table(
            data.columns,
            categorical=data.categorical or None,
            response=data.response,
            weights=data.weights,
            missing=prepared.options.missing,
            repair=repair,
        )
    if isinstance(data, CorrelationData):
        return from_correlation(
            data.names,
            data.matrix,
            data.n,
            response=data.response,
            terms=data.terms,
            repair=repair,
        )
    if isinstance(data, EstimatesData):
        return from_estimates(
            data.names,
            data.covariance,
            data.intercept,
            terms=data.terms,
            n=data.n,
            repair=repair,
        )
    if data.parts is not None:
        return merge_moments(
            data.parts, data.names, response=data.response, terms=data.terms, repair=repair
        )
    assert data.n is not None and data.means is not None
    return from_moments(
        data.names,
        data.n,
        data.means,
        data.covariance,
        response=data.response,
        terms=data.terms,
        repair=repair,
    )


def _compute(prepared: Prepared) -> tuple[Summary, Assessment]:
    """The model rules first, then a GLM fit for a table under a non-gaussian family, or the
    summary of the input as it is; the summary the diagnostics ran on, and the answer."""
    options = core_options(prepared.options)
    data = prepared.data
    table = data if isinstance(data, TableData) else None
    check_model(
        options,
        input_kind=prepared.kind,
        response=None if table is None else table.response,
        offset=None if table is None else table.offset,
        trials=None if table is None else table.trials,
    )
    if table is None or options.family == "gaussian":
        summary, rows = summarize_with_rows(prepared)
        return summary, assess(summary, options, rows)
    assert table.response is not None  # check_model insists on it
    glm = summarize_glm(
        table.columns,
        response=table.response,
        family=options.family,
        categorical=table.categorical or None,
        var_power=options.var_power,
        weights=table.weights,
        offset=table.offset,
        trials=table.trials,
        intercept=options.intercept,
        missing=prepared.options.missing,
    )
    return glm.weighted, assess_glm(glm, options)


def run(prepared: Prepared, *, full: bool = False) -> Assessment:
    """Summarize and assess: the whole computation for one request, at the detail it asks.

    The answer carries its provenance (the service version, the fingerprint of the summary
    and options, the options in force) at every detail. ``full=True`` keeps every table
    whatever the request's ``detail`` (the report draws from them); the provenance is the
    same as that of the JSON answer to the same request.

    Raises
    ------
    UnusableInput
        For input or options the core cannot use: the core's error, its kind kept and its
        pointers translated into the request the client sent (``prepared.origin``).
    """
    try:
        summary, result = _compute(prepared)
    except KnotworkError as exc:
        where = prepared.origin
        problems = [Problem(where.locate(exc.scope, p.pointer), p.reason) for p in exc.problems]
        raise UnusableInput(exc.message, problems, kind=exc.kind) from None
    result = msgspec.structs.replace(result, provenance=provenance(summary, prepared.options))
    return result if full or prepared.options.detail == "full" else summary_detail(result)
