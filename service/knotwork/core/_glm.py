"""Generalized linear models fitted by IRLS, and the weighted design at the fit as a summary.

A GLM's coefficients are estimated by iteratively reweighted least squares; at the fit, the
precision of each coefficient is that of a weighted least-squares problem with the working
weights :math:`w_i`. Every collinearity diagnostic of a GLM is therefore the diagnostic of the
design weighted by :math:`w_i`: :func:`glm_summary` turns a fit into the core's one internal
form, a :class:`~knotwork.core._summary.Summary`, so ``assess()`` runs on it unchanged.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, replace

import numpy as np
import scipy.linalg

from knotwork_contract import (
    GLM_LINKS,
    IRLS_MAX_ITER,
    IRLS_TOLERANCE,
    GlmFamily,
    comoments,
    correlation_from_comoments,
)
from knotwork_contract import escape as esc

from ._errors import (
    FitError,
    InputError,
    MissingValuesError,
    OptionError,
    Problem,
    TooFewDataError,
)
from ._interrupt import checkpoint
from ._notices import Notice, notice
from ._rows import column_array, from_table
from ._summary import INTERCEPT_NAME, Summary, Term
from ._validation import check_terms, common_length

#: The families, each with its link (the canonical one, or log for gamma and tweedie); the
#: arithmetic of each family is the contract's (:class:`knotwork_contract.GlmFamily`).
FAMILIES = ("gaussian", "binomial", "poisson", "gamma", "tweedie")
LINKS: Mapping[str, str] = GLM_LINKS
GLM_MISSING_POLICIES = ("reject", "drop_rows")

#: Default iteration limit (statsmodels' default too).
MAX_ITER = IRLS_MAX_ITER
#: Default convergence tolerance: the fit has converged when no linear predictor moved by more
#: than ``TOL * (1 + max |eta|)`` in the last iteration. The working weights are functions of
#: eta, and for the logit and log links d(log w)/d(eta) is at most 1 in size, so this bounds
#: the relative change of every weight in the last step (see :func:`fit_glm`).
TOL = IRLS_TOLERANCE

#: Row blocks of the weighted Gram product are about this many bytes (as in the summaries).
_BLOCK_BYTES = 4 << 20
#: A coefficient direction whose Cholesky pivot on the unit-diagonal weighted Gram matrix falls
#: to this size is an exact dependency in double precision; the step is then the minimum-norm
#: solution over eigenvalues above this fraction of the largest (the dependency finder's rtol).
_RANK_RTOL = 1e-10
#: Step halvings tried when a step increases the deviance.
_MAX_HALVINGS = 30
#: Iterations in a row with fitted values at the boundary, moving further out, that mark a
#: coefficient growing without bound (separation); a converging fit settles well before.
_DIVERGING_STREAK = 8


@dataclass(frozen=True, eq=False)
class GlmFit:
    """A generalized linear model fitted by iteratively reweighted least squares.

    Attributes
    ----------
    family
        ``"gaussian"``, ``"binomial"``, ``"poisson"``, ``"gamma"`` or ``"tweedie"``.
    link
        The link function: ``"identity"`` (gaussian), ``"logit"`` (binomial), ``"log"`` (others).
    var_power
        The tweedie variance power v (variance proportional to mu^v); None for other families.
    converged
        Whether the iteration met its criterion; always True for a returned fit, since a fit
        that does not converge raises :class:`FitError` instead.
    iterations
        IRLS iterations used (one weighted least-squares solve each).
    deviance
        Deviance at the fit, sum of prior weight (times trials) times the unit deviance; not
        divided by the dispersion (statsmodels' ``deviance``).
    dispersion
        The dispersion phi: Pearson chi-square over (n - rank) for gaussian, gamma and tweedie;
        1 for binomial and poisson (statsmodels' default scale). The coefficients' covariance
        is phi (X'WX)^-1.
    n
        Observations used (rows with a positive prior weight), not the sum of the weights.
    n_coefficients
        Coefficients fitted, the intercept included.
    rank
        Rank of the weighted design at the fit: ``n_coefficients`` unless some columns are
        exactly collinear, when the coefficients are the minimum-norm solution (only the
        fitted means, and so the weights, are unique) and the diagnostics report the relation.
    intercept
        Whether the model has an intercept.
    names
        Coefficient names, ``"<constant>"`` (the reserved label) first when there is one.
    coefficients
        Estimates on the scale of the linear predictor, in the order of ``names``.
    weights
        Working weights w_i at the fit, one per input row, prior weights and trials included:
        binomial mu(1 - mu) x trials, poisson mu, gamma 1, tweedie mu^(2 - v), gaussian 1, each
        times the prior weight (0 for rows with prior weight 0).
    working_response
        Working response z_i = eta_i - offset_i + (y_i - mu_i) g'(mu_i) at the fit, one per
        input row (0 where the prior weight is 0): the weighted least-squares regression of z
        on the design with weights w reproduces the coefficients.
    """

    family: str
    link: str
    var_power: float | None
    converged: bool
    iterations: int
    deviance: float
    dispersion: float
    n: int
    n_coefficients: int
    rank: int
    intercept: bool
    names: tuple[str, ...]
    coefficients: np.ndarray
    weights: np.ndarray
    working_response: np.ndarray


@dataclass(frozen=True, eq=False)
class GlmSummaries:
    """A fitted GLM and the two summaries of its design, for the diagnostics side by side.

    Attributes
    ----------
    fit
        The fitted model (family, link, convergence, deviance, dispersion, weights).
    weighted
        Summary of the predictors weighted by the working weights at the fit: every diagnostic
        computed on it is the GLM's (weighted VIF, GVIF, conditioning, removal).
    design
        Summary of the same predictors and rows with the prior weights only (no fit): the
        design VIFs to show beside the weighted ones.
    """

    fit: GlmFit
    weighted: Summary
    design: Summary


# ---------------------------------------------------------------------------------------------
# Families


def _family(family: object, var_power: object) -> GlmFamily:
    if family not in FAMILIES:
        raise OptionError.at(
            "/family", f"must be one of {', '.join(repr(f) for f in FAMILIES)}; got {family!r}"
        )
    if family == "tweedie":
        if var_power is None:
            raise OptionError.at(
                "/var_power", "the tweedie family needs var_power, strictly between 1 and 2"
            )
        ok = isinstance(var_power, int | float) and not isinstance(var_power, bool)
        if not ok or not 1.0 < float(var_power) < 2.0:  # type: ignore[arg-type]
            raise OptionError.at(
                "/var_power", f"var_power must lie strictly between 1 and 2; got {var_power!r}"
            )
        return GlmFamily("tweedie", float(var_power))  # type: ignore[arg-type]
    if var_power is not None:
        raise OptionError.at(
            "/var_power", f"var_power applies to the tweedie family only, not {family!r}"
        )
    power = {"gaussian": 0.0, "binomial": 1.0, "poisson": 1.0, "gamma": 2.0}[str(family)]
    return GlmFamily(str(family), power)


# ---------------------------------------------------------------------------------------------
# Input checks


def _vector(values: object, n: int, pointer: str, what: str, rows: np.ndarray) -> np.ndarray:
    """A finite float vector of length n, or an error naming the field and the row."""
    a, complete = column_array(values, pointer)
    if a.shape[0] != n:
        raise InputError.at(
            pointer,
            f"has {a.shape[0]} values while the design has {n} rows; {what} needs one "
            "value per row",
        )
    if not complete:
        row = int(rows[np.flatnonzero(np.isnan(a))[0]])
        raise MissingValuesError.at(
            pointer, f"row {row} is missing; a model fit needs complete rows (drop them first)"
        )
    return a


def _first(bad: np.ndarray, values: np.ndarray, rows: np.ndarray) -> tuple[int, float]:
    i = int(np.flatnonzero(bad)[0])
    return int(rows[i]), float(values[i])


def _check_response(
    fam: GlmFamily,
    y: np.ndarray,
    trials: np.ndarray | None,
    ptr: Mapping[str, str],
    rows: np.ndarray,
) -> None:
    """Values the family cannot take, then responses with no finite estimate at all."""
    at = ptr["response"]
    if fam.name == "binomial":
        if trials is not None:
            bad = trials <= 0
            if bad.any():
                row, v = _first(bad, trials, rows)
                raise InputError.at(ptr["trials"], f"trials must be positive; row {row} is {v:g}")
            bad = (y < 0) | (y > 1)
            if bad.any():
                row, v = _first(bad, y, rows)
                raise InputError.at(
                    at,
                    "with trials, a binomial response is the proportion of successes and must "
                    f"lie in [0, 1]; row {row} is {v:g}",
                )
        else:
            bad = (y != 0) & (y != 1)
            if bad.any():
                row, v = _first(bad, y, rows)
                raise InputError.at(
                    at,
                    f"a binomial response must be 0 or 1; row {row} is {v:g}. For proportions "
                    "of successes, give the number of trials as well",
                )
        for value, outcome in ((0.0, "failure"), (1.0, "success")):
            if (y == value).all():
                raise FitError.at(
                    at,
                    f"every row is a {outcome} (the response is {value:g} throughout); a "
                    "binomial model needs both outcomes",
                )
        return
    if fam.name in ("poisson", "tweedie"):
        bad = y < 0
        if bad.any():
            row, v = _first(bad, y, rows)
            what = (
                "a poisson response counts events and"
                if fam.name == "poisson"
                else "a tweedie response"
            )
            raise InputError.at(at, f"{what} cannot be negative; row {row} is {v:g}")
        if (y == 0).all():
            raise FitError.at(
                at,
                "the response is 0 in every row, so the fitted mean would be 0: no finite "
                "estimate exists",
            )
    elif fam.name == "gamma":
        bad = y <= 0
        if bad.any():
            row, v = _first(bad, y, rows)
            raise InputError.at(at, f"a gamma response must be positive; row {row} is {v:g}")


def _separating_column(
    fam: GlmFamily, x: np.ndarray, y: np.ndarray, intercept: bool, names: Sequence[str]
) -> tuple[int, str] | None:
    """A single column whose maximum-likelihood coefficient is infinite, with the reason.

    Binomial: the column (quasi-completely) separates the outcomes (Albert & Anderson 1984):
    every row with a failure lies at or below every row with a success (or the reverse).
    Poisson and tweedie: the column is constant, at c, over the rows with a positive response,
    and all the rows where it differs from c lie on one side of c with response 0. Without an
    intercept the boundary c must be 0. Exact comparisons on the values: no tolerance.
    """
    if fam.name == "binomial":
        fail, success = x[y < 1], x[y > 0]  # one copy of the rows each, reduced by column
        lo_min, lo_max = fail.min(axis=0), fail.max(axis=0)
        hi_min, hi_max = success.min(axis=0), success.max(axis=0)
        varies = np.minimum(lo_min, hi_min) < np.maximum(lo_max, hi_max)
        up = varies & (lo_max <= hi_min)
        down = varies & (hi_max <= lo_min)
        if not intercept:
            up &= (lo_max <= 0) & (hi_min >= 0)
            down &= (hi_max <= 0) & (lo_min >= 0)
        for j in map(int, np.flatnonzero(up | down)):
            if up[j]:
                return j, (
                    f"{names[j]!r} separates the outcomes (no failure where it exceeds "
                    f"{lo_max[j]:g}, no success where it is below {hi_min[j]:g})"
                )
            return j, (
                f"{names[j]!r} separates the outcomes (no success where it exceeds "
                f"{hi_max[j]:g}, no failure where it is below {lo_min[j]:g})"
            )
        return None
    if fam.name in ("poisson", "tweedie"):
        positive = x[y > 0]
        level_min, level_max = positive.min(axis=0), positive.max(axis=0)
        for j in map(int, np.flatnonzero(level_min == level_max)):
            c, value = x[:, j], level_min[j]
            if c.min() == c.max() or not (intercept or value == 0):
                continue
            if (c >= value).all() or (c <= value).all():
                return j, f"the response is 0 in every row where {names[j]!r} is not {value:g}"
    return None


# ---------------------------------------------------------------------------------------------
# IRLS


def _weighted_gram(x: np.ndarray, w: np.ndarray) -> np.ndarray:
    """X'WX by row blocks (bounded memory; one symmetric BLAS product per block)."""
    n, k = x.shape
    step = max(1, _BLOCK_BYTES // (8 * k))
    gram = np.zeros((k, k))
    for start in range(0, n, step):
        stop = min(start + step, n)
        b = x[start:stop] * np.sqrt(w[start:stop])[:, None]
        gram += b.T @ b
    return (gram + gram.T) * 0.5


def _solve(gram: np.ndarray, rhs: np.ndarray) -> tuple[np.ndarray, int]:
    """Solve (X'WX) b = rhs by Cholesky on the unit-diagonal (Jacobi-scaled) matrix; when a
    pivot shows an exact dependency, the minimum-norm solution over the eigenvalues above
    ``_RANK_RTOL`` times the largest. Returns the solution and the rank used."""
    d = np.sqrt(np.diag(gram))
    d = np.where(d > 0, d, 1.0)
    a = gram / np.outer(d, d)
    c = rhs / d
    factor, info = scipy.linalg.lapack.dpotrf(a, lower=1, clean=1)
    if info == 0 and float(np.min(np.diag(factor))) ** 2 > _RANK_RTOL:
        return scipy.linalg.cho_solve((factor, True), c) / d, a.shape[0]
    values, vectors = np.linalg.eigh(a)
    keep = values > _RANK_RTOL * values[-1]
    v = vectors[:, keep]
    return (v @ ((v.T @ c) / values[keep])) / d, int(keep.sum())


@dataclass(slots=True)
class _State:
    coef: np.ndarray
    eta: np.ndarray
    deviance: float
    iterations: int
    rank: int
    last_step: np.ndarray


def _irls(
    fam: GlmFamily,
    x: np.ndarray,
    y: np.ndarray,
    a: np.ndarray,
    offset: np.ndarray,
    max_iter: int,
    tol: float,
) -> tuple[_State, str]:
    """IRLS from the family's starting values. Returns the state and how it ended:
    ``"converged"``, ``"limit"`` (iteration limit), ``"diverging"`` (fitted values at the
    boundary moving further out, iteration after iteration) or ``"stalled"`` (no step
    halving decreased the deviance)."""
    eta = fam.start(y, a)
    coef = np.zeros(x.shape[1])
    deviance = math.inf
    streak = 0
    state = _State(coef, eta, deviance, 0, x.shape[1], np.zeros_like(coef))
    for it in range(1, max_iter + 1):
        checkpoint()
        w, s = fam.working(eta, y, a)
        with np.errstate(all="ignore"):
            gram = _weighted_gram(x, w)
            # The first step regresses the working response (from fitted values, not
            # coefficients); later steps solve for the change.
            rhs = x.T @ (w * (eta - offset) + s) if it == 1 else x.T @ s
        if not (np.isfinite(gram).all() and np.isfinite(rhs).all()):
            return state, "overflow"  # values too large for double precision
        if it == 1:
            target, rank = _solve(gram, rhs)
            delta = target - coef
            d_eta = x @ target + offset - eta
        else:
            delta, rank = _solve(gram, rhs)
            d_eta = x @ delta
        size = float(np.max(np.abs(d_eta)))
        limit = tol * (1.0 + float(np.max(np.abs(eta + d_eta))))
        t = 1.0
        for _ in range(_MAX_HALVINGS + 1):
            trial = eta + t * d_eta
            dev = fam.deviance(trial, y, a)
            # The first step has no deviance to beat; a step within the tolerance is accepted
            # as it is (rounding may move the deviance by a few ulps either way).
            better = it == 1 or t * size <= limit or dev <= deviance + 1e-12 * (abs(deviance) + 0.1)
            if better and math.isfinite(dev):
                break
            t *= 0.5
        else:
            return state, "stalled"
        outward = d_eta * np.sign(trial)
        eta = trial
        coef = coef + t * delta
        deviance = dev
        state = _State(coef, eta, deviance, it, rank, t * delta)
        if it > 1 and t * size <= limit:
            return state, "converged"
        edge = fam.at_boundary(eta, y)
        streak = streak + 1 if edge.any() and (outward[edge] > 0).all() else 0
        if streak >= _DIVERGING_STREAK:
            return state, "diverging"
    return state, "limit"


def _diverging_columns(
    names: Sequence[str], x: np.ndarray, step: np.ndarray, intercept: bool
) -> list[str]:
    """Columns whose coefficients grew most in the last step, measured as the change in the
    linear predictor per standard deviation of the column (at least a tenth of the largest)."""
    cols = x[:, 1:] if intercept else x
    steps = step[1:] if intercept else step
    size = np.abs(steps) * cols.std(axis=0)
    if not size.size or size.max() <= 0:
        return []
    return [names[int(j)] for j in np.flatnonzero(size >= 0.1 * size.max())]


def _largest(
    x: np.ndarray,
    offset: np.ndarray,
    weights: np.ndarray,
    trials: np.ndarray | None,
    col_ptrs: Sequence[str],
    ptr: Mapping[str, str],
) -> str:
    """The pointer of the input holding the value farthest from 1 in magnitude (on a log
    scale): the likeliest cause of an overflow."""

    def spread(v: np.ndarray) -> float:
        with np.errstate(all="ignore"):
            mags = np.abs(np.log10(np.abs(v[v != 0]))) if np.any(v != 0) else np.zeros(1)
        return float(np.max(mags, initial=0.0))

    candidates = [(spread(x[:, j]), col_ptrs[j]) for j in range(x.shape[1])]
    candidates += [(spread(offset), ptr["offset"]), (spread(weights), ptr["weights"])]
    if trials is not None:
        candidates.append((spread(trials), ptr["trials"]))
    return max(candidates, key=lambda c: c[0])[1]


def fit_glm(
    x: object,
    y: object,
    *,
    family: str,
    var_power: float | None = None,
    prior_weights: object | None = None,
    offset: object | None = None,
    trials: object | None = None,
    intercept: bool = True,
    max_iter: int = MAX_ITER,
    tol: float = TOL,
    names: Sequence[str] | None = None,
    sources: Sequence[str] | None = None,
    pointers: Mapping[str, str] | None = None,
    row_numbers: Sequence[int] | np.ndarray | None = None,
) -> GlmFit:
    """Fit a generalized linear model by iteratively reweighted least squares (IRLS).

    Parameters
    ----------
    x
        The design without the intercept column, (n, p), finite.
    y
        The response, (n,): 0/1 (binomial; or proportions with ``trials``), non-negative
        counts (poisson), positive values (gamma), non-negative values (tweedie).
    family
        ``"gaussian"`` (identity link), ``"binomial"`` (logit), ``"poisson"`` (log),
        ``"gamma"`` (log) or ``"tweedie"`` (log).
    var_power
        The tweedie variance power v, strictly between 1 and 2 (variance proportional to
        mu^v); only with ``family="tweedie"``.
    prior_weights
        Non-negative prior weights (the variance of y_i is phi V(mu_i) / weight_i); rows with
        weight 0 are left out. Default 1.
    offset
        Added to the linear predictor (log exposure for a rate), (n,). Default 0.
    trials
        Binomial only: positive numbers of trials behind each proportion ``y``; they multiply
        the prior weights.
    intercept
        Whether the model has an intercept (the design gets a constant column).
    max_iter
        Iteration limit.
    tol
        Convergence tolerance on the linear predictor (see Notes).
    names
        Column names of ``x`` (default ``x0, x1, ...``), for the coefficients and messages.
    sources
        JSON pointer of each column of ``x`` in the input (default ``/columns/<name>``), for
        errors that name a column.
    pointers
        JSON pointers of ``"response"``, ``"weights"``, ``"offset"`` and ``"trials"`` in the
        input (defaults ``/response``, ``/weights``, ``/offset``, ``/trials``).
    row_numbers
        Input row of each observation, for messages (default 0, 1, ...).

    Returns
    -------
    GlmFit

    Raises
    ------
    OptionError
        Unknown family, var_power missing or out of (1, 2), var_power or trials with a family
        that has none, iteration limit or tolerance out of range.
    InputError, MissingValuesError, TooFewDataError
        A response the family cannot take (binomial outside {0, 1}, or outside [0, 1] with
        trials; negative counts; a non-positive gamma or negative tweedie response), trials
        that are not positive, negative prior weights, missing or infinite values, mismatched
        lengths, no more rows than coefficients.
    FitError
        No finite estimate: separation of a binomial response (the separating column named
        when one column does it), a response that is 0 wherever one column differs from a
        single value (poisson, tweedie), every outcome the same; or no convergence within
        ``max_iter`` iterations.

    Notes
    -----
    With linear predictor :math:`\\eta = X\\beta + o`, mean :math:`\\mu = g^{-1}(\\eta)`, variance
    function V and prior weights a (times trials), each iteration solves the weighted
    least-squares problem

    .. math:: (X^\\top W X)\\,\\delta = X^\\top s, \\quad
       w_i = \\frac{a_i}{V(\\mu_i)\\,g'(\\mu_i)^2}, \\quad
       s_i = a_i \\frac{y_i - \\mu_i}{V(\\mu_i)\\,g'(\\mu_i)}

    and sets :math:`\\beta \\leftarrow \\beta + \\delta` (Nelder & Wedderburn 1972): Newton's
    method for the canonical links (binomial logit, poisson log, gaussian identity), Fisher
    scoring for gamma and tweedie with the log link. Working weights: gaussian a, binomial
    :math:`a\\mu(1-\\mu)`, poisson :math:`a\\mu`, gamma a, tweedie :math:`a\\mu^{2-v}`. The
    deviance is :math:`\\sum a_i d(y_i, \\mu_i)` with the unit deviances of McCullagh & Nelder
    (1989, ch. 2 [page unverified]); for tweedie
    :math:`d = 2[y^{2-v}/((1-v)(2-v)) - y\\mu^{1-v}/(1-v) + \\mu^{2-v}/(2-v)]`. The dispersion is
    Pearson's :math:`\\sum a_i (y_i - \\mu_i)^2 / V(\\mu_i)` over n - rank for gaussian, gamma and
    tweedie, and 1 for binomial and poisson.

    Convergence: the fit has converged when the last step moved no linear predictor by more
    than ``tol * (1 + max |eta|)`` (default ``tol`` 1e-9). The working weights depend on the
    fit only through eta, with :math:`|d \\log w / d\\eta| \\le 1` for the logit and log links,
    so the criterion bounds the relative change of every weight in the last step; for the
    canonical links Newton's quadratic convergence leaves the weights accurate to far below
    that. A criterion on eta rather than on the coefficients is unaffected by collinearity:
    along a near-dependency the coefficients are poorly determined but eta is not.

    A step that increases the deviance is halved (up to 30 times). Maximum-likelihood
    estimates do not exist under complete or quasi-complete separation (Albert & Anderson
    1984): the fit stops when one column separates the outcomes (checked exactly before
    fitting), or when fitted probabilities reach 0 or 1 (within 1e-10) and keep moving out for
    8 iterations in a row, naming the columns whose coefficients grew most.

    Verification: coefficients and deviance against statsmodels' GLM (0.15.0) on
    statsmodels.datasets spector (binomial), randhie (poisson), scotland (gamma), fair
    (tweedie, v = 1.5) and star98 (binomial with trials), and with an offset and prior
    weights; the working weights against statsmodels' ``weights`` at its fit.

    Implementation: the design is centred by its column means when there is an intercept
    (which keeps a column with a large mean from ruining the Gram matrix's conditioning; the
    intercept is mapped back at the end). X'WX is formed by row blocks of about 4 MB with one
    symmetric BLAS product each, scaled to unit diagonal and solved by Cholesky (LAPACK
    ``dpotrf``); an exact dependency falls back to the minimum-norm solution over the
    eigenvalues above 1e-10 times the largest. One cooperative ``checkpoint()`` per iteration.
    Every unit deviance is written to stay finite near the boundary (``logaddexp``,
    ``xlogy``, no division by mu(1 - mu)).

    References
    ----------
    .. [1] Nelder, J. A. and Wedderburn, R. W. M. (1972). Generalized linear models. Journal
       of the Royal Statistical Society, Series A 135(3), 370-384.
    .. [2] McCullagh, P. and Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman
       and Hall, London.
    .. [3] Albert, A. and Anderson, J. A. (1984). On the existence of maximum likelihood
       estimates in logistic regression models. Biometrika 71(1), 1-10.
    .. [4] Jorgensen, B. (1987). Exponential dispersion models. Journal of the Royal
       Statistical Society, Series B 49(2), 127-162 [from memory: the tweedie family].
    """
    fam = _family(family, var_power)
    ptr = {"response": "/response", "weights": "/weights", "offset": "/offset", "trials": "/trials"}
    ptr.update(pointers or {})
    if trials is not None and fam.name != "binomial":
        raise OptionError.at("/trials", f"trials apply to the binomial family only, not {family!r}")
    if isinstance(max_iter, bool) or not isinstance(max_iter, int) or max_iter < 1:
        raise OptionError.at("/max_iter", f"max_iter must be a positive integer; got {max_iter!r}")
    if not (isinstance(tol, int | float) and 0.0 < float(tol) < 1.0):
        raise OptionError.at("/tol", f"tol must be a number in (0, 1); got {tol!r}")

    design = np.asarray(x, dtype=float)
    if design.ndim != 2:
        raise InputError.at("/columns", "the design must be a two-dimensional array (n, p)")
    n_rows, p = design.shape
    col_names = tuple(names) if names is not None else tuple(f"x{j}" for j in range(p))
    if len(col_names) != p:
        raise InputError.at("/columns", f"{len(col_names)} names for {p} columns")
    col_ptrs = (
        tuple(sources) if sources is not None else tuple(f"/columns/{esc(c)}" for c in col_names)
    )
    rows = np.arange(n_rows) if row_numbers is None else np.asarray(row_numbers)
    bad = np.argwhere(~np.isfinite(design))
    if bad.size:
        i, j = (int(v) for v in bad[0])
        raise InputError.at(
            col_ptrs[j],
            f"row {int(rows[i])} is missing or infinite; a model fit needs complete, finite rows",
        )
    yv = _vector(y, n_rows, ptr["response"], "the response", rows)
    pw = (
        np.ones(n_rows)
        if prior_weights is None
        else _vector(prior_weights, n_rows, ptr["weights"], "the prior weights", rows)
    )
    if (pw < 0).any():
        row, _ = _first(pw < 0, pw, rows)
        raise InputError.at(ptr["weights"], f"weights must be non-negative; row {row} is negative")
    off = (
        np.zeros(n_rows)
        if offset is None
        else _vector(offset, n_rows, ptr["offset"], "the offset", rows)
    )
    m = None if trials is None else _vector(trials, n_rows, ptr["trials"], "trials", rows)

    used = pw > 0
    n = int(used.sum())
    k = p + int(intercept)
    if n <= k:
        raise TooFewDataError.at(
            "/columns",
            f"{n} rows (with positive weight) for {k} coefficients; the fit needs more rows than "
            "coefficients",
        )
    full = used.all()
    xs = design if full else design[used]
    ys, pws, offs, rws = (
        (yv, pw, off, rows) if full else (yv[used], pw[used], off[used], rows[used])
    )
    ms = None if m is None else (m if full else m[used])
    _check_response(fam, ys, ms, ptr, rws)
    a = pws if ms is None else pws * ms

    separating = _separating_column(fam, xs, ys, intercept, col_names)
    if separating is not None:
        j, why = separating
        raise FitError.at(
            col_ptrs[j],
            f"{why}, so its coefficient grows without bound and no finite estimate exists; "
            "drop the column or merge its rare values or categories",
        )

    # Internal design: centred columns after a constant (the intercept is mapped back).
    shift = xs.mean(axis=0) if intercept else np.zeros(p)
    xi = np.empty((n, k))
    if intercept:
        xi[:, 0] = 1.0
    np.subtract(xs, shift, out=xi[:, int(intercept) :])
    # Overflow and division by zero are found by the checks on what they produce (a gram or
    # deviance that is not finite), so numpy's floating-point warnings are not wanted here.
    with np.errstate(all="ignore"):
        state, outcome = _irls(fam, xi, ys, a, offs, max_iter, tol)

    if outcome != "converged":
        edge = fam.at_boundary(state.eta, ys)
        if outcome == "diverging" or (outcome == "limit" and edge.any()):
            grown = _diverging_columns(col_names, xi, state.last_step, intercept)
            first = int(rws[np.flatnonzero(edge)[0]])
            what = "probabilities reached 0 or 1" if fam.name == "binomial" else "means reached 0"
            raise FitError.at(
                ptr["response"],
                f"the fitted {what} for {int(edge.sum())} rows (the first is row {first}): a "
                "combination of predictors separates them, so coefficients grow without bound "
                + (f"(those of {', '.join(repr(c) for c in grown)}) " if grown else "")
                + "and no finite estimate exists; drop or combine those predictors",
            )
        if outcome == "overflow":
            raise FitError.at(
                _largest(xs, offs, pws, ms, col_ptrs, ptr),
                "the fit overflowed double precision: values this large (or small) cannot be "
                "fitted as given; rescale the column (for example to other units)",
            )
        if outcome == "stalled":
            raise FitError.at(
                ptr["response"],
                f"the fit stalled after {state.iterations} iterations: no step decreased the "
                "deviance. Check the response and predictors for extreme values, or rescale them",
            )
        raise FitError.at(
            ptr["response"],
            f"the fit did not converge in {max_iter} iterations; raise the iteration limit, or "
            "check the response and predictors for extreme values",
        )

    coef = state.coef.copy()
    if intercept:
        coef[0] -= float(np.dot(shift, coef[1:]))
    w, s = fam.working(state.eta, ys, a)
    total = float(np.sum(w))
    if not (math.isfinite(total) and total > 0 and np.isfinite(w).all()):
        raise FitError.at(
            _largest(xs, offs, pws, ms, col_ptrs, ptr),
            "the working weights at the fit are all 0 or not finite (fitted values at the "
            "boundary of their range): no information is left to assess; rescale the column "
            "or check the offset",
        )
    with np.errstate(all="ignore"):
        z = state.eta - offs + s / w
    dispersion = 1.0
    if fam.name in ("gaussian", "gamma", "tweedie"):
        dispersion = fam.pearson(state.eta, ys, a) / (n - state.rank)
    weights = w if full else np.zeros(n_rows)
    working = z if full else np.zeros(n_rows)
    if not full:
        weights[used] = w
        working[used] = z
    return GlmFit(
        family=fam.name,
        link=LINKS[fam.name],
        var_power=fam.power if fam.name == "tweedie" else None,
        converged=True,
        iterations=state.iterations,
        deviance=state.deviance,
        dispersion=float(dispersion),
        n=n,
        n_coefficients=k,
        rank=state.rank,
        intercept=intercept,
        names=((INTERCEPT_NAME,) if intercept else ()) + col_names,
        coefficients=coef,
        weights=weights,
        working_response=working,
    )


# ---------------------------------------------------------------------------------------------
# Summaries


def _terms(
    terms: Sequence[Term] | Mapping[str, Sequence[str]] | None, names: tuple[str, ...]
) -> tuple[Term, ...]:
    if terms is None:
        return ()
    if isinstance(terms, Mapping):
        return check_terms(terms, names)
    return check_terms({t.name: t.columns for t in terms}, names)


def _columns(x: object, fit: GlmFit | None, p: int | None) -> list[np.ndarray]:
    design = np.asarray(x, dtype=float)
    if design.ndim != 2 or (p is not None and design.shape[1] != p):
        raise InputError.at(
            "/columns", f"the design must be a two-dimensional array with {p} columns"
        )
    if fit is not None and design.shape[0] != fit.weights.shape[0]:
        raise InputError.at(
            "/columns",
            f"the design has {design.shape[0]} rows and the fit {fit.weights.shape[0]}",
        )
    return [design[:, j] for j in range(design.shape[1])]


def glm_summary(
    fit: GlmFit,
    x: object,
    *,
    terms: Sequence[Term] | Mapping[str, Sequence[str]] | None = None,
    sources: Sequence[str] | None = None,
    response: str | None = None,
) -> Summary:
    """Summary of the predictors weighted by a GLM's working weights at the fit.

    Parameters
    ----------
    fit
        The fitted model.
    x
        The same design the model was fitted on, without the intercept column, (rows, p).
    terms
        Multi-column terms (a categorical variable's indicator columns), kept for GVIF.
    sources
        JSON pointer of each column in the input, for errors found later.
    response
        When given, the working response at the fit is included under this name, so that
        diagnostics that use a response (ridge, principal-component regression) work on the
        weighted working problem at the fit.

    Returns
    -------
    Summary
        ``n`` is the number of observations used (not the sum of the weights); the weights
        are rescaled to sum to n, which changes no diagnostic (each is invariant to a common
        scale of the weights) and keeps the summary's identities (such as the design
        cross-products ``comoments + n m m'``) exact. ``input_kind`` is ``"table"``.

    Notes
    -----
    With an intercept each column is centred by its w-weighted mean, and the summary's
    correlation matrix is

    .. math:: R_w = D^{-1/2} X_c^\\top W X_c D^{-1/2}, \\qquad
       \\mathrm{VIF}_j = [R_w^{-1}]_{jj},

    the correlation matrix of :math:`W^{1/2} X_c`. Since the coefficients' covariance is
    :math:`\\phi (X^\\top W X)^{-1}`, whose slope block is :math:`\\phi (X_c^\\top W X_c)^{-1}`,
    these VIFs are the diagonal of the inverse of the correlation matrix of the estimated slope
    coefficients, Fox & Monette's (1992) definition for any model with a covariance of
    estimates; the dispersion cancels. The same holds for GVIF (by the partitioned-inverse
    identity) and the condition indices of the scaled weighted design (Lesaffre & Marx 1993;
    Weissfeld & Sereika 1991). Without an intercept, ``assess(..., Options(intercept=False))``
    gives the uncentred weighted VIFs, again those of the coefficients' covariance.

    Verification: the weighted VIFs equal the VIFs derived from statsmodels' ``cov_params()``
    to 1e-6 on spector, randhie, scotland, fair and star98; GVIF of a categorical term equals
    the determinant formula on the coefficient correlation.

    Implementation: the moments come from the same kernel as ``from_table(..., weights=...)``
    (row blocks, corrected two-pass centring; Chan, Golub & LeVeque 1983), with the working
    weights as the weights and rows of zero weight left out.

    References
    ----------
    .. [1] Fox, J. and Monette, G. (1992). Generalized collinearity diagnostics. Journal of
       the American Statistical Association 87(417), 178-183.
    .. [2] Weissfeld, L. A. and Sereika, S. M. (1991). A multicollinearity diagnostic for
       generalized linear models. Communications in Statistics - Theory and Methods 20(4),
       1183-1198 [page range unverified].
    .. [3] Lesaffre, E. and Marx, B. D. (1993). Collinearity in generalized linear regression.
       Communications in Statistics - Theory and Methods 22(7), 1933-1952 [page range
       unverified].
    """
    names = fit.names[1:] if fit.intercept else fit.names
    columns = _columns(x, fit, len(names))
    keep = fit.weights > 0
    w = fit.weights * (fit.n / float(np.sum(fit.weights[keep])))
    pointers = list(sources) if sources is not None else [f"/columns/{esc(c)}" for c in names]
    if response is not None:
        if response in names:
            raise InputError.at("/response", "the response cannot also be a predictor")
        columns.append(fit.working_response)
        pointers.append(f"/columns/{esc(response)}")
    _, mean, com = comoments(columns, w, keep, between_blocks=checkpoint)
    return Summary(
        names=tuple(names),
        n=float(fit.n),
        correlation=correlation_from_comoments(com),
        response=response,
        means=mean,
        comoments=com,
        terms=_terms(terms, tuple(names)),
        input_kind="table",
        rows=fit.n,
        sources=tuple(pointers),
    )


def design_summary(
    x: object,
    names: Sequence[str],
    *,
    prior_weights: object | None = None,
    terms: Sequence[Term] | Mapping[str, Sequence[str]] | None = None,
    sources: Sequence[str] | None = None,
) -> Summary:
    """Summary of the plain design (prior weights only, no fit), for the design VIFs beside
    the weighted ones.

    Parameters
    ----------
    x
        The design without the intercept column, (rows, p).
    names
        Its column names.
    prior_weights
        Optional prior weights (rows with weight 0 count as not observed, as in the fit).
    terms, sources
        As for :func:`glm_summary`.

    Returns
    -------
    Summary
        Exactly ``from_table`` on the same columns (and weights): today's answer for the
        table, so a GLM answer can show how much the fit changes the picture.

    Notes
    -----
    :math:`\\mathrm{VIF}_j = [R^{-1}]_{jj}` with R the (prior-weighted) correlation matrix of the
    columns: the least-squares VIF, which ignores how the fit weighs the observations.

    Verification: equal to statsmodels' ``variance_inflation_factor`` on spector (1e-9), and
    bit for bit to ``from_table`` on the same columns.

    Implementation: one call of ``from_table``; the prior weights go in under a column name
    that no predictor has.
    """
    names = tuple(names)
    columns = _columns(x, None, len(names))
    table: dict[str, object] = dict(zip(names, columns, strict=True))
    key = None
    if prior_weights is not None:
        key = "(prior weights)"
        while key in table:
            key = f"({key})"
        table[key] = np.asarray(prior_weights, dtype=float)
    s = from_table(table, weights=key)
    pointers = tuple(sources) if sources is not None else s.sources
    return replace(s, terms=_terms(terms, names), sources=pointers)


def _check_levels(fam: GlmFamily, y: np.ndarray, labels: Mapping[str, np.ndarray]) -> None:
    """A level of a categorical variable whose rows all have the same outcome at the boundary
    (only successes or only failures; only zero counts) has an infinite coefficient, whichever
    level is the reference; named here by its label, before any fit."""
    outcomes: tuple[tuple[np.ndarray, str], ...]
    if fam.name == "binomial":
        outcomes = ((y == 1, "has only successes"), (y == 0, "has only failures"))
    elif fam.name in ("poisson", "tweedie"):
        outcomes = ((y == 0, "has response 0 in every row"),)
    else:
        return
    for name, values in labels.items():
        for level in sorted(set(values.tolist())):
            rows = values == level
            for hit, what in outcomes:
                if hit[rows].all():
                    raise FitError.at(
                        f"/categorical/{esc(name)}",
                        f"level {level!r} of {name!r} {what} ({int(rows.sum())} rows), so its "
                        "coefficient grows without bound and no finite estimate exists; merge "
                        "the level with another or leave its rows out",
                    )


def _rebuild_design(
    design: Summary, numeric: Mapping[str, np.ndarray], labels: Mapping[str, np.ndarray]
) -> np.ndarray:
    """The design matrix behind a ``from_table`` summary: numeric columns as they are and each
    categorical term's indicator columns ``name[level]`` (rows equal to the level)."""
    level_of = {
        column: (term.name, column[len(term.name) + 1 : -1])
        for term in design.terms
        for column in term.columns
    }
    n = design.rows or 0
    x = np.empty((n, design.p))
    for j, name in enumerate(design.names):
        if name in level_of:
            term, level = level_of[name]
            x[:, j] = labels[term] == level
        else:
            x[:, j] = numeric[name]
    return x


def summarize_glm(
    columns: Mapping[str, object],
    *,
    response: str,
    family: str,
    categorical: Mapping[str, Sequence[str | None]] | None = None,
    var_power: float | None = None,
    weights: str | None = None,
    offset: str | None = None,
    trials: str | None = None,
    intercept: bool = True,
    missing: str = "reject",
    max_iter: int = MAX_ITER,
    tol: float = TOL,
) -> GlmSummaries:
    """Fit a GLM to a table and summarize its design weighted at the fit and as it is.

    Parameters
    ----------
    columns
        Column name to numeric values, as for ``from_table``; NaN (or None) marks a missing
        value. Every column other than the response, weights, offset and trials is a predictor.
    response
        The response column.
    family, var_power, intercept, max_iter, tol
        As for :func:`fit_glm`.
    categorical
        Column name to string labels, expanded to indicator columns kept together as a term
        (as ``from_table`` does).
    weights
        A column of non-negative prior weights (rows with weight 0 are left out).
    offset
        A column added to the linear predictor (log exposure).
    trials
        Binomial only: a column of positive numbers of trials; the response is then the
        proportion of successes.
    missing
        ``"reject"`` (default) or ``"drop_rows"``: a fit needs complete rows, so pairwise
        deletion does not apply.

    Returns
    -------
    GlmSummaries
        The fit, the summary weighted at the fit, and the plain design's summary (today's
        ``from_table`` summary of the same rows, with the prior weights).

    Notes
    -----
    Rows with a missing value in any column used (predictors, response, weights, offset,
    trials) are rejected or dropped, then rows with prior weight 0; ``from_table`` on the rows
    left gives the plain design's summary (names, categorical expansion against the first
    sorted level, terms, field pointers), the design matrix is rebuilt from it column for
    column, and :func:`fit_glm` and :func:`glm_summary` do the rest. Both summaries carry the
    ``rows_dropped`` notice when rows were dropped.

    Verification: GVIF of a categorical term (fair, occupation) equals the determinant formula
    on the correlation of statsmodels' coefficient covariance, for binomial and tweedie fits.

    Implementation: the table is read once to find missing values; the moments are made by
    the same kernel as ``from_table``.

    Raises
    ------
    InputError, MissingValuesError, TooFewDataError, OptionError, FitError
        As for :func:`fit_glm`, and a level of a categorical variable whose rows all have the
        same outcome at the boundary (only successes, only failures, or only zero counts),
        which has no finite coefficient whichever level is the reference. The field is named:
        ``/columns/<name>``, ``/categorical/<name>``, ``/response``,
        ``/weights``, ``/offset``, ``/trials`` for a reference to a column that does not
        exist, or an option (``/family``, ``/var_power``, ``/missing``, ``/trials``).
    """
    fam = _family(family, var_power)
    if missing not in GLM_MISSING_POLICIES:
        raise OptionError.at(
            "/missing",
            f"must be 'reject' or 'drop_rows' for a model fit, which needs complete rows; got "
            f"{missing!r}",
        )
    if not isinstance(columns, Mapping):
        raise InputError.at("/columns", "columns must map names to lists of numbers")
    roles = {"response": response, "weights": weights, "offset": offset, "trials": trials}
    if trials is not None and fam.name != "binomial":
        raise OptionError.at("/trials", f"trials apply to the binomial family only, not {family!r}")
    seen: dict[str, str] = {}
    for role, ref in roles.items():
        if ref is None:
            continue
        if ref not in columns:
            raise InputError.at(
                f"/{role}", f"{role} names {ref!r}, which is not a numeric column of the table"
            )
        if ref in seen:
            raise InputError.at(f"/{role}", f"{ref!r} is already the {seen[ref]} column")
        seen[ref] = role
    labels_in = dict(categorical or {})
    numeric: dict[str, np.ndarray] = {}
    for name, values in columns.items():
        numeric[name], _ = column_array(values, f"/columns/{esc(name)}")
    labels = {name: np.asarray(list(v), dtype=object) for name, v in labels_in.items()}
    lengths = {name: a.shape[0] for name, a in numeric.items()}
    lengths.update({name: a.shape[0] for name, a in labels.items()})
    expected = common_length(lengths, labels)
    missing_rows = {f"/columns/{esc(k)}": np.isnan(a) for k, a in numeric.items()}
    missing_rows.update(
        {
            f"/categorical/{esc(k)}": np.array([v is None for v in a], dtype=bool)
            for k, a in labels.items()
        }
    )
    counts = {k: int(v.sum()) for k, v in missing_rows.items() if v.any()}
    notes: list[Notice] = []
    keep = np.ones(expected, dtype=bool)
    if counts and missing == "reject":
        problems = [Problem(k, f"{c} of {expected} values missing") for k, c in counts.items()]
        raise MissingValuesError(
            f"{sum(counts.values())} missing values in {len(counts)} column(s); fill them, or "
            "set options.missing to 'drop_rows' (a model fit needs complete rows)",
            problems,
        )
    for k in counts:
        keep &= ~missing_rows[k]
    if counts:
        notes.append(
            notice(
                "rows_dropped",
                f"{int(expected - keep.sum())} of {expected} rows had missing values and were "
                "dropped",
            )
        )
    if weights is not None:
        w = numeric[weights]
        negative = keep & (w < 0)
        if negative.any():
            raise InputError.at(
                f"/columns/{esc(weights)}",
                f"weights must be non-negative; row {int(np.flatnonzero(negative)[0])} is negative",
            )
        keep &= w > 0

    design_cols = {name: a[keep] for name, a in numeric.items() if name not in (offset, trials)}
    kept_labels = {name: a[keep] for name, a in labels.items()}
    design = from_table(
        design_cols,
        categorical={k: list(v) for k, v in kept_labels.items()} or None,
        response=response,
        weights=weights,
    )
    x = _rebuild_design(design, design_cols, kept_labels)
    p = design.p
    pointers = {role: f"/columns/{esc(ref)}" for role, ref in roles.items() if ref is not None}
    y = design_cols[response]
    m = None if trials is None else numeric[trials][keep]
    _check_response(fam, y, m, pointers, np.flatnonzero(keep))
    _check_levels(fam, y, kept_labels)
    fit = fit_glm(
        x,
        y,
        family=family,
        var_power=var_power,
        prior_weights=None if weights is None else design_cols[weights],
        offset=None if offset is None else numeric[offset][keep],
        trials=m,
        intercept=intercept,
        max_iter=max_iter,
        tol=tol,
        names=design.names,
        sources=design.sources[:p],
        pointers=pointers,
        row_numbers=np.flatnonzero(keep),
    )
    weighted = glm_summary(fit, x, terms=design.terms, sources=design.sources[:p])
    if notes:
        weighted = replace(weighted, notes=tuple(notes))
        design = replace(design, notes=(*design.notes, *notes))
    return GlmSummaries(fit=fit, weighted=weighted, design=design)
