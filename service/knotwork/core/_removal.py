"""Greedy removal sequence: drop the most inflated predictor or term until all are under threshold.

The sequence is a proposal for a reader to weigh, not a model-selection procedure: dropping a
predictor changes what every remaining coefficient means (it now absorbs part of the dropped
one's effect), and the threshold is a rule of thumb from common practice.
"""

from __future__ import annotations

import math
from collections.abc import Collection, Sequence
from dataclasses import dataclass

import numpy as np
from msgspec.structs import replace

from knotwork_contract import Removal, RemovalStep, StillHigh

from ._dependencies import NULL_RTOL, DependencyReport, Spectrum, find_dependencies
from ._downdate import GROWTH_LIMIT, DowndatedInverse, agrees_with_fresh
from ._errors import InputError, MatrixError, OptionError, Problem
from ._interrupt import checkpoint
from ._linalg import inverse_spd, logdet_spd

#: Inflations within this relative distance of the largest count as tied, so that values equal
#: in exact arithmetic but different in the last bits are broken by the documented rule and not
#: by rounding (the downdated and the freshly inverted values agree far closer than this).
TIE_RTOL = 1e-9

#: Relation weights below this (relative to the largest) count as zero when choosing which
#: variables of an exact dependency to drop.
_RANK_RTOL = 1e-8

LARGEST_INFLATION = "largest_inflation"
LEAST_RESPONSE_CORRELATION = "least_response_correlation"
ALIASED = "aliased"

_RULES = {
    LARGEST_INFLATION: (
        "At each step drop, among the unprotected predictors and terms whose inflation exceeds "
        "the threshold, the one with the largest inflation: its VIF, or for a term of df "
        "columns the square of its scaled GVIF (GVIF to the power 1/df), so that comparing it "
        "with the threshold is comparing the scaled GVIF with sqrt(threshold). Stop when none "
        "is left above it."
    ),
    LEAST_RESPONSE_CORRELATION: (
        "At each step drop, among the unprotected predictors and terms whose inflation exceeds "
        "the threshold, the one least correlated with the response: smallest |r| of a "
        "predictor with the response, or for a term the multiple correlation of the response "
        "with the term's columns alone. Stop when none is left above the threshold."
    ),
}

_TIE_BREAK = {
    LARGEST_INFLATION: (
        "Inflations within a relative 1e-9 of the largest count as tied; of tied candidates the "
        "one listed last is dropped (earlier-listed predictors are kept)."
    ),
    LEAST_RESPONSE_CORRELATION: (
        "Correlations within 1e-12 of the smallest count as tied; of tied candidates the one "
        "with the largest inflation is dropped, then the one listed last."
    ),
}


_NOTES = (
    "Greedy removal of the largest VIF is common practice with no single source; the threshold "
    "is a rule of thumb, and a different threshold or order can keep a different set.",
    "Dropping a predictor changes what the remaining coefficients mean: each now also carries "
    "the part of the dropped predictors' effect it is correlated with.",
    "Decisions on regulated models follow local rules and qualified review.",
)


# --------------------------------------------------------------------------------------------
# Units: single predictors and multi-column terms


class _Units:
    """Predictors and terms as the things the sequence drops, in input order."""

    def __init__(
        self,
        m: np.ndarray,
        names: Sequence[str],
        terms: Sequence[tuple[str, tuple[int, ...]]],
        r_xy: np.ndarray | None,
    ) -> None:
        p = len(names)
        owner = np.full(p, -1, dtype=np.intp)
        problems: list[Problem] = []
        for t, (tname, cols) in enumerate(terms):
            cols = tuple(int(c) for c in cols)
            if not cols or any(not 0 <= c < p for c in cols):
                problems.append(Problem(f"/terms/{t}", f"term {tname!r} has no valid columns"))
                continue
            clash = [names[c] for c in cols if owner[c] >= 0]
            if clash:
                problems.append(
                    Problem(f"/terms/{t}", f"term {tname!r} shares columns {clash} with another")
                )
                continue
            owner[list(cols)] = t
        if problems:
            raise InputError("invalid terms", problems)
        raw: list[tuple[str, tuple[int, ...]]] = []
        for j in range(p):
            if owner[j] < 0:
                raw.append((names[j], (j,)))
        for tname, cols in terms:
            raw.append((tname, tuple(sorted(int(c) for c in cols))))
        raw.sort(key=lambda u: u[1][0])
        self.names = tuple(u[0] for u in raw)
        self.cols = [np.asarray(u[1], dtype=np.intp) for u in raw]
        self.df = np.array([len(u[1]) for u in raw], dtype=np.intp)
        self.count = len(raw)
        self.unit_of = np.empty(p, dtype=np.intp)
        for u, members in enumerate(self.cols):
            self.unit_of[members] = u
        self.single = np.flatnonzero(self.df == 1)
        self.single_cols = np.array([self.cols[u][0] for u in self.single], dtype=np.intp)
        self.multi = [int(u) for u in np.flatnonzero(self.df > 1)]
        self.logdet_m = np.zeros(self.count)
        for u in self.multi:
            self.logdet_m[u] = logdet_spd(m[np.ix_(self.cols[u], self.cols[u])])
        self.response: np.ndarray | None = None
        if r_xy is not None:
            resp = np.zeros(self.count)
            resp[self.single] = np.abs(r_xy[self.single_cols])
            for u in self.multi:
                c = self.cols[u]
                rt = r_xy[c]
                sol = np.linalg.solve(m[np.ix_(c, c)], rt)
                resp[u] = math.sqrt(max(float(rt @ sol), 0.0))
            self.response = resp

    def resolve(self, protect: Collection[str], names: Sequence[str]) -> np.ndarray:
        """Mask of protected units; a column of a term protects the whole term."""
        by_name = {n: u for u, n in enumerate(self.names)}
        column = {n: j for j, n in enumerate(names)}
        mask = np.zeros(self.count, dtype=bool)
        problems = []
        for i, name in enumerate(protect):
            if name in by_name:
                mask[by_name[name]] = True
            elif name in column:
                mask[self.unit_of[column[name]]] = True
            else:
                problems.append(
                    Problem(f"/protect/{i}", f"{name!r} is not a predictor or term of the input")
                )
        if problems:
            raise OptionError("unknown names in protect", problems)
        return mask

    def columns_mask(self, active_units: np.ndarray, p: int) -> np.ndarray:
        mask = np.zeros(p, dtype=bool)
        for u in np.flatnonzero(active_units):
            mask[self.cols[u]] = True
        return mask

    def inflation(self, eng: DowndatedInverse, active_units: np.ndarray) -> np.ndarray:
        """Inflation of every unit on the VIF scale (NaN for inactive ones)."""
        out = np.empty(self.count)
        out[self.single] = eng.vif(self.single_cols)
        for u in self.multi:
            if active_units[u]:
                ld = logdet_spd(eng.block(self.cols[u]))
                out[u] = math.exp((self.logdet_m[u] + ld) / self.df[u])
        out[~active_units] = np.nan
        return out


# --------------------------------------------------------------------------------------------
# Exact dependencies


def _dependencies_of(
    m: np.ndarray, names: Sequence[str]
) -> tuple[DependencyReport, np.ndarray | None]:
    """Exact dependencies, skipping the eigen-decomposition when a bound rules them out.

    With ``A = M^-1``, the smallest eigenvalue is at least ``1 / trace A`` and the largest at most
    the largest absolute row sum of M; when their ratio is above ``NULL_RTOL`` there is no null
    space in the sense of :class:`Spectrum`, and the inverse is kept for the sequence.
    """
    try:
        inverse = inverse_spd(m)
    except np.linalg.LinAlgError:
        inverse = None
    if inverse is not None:
        bound = float(np.abs(m).sum(axis=1).max())
        if float(np.trace(inverse)) * bound * NULL_RTOL < 1.0:
            p = m.shape[0]
            return DependencyReport(np.zeros(p, dtype=bool), (), ()), inverse
    report = find_dependencies(Spectrum.of(m), names)
    return report, (inverse if not report.relations else None)


@dataclass(frozen=True, slots=True)
class _AliasPlan:
    drops: tuple[tuple[int, int], ...]  # (unit, relation index)
    blocked_units: tuple[int, ...]  # units still in a dependency when protection blocks


def _plan_aliased(
    units: _Units,
    names: Sequence[str],
    report: DependencyReport,
    protected: np.ndarray,
    ordering: str,
) -> _AliasPlan:
    """Choose which predictors or terms to drop so that no exact dependency is left.

    The relations' weight vectors W (one row per relation) span the null space; dropping the
    columns D leaves a full-rank set exactly when ``W[:, D]`` has full row rank. Candidates are
    tried in preference order and kept when they raise that rank: the report's own choice first
    (the variable each relation is expressed through) under ``largest_inflation``, the least
    response-correlated first under ``least_response_correlation``; protected ones never.
    """
    index = {n: j for j, n in enumerate(names)}
    d = len(report.relations)
    w = np.zeros((d, len(names)))
    for i, rel in enumerate(report.relations):
        for v, wt in zip(rel.variables, rel.weights, strict=True):
            w[i, index[v]] = wt
    involved_units = sorted({int(units.unit_of[j]) for j in np.flatnonzero(np.any(w != 0, axis=0))})
    latest_first = sorted(involved_units, reverse=True)
    if ordering == LEAST_RESPONSE_CORRELATION and units.response is not None:
        resp = units.response
        order = sorted(latest_first, key=lambda u: (resp[u], -u))
    else:
        first = [int(units.unit_of[j]) for j in report.redundant]
        order = list(dict.fromkeys(first + latest_first))
    scale = float(np.abs(w).max())

    def rank(cols: list[int]) -> int:
        if not cols:
            return 0
        sv = np.linalg.svd(w[:, cols], compute_uv=False)
        return int(np.count_nonzero(sv > _RANK_RTOL * scale))

    chosen: list[int] = []
    cols: list[int] = []
    current = 0
    p = len(names)
    # d columns suffice to remove d relations. A multi-column term can raise the rank by less
    # than its width, so the first pass never drops more than d columns in all; only if that
    # leaves a relation does the second pass take wider units, and never every column.
    for most in (d, p - 1):
        for u in order:
            if current == d:
                break
            if protected[u] or u in chosen:
                continue
            trial = cols + [int(c) for c in units.cols[u]]
            if len(trial) > most:
                continue
            r = rank(trial)
            if r > current:
                chosen.append(u)
                cols, current = trial, r
    used: set[int] = set()
    drops = []
    for u in chosen:
        ucols = units.cols[u]
        rels = [i for i in range(d) if np.any(w[i, ucols] != 0)]
        if ordering == LARGEST_INFLATION:
            # The report expresses relation i through its first variable: name that one.
            own = [
                i for i in rels if index[report.relations[i].variables[0]] in set(ucols.tolist())
            ]
            rels = own + [i for i in rels if i not in own]
        fresh = [i for i in rels if i not in used] or rels
        drops.append((u, fresh[0]))
        used.add(fresh[0])
    blocked: tuple[int, ...] = ()
    if current < d:
        # Protected variables are themselves dependent: find who is still in a relation.
        if cols:
            uu, sv, _ = np.linalg.svd(w[:, cols], full_matrices=True)
            left = uu[:, int(np.count_nonzero(sv > _RANK_RTOL * scale)) :]
        else:
            left = np.eye(d)
        rest = left.T @ w
        rest[:, cols] = 0.0
        still = np.flatnonzero(np.linalg.norm(rest, axis=0) > _RANK_RTOL * scale)
        blocked = tuple(sorted({int(units.unit_of[j]) for j in still}))
    return _AliasPlan(tuple(drops), blocked)


# --------------------------------------------------------------------------------------------
# The sequence


def _table(infl: np.ndarray, active: np.ndarray) -> tuple[float | None, ...]:
    values = infl.astype(object)
    values[~active] = None
    return tuple(values.tolist())


def _opt(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def _by_response(
    eligible: np.ndarray, threshold: float, infl: np.ndarray, response: np.ndarray
) -> int:
    """The candidate least correlated with the response; ties by inflation, then position."""
    cand = np.flatnonzero(eligible > threshold)
    key = response[cand]
    tied = cand[key <= key.min() + 1e-12]
    top = infl[tied].max()
    return int(tied[infl[tied] >= top * (1.0 - TIE_RTOL)].max())


def _holds(
    eng: DowndatedInverse,
    units: _Units,
    active: np.ndarray,
    infl: np.ndarray,
    high: np.ndarray,
    protected: np.ndarray,
) -> tuple[StillHigh, ...]:
    """For each unit left above the threshold, the partner that keeps it highest."""
    out = []
    for u in high:
        u = int(u)
        cu = units.cols[u]
        lu = eng.loc[cu]
        wcols = eng.columns(cu)  # (q, du), local rows
        auu = wcols[lu]
        du = int(units.df[u])
        ld_auu = logdet_spd(auu)
        best_val, best_v = math.inf, -1
        others = [int(v) for v in np.flatnonzero(active) if v != u]
        singles = np.array([v for v in others if units.df[v] == 1], dtype=np.intp)
        if singles.size:
            lv = eng.loc[np.array([units.cols[v][0] for v in singles], dtype=np.intp)]
            wv = wcols[lv]  # (k, du)
            quad = np.einsum("ij,ij->i", wv, np.linalg.solve(auu, wv.T).T)
            frac = np.maximum(1.0 - quad / eng.diag[lv], np.finfo(float).tiny)
            vals = np.exp((units.logdet_m[u] + ld_auu + np.log(frac)) / du)
            # Ties go to the later partner, as everywhere in the sequence.
            i = int(np.flatnonzero(vals <= vals.min() * (1.0 + TIE_RTOL)).max())
            best_val, best_v = float(vals[i]), int(singles[i])
        for v in others:
            if units.df[v] == 1:
                continue
            cv = units.cols[v]
            auv = wcols[eng.loc[cv]]  # (dv, du)
            reduced = auu - auv.T @ np.linalg.solve(eng.block(cv), auv)
            val = math.exp((units.logdet_m[u] + logdet_spd(reduced)) / du)
            if val < best_val * (1.0 - TIE_RTOL) or (val <= best_val and v > best_v):
                best_val, best_v = val, v
        out.append(
            StillHigh(
                name=units.names[u],
                vif=float(infl[u]),
                protected=bool(protected[u]),
                partner=units.names[best_v] if best_v >= 0 else None,
                partner_protected=bool(protected[best_v]) if best_v >= 0 else False,
                vif_without_partner=best_val if best_v >= 0 else None,
            )
        )
    return tuple(out)


def _blocking(holds: Sequence[StillHigh]) -> tuple[str, ...]:
    names: list[str] = []
    for h in holds:
        if h.protected:
            names.append(h.name)
        if h.partner is not None and h.partner_protected:
            names.append(h.partner)
    return tuple(dict.fromkeys(names))


def _sequence(
    m: np.ndarray,
    names: Sequence[str],
    units: _Units,
    *,
    threshold: float,
    protected: np.ndarray,
    report: DependencyReport,
    inverse: np.ndarray | None,
    r_xy: np.ndarray | None,
    r_squared_full: float | None,
    ordering: str,
    tables: bool,
    growth_limit: float,
) -> tuple[Removal, bool]:
    """Run one ordering; the flag says whether the final accuracy check passed."""
    p = m.shape[0]
    active = np.ones(units.count, dtype=bool)
    steps: list[RemovalStep] = []
    response = units.response
    names_t = tuple(names)

    def base(**kw: object) -> Removal:
        fields: dict[str, object] = {
            "threshold": float(threshold),
            "ordering": ordering,
            "rule": _RULES[ordering],
            "tie_break": _TIE_BREAK[ordering],
            "units": units.names,
            "protected": tuple(units.names[u] for u in np.flatnonzero(protected)),
            "r_squared_full": r_squared_full,
            "alternative": None,
            "notes": _NOTES,
        }
        fields.update(kw)
        return Removal(**fields)  # type: ignore[arg-type]

    max_before: float | None = None
    if report.relations:
        plan = _plan_aliased(units, names, report, protected, ordering)
        for u, i in plan.drops:
            rel = report.relations[i]
            active[u] = False
            steps.append(
                RemovalStep(
                    drop=units.names[u],
                    columns=tuple(names_t[j] for j in units.cols[u]),
                    reason=ALIASED,
                    vif=None,
                    gvif=None,
                    df=int(units.df[u]),
                    max_vif_after=None,
                    vifs=None,
                    relation=rel.variables,
                    relation_weights=rel.weights,
                    response_correlation=_opt(response[u]) if response is not None else None,
                )
            )
        if plan.blocked_units:
            blocked = [u for u in plan.blocked_units if active[u]]
            holds = tuple(
                StillHigh(
                    name=units.names[u],
                    vif=None,
                    protected=bool(protected[u]),
                    partner=None,
                    partner_protected=False,
                    vif_without_partner=None,
                )
                for u in blocked
            )
            kept_cols = units.columns_mask(active, p)
            return (
                base(
                    steps=tuple(steps),
                    kept=tuple(units.names[u] for u in np.flatnonzero(active)),
                    kept_indices=tuple(int(j) for j in np.flatnonzero(kept_cols)),
                    max_vif_before=None,
                    max_vif_left=None,
                    stopped_by_protection=True,
                    still_high=tuple(h.name for h in holds),
                    blocking=tuple(h.name for h in holds if h.protected),
                    holds=holds,
                    refactorizations=0,
                    notes=(
                        *_NOTES,
                        "Protected predictors are exactly dependent among themselves, so the "
                        "dependency cannot be removed and the VIFs stay infinite; allow one of "
                        "them to be dropped.",
                    ),
                ),
                True,
            )
        inverse = None
    col_active = units.columns_mask(active, p)
    try:
        eng = DowndatedInverse(m, col_active, r_xy, inverse)
    except np.linalg.LinAlgError:
        raise MatrixError.at(
            "/matrix",
            "the matrix is not positive definite once exactly dependent predictors are set "
            "aside; it is not a valid correlation matrix (repair it or check the input)",
        ) from None
    infl = units.inflation(eng, active)
    if steps:
        steps[-1] = _replace_after(steps[-1], infl, active, eng.r_squared())
    else:
        max_before = float(np.fmax.reduce(infl))
    unprotected = ~protected
    any_protected = bool(protected.any())
    by_response = ordering == LEAST_RESPONSE_CORRELATION and response is not None
    while np.count_nonzero(active) > 1:
        # A lone predictor (or term) has inflation 1 by definition; with a threshold just
        # above 1 rounding could otherwise drop it and leave nothing to assess.
        checkpoint()
        eligible = np.where(active & unprotected, infl, -np.inf)
        top = float(eligible.max())
        if not top > threshold:
            break
        if by_response:
            assert response is not None
            u = _by_response(eligible, threshold, infl, response)
        else:
            tied = (eligible >= top * (1.0 - TIE_RTOL)) & (eligible > threshold)
            u = int(np.flatnonzero(tied).max())
        skipped: tuple[str, ...] = ()
        if any_protected:
            above_protected = active & protected & (infl > threshold)
            if by_response:
                assert response is not None
                above_protected &= response < response[u]
            else:
                above_protected &= infl > infl[u]
            skipped = tuple(units.names[v] for v in np.flatnonzero(above_protected))
        table = _table(infl, active) if tables else None
        vif_u = float(infl[u])
        df_u = int(units.df[u])
        gvif_u = vif_u**df_u if df_u > 1 else None
        cols_u = units.cols[u]
        active[u] = False
        col_active[cols_u] = False
        eng.remove(cols_u, col_active, growth_limit)
        infl = units.inflation(eng, active)
        steps.append(
            RemovalStep(
                drop=units.names[u],
                columns=tuple(names_t[j] for j in cols_u),
                reason=ordering,
                vif=vif_u,
                gvif=gvif_u,
                df=df_u,
                max_vif_after=float(np.fmax.reduce(infl)),
                vifs=table,
                r_squared_after=eng.r_squared(),
                response_correlation=float(response[u]) if response is not None else None,
                skipped=skipped,
            )
        )
    high = np.flatnonzero(active & (infl > threshold))
    holds = _holds(eng, units, active, infl, high, protected)
    # Final accuracy check: the kept set's inflations from a fresh inverse.
    ok = agrees_with_fresh(
        m,
        col_active,
        infl[active],
        lambda fresh: units.inflation(fresh, active)[active],
        growth_limit,
    )
    removal = base(
        steps=tuple(steps),
        kept=tuple(units.names[u] for u in np.flatnonzero(active)),
        kept_indices=tuple(int(j) for j in np.flatnonzero(col_active)),
        max_vif_before=max_before,
        max_vif_left=float(np.fmax.reduce(infl)),
        stopped_by_protection=bool(high.size),
        still_high=tuple(units.names[int(u)] for u in high),
        blocking=_blocking(holds),
        holds=holds,
        refactorizations=eng.refactorizations,
    )
    return removal, ok


def _replace_after(
    step: RemovalStep, infl: np.ndarray, active: np.ndarray, r2: float | None
) -> RemovalStep:
    return replace(step, max_vif_after=float(np.fmax.reduce(infl[active])), r_squared_after=r2)


def removal_sequence(
    M: np.ndarray,
    names: Sequence[str],
    *,
    threshold: float,
    protect: Collection[str] = (),
    terms: Sequence[tuple[str, tuple[int, ...]]] = (),
    dependencies: DependencyReport | None = None,
    r_xy: np.ndarray | None = None,
    tables: bool = True,
    growth_limit: float = GROWTH_LIMIT,
    alternative: bool = True,
) -> Removal:
    """Greedy removal of the most inflated predictors or terms until all are under a threshold.

    Parameters
    ----------
    M
        The predictors' correlation matrix (p, p), or their cosine matrix for a model without
        intercept; unit diagonal, positive semi-definite.
    names
        Predictor names in matrix order.
    threshold
        VIF above which a predictor (or squared scaled GVIF above which a term) is dropped; a
        rule of thumb (5 or 10 in common practice), at least 1.
    protect
        Predictors or terms never dropped; naming one column of a term protects the term.
    terms
        Multi-column terms as (name, column indices); they are dropped whole and judged by
        their scaled GVIF against sqrt(threshold).
    dependencies
        Exact dependencies of ``M`` (from :func:`find_dependencies`); None to find them here.
    r_xy
        Correlations of the predictors with the response (p,), to track R^2 and to add the
        ordering that prefers keeping predictors correlated with the response.
    tables
        Whether each step carries the full inflation table (``steps[].vifs``); set False for
        very wide inputs to keep the result small.
    alternative
        Whether to add the second ordering when ``r_xy`` is given (False: only the first).
    growth_limit
        Accuracy test of the downdate (see ``GROWTH_LIMIT``); 1 or less re-inverts after every
        drop (the naive method).

    Returns
    -------
    Removal
        The sequence by largest inflation; with ``r_xy`` its ``alternative`` is the sequence by
        least response correlation.

    Raises
    ------
    OptionError
        ``threshold`` below 1 or not finite; ``protect`` naming something unknown.
    InputError
        ``terms`` with invalid or overlapping columns.
    MatrixError
        ``M`` not positive semi-definite.

    Notes
    -----
    With :math:`A = M^{-1}` over the remaining set, :math:`\\mathrm{VIF}_j = A_{jj}` and, for a
    term T with df columns (Fox & Monette 1992),

    .. math::

        \\mathrm{GVIF}_T = \\det M_{TT} \\det M_{OO} / \\det M = \\det M_{TT} \\det A_{TT},

    compared on the VIF scale as :math:`\\mathrm{GVIF}_T^{1/df}` (equivalently
    :math:`\\mathrm{GVIF}^{1/(2 df)}` against :math:`\\sqrt{\\text{threshold}}`). Dropping a set T
    updates the inverse of the rest by the partitioned-inverse formula

    .. math:: (M_{-T,-T})^{-1} = A_{-T,-T} - A_{-T,T} A_{TT}^{-1} A_{T,-T},

    the sweep operator run backwards (Goodnight 1979). Exactly aliased predictors (infinite VIF)
    go first, each with the relation it resolves, chosen so that what is left has no exact
    dependency and no protected predictor goes; then the rule of the ordering (``rule`` in the
    result) picks one drop at a time until every unprotected predictor and term is at or below
    the threshold. Protected ones the rule would pick are skipped (listed in ``skipped``). When
    the sequence ends with something still above the threshold, ``still_high`` names it and
    ``holds`` gives, for each, the partner whose removal alone would lower it most (by the
    same downdate), and ``blocking`` the protected ones among them.

    The alternative ordering (with ``r_xy``) prefers to keep predictors correlated with the
    response: among the candidates above the threshold it drops the one with the smallest
    :math:`|r_{jy}|` (for a term, :math:`\\sqrt{r_T^\\top M_{TT}^{-1} r_T}`), ties by larger
    inflation, then by later position. Each step also reports the R^2 left,
    :math:`r_S^\\top M_{SS}^{-1} r_S`, tracked by the same downdate of :math:`A r`.

    Verification: tests recompute every VIF and GVIF from scratch at every step (a fresh
    inverse and determinants of the remaining matrix) on random latent-factor designs, with
    and without terms and protection, on near-dependencies that force re-inversion, and on
    Longley, diabetes and copper data; the sequences agree exactly and the values to 1e-9
    (widened to about eps * cond where the matrix is ill-conditioned, the accuracy any inverse
    has there). On Longley at threshold 10 the sequence is GNP (1788.51), YEAR (271.190),
    GNPDEFL (35.9708), keeping UNEMP, ARMED and POP (docs/numerics.md check values); every step's
    table matches statsmodels' ``variance_inflation_factor(standardize=True)`` on the remaining
    design with a constant, and every R^2 statsmodels' OLS on the remaining predictors.

    Implementation (the downdate engine, ``DowndatedInverse`` in ``_downdate``, where the
    constants named here live): one Cholesky inverse (LAPACK potrf/potri) of M, then per drop
    O(p s) work for s stored downdate rows: only the diagonal is kept current and the dropped
    column is fetched with one matrix-vector product over the stored rows; the stored form is
    folded into an explicit inverse of the remaining columns whenever a quarter of them are
    gone (``COMPACT_AT``), so a whole sequence costs O(p^3) with a small constant. Accuracy
    test (``GROWTH_LIMIT``): when the error scale of a remaining diagonal entry (its downdate
    magnitude, or the largest VIF at the last factorization) exceeds 1e6 times its value, the
    remaining matrix is inverted again from M. The kept set is rechecked against a fresh
    inverse at the end (``CHECK_RTOL``), and the sequence is rerun with a fresh inverse after
    every drop if that check fails. Terms use Cholesky log-determinants.

    References
    ----------
    .. [1] Goodnight, J. H. (1979). A tutorial on the SWEEP operator. The American
       Statistician 33(3), 149-158.
    .. [2] Fox, J. & Monette, G. (1992). Generalized collinearity diagnostics. JASA 87(417),
       178-183.
    .. [3] Marquardt, D. W. (1970). Generalized inverses, ridge regression, biased linear
       estimation, and nonlinear estimation. Technometrics 12, 591-612.
    """
    m = np.asarray(M, dtype=float)
    p = len(names)
    if m.shape != (p, p):
        raise InputError.at("/matrix", f"expected a {p} x {p} matrix, got shape {m.shape}")
    r = None if r_xy is None else np.asarray(r_xy, dtype=float)
    units = _Units(m, names, terms, r)
    protected = units.resolve(protect, names)
    inverse: np.ndarray | None = None
    if dependencies is None:
        report, inverse = _dependencies_of(m, names)
    else:
        report = dependencies
    r2_full: float | None = None
    if r is not None:
        if report.relations:
            spec = Spectrum.of(m)
            keep = spec.values > NULL_RTOL * spec.values[0]
            c = spec.vectors[:, keep].T @ r
            r2_full = float(np.sum(c * c / spec.values[keep]))
        else:
            if inverse is None:
                inverse = inverse_spd(m)
            r2_full = float(r @ inverse @ r)

    def run(ordering: str) -> Removal:
        kwargs = {
            "threshold": float(threshold),
            "protected": protected,
            "report": report,
            "inverse": inverse,
            "r_xy": r,
            "r_squared_full": r2_full,
            "ordering": ordering,
            "tables": tables,
        }
        result, ok = _sequence(m, names, units, growth_limit=growth_limit, **kwargs)  # type: ignore[arg-type]
        if not ok:
            result, _ = _sequence(m, names, units, growth_limit=1.0, **kwargs)  # type: ignore[arg-type]
            result = _with_notes(
                result,
                "The downdated inverse failed its final accuracy check, so the sequence was "
                "recomputed with a fresh inverse after every drop.",
            )
        return result

    plain = run(LARGEST_INFLATION)
    if r is None or not alternative:
        return plain
    return _with_alternative(plain, run(LEAST_RESPONSE_CORRELATION))


def _with_notes(r: Removal, note: str) -> Removal:
    return replace(r, notes=(*r.notes, note))


def _with_alternative(r: Removal, alt: Removal) -> Removal:
    return replace(r, alternative=alt)
