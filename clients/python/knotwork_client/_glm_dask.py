"""A GLM fitted where a Dask dataframe's partitions live: IRLS by one weighted summary per pass.

Each IRLS iteration needs, for the current coefficients, the weighted cross-products X'WX, the
score X's and the deviance. For fixed coefficients these are sums over rows, so every partition
computes its own (a (p + 1) x (p + 1) matrix, a vector and a few numbers) and only those travel
and are added; the client solves the small system and sends the next coefficients. At the fit,
each partition summarizes its predictors weighted by the working weights (the moments kernel of
``knotwork_contract``, merged exactly), and the plain design is summarized as
:func:`~knotwork_client.summarize_dask` does. The family arithmetic (weights, deviances, start)
is the contract's, the same the service fits with, and the iteration follows the service's
(centred design, the same start, step halving, the same convergence rule on the linear
predictor), so the answer equals the service's answer for the same rows to about the IRLS
tolerance.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any, NamedTuple

import msgspec
import numpy as np

import knotwork_contract as contract

from ._exceptions import DataError
from ._summary import Summary, _finish, _make_spec, _summarize_unchecked

__all__ = ["GlmSummaries", "summarize_glm_dask"]

#: Sections a GLM answer leaves out: their regressions are least squares on the response.
GLM_OMITTED = ("ridge", "components", "comparison")
#: Step halvings tried when a step increases the deviance (as the service).
_MAX_HALVINGS = 30
#: Pivots of the unit-diagonal X'WX at or below this mark an exact dependency (as the service).
_RANK_RTOL = 1e-10
#: Passes in a row with fitted values at the boundary moving further out: separation.
_DIVERGING_STREAK = 8


@dataclass(frozen=True, eq=False)
class GlmSummaries:
    """A GLM fitted on a Dask dataframe, and the two summaries its diagnostics need.

    Pass it to ``Client.assess`` (or ``AsyncClient.assess``): both summaries go in one batch
    request, and the answer is assembled as the service assembles a GLM answer for rows: every
    diagnostic of the weighted design, ``design_vif`` / ``design_gvif`` beside the weighted
    values, the response's name and the ``model`` record (the client's fit). ``input_kind`` is
    ``"moments"``: the service saw moments, not rows.

    Attributes
    ----------
    model
        The fitted model (family, link, iterations, tolerance, deviance, dispersion, n, ...).
    weighted
        Summary of the predictors weighted by the working weights at the fit (rescaled to sum
        to the number of observations used, as the service does).
    design
        Summary of the plain design (prior weights only), with the response.
    response
        The response column.
    """

    model: contract.ModelFit
    weighted: Summary
    design: Summary
    response: str

    def requests(self, options: dict[str, Any]) -> list[tuple[Any, dict[str, Any]]]:
        """The two batch items: the weighted design with the options (the sections a GLM
        answer has), and the plain design for its VIFs and GVIFs."""
        opts = {k: v for k, v in options.items() if k not in ("family", "var_power")}
        wanted = opts.get("sections")
        sections = list(contract.SECTIONS) if wanted is None else list(wanted)
        opts["sections"] = [s for s in sections if s not in GLM_OMITTED] or ["variables"]
        plain: dict[str, Any] = {k: opts[k] for k in ("threshold", "intercept") if k in opts}
        plain["sections"] = ["variables", "terms"]
        return [(self.weighted, opts), (self.design, plain)]

    def combine(self, answers: Sequence[Any], options: dict[str, Any]) -> Any:
        """The GLM answer from the two batch results (raises the first problem, if any)."""
        from ._exceptions import InputRejectedError
        from ._results import Assessment

        for answer in answers:
            if not isinstance(answer, Assessment):
                raise InputRejectedError(answer, answer.status)
        weighted, design = answers
        design_vifs = {v.name: v.vif for v in design.variables}
        design_gvifs = {t.name: t.gvif for t in design.terms}
        variables = [
            msgspec.structs.replace(v, design_vif=design_vifs.get(v.name))
            for v in weighted.variables
        ]
        terms = [
            msgspec.structs.replace(t, design_gvif=design_gvifs.get(t.name)) for t in weighted.terms
        ]
        warnings = list(weighted.warnings)
        wanted = options.get("sections")
        omitted = [s for s in GLM_OMITTED if wanted is None or s in wanted]
        if omitted:
            warnings.append(
                contract.Notice(
                    code="glm_remedies_omitted",
                    message=(
                        f"{', '.join(omitted)} left out: they are least-squares regressions of "
                        f"the response, not remedies for a {self.model.family} model; the "
                        "removal sequence (on the weighted design) is given"
                    ),
                )
            )
        return msgspec.structs.replace(
            weighted,
            response=self.response,
            variables=variables,
            terms=terms,
            warnings=warnings,
            model=self.model,
        )


class _Part(NamedTuple):
    """What one partition returns for one evaluation: sums, maxima and counts only."""

    gram: np.ndarray
    score: np.ndarray
    deviance: float
    max_eta: float
    max_step: float
    edge: int
    edge_inward: int
    pearson: float


def _add(*parts: _Part) -> _Part:
    return _Part(
        gram=sum((p.gram for p in parts), np.zeros_like(parts[0].gram)),
        score=sum((p.score for p in parts), np.zeros_like(parts[0].score)),
        deviance=math.fsum(p.deviance for p in parts),
        max_eta=max(p.max_eta for p in parts),
        max_step=max(p.max_step for p in parts),
        edge=sum(p.edge for p in parts),
        edge_inward=sum(p.edge_inward for p in parts),
        pearson=math.fsum(p.pearson for p in parts),
    )


@dataclass(frozen=True)
class _Roles:
    predictors: tuple[str, ...]  # numeric predictors
    levels: tuple[tuple[str, tuple[str, ...]], ...]  # categorical variable -> sorted levels
    response: str
    weights: str | None
    offset: str | None
    trials: str | None
    intercept: bool


def _indicators(frame: Any, roles: _Roles, *, reference: bool) -> list[np.ndarray]:
    """Indicator columns of each categorical variable's levels (the first, the reference,
    only when ``reference``), in the order of the plain design's names."""
    out = []
    for var, levels in roles.levels:
        labels = frame[var].to_numpy(dtype=object)
        out += [(labels == level).astype(float) for level in levels[0 if reference else 1 :]]
    return out


def _arrays(frame: Any, roles: _Roles, *, reference: bool = False) -> tuple[np.ndarray, ...]:
    """Design (rows with positive prior weight), response, a = prior x trials, offset."""
    x = frame[list(roles.predictors)].to_numpy(dtype=float)
    if roles.levels:
        x = np.column_stack([x, *_indicators(frame, roles, reference=reference)])
    y = frame[roles.response].to_numpy(dtype=float)
    a = np.ones(len(y)) if roles.weights is None else frame[roles.weights].to_numpy(dtype=float)
    used = a > 0
    if roles.trials is not None:
        a = a * frame[roles.trials].to_numpy(dtype=float)
    off = np.zeros(len(y)) if roles.offset is None else frame[roles.offset].to_numpy(dtype=float)
    return x[used], y[used], a[used], off[used]


def _design(x: np.ndarray, shift: np.ndarray, intercept: bool) -> np.ndarray:
    k = x.shape[1] + int(intercept)
    xi = np.empty((x.shape[0], k))
    if intercept:
        xi[:, 0] = 1.0
    np.subtract(x, shift, out=xi[:, int(intercept) :])
    return xi


class _First(NamedTuple):
    """Counts, sums and extremes for the centring, the start and the response checks."""

    sums: np.ndarray  # rows, column sums, sum a y, sum a, sum y, responses outside {0, 1}
    low: np.ndarray  # smallest response, smallest a
    high: float  # largest response


def _first_pass(frame: Any, roles: _Roles) -> _First:
    x, y, a, _ = _arrays(frame, roles)
    sums = np.array(
        [
            float(len(y)),
            *x.sum(axis=0).tolist(),
            float(np.dot(a, y)),
            float(a.sum()),
            float(y.sum()),
            float(np.count_nonzero((y != 0) & (y != 1))),
        ]
    )
    low = np.array([np.min(y, initial=math.inf), np.min(a, initial=math.inf)])
    return _First(sums, low, float(np.max(y, initial=-math.inf)))


def _add_first(*parts: _First) -> _First:
    return _First(
        sum((q.sums for q in parts), np.zeros_like(parts[0].sums)),
        np.min([q.low for q in parts], axis=0),
        max(q.high for q in parts),
    )


def _evaluate(
    frame: Any,
    roles: _Roles,
    fam: contract.GlmFamily,
    shift: np.ndarray,
    coef: np.ndarray | None,
    step: np.ndarray,
    mean_a: float,
    mean_y: float,
) -> _Part:
    """The sums of one partition at ``coef`` (None: at the family's start)."""
    x, y, a, off = _arrays(frame, roles)
    xi = _design(x, shift, roles.intercept)
    if coef is None:
        eta = fam.start(y, a, mean_a)
        w, s = fam.working(eta, y, a)
        rhs = xi.T @ (w * (eta - off) + s)
        deviance = 0.0
    else:
        eta = xi @ coef + off
        w, s = fam.working(eta, y, a)
        rhs = xi.T @ s
        deviance = fam.deviance(eta, y, a)
    b = xi * np.sqrt(w)[:, None]
    d_eta = xi @ step
    edge = fam.at_boundary(eta, y, mean_y)
    outward = d_eta * np.sign(eta)
    return _Part(
        gram=b.T @ b,
        score=rhs,
        deviance=deviance,
        max_eta=float(np.max(np.abs(eta), initial=0.0)),
        max_step=float(np.max(np.abs(d_eta), initial=0.0)),
        edge=int(edge.sum()),
        edge_inward=int((outward[edge] <= 0).sum()),
        pearson=fam.pearson(eta, y, a) if coef is not None else 0.0,
    )


def _weighted_moments(
    frame: Any,
    roles: _Roles,
    fam: contract.GlmFamily,
    shift: np.ndarray,
    coef: np.ndarray,
) -> contract.Moments:
    x, y, a, off = _arrays(frame, roles)
    eta = _design(x, shift, roles.intercept) @ coef + off
    w, _ = fam.working(eta, y, a)
    # The moments cover every level's indicator, the reference's too (as a summary does).
    full, _, _, _ = _arrays(frame, roles, reference=True)
    if not len(y):
        return contract.Moments.empty(full.shape[1])
    return contract.comoments([full[:, j] for j in range(full.shape[1])], w, w > 0)


def _solve(gram: np.ndarray, rhs: np.ndarray) -> tuple[np.ndarray, int]:
    """As the service: Cholesky on the unit-diagonal matrix, or the minimum-norm solution over
    eigenvalues above 1e-10 of the largest when a pivot shows an exact dependency."""
    d = np.sqrt(np.diag(gram))
    d = np.where(d > 0, d, 1.0)
    a = (gram + gram.T) * 0.5 / np.outer(d, d)
    c = rhs / d
    try:
        factor = np.linalg.cholesky(a)
        if float(np.min(np.diag(factor))) ** 2 > _RANK_RTOL:
            z = np.linalg.solve(factor, c)
            return np.linalg.solve(factor.T, z) / d, a.shape[0]
    except np.linalg.LinAlgError:
        pass
    values, vectors = np.linalg.eigh(a)
    keep = values > _RANK_RTOL * values[-1]
    v = vectors[:, keep]
    return (v @ ((v.T @ c) / values[keep])) / d, int(keep.sum())


def _check(fam: contract.GlmFamily, stats: _First, p: int, trials: bool) -> None:
    n, not_binary = stats.sums[0], stats.sums[p + 4]
    (ymin, amin), ymax = stats.low, stats.high
    if n <= p + 1:
        raise DataError(f"{n:g} rows (with positive weight) for {p + 1} coefficients")
    if fam.name == "binomial":
        if trials and amin <= 0:
            raise DataError("trials must be positive", [("trials", "not positive")])
        if (trials and (ymin < 0 or ymax > 1)) or (not trials and not_binary):
            raise DataError(
                "a binomial response must be 0 or 1 (or a proportion in [0, 1] with trials)",
                [("response", "outside the binomial range")],
            )
        if ymin == ymax:
            raise DataError(
                "every row has the same outcome; a binomial model needs both",
                [("response", "one outcome")],
            )
    elif fam.name in ("poisson", "tweedie") and ymin < 0:
        raise DataError(
            f"a {fam.name} response cannot be negative", [("response", "negative values")]
        )
    elif fam.name == "gamma" and ymin <= 0:
        raise DataError("a gamma response must be positive", [("response", "not positive")])


def _family(family: str, var_power: float | None) -> contract.GlmFamily:
    opts = {"family": family} | ({} if var_power is None else {"var_power": var_power})
    contract.check_options(opts)  # the enum and the bounds, in the service's words
    if family == "gaussian":
        raise ValueError("the gaussian family needs no fit: use summarize_dask")
    if (family == "tweedie") != (var_power is not None):
        raise ValueError("var_power is required with the tweedie family and refused otherwise")
    power = {"binomial": 1.0, "poisson": 1.0, "gamma": 2.0}.get(family, var_power or 0.0)
    return contract.GlmFamily(family, float(power))


def summarize_glm_dask(
    ddf: Any,
    *,
    response: str,
    family: str,
    var_power: float | None = None,
    weights: str | None = None,
    offset: str | None = None,
    trials: str | None = None,
    columns: Sequence[str] | None = None,
    categorical: Sequence[str] | None = None,
    intercept: bool = True,
    split_every: int = 8,
) -> GlmSummaries:
    """Fit a GLM by IRLS where a Dask dataframe's partitions live, and summarize its design.

    Parameters
    ----------
    ddf
        A ``dask.dataframe.DataFrame`` of numeric columns (``persist()`` it first if reading it
        is costly: every IRLS iteration reads each partition once).
    response, family, var_power, weights, offset, trials
        As for ``Client.assess`` with rows (``weights`` are prior weights; rows with weight 0
        are left out).
    columns
        The predictors (default: every column but the response, weights, offset and trials).
    categorical
        Columns to treat as categorical besides the text ones (each becomes indicator columns
        ``name[level]`` against its first sorted level, judged together as one term).
    intercept
        Whether the model has an intercept.
    split_every
        Fan-in of the merge tree of the final summaries.

    Returns
    -------
    GlmSummaries
        Pass it to ``Client.assess``.

    Notes
    -----
    One pass over the partitions gives the column means (the centring), the a-weighted mean
    response (the start of the log-link families) and the response checks; then each IRLS
    iteration is one pass that returns, per partition, X'WX, X's and the deviance at the
    candidate coefficients, summed on the client; a step that raises the deviance is halved
    and evaluated again. Converged when the last step moved no linear predictor by more than
    1e-9 (1 + max |eta|), the service's rule. A last pass summarizes the predictors weighted at
    the fit. Missing values are refused (the fit needs complete rows). The levels of each
    categorical column are those of the whole table (from the plain design's summary).

    Raises
    ------
    DataError
        A response the family cannot take, too few rows, missing values, separation (fitted
        values reaching the boundary) or no convergence.
    """
    try:
        from dask.delayed import delayed
    except ImportError as exc:
        raise ImportError(
            "summarize_glm_dask needs dask: pip install 'knotwork-client[dask]'"
        ) from exc
    fam = _family(family, var_power)
    if trials is not None and family != "binomial":
        raise ValueError(f"trials apply to the binomial family only, not {family!r}")
    roles_used = [c for c in (response, weights, offset, trials) if c is not None]
    if len(set(roles_used)) != len(roles_used):
        raise ValueError("the response, weights, offset and trials must be different columns")
    cats = [categorical] if isinstance(categorical, str) else list(categorical or ())
    text = [c for c in ddf.columns if not _is_number(ddf[c].dtype)]
    cats += [c for c in text if c not in cats]
    chosen = [c for c in (columns or ddf.columns) if c not in roles_used]
    predictors = tuple(c for c in chosen if c not in cats)
    categorical_used = [c for c in chosen if c in cats]
    used = [*predictors, *categorical_used]
    # The plain design, exactly as summarize_dask would give it (missing values refused).
    spec = _make_spec(response, weights, categorical_used, "reject", None)
    design_cols = ddf[[*used, response, *([weights] if weights else [])]]
    parts = [delayed(_summarize_unchecked, pure=True)(p, spec) for p in design_cols.to_delayed()]
    design = _finish(delayed(_merge)(*parts).compute())
    design._check_sendable()  # a categorical column with one level, a constant column
    levels = tuple((var, tuple(design.levels[var])) for var in design.levels)
    roles = _Roles(predictors, levels, response, weights, offset, trials, intercept)
    frame = ddf[[*used, *roles_used]]
    counts = frame.isna().sum().compute()
    if int(counts.sum()):
        from ._exceptions import MissingValuesError

        raise MissingValuesError({str(k): int(v) for k, v in counts.items() if v})
    partitions = frame.to_delayed()
    p = len(design.predictors)
    first = [delayed(_first_pass, pure=True)(part, roles) for part in partitions]
    stats: _First = delayed(_add_first)(*first).compute()
    _check(fam, stats, p, trials is not None)
    n = int(stats.sums[0])
    shift = stats.sums[1 : 1 + p] / n if intercept else np.zeros(p)
    mean_a = float(stats.sums[p + 1] / stats.sums[p + 2])
    mean_y = float(stats.sums[p + 3] / n)
    k = p + int(intercept)

    def evaluate(coef: np.ndarray | None, step: np.ndarray) -> _Part:
        tasks = [
            delayed(_evaluate, pure=True)(part, roles, fam, shift, coef, step, mean_a, mean_y)
            for part in partitions
        ]
        result: _Part = delayed(_add)(*tasks).compute()
        return result

    start = evaluate(None, np.zeros(k))
    coef, rank = _solve(start.gram, start.score)
    at = evaluate(coef, coef)
    if not math.isfinite(at.deviance):
        raise DataError("the fit stalled at its first step: check the response and predictors")
    iterations, streak, converged = 1, 0, False
    for iterations in range(2, contract.IRLS_MAX_ITER + 1):
        delta, rank = _solve(at.gram, at.score)
        t, accepted = 1.0, None
        for _ in range(_MAX_HALVINGS + 1):
            trial = evaluate(coef + t * delta, t * delta)
            if t == 1.0:
                size, limit = trial.max_step, contract.IRLS_TOLERANCE * (1.0 + trial.max_eta)
            better = t * size <= limit or trial.deviance <= at.deviance + 1e-12 * (
                abs(at.deviance) + 0.1
            )
            if better and math.isfinite(trial.deviance):
                accepted = trial
                break
            t *= 0.5
        if accepted is None:
            raise DataError(
                f"the fit stalled after {iterations} iterations: no step decreased the deviance"
            )
        coef, at = coef + t * delta, accepted
        if t * size <= limit:
            converged = True
            break
        streak = streak + 1 if at.edge and not at.edge_inward else 0
        if streak >= _DIVERGING_STREAK:
            what = "probabilities reached 0 or 1" if family == "binomial" else "means reached 0"
            raise DataError(
                f"the fitted {what} for {at.edge} rows: a combination of predictors separates "
                "them, so coefficients grow without bound and no finite estimate exists",
                [(response, "separation")],
            )
    if not converged:
        raise DataError(f"the fit did not converge in {contract.IRLS_MAX_ITER} iterations")
    dispersion = 1.0
    if family in ("gamma", "tweedie"):
        dispersion = at.pearson / (n - rank)
    tasks = [
        delayed(_weighted_moments, pure=True)(part, roles, fam, shift, coef) for part in partitions
    ]
    while len(tasks) > 1:
        tasks = [
            delayed(_merge_moments)(*tasks[i : i + split_every])
            for i in range(0, len(tasks), split_every)
        ]
    moments: contract.Moments = tasks[0].compute()
    scale = n / moments.n  # the working weights rescaled to sum to n, as the service does
    moments = contract.Moments(float(n), moments.mean, moments.comoments * scale)
    weighted = Summary(
        numeric=predictors,
        levels=dict(levels),
        response=None,
        weights=None,
        missing="reject",
        rows_read=n,
        rows_complete=n,
        missing_counts={},
        _moments=moments,
    )
    model = contract.ModelFit(
        family=family,
        link=contract.GLM_LINKS[family],
        var_power=var_power if family == "tweedie" else None,
        converged=True,
        iterations=iterations,
        tolerance=contract.IRLS_TOLERANCE,
        deviance=at.deviance,
        dispersion=float(dispersion),
        n=n,
        n_coefficients=k,
    )
    return GlmSummaries(model=model, weighted=weighted, design=design, response=response)


def _is_number(dtype: Any) -> bool:
    """Whether a column's dtype holds numbers (numpy's, or pandas' extension types)."""
    try:
        return bool(np.issubdtype(dtype, np.number) or np.issubdtype(dtype, np.bool_))
    except TypeError:  # a pandas extension dtype (strings, categories)
        kind = getattr(dtype, "kind", "O")
        return kind in "iufb"


def _merge(*parts: Summary) -> Summary:
    total = parts[0]
    for part in parts[1:]:
        total = total.merge(part)
    return total


def _merge_moments(*parts: contract.Moments) -> contract.Moments:
    return contract.merge_all(list(parts))
