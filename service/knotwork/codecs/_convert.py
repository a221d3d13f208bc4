"""Prepared requests -> core summaries and options (the only codec module that imports the core)."""

from __future__ import annotations

from dataclasses import replace

import msgspec

from knotwork.core import (
    KnotworkError,
    Options,
    Summary,
    assess,
    from_correlation,
    from_moments,
    from_table,
    merge_moments,
    summary_detail,
)
from knotwork_contract import Assessment, AssessOptions, Problem

from ._errors import UnusableInput
from ._prepared import CorrelationData, MomentsData, Prepared, TableData
from ._provenance import provenance

__all__ = ["core_options", "run", "summarize"]


def core_options(options: AssessOptions) -> Options:
    """The core's :class:`Options` for wire options (``missing`` and ``repair`` go elsewhere)."""
    ridge = options.ridge
    result = Options(
        threshold=options.threshold,
        protect=tuple(options.protect),
        intercept=options.intercept,
        sections=tuple(options.sections) if options.sections is not None else None,
        ridge_grid=tuple(ridge.grid) if ridge is not None and ridge.grid is not None else None,
    )
    components = options.components
    if components is not None:
        # Only what the client set: the core keeps its own defaults otherwise.
        result = replace(result, components_rule=components.rule, components_limit=components.limit)
    return result


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
    assert isinstance(data, MomentsData)
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
        summary = summarize(prepared)
        result = assess(summary, core_options(prepared.options))
    except KnotworkError as exc:
        where = prepared.origin
        problems = [Problem(where.locate(exc.scope, p.pointer), p.reason) for p in exc.problems]
        raise UnusableInput(exc.message, problems, kind=exc.kind) from None
    result = msgspec.structs.replace(result, provenance=provenance(summary, prepared.options))
    return result if full or prepared.options.detail == "full" else summary_detail(result)
