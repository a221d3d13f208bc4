"""Tests of collinearity: determinant, Farrar-Glauber chi-square, per-variable F, partials."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import scipy.linalg
import scipy.special

from knotwork.core._dependencies import Spectrum, find_dependencies
from knotwork_contract import FarrarGlauber, PartialPair, Tests, VariableF

#: The caveats that go with every result, in the order they are reported.
CAVEATS = (
    "The chi-square and F statistics test whether the predictors are uncorrelated in a "
    "normal population; they do not measure whether the collinearity harms the estimates.",
    "With many observations the tests reject at collinearity far too weak to matter, so a small "
    "p-value is no sign of trouble by itself (critiques: Wichers 1975; Kumar 1975; O'Hagan and "
    "McCabe 1975; Review of Economics and Statistics 57(3)).",
)


def _whole(x: float) -> float:
    """Return ``x`` as an int when it is a whole number, so it encodes as one."""
    return int(x) if float(x).is_integer() else float(x)


def _rows_with_none(a: np.ndarray) -> tuple[tuple[float | None, ...], ...]:
    """A matrix as nested tuples of floats, with None where the value is NaN (undefined)."""
    rows = a.tolist()
    for i, j in np.argwhere(np.isnan(a)).tolist():
        rows[i][j] = None
    return tuple(map(tuple, rows))


def _log_det_cholesky(matrix: np.ndarray) -> tuple[float | None, np.ndarray | None]:
    """ln det and Cholesky factor of a positive definite matrix; (None, None) otherwise."""
    try:
        factor = scipy.linalg.cholesky(matrix, lower=True, check_finite=False)
    except np.linalg.LinAlgError:
        return None, None
    return float(2.0 * np.sum(np.log(np.diag(factor)))), factor


def collinearity_tests(
    R: np.ndarray,
    n: float,
    names: Sequence[str],
    vif: Sequence[float | None],
    *,
    spectrum: Spectrum | None = None,
    tables: bool = True,
) -> Tests:
    """Farrar-Glauber tests of collinearity and the partial correlations of the predictors.

    Parameters
    ----------
    R
        Correlation matrix of the predictors, p x p.
    n
        Number of observations (or sum of frequency weights).
    names
        Predictor names, in matrix order.
    vif
        The (centred) VIFs of the predictors, None for aliased variables.
    spectrum
        The eigen-decomposition of ``R``, if already computed; it decides whether R is
        singular (``null_dim > 0``). Computed here when not given.
    tables
        Whether to build the three p x p partial-correlation tables (False: empty; the
        strongest pairs are kept either way).

    Returns
    -------
    Tests

    Raises
    ------
    ValueError
        When the shapes of ``R``, ``names`` and ``vif`` disagree (a programming error).

    Notes
    -----
    Overall test (Bartlett's statistic for the hypothesis :math:`R = I`, used by Farrar and
    Glauber as a test of collinearity), on :math:`p(p-1)/2` degrees of freedom:

    .. math:: \\chi^2 = -\\left[n - 1 - \\frac{2p + 5}{6}\\right] \\ln \\det R.

    Per variable, the F statistic of the regression of :math:`x_j` on the other predictors,
    on :math:`(p - 1, n - p)` degrees of freedom:

    .. math:: F_j = (\\mathrm{VIF}_j - 1) \\frac{n - p}{p - 1}.

    Partial correlations from :math:`P = R^{-1}`, with their t statistics on :math:`n - p`
    degrees of freedom:

    .. math::

        r_{ij \\cdot \\mathrm{rest}} = -\\frac{P_{ij}}{\\sqrt{P_{ii} P_{jj}}}, \\qquad
        t_{ij} = \\frac{r \\sqrt{n - p}}{\\sqrt{1 - r^2}}.

    The tests assume a normal population and test orthogonality, not harm; with large n they
    reject at trivial collinearity. The caveats travel in ``notes``.

    When R is singular (an exact dependency), :math:`\\ln\\det R = -\\infty`: the chi-square
    and its p-value are None, the determinant is 0.0, the F statistics of aliased variables
    (VIF None) are None, and partial correlations are None for every pair with an aliased
    variable. For pairs of variables outside every exact dependency the partial correlation
    is still defined: dropping one redundant variable per dependency leaves the span of the
    conditioning set unchanged, so it is computed from the inverse of the reduced matrix, on
    :math:`n - p + d` degrees of freedom for *d* dependencies.

    Verification: tests against Longley's data (statsmodels.datasets.longley):
    :math:`\\chi^2 = 218.556` on 15 df and :math:`\\det R = 1.57962 \\times 10^{-8}`; the
    chi-square equals Bartlett's statistic from numpy eigenvalues; p-values equal
    ``scipy.stats`` upper tails; partial correlations equal the correlation of statsmodels
    OLS residuals and the F statistics equal statsmodels' auxiliary-regression ``fvalue``,
    both to 1e-9.

    Implementation: :math:`\\ln\\det R` as twice the sum of the logarithms of the diagonal of
    the Cholesky factor (LAPACK ``potrf``), which does not underflow as a product of
    eigenvalues can; :math:`R^{-1}` from the same factor. Tail probabilities with the
    ``scipy.special`` functions behind ``scipy.stats``' survival functions (``chdtrc``,
    ``fdtrc``, ``stdtr``), called directly.

    References
    ----------
    .. [1] Farrar, D. E. and Glauber, R. R. (1967). Multicollinearity in regression analysis:
       the problem revisited. *Review of Economics and Statistics* 49(1), 92-107.
    .. [2] Bartlett, M. S. (1951). The effect of standardization on a chi-squared
       approximation in factor analysis. *Biometrika* 38, 337-344.
    .. [3] Wichers, C. R. (1975); Kumar, T. K. (1975); O'Hagan, J. and McCabe, B. (1975):
       comments on [1], *Review of Economics and Statistics* 57(3).
    """
    r = np.asarray(R, dtype=float)
    p = len(names)
    if r.shape != (p, p) or len(vif) != p:
        raise ValueError(
            f"R must be {p} x {p} and vif of length {p} to match names, "
            f"got R {r.shape} and vif of length {len(vif)}"
        )
    n = float(n)
    if spectrum is None:
        spectrum = Spectrum.of(r)
    notes = list(CAVEATS)

    log_det, factor = _log_det_cholesky(r)
    if spectrum.null_dim > 0 or log_det is None or factor is None:
        log_det = None
        factor = None
        determinant = 0.0
        notes.append(
            "R is singular (an exact linear dependency): its determinant is 0, so the "
            "chi-square statistic is infinite and is not reported."
        )
    else:
        determinant = math.exp(log_det)
    singular = factor is None

    df_fg = p * (p - 1) // 2
    multiplier = n - 1.0 - (2.0 * p + 5.0) / 6.0
    chi_square: float | None = None
    chi_p: float | None = None
    if log_det is not None and p >= 2 and multiplier > 0:
        # ln det R <= 0 for a correlation matrix; clipping keeps rounding from giving -0.0 or
        # a tiny negative statistic for an orthogonal design.
        chi_square = max(0.0, -multiplier * log_det)
        # scipy.stats.chi2.sf computes this same function; the ufunc skips its per-call
        # argument handling (about 0.1 ms, a fifth of a small request), which the guards here
        # make unnecessary: the statistic is finite and >= 0, df > 0.
        chi_p = float(scipy.special.chdtrc(df_fg, chi_square))
    elif p < 2:
        notes.append("With fewer than two predictors there is nothing to test.")

    df1 = p - 1
    df2 = n - p
    finite = np.array([v is not None for v in vif], dtype=bool)
    f_stat = np.full(p, np.nan)
    f_p = np.full(p, np.nan)
    if df1 > 0 and df2 > 0 and finite.any():
        # VIF >= 1 in exact arithmetic; rounding can leave 1 - 1e-16.
        values = np.array([float(v) for v in vif if v is not None])
        f_stat[finite] = np.maximum(0.0, (values - 1.0) * df2 / df1)
        f_p[finite] = scipy.special.fdtrc(df1, df2, f_stat[finite])  # = scipy.stats.f.sf
    variable_f = [
        VariableF(
            name=str(name),
            f=None if np.isnan(f_stat[j]) else float(f_stat[j]),
            df1=df1,
            df2=_whole(df2),
            p_value=None if np.isnan(f_p[j]) else float(f_p[j]),
        )
        for j, name in enumerate(names)
    ]
    if any(v is None for v in vif):
        notes.append("The F statistic of an aliased variable is infinite and is not reported.")

    # Partial correlations over the variables that can carry them.
    partial = np.full((p, p), np.nan)
    if singular:
        report = find_dependencies(spectrum, names)
        defined = ~report.involved & np.array([v is not None for v in vif], dtype=bool)
        kept = report.independent
        reduced = r[np.ix_(kept, kept)]
        _, kept_factor = _log_det_cholesky(reduced)
        if kept_factor is not None:
            inverse = scipy.linalg.cho_solve((kept_factor, True), np.eye(kept.size))
            where = {int(j): a for a, j in enumerate(kept)}
            scale = 1.0 / np.sqrt(np.diag(inverse))
            sub = -inverse * np.outer(scale, scale)
            for i in range(p):
                for j in range(p):
                    if defined[i] and defined[j]:
                        partial[i, j] = sub[where[i], where[j]]
        else:
            defined[:] = False
        partial_df = df2 + spectrum.null_dim
        notes.append(
            "Partial correlations involving a variable in an exact dependency are undefined "
            "and are not reported."
        )
    else:
        assert factor is not None  # not singular
        inverse = scipy.linalg.cho_solve((factor, True), np.eye(p))
        scale = 1.0 / np.sqrt(np.diag(inverse))
        partial = -inverse * np.outer(scale, scale)
        defined = np.ones(p, dtype=bool)
        partial_df = df2
    for i in range(p):
        if defined[i]:
            partial[i, i] = 1.0

    # The formula is symmetric; averaging removes rounding asymmetry of the inverse.
    partial = np.clip(0.5 * (partial + partial.T), -1.0, 1.0)
    # The upper triangle only, mirrored: ``partial`` is exactly symmetric, so the lower
    # triangle would repeat the same operations on the same numbers (the same bits), and the
    # t distribution's tail is most of the cost of this function.
    rows, cols = np.triu_indices(p, 1)
    upper = partial[rows, cols]
    off = ~np.isnan(upper) & (np.abs(upper) < 1.0)
    rows, cols, upper = rows[off], cols[off], upper[off]
    t_stat = np.full((p, p), np.nan)
    p_val = np.full((p, p), np.nan)
    if partial_df > 0 and upper.size:
        t_upper = upper * math.sqrt(partial_df) / np.sqrt(1.0 - upper * upper)
        # One vectorized call: the survival function, never 1 - cdf (scipy.stats.t.sf(|t|) is
        # this same stdtr(df, -|t|)).
        p_upper = 2.0 * scipy.special.stdtr(partial_df, -np.abs(t_upper))
        t_stat[rows, cols] = t_stat[cols, rows] = t_upper
        p_val[rows, cols] = p_val[cols, rows] = p_upper
    empty: tuple[tuple[float | None, ...], ...] = ()
    corr_rows = _rows_with_none(partial) if tables else empty
    t_rows = _rows_with_none(t_stat) if tables else empty
    p_rows = _rows_with_none(p_val) if tables else empty
    strongest = _strongest_pairs(partial, t_stat, p_val, names)

    return Tests(
        determinant=float(determinant),
        log_determinant=log_det,
        farrar_glauber=FarrarGlauber(chi_square=chi_square, df=df_fg, p_value=chi_p),
        variable_f=tuple(variable_f),
        partial_correlations=tuple(corr_rows),
        partial_t=tuple(t_rows),
        notes=tuple(notes),
        partial_p_values=tuple(p_rows),
        partial_df=_whole(partial_df),
        strongest_partials=strongest,
    )


#: How many of the strongest partial correlations every answer carries.
STRONGEST_PAIRS = 5


def _strongest_pairs(
    partial: np.ndarray, t_stat: np.ndarray, p_val: np.ndarray, names: Sequence[str]
) -> tuple[PartialPair, ...]:
    """The largest partial correlations in absolute value, at most STRONGEST_PAIRS pairs.

    Ties keep the order of the predictors (a stable sort on the upper triangle), so the same
    input gives the same pairs.
    """
    p = partial.shape[0]
    rows, cols = np.triu_indices(p, 1)
    strength = np.abs(partial[rows, cols])
    defined = ~np.isnan(strength)
    rows, cols, strength = rows[defined], cols[defined], strength[defined]
    order = np.argsort(-strength, kind="stable")[:STRONGEST_PAIRS]

    def value(a: np.ndarray, i: int, j: int) -> float | None:
        v = float(a[i, j])
        return None if math.isnan(v) else v

    return tuple(
        PartialPair(
            first=names[i],
            second=names[j],
            correlation=float(partial[i, j]),
            t=value(t_stat, i, j),
            p_value=value(p_val, i, j),
        )
        for i, j in zip(rows[order].tolist(), cols[order].tolist(), strict=True)
    )
