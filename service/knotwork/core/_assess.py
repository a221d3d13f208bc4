"""Options, the assessment record, and :func:`assess`: every diagnostic from one summary."""

from __future__ import annotations

import math
from collections.abc import Collection
from dataclasses import dataclass, replace

import msgspec
import numpy as np

from knotwork_contract import (
    SECTIONS,
    Assessment,
    Conditioning,
    ModelFit,
    Notice,
    OptionsError,
    TermInflation,
    Uncertainty,
    UncertaintyOptions,
    VariableInflation,
)
from knotwork_contract import check_options as contract_check_options

from ._components import LIMIT_WITH_VIF_THRESHOLD, VIF_THRESHOLD, principal_components
from ._conditioning import condition_diagnostics
from ._dependencies import (
    NEAR_SINGULAR_RTOL,
    DependencyReport,
    Spectrum,
    clearly_regular_inverse,
    find_dependencies,
)
from ._errors import InputError, OptionError, Problem
from ._glm import TOL, GlmSummaries
from ._inflation import generalized_inflation, variance_inflation
from ._interrupt import checkpoint
from ._notices import CAUTIONS, notice
from ._regression import Regression
from ._remedies import compare_remedies
from ._removal import removal_sequence
from ._ridge import ridge_analysis
from ._rows import DesignRows
from ._significance import collinearity_tests
from ._summary import INTERCEPT_NAME, Summary
from ._uncertainty import MAX_N as NORMAL_MAX_N
from ._uncertainty import MAX_N_REASON as TOO_MANY_FOR_NORMAL
from ._uncertainty import bootstrap_intervals, normal_intervals

#: Sample size beyond which the significance tests reject at any trace of collinearity; the
#: figure is a round number for the warning, not a published cut-off.
_LARGE_N = 10_000
#: Sections that read the eigen-decomposition of the predictors' matrix; without them a matrix
#: that is provably far from singular needs none (see ``clearly_regular_inverse``).
_SPECTRAL = ("conditioning", "tests", "removal", "ridge", "components", "comparison")


@dataclass(frozen=True, slots=True)
class Options:
    """What to compute and the rules of thumb to judge it by.

    Attributes
    ----------
    threshold
        VIF above which a predictor counts as redundant (common practice: 5 or 10).
    protect
        Predictors or terms never proposed for removal.
    intercept
        True (default): the model has an intercept, VIFs are centred. False: regression through
        the origin, VIFs from the uncentred cosine matrix (needs rows or moments).
    sections
        Which sections to compute (None: all).
    ridge_grid
        Values of k on the correlation scale for the ridge trace (None: a default grid).
    components_rule
        ``"vif_threshold"`` (default: keep the most leading components whose regression has
        every VIF at or below ``threshold``), ``"condition_index"`` (drop components whose
        index exceeds ``components_limit``, default 30) or ``"cumulative"`` (keep the fewest
        explaining ``components_limit`` of the variance, default 0.95).
    components_limit
        The limit of ``"condition_index"`` or ``"cumulative"`` (None: its default); refused
        with ``"vif_threshold"``, whose limit is ``threshold``.
    index_threshold, proportion_threshold
        A tangle is a component with condition index above ``index_threshold`` and two or more
        variance-decomposition proportions above ``proportion_threshold`` (common practice
        after Belsley, Kuh & Welsch: 30 and 0.5).
    family, var_power
        The model the diagnostics are for: ``"gaussian"`` (least squares; :func:`assess`) or a
        GLM family fitted to a table (:func:`assess_glm`, on :func:`summarize_glm`'s
        summaries); ``var_power`` is the tweedie variance power, required with tweedie only.
    detail
        ``"full"`` (default) builds every table; ``"summary"`` leaves out the p x p tables
        that :func:`summary_detail` drops (proportions, partial-correlation tables, component
        loadings, per-step VIF vectors and the second removal ordering), so they are not
        computed only to be thrown away. Everything a summary keeps is computed the same way.
    uncertainty
        The contract's :class:`~knotwork_contract.UncertaintyOptions` (method ``normal`` or
        ``bootstrap``, level, replicates, seed), or None for no intervals. The bootstrap needs
        the design's rows (:func:`~knotwork.core.design_from_table`, passed to :func:`assess`).
    """

    threshold: float = 5.0
    protect: tuple[str, ...] = ()
    intercept: bool = True
    sections: Collection[str] | None = None
    ridge_grid: tuple[float, ...] | None = None
    components_rule: str = VIF_THRESHOLD
    components_limit: float | None = None
    index_threshold: float = 30.0
    proportion_threshold: float = 0.5
    family: str = "gaussian"
    var_power: float | None = None
    detail: str = "full"
    uncertainty: UncertaintyOptions | None = None

    def wants(self, section: str) -> bool:
        return self.sections is None or section in self.sections

    @property
    def tables(self) -> bool:
        """Whether the p x p tables are wanted (the full detail)."""
        return self.detail == "full"


def _wire_document(options: Options) -> dict[str, object]:
    """The options as the contract's options document, to check them by its rules."""
    doc: dict[str, object] = {
        "threshold": options.threshold,
        "protect": list(options.protect),
        "intercept": options.intercept,
        "components": {"rule": options.components_rule, "limit": options.components_limit},
    }
    if options.sections is not None:
        doc["sections"] = list(options.sections)
    if options.ridge_grid is not None:
        doc["ridge"] = {"grid": list(options.ridge_grid)}
    doc["family"] = options.family
    if options.var_power is not None:
        doc["var_power"] = options.var_power
    if options.uncertainty is not None:
        doc["uncertainty"] = msgspec.structs.asdict(options.uncertainty)
    return doc


def _family_problems(options: Options) -> list[Problem]:
    """The rule of two options: var_power goes with the tweedie family, and only with it."""
    if options.family == "tweedie" and options.var_power is None:
        return [
            Problem(
                "/var_power",
                "the tweedie family needs var_power, strictly between 1 and 2 (1 is poisson-like, "
                "2 gamma-like); there is no default",
            )
        ]
    if options.family != "tweedie" and options.var_power is not None:
        return [
            Problem(
                "/var_power",
                f"var_power applies to the tweedie family only, not {options.family!r}; leave it "
                "out or set family to 'tweedie'",
            )
        ]
    return []


def check_model(
    options: Options,
    *,
    input_kind: str,
    response: str | None = None,
    offset: str | None = None,
    trials: str | None = None,
) -> None:
    """The rules that tie the model family to the input, checked before anything is computed.

    A non-gaussian family fits a model to the rows of a table, so it needs a table and a
    response column; ``trials`` belong to the binomial family and ``offset`` to a fitted
    (non-gaussian) family. The gaussian family's diagnostics are those of the design itself,
    which neither an offset nor trials change, so they are refused there rather than ignored.

    Raises
    ------
    OptionError
        ``/family`` or ``/var_power`` (the options), or var_power without tweedie.
    InputError
        ``/response``, ``/offset`` or ``/trials`` (fields of the input).
    """
    family_faults = _family_problems(options)
    if family_faults:
        raise OptionError(family_faults[0].reason, family_faults)
    family = options.family
    if family != "gaussian" and input_kind != "table":
        raise OptionError.at(
            "/family",
            f"family {family!r} fits a model to the rows of a table; a {input_kind} input has no "
            "rows, so only family 'gaussian' applies to it",
        )
    if trials is not None and family != "binomial":
        raise InputError.at(
            "/trials",
            f"trials apply to the binomial family only, not {family!r}; leave trials out or set "
            "family to 'binomial'",
        )
    if offset is not None and family == "gaussian":
        raise InputError.at(
            "/offset",
            "an offset applies to a fitted model (family binomial, poisson, gamma or tweedie); "
            "the gaussian family's diagnostics do not depend on it, so leave it out",
        )
    if family != "gaussian" and response is None:
        raise InputError.at(
            "/response",
            f"family {family!r} fits a model to a response; name the response column",
        )
    unc = options.uncertainty
    if family != "gaussian" and unc is not None and unc.method == "bootstrap":
        raise OptionError.at(
            "/uncertainty/method",
            f"the bootstrap is not offered for family {family!r} (each replicate would need its "
            "own fit); use method 'normal', whose intervals are those of the design weighted "
            "at the fit",
        )


def check_options(options: Options, summary: Summary, rows: DesignRows | None = None) -> None:
    """Validate options against the summary, naming the option at fault.

    The rules the contract declares (bounds, enums: the threshold finite and above 1, the
    sections, k >= 0, the components rule) are checked by the contract itself, in its own
    words; what depends on the input or on two options together is checked here. The kernels
    trust what passes. ``rows`` are the design's rows, which only the bootstrap needs.
    """
    try:
        contract_check_options(_wire_document(options))
    except OptionsError as exc:
        where = exc.pointer.removeprefix("/options")
        raise OptionError(exc.reason, [Problem(where, exc.reason)]) from None
    problems: list[Problem] = list(_family_problems(options))
    known = set(summary.names) | {term.name for term in summary.terms}
    for i, name in enumerate(options.protect):
        if name not in known:
            problems.append(
                Problem(f"/protect/{i}", f"protect names {name!r}, which is not a predictor")
            )
    lim = options.components_limit
    if lim is not None:
        if options.components_rule == VIF_THRESHOLD:
            problems.append(Problem("/components/limit", LIMIT_WITH_VIF_THRESHOLD))
        elif options.components_rule == "cumulative" and not (0 < lim <= 1):
            problems.append(Problem("/components/limit", "a cumulative share must lie in (0, 1]"))
        elif options.components_rule == "condition_index" and not (math.isfinite(lim) and lim >= 1):
            problems.append(
                Problem("/components/limit", "a condition-index limit must be a number >= 1")
            )
    estimates = summary.implied_design
    if estimates is not None:
        if not options.intercept and estimates[1][0] == INTERCEPT_NAME:
            problems.append(
                Problem(
                    "/intercept",
                    "the fitted model has an intercept (input.intercept names it), so its "
                    "estimates give centred diagnostics; leave intercept at true",
                )
            )
    elif not options.intercept and not summary.has_moments:
        problems.append(
            Problem(
                "/intercept",
                "intercept=false (uncentred VIF) needs rows or moments; a correlation matrix "
                "has lost the means",
            )
        )
    problems.extend(_uncertainty_problems(options, summary, rows))
    if problems:
        raise OptionError(problems[0].reason, problems)


def _uncertainty_problems(
    options: Options, summary: Summary, rows: DesignRows | None
) -> list[Problem]:
    """What the contract cannot state about ``uncertainty``: it depends on the input."""
    unc = options.uncertainty
    if unc is None:
        return []
    if not options.intercept:
        return [
            Problem(
                "/uncertainty",
                "intervals are for centred VIFs (a model with an intercept); with "
                "intercept=false leave uncertainty out",
            )
        ]
    if math.isnan(summary.n):
        return [
            Problem(
                "/uncertainty",
                "the intervals need the number of observations behind the estimates; give "
                "the input's n",
            )
        ]
    if unc.method != "bootstrap":
        if summary.n > NORMAL_MAX_N:
            return [
                Problem(
                    "/uncertainty/method",
                    f"n = {summary.n:g}: {TOO_MANY_FOR_NORMAL}; leave uncertainty out",
                )
            ]
        return []
    if summary.input_kind != "table":
        article = "an" if summary.input_kind[:1] in "aeiou" else "a"
        return [
            Problem(
                "/uncertainty/method",
                f"the bootstrap resamples rows, and {article} {summary.input_kind} input has "
                "none; send the rows, or use method 'normal'",
            )
        ]
    if rows is None:
        reason = (
            "the bootstrap resamples complete rows, and pairwise deletion keeps none; use "
            "missing 'drop_rows', or method 'normal'"
            if summary.comoments is None
            else "the bootstrap needs the design's rows (design_from_table), not only its summary"
        )
        return [Problem("/uncertainty/method", reason)]
    if rows.names != summary.names:
        return [Problem("/uncertainty/method", "the rows are not those of this summary")]
    return []


def assess(
    summary: Summary, options: Options | None = None, rows: DesignRows | None = None
) -> Assessment:
    """Compute every requested diagnostic from a summary.

    Parameters
    ----------
    summary
        The design's summary (from rows, a correlation matrix or moments).
    options
        What to compute and the thresholds (defaults: VIF 5, intercept, all sections).
    rows
        The design's rows (:func:`~knotwork.core.design_from_table`); needed only by the
        bootstrap (``options.uncertainty.method == "bootstrap"``), ignored otherwise.

    Returns
    -------
    Assessment

    Raises
    ------
    TooFewDataError, InputError
        Too few observations for the predictors, or a constant variable (pointer into the input).
    OptionError
        An option is out of range or does not fit the input (pointer into the options).

    Notes
    -----
    With an intercept every diagnostic works on the predictors' correlation matrix R (centred);
    without one, on the cosine matrix of the uncentred columns. The eigen-decomposition of that
    matrix is computed once and shared by the dependency finder, the tests, ridge and the
    principal components. Conditioning uses the scaled uncentred design with the intercept
    column (Belsley, Kuh & Welsch) when moments are known, and R otherwise; ``basis`` says which.
    """
    options = options or Options()
    summary.check()
    check_options(options, summary, rows)
    p = summary.p
    names = summary.names
    notes: list[Notice] = list(summary.notes)
    # Estimates imply their design's correlation, centred or not as the fitted model was.
    estimates = summary.implied_design is not None
    intercept = options.intercept
    if estimates:
        assert summary.implied_design is not None
        intercept = summary.implied_design[1][0] == INTERCEPT_NAME
    if options.intercept or estimates:
        matrix = summary.R
        r_xy = summary.r_xy
    else:
        cos = summary.cosine()
        assert cos is not None
        matrix = cos[:p, :p]
        r_xy = cos[:p, p] if summary.response is not None else None
    inverse = None if any(map(options.wants, _SPECTRAL)) else clearly_regular_inverse(matrix)
    spectrum: Spectrum | None = None
    if inverse is None:
        spectrum = Spectrum.of(matrix)
        deps: DependencyReport = find_dependencies(
            spectrum,
            names,
            sds=summary.sds if options.intercept else None,
            means=summary.predictor_means if options.intercept else None,
        )
    else:
        deps = DependencyReport.none(p)
    if deps.relations:
        aliased = [names[j] for j in np.flatnonzero(deps.involved)]
        notes.append(
            notice(
                "exact_dependency",
                f"{len(deps.relations)} exact linear relation(s) among "
                f"{', '.join(aliased)}: their VIFs are infinite (reported as null, aliased)",
            )
        )
    elif spectrum is not None and spectrum.values[-1] < NEAR_SINGULAR_RTOL * spectrum.values[0]:
        notes.append(
            notice(
                "near_singular",
                f"the smallest eigenvalue of the correlation matrix is {spectrum.values[-1]:.3g}: "
                "near-singular, results are sensitive to small changes in the data",
            )
        )
    variables = variance_inflation(
        matrix, names, threshold=options.threshold, dependencies=deps, inverse=inverse
    )
    terms: tuple[TermInflation, ...] = ()
    if options.wants("terms") and summary.terms:
        terms = generalized_inflation(
            matrix,
            names,
            summary.term_indices(),
            threshold=options.threshold,
            dependencies=deps,
        )
    high = [v.name for v in variables if v.above_threshold and not v.aliased]
    if high:
        notes.append(
            notice(
                "above_threshold",
                f"{len(high)} predictor(s) have VIF above {options.threshold:g}: "
                + ", ".join(high),
            )
        )

    checkpoint()
    conditioning = None
    if options.wants("conditioning"):
        conditioning = _conditioning(summary, options, matrix, spectrum, notes)

    checkpoint()
    tests = None
    no_n = math.isnan(summary.n)
    if options.wants("tests") and no_n:
        notes.append(
            notice(
                "skipped_without_n",
                "the tests were skipped: they need the number of observations; send n with "
                "the estimates",
            )
        )
    elif options.wants("tests"):
        tests = collinearity_tests(
            matrix,
            summary.n,
            names,
            [v.vif for v in variables],
            spectrum=spectrum,
            tables=options.tables,
        )
        if summary.n > _LARGE_N:
            notes.append(
                notice(
                    "large_sample_tests",
                    f"with n = {summary.n:g} the Farrar-Glauber tests reject at trivial "
                    "collinearity; read the VIFs and condition indices instead",
                )
            )

    checkpoint()
    removal = ridge = components = comparison = None
    # Ridge, components and the comparison need the response's correlations (or rows).
    remedies = not estimates
    wants_ridge = remedies and options.wants("ridge")
    wants_components = remedies and options.wants("components")
    wants_comparison = remedies and options.wants("comparison")
    if estimates:
        skipped = [s for s in ("ridge", "components", "comparison") if options.wants(s)]
        if skipped:
            notes.append(
                notice(
                    "skipped_without_response",
                    f"{', '.join(skipped)} skipped: they need a response or rows, and the "
                    "estimates of a fitted model carry neither; send rows or moments for them",
                )
            )
    if options.wants("removal") or wants_comparison:
        removal = removal_sequence(
            matrix,
            names,
            threshold=options.threshold,
            protect=options.protect,
            terms=summary.term_indices(),
            dependencies=deps,
            r_xy=r_xy,
            tables=options.tables,
            alternative=options.tables,
        )
    checkpoint()
    # The remedies' regression; coefficients in original units for centred models only.
    centred = options.intercept
    regression = Regression(
        n=summary.n,
        intercept=options.intercept,
        r_xy=r_xy,
        sds=summary.sds if centred else None,
        response_sd=summary.response_sd if centred else None,
        means=summary.predictor_means if centred else None,
        response_mean=summary.response_mean if centred else None,
    )
    if wants_ridge or wants_comparison:
        ridge = ridge_analysis(
            matrix,
            names,
            regression=regression,
            threshold=options.threshold,
            grid=options.ridge_grid,
            spectrum=spectrum,
        )
    checkpoint()
    if wants_components or wants_comparison:
        components = principal_components(
            matrix,
            names,
            regression=regression,
            rule=options.components_rule,
            limit=options.components_limit,
            threshold=options.threshold,
            spectrum=spectrum,
            tables=options.tables,
        )
    checkpoint()
    if wants_comparison:
        comparison = compare_remedies(
            matrix,
            names,
            regression=regression,
            threshold=options.threshold,
            removal=removal,
            ridge=ridge,
            components=components,
            spectrum=spectrum,
        )
    uncertainty = None
    if options.uncertainty is not None:
        checkpoint()
        variables, terms, uncertainty = _uncertainty(
            summary, options, options.uncertainty, rows, variables, terms, deps
        )
    return Assessment(
        input_kind=summary.input_kind,
        n=None if no_n else float(summary.n),
        p=p,
        response=summary.response,
        intercept=intercept,
        threshold=float(options.threshold),
        variables=variables,
        terms=terms,
        conditioning=conditioning,
        tests=tests,
        dependencies=deps.relations,
        removal=removal if options.wants("removal") else None,
        ridge=ridge if wants_ridge else None,
        components=components if wants_components else None,
        comparison=comparison,
        repair=summary.repair,
        warnings=tuple(dict.fromkeys(notes)),
        cautions=CAUTIONS,
        uncertainty=uncertainty,
    )


def _uncertainty(
    summary: Summary,
    options: Options,
    unc: UncertaintyOptions,
    rows: DesignRows | None,
    variables: tuple[VariableInflation, ...],
    terms: tuple[TermInflation, ...],
    deps: DependencyReport,
) -> tuple[tuple[VariableInflation, ...], tuple[TermInflation, ...], Uncertainty]:
    """The intervals, p-values and shares in the variables and terms, and their record."""
    rep = msgspec.structs.replace
    if unc.method == "normal":
        # Any summary with a correlation matrix and n: the finite VIFs are those of the
        # independent predictors, so the distribution's p is their number (the rank).
        rank = int(deps.independent.shape[0])
        term_columns = [c for term in summary.terms for c in term.columns]
        normal = normal_intervals(
            [v.vif for v in variables],
            summary.n,
            rank,
            level=unc.level,
            threshold=options.threshold,
            names=summary.names,
            indicators=term_columns,
        )
        variables = tuple(
            rep(v, vif_interval=iv.vif_interval, threshold_p_value=iv.p_value)
            for v, iv in zip(variables, normal.variables, strict=True)
        )
        record = Uncertainty(
            method="normal",
            level=float(unc.level),
            threshold=float(options.threshold),
            n=float(summary.n),
            rank=rank,
            approximate=tuple(iv.name for iv in normal.variables if iv.approximate),
            notes=normal.notes,
        )
        return variables, terms, record
    assert rows is not None  # check_options refuses the bootstrap without rows
    spread = bootstrap_intervals(
        rows.x,
        rows.names,
        terms={term.name: term.columns for term in summary.terms},
        weights=rows.weights,
        threshold=options.threshold,
        protect=options.protect,
        replicates=unc.replicates,
        level=unc.level,
        seed=unc.seed,
    )
    variables = tuple(
        rep(
            v,
            vif_interval=b.vif_interval,
            share_above_threshold=b.share_above,
            share_dropped=b.share_dropped,
        )
        for v, b in zip(variables, spread.variables, strict=True)
    )
    by_term = {b.name: b for b in spread.terms}
    terms = tuple(
        rep(
            t,
            gvif_interval=by_term[t.name].gvif_interval,
            gvif_scaled_interval=by_term[t.name].gvif_scaled_interval,
            share_above_threshold=by_term[t.name].share_above,
            share_dropped=by_term[t.name].share_dropped,
        )
        for t in terms
    )
    record = Uncertainty(
        method="bootstrap",
        level=float(unc.level),
        threshold=float(options.threshold),
        n=float(summary.n),
        rank=int(deps.independent.shape[0]),
        replicates=spread.replicates,
        seed=spread.seed,
        usable_replicates=spread.usable_replicates,
        singular_replicates=spread.singular_replicates,
        kept=spread.kept,
        share_same_kept=spread.share_same_kept,
        notes=spread.notes,
    )
    return variables, terms, record


def _conditioning(
    summary: Summary,
    options: Options,
    matrix: np.ndarray,
    spectrum: Spectrum | None,
    notes: list[Notice],
) -> Conditioning:
    cross = summary.design_crossproducts(options.intercept)
    if summary.implied_design is not None:
        g, cnames = summary.implied_design
        result = condition_diagnostics(
            g,
            cnames,
            "estimates",
            index_threshold=options.index_threshold,
            proportion_threshold=options.proportion_threshold,
        )
    elif cross is not None:
        g, cnames = cross
        basis = "scaled_with_intercept" if options.intercept else "scaled_uncentred"
        result = condition_diagnostics(
            g,
            cnames,
            basis,
            index_threshold=options.index_threshold,
            proportion_threshold=options.proportion_threshold,
            tables=options.tables,
        )
    else:
        result = condition_diagnostics(
            matrix,
            summary.names,
            "correlation",
            index_threshold=options.index_threshold,
            proportion_threshold=options.proportion_threshold,
            spectrum=spectrum,
            tables=options.tables,
        )
        notes.append(
            notice(
                "correlation_basis",
                "only correlations are known, so conditioning uses the correlation matrix "
                "(centred): near-dependence involving the intercept cannot be seen",
            )
        )
    cn = result.condition_number
    if cn is not None and cn > 100:
        notes.append(
            notice(
                "severe_conditioning",
                f"condition number {cn:.4g} on the {result.basis} basis exceeds 100 "
                "(severe, by the common reading of Belsley, Kuh & Welsch)",
            )
        )
    elif cn is not None and cn > options.index_threshold:
        notes.append(
            notice(
                "moderate_conditioning",
                f"condition number {cn:.4g} on the {result.basis} basis exceeds "
                f"{options.index_threshold:g} (moderate to strong near-dependence)",
            )
        )
    return result


#: Sections left out under a GLM family: their regressions are least squares on the response.
GLM_OMITTED: tuple[str, ...] = ("ridge", "components", "comparison")


def assess_glm(glm: GlmSummaries, options: Options | None = None) -> Assessment:
    """Every diagnostic of a fitted GLM, on its design weighted at the fit.

    Parameters
    ----------
    glm
        The fit and its two summaries, from :func:`~knotwork.core._glm.summarize_glm`.
    options
        As for :func:`assess`; ``family`` and ``var_power`` should be those of the fit.

    Returns
    -------
    Assessment
        :func:`assess` of the weighted summary (variables, terms, conditioning, tests,
        dependencies, removal), with ``design_vif`` and ``design_gvif`` from the plain design
        beside the weighted values, the response's name, and the ``model`` record. Ridge,
        components and the comparison are None with the warning ``glm_remedies_omitted``
        when they were asked for.

    Notes
    -----
    On the weighted summary, :math:`\\mathrm{VIF}_j = [R_w^{-1}]_{jj}` with :math:`R_w` the
    correlation matrix of :math:`W^{1/2} X_c` (working weights at the fit, weighted centring);
    GVIF by the determinant formula on :math:`R_w`; conditioning on the weighted, scaled design
    with the constant column (Lesaffre & Marx 1993; Weissfeld & Sereika 1991); the removal
    sequence on :math:`R_w`. The weights are held at the full model's fit: the removal's later
    VIFs are those of the reduced design under the same weights, not of refitted models.

    Ridge, principal-component regression and the comparison of remedies are least-squares
    regressions of the response; a GLM's counterparts (penalized likelihood, refits) are not
    computed here, so those sections are left out rather than given under a GLM's name.

    Verification: the weighted VIFs equal Fox & Monette's VIFs of statsmodels' GLM
    ``cov_params()`` (tests/reference/test_glm_reference.py, tests/api/test_api_glm.py).

    Implementation: :func:`assess` twice, once on the weighted summary with the requested
    sections, once on the plain design for variables and terms only.
    """
    options = options or Options()
    omitted = [s for s in GLM_OMITTED if options.wants(s)]
    # The contract wants at least one section; variables are always computed.
    kept = tuple(s for s in SECTIONS if options.wants(s) and s not in GLM_OMITTED) or ("variables",)
    weighted = assess(glm.weighted, replace(options, sections=kept))
    design = assess(
        glm.design,
        Options(
            threshold=options.threshold,
            intercept=options.intercept,
            sections=("variables", "terms"),
        ),
    )
    design_vifs = {v.name: v.vif for v in design.variables}
    design_gvifs = {t.name: t.gvif for t in design.terms}
    variables = tuple(
        msgspec.structs.replace(v, design_vif=design_vifs.get(v.name)) for v in weighted.variables
    )
    terms = tuple(
        msgspec.structs.replace(t, design_gvif=design_gvifs.get(t.name)) for t in weighted.terms
    )
    warnings = list(weighted.warnings)
    if omitted:
        warnings.append(
            notice(
                "glm_remedies_omitted",
                f"{', '.join(omitted)} left out: they are least-squares regressions of the "
                f"response, not remedies for a {glm.fit.family} model; the removal sequence "
                "(on the weighted design) is given",
            )
        )
    fit = glm.fit
    model = ModelFit(
        family=fit.family,
        link=fit.link,
        var_power=fit.var_power,
        converged=fit.converged,
        iterations=fit.iterations,
        tolerance=TOL,
        deviance=fit.deviance,
        dispersion=fit.dispersion,
        n=fit.n,
        n_coefficients=fit.n_coefficients,
    )
    return msgspec.structs.replace(
        weighted,
        response=glm.design.response,
        variables=variables,
        terms=terms,
        warnings=tuple(dict.fromkeys(warnings)),
        model=model,
    )
