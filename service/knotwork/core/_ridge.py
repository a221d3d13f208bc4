"""Ridge trace and the published choices of the ridge constant k, on the correlation scale."""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
import scipy.optimize

from knotwork_contract import Ridge, RidgeChoice, RidgePoint

from ._dependencies import INVOLVED_TOL, Spectrum
from ._errors import InputError, OptionError, Problem
from ._regression import Regression

#: The scale every k is stated on: the predictors' correlation matrix (Z'Z = R).
K_SCALE = "correlation"

#: Number of points in the default grid (k = 0 and this many minus one log-spaced values).
GRID_POINTS = 100

#: The default grid runs from ``lambda_ref / GRID_SPAN`` (the smallest eigen-direction shrunk by
#: about 1%) to ``GRID_SPAN * lambda_ref`` (shrunk to about 1%), or further to ``1/(4 T)``.
GRID_SPAN = 100.0

#: Relative width at which the bisection for the VIF-threshold k stops.
BISECTION_RTOL = 1e-10

#: Values of k evaluated at once in each round of the search for the VIF-threshold k.
_BRACKET_POINTS = 34

HKB = "hoerl_kennard_baldwin"
LAWLESS_WANG = "lawless_wang"
GCV = "gcv"
VIF_THRESHOLD = "vif_threshold"

_REFERENCES = {
    HKB: "Hoerl, Kennard & Baldwin (1975), Communications in Statistics 4(2), 105-123",
    LAWLESS_WANG: "Lawless & Wang (1976), Communications in Statistics A5(4), 307-323",
    GCV: "Golub, Heath & Wahba (1979), Technometrics 21(2), 215-223",
    VIF_THRESHOLD: "smallest k with every ridge VIF (Marquardt 1970) at or below the threshold",
}


_NOTES = (
    "k is on the correlation scale (Z'Z = R); for predictors and response scaled to unit "
    "variance the same fit has penalty (n - 1) k (n k without intercept).",
    "Ridge coefficients are shrunk toward zero on purpose: they are biased, and ordinary "
    "least-squares standard errors and tests do not apply to them.",
    "Ridge VIFs measure the variance of the shrunk coefficients relative to an orthogonal "
    "design; they can fall below 1 and are not the same quantity as ordinary VIFs.",
    "The VIF threshold is a rule of thumb from common practice, and no choice of k is "
    "authoritative; decisions on regulated models follow local rules and qualified review.",
)


class _Eigen:
    """The eigen-decomposition in the form every ridge quantity uses, null directions zeroed."""

    def __init__(self, m: np.ndarray, spectrum: Spectrum | None, r: np.ndarray | None) -> None:
        spec = spectrum if spectrum is not None else Spectrum.of(m)
        p = spec.values.shape[0]
        self.p = p
        self.null_dim = spec.null_dim
        null = np.arange(p) >= p - spec.null_dim
        # In exact arithmetic the null eigenvalues are 0 and r_xy has no component along them
        # (it lies in the span of the predictors), so they contribute nothing for k > 0.
        self.l = np.where(null, 0.0, spec.values)
        self.v = spec.vectors
        self.vv = spec.vectors**2
        self.pos = self.l > 0.0
        self.lmax = float(self.l[0]) if p else 1.0
        self.lref = float(self.l[self.pos].min()) if self.pos.any() else 1.0
        if spec.null_dim:
            self.involved = np.linalg.norm(spec.null_basis, axis=1) >= INVOLVED_TOL
        else:
            self.involved = np.zeros(p, dtype=bool)
        self.c: np.ndarray | None = None
        self.c2: np.ndarray | None = None
        if r is not None:
            c = spec.vectors.T @ r
            c[null] = 0.0
            self.c = c
            self.c2 = c * c

    def weights(self, ks: np.ndarray) -> np.ndarray:
        """l_i / (l_i + k)^2 for every eigenvalue and k, shape (p, len(ks)); 0 on null ones."""
        lam = self.l[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            w = lam / (lam + ks[None, :]) ** 2
        return np.where(self.pos[:, None], w, 0.0)

    def vifs(self, ks: np.ndarray) -> np.ndarray:
        vifs: np.ndarray = self.vv @ self.weights(ks)
        return vifs

    def max_vif(self, k: float) -> float:
        return float(np.max(self.vifs(np.array([k]))))

    def edf(self, ks: np.ndarray) -> np.ndarray:
        lam = self.l[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            f = lam / (lam + ks[None, :])
        total: np.ndarray = np.where(self.pos[:, None], f, 0.0).sum(axis=0)
        return total

    def rss(self, ks: np.ndarray) -> np.ndarray:
        """Residual sum of squares as a share of SST: 1 - sum c_i^2 (l_i + 2k) / (l_i + k)^2."""
        assert self.c2 is not None
        lam = self.l[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            g = (lam + 2 * ks[None, :]) / (lam + ks[None, :]) ** 2
        g = np.where(self.pos[:, None], g, 0.0)
        return 1.0 - self.c2 @ g

    def coefficients(self, ks: np.ndarray) -> np.ndarray:
        assert self.c is not None
        lam = self.l[:, None]
        with np.errstate(divide="ignore", invalid="ignore"):
            g = self.c[:, None] / (lam + ks[None, :])
        g = np.where(self.pos[:, None], g, 0.0)
        return self.v @ g


def default_grid(
    eigenvalues: np.ndarray, threshold: float, points: int = GRID_POINTS
) -> np.ndarray:
    """k = 0, then log-spaced values from lambda_ref / 100 to max(100 lambda_ref, 1 / (4 T)).

    ``lambda_ref`` is the smallest eigenvalue of R that is not numerically zero; the
    direction belonging to it keeps about 99% of its length at the low end and about 1% at
    100 lambda_ref. Every ridge VIF is at most 1/(4k) (since l/(l + k)^2 <= 1/(4k)), so the grid
    reaches a k where all of them are under the threshold T.
    """
    lam = eigenvalues[eigenvalues > 0]
    lref = float(lam.min()) if lam.size else 1.0
    lo = lref / GRID_SPAN
    hi = max(GRID_SPAN * lref, 1.0 / (4.0 * threshold))
    return np.concatenate([[0.0], np.geomspace(lo, hi, points - 1)])


def _opt(x: float) -> float | None:
    return float(x) if math.isfinite(x) else None


def _smallest_k_under(eig: _Eigen, threshold: float) -> tuple[float | None, str | None]:
    """Smallest k with every ridge VIF at or below the threshold, by bracketing in log k.

    The largest ridge VIF decreases in k (each term l/(l + k)^2 does), and is at most 1/(4k),
    so ``hi = 1/(4T)`` always satisfies the bound. Decades below it locate the crossing, then
    each round evaluates the bracket at ``_BRACKET_POINTS`` log-spaced values at once and keeps
    the sub-interval where the bound starts to hold, until its relative width is at most
    ``BISECTION_RTOL``: the same answer as bisection, in about 8 evaluations instead of 40.
    """
    if eig.null_dim == 0 and eig.max_vif(0.0) <= threshold:
        return 0.0, "every VIF is already at or below the threshold without shrinkage"
    hi = 1.0 / (4.0 * threshold)
    floor = eig.lref * 1e-12
    decades = int(math.log10(hi / floor)) + 2 if 0 < floor < hi else 1
    ks = hi / 10.0 ** np.arange(1, decades + 1)
    ks = ks[ks >= floor]  # k below lambda_ref * 1e-12 is not looked at
    ok = eig.vifs(ks).max(axis=0) <= threshold
    if ok.all():
        return None, (
            "every k > 0 brings the ridge VIFs under the threshold (they tend to those of "
            "the pseudo-inverse as k falls, because of the exact dependency), but at k = 0 "
            "they are not finite: there is no smallest k"
        )
    first_bad = int(np.argmin(ok))  # ks fall, so the first failing decade bounds from below
    lo = float(ks[first_bad])
    hi = float(ks[first_bad - 1]) if first_bad > 0 else hi
    while hi / lo - 1.0 > BISECTION_RTOL:
        inner = np.geomspace(lo, hi, _BRACKET_POINTS)[1:-1]
        good = eig.vifs(inner).max(axis=0) <= threshold
        j = int(np.argmax(good)) if good.any() else inner.size  # first k that satisfies
        new_lo = float(inner[j - 1]) if j > 0 else lo
        new_hi = float(inner[j]) if j < inner.size else hi
        if (new_lo, new_hi) == (lo, hi):  # the grid no longer separates floats
            break
        lo, hi = new_lo, new_hi
    return hi, None


def _gcv(eig: _Eigen, dof: float) -> tuple[float | None, str | None]:
    """Minimize V(k) = RSS(k) / (n' - edf(k))^2 over k >= 0 (n' = n - 1, or n without intercept).

    A log grid from lambda_ref * 1e-6 to lambda_max * 1e4 (401 points) and k = 0 locates the
    minimum; a bounded Brent search in log k between the neighbours of the best grid point
    refines it.
    """

    def v(ks: np.ndarray) -> np.ndarray:
        den = dof - eig.edf(ks)
        with np.errstate(divide="ignore", invalid="ignore"):
            out = eig.rss(ks) / den**2
        return np.where(den > 0, out, np.inf)

    ks = np.geomspace(eig.lref * 1e-6, eig.lmax * 1e4, 401)
    values = v(ks)
    v0 = float(v(np.array([0.0]))[0])
    i = int(np.argmin(values))
    if not math.isfinite(values[i]):
        return None, "the residual degrees of freedom are not positive anywhere"
    if v0 <= values[i]:
        return 0.0, "GCV is smallest without shrinkage"
    if i == len(ks) - 1:
        return float(ks[-1]), (
            "GCV keeps falling as k grows: the response is barely explained by the predictors; "
            "k is the upper end of the search"
        )
    t_lo = math.log(ks[max(i - 1, 0)])
    t_hi = math.log(ks[i + 1])
    # The same V(k) for one k, over the non-null directions only (the others add zeros):
    # Brent's steps are scalar, and the array version's masks cost more than its arithmetic.
    assert eig.c2 is not None
    lam, c2 = eig.l[eig.pos], eig.c2[eig.pos]

    def v_at(t: float) -> float:
        k = math.exp(t)
        q = lam + k
        den = dof - float(np.sum(lam / q))
        if den <= 0:
            return math.inf
        return (1.0 - float(np.sum(c2 * (lam + 2.0 * k) / (q * q)))) / (den * den)

    res = scipy.optimize.minimize_scalar(
        v_at,
        bounds=(t_lo, t_hi),
        method="bounded",
        options={"xatol": 1e-10},
    )
    k = math.exp(float(res.x))
    if float(res.fun) > values[i]:  # pragma: no cover - Brent returns at least as good a point
        k = float(ks[i])
    return k, None


def _validate_grid(grid: Sequence[float]) -> np.ndarray:
    values = np.asarray(list(grid), dtype=float)
    problems = [
        Problem(f"/ridge/grid/{i}", f"k must be a finite number >= 0, got {v!r}")
        for i, v in enumerate(values.tolist())
        if not (math.isfinite(v) and v >= 0)
    ]
    if values.size == 0:
        problems.append(Problem("/ridge/grid", "the grid needs at least one value of k"))
    if problems:
        raise OptionError("invalid ridge grid", problems)
    return values


def ridge_analysis(
    M: np.ndarray,
    names: Sequence[str],
    *,
    regression: Regression,
    threshold: float,
    grid: Sequence[float] | None = None,
    spectrum: Spectrum | None = None,
) -> Ridge:
    """Ridge trace (VIFs, effective df, coefficients) and the published choices of k.

    Parameters
    ----------
    M
        The predictors' correlation matrix (p, p), or their cosine matrix without intercept.
    names
        Predictor names in matrix order.
    regression
        The sample size and whether the model has an intercept (residual df n - p - 1, else
        n - p); the response's correlations with the predictors (without them only VIFs,
        effective df and the ``vif_threshold`` choice are computed); the scales and means for
        coefficients and the intercept in original units.
    threshold
        VIF threshold of the ``vif_threshold`` rule (a rule of thumb: 5 or 10).
    grid
        Values of k on the correlation scale; None for the default grid (see
        :func:`default_grid`).
    spectrum
        The eigen-decomposition of ``M`` when already computed.

    Returns
    -------
    Ridge

    Raises
    ------
    OptionError
        A grid value that is negative or not finite; a threshold below 1.

    Notes
    -----
    With :math:`R = V \\Lambda V^\\top`, :math:`c = V^\\top r_{xy}` and :math:`\\lambda_i` the
    eigenvalues (Hoerl & Kennard 1970; Marquardt 1970):

    .. math::

        b(k) = (R + kI)^{-1} r_{xy} = V\\,\\mathrm{diag}(1/(\\lambda_i + k))\\,c, \\qquad
        \\mathrm{VIF}_j(k) = [(R + kI)^{-1} R (R + kI)^{-1}]_{jj}
            = \\sum_i v_{ji}^2 \\lambda_i / (\\lambda_i + k)^2,

    effective df :math:`\\sum_i \\lambda_i/(\\lambda_i + k)`, and the residual sum of squares as a
    share of the total :math:`1 - \\sum_i c_i^2 (\\lambda_i + 2k)/(\\lambda_i + k)^2`. Original
    units: :math:`\\beta_j = b_j s_y / s_j`, intercept :math:`\\bar y - \\sum_j \\beta_j \\bar x_j`.
    Choices of k, with :math:`b = R^{-1} r_{xy}`, :math:`R_y^2 = r_{xy}^\\top b` and
    :math:`s^2 = (1 - R_y^2)/(n - p - 1)`: Hoerl-Kennard-Baldwin :math:`p s^2 / b^\\top b`;
    Lawless-Wang :math:`p s^2 / R_y^2`; generalized cross-validation minimizes
    :math:`\\mathrm{RSS}(k) / (n - 1 - \\mathrm{edf}(k))^2` (Golub, Heath & Wahba 1979; no rows
    needed); ``vif_threshold`` is the smallest k with every ridge VIF at or below the
    threshold. Without intercept, n - 1 becomes n and n - p - 1 becomes n - p. With an exact
    dependency the null directions contribute nothing (the limit is the minimum-norm fit);
    the rules needing the OLS fit are then not defined.

    Verification: Longley (statsmodels.datasets): k_HKB 0.000400815, k_LW 0.00302769 and the
    ridge VIFs at k = 0.01 (17.1640, 3.45422, 2.73104, 2.10435, 13.7889, 9.99575) to 1e-6
    (docs/numerics.md check values); coefficients equal scikit-learn's ``Ridge`` on standardized
    data with ``alpha = (n - 1) k`` to 1e-8 (diabetes and Longley); VIFs, effective df and
    residuals equal direct matrix formulas (inverse of R + kI) on random designs; GCV equals a
    brute-force minimization of the formula computed from rows (hat-matrix trace).

    Implementation: one symmetric eigen-decomposition (shared with the other diagnostics),
    then every k costs O(p^2): the whole trace is two matrix products with the p x m matrix
    of eigen-weights. The VIF-threshold k is found by bisection in log k to a relative
    width of 1e-10 (about 40 evaluations of O(p^2)); GCV by a grid and a bounded Brent search.

    References
    ----------
    .. [1] Hoerl, A. E. & Kennard, R. W. (1970). Ridge regression: biased estimation for
       nonorthogonal problems. Technometrics 12(1), 55-67.
    .. [2] Marquardt, D. W. (1970). Generalized inverses, ridge regression, biased linear
       estimation, and nonlinear estimation. Technometrics 12, 591-612.
    .. [3] Hoerl, A. E., Kennard, R. W. & Baldwin, K. F. (1975). Ridge regression: some
       simulations. Communications in Statistics 4(2), 105-123 (details from memory).
    .. [4] Lawless, J. F. & Wang, P. (1976). A simulation study of ridge and other regression
       estimators. Communications in Statistics A5(4), 307-323 (details from memory).
    .. [5] Golub, G. H., Heath, M. & Wahba, G. (1979). Generalized cross-validation as a
       method for choosing a good ridge parameter. Technometrics 21(2), 215-223.
    """
    m = np.asarray(M, dtype=float)
    p = len(names)
    if m.shape != (p, p):
        raise InputError.at("/matrix", f"expected a {p} x {p} matrix, got shape {m.shape}")
    eig = _Eigen(m, spectrum, regression.r_xy)
    dof = regression.dof
    residual_df = dof - p
    if grid is None:
        ks = default_grid(eig.l, threshold)
        grid_rule = (
            f"k = 0, then {GRID_POINTS - 1} values log-spaced from lambda_min/{GRID_SPAN:g} to "
            f"max({GRID_SPAN:g} lambda_min, 1/(4 threshold)), lambda_min the smallest non-zero "
            "eigenvalue of the matrix"
        )
    else:
        ks = _validate_grid(grid)
        grid_rule = "given"
    # The whole trace as a few array operations, turned into Python numbers once: per-point
    # numpy calls cost more than the arithmetic at the sizes a request has.
    vifs = eig.vifs(ks)  # (p, m)
    edf = eig.edf(ks)
    zero_aliased = eig.null_dim > 0
    have_y = eig.c is not None
    vif_rows = vifs.T.tolist()
    max_vifs = vifs.max(axis=0).tolist()
    edf_list = edf.tolist()
    # Filled only when the response is known (and the scales, and the means, for the last two).
    rss_list: list[float] = []
    coef_rows: list[list[float]] = []
    beta_rows: list[list[float]] = []
    icpt_list: list[float] = []
    if have_y:
        coefs = eig.coefficients(ks)
        rss_list = eig.rss(ks).tolist()
        coef_rows = coefs.T.tolist()
        units = regression.original(coefs)
        if units is not None:
            betas, icpts = units
            beta_rows = betas.T.tolist()
            if icpts is not None:
                icpt_list = icpts.tolist()
    trace = []
    for i, k in enumerate(ks.tolist()):
        vif_list: list[float | None] = list(vif_rows[i])
        max_vif: float | None = max_vifs[i]
        aliased_point = k == 0.0 and zero_aliased
        if aliased_point:
            vif_list = [None if a else v for v, a in zip(vif_list, eig.involved, strict=True)]
            max_vif = None
        coef_t = orig = icpt = r2 = resvar = None
        if have_y:
            r2 = 1.0 - rss_list[i]
            den = dof - edf_list[i]
            resvar = rss_list[i] * dof / den if den > 0 else None
            if not aliased_point:
                coef_t = tuple(coef_rows[i])
                orig = tuple(beta_rows[i]) if beta_rows else None
                icpt = icpt_list[i] if icpt_list else None
        trace.append(
            RidgePoint(
                k=k,
                vif=tuple(vif_list),
                max_vif=max_vif,
                effective_df=edf_list[i],
                coefficients=coef_t,
                r_squared=r2,
                residual_variance=resvar,
                original_coefficients=orig,
                original_intercept=icpt,
            )
        )

    def choice(rule: str, k: float | None, note: str | None) -> RidgeChoice:
        if k is None:
            return RidgeChoice(
                rule=rule,
                k=None,
                max_vif=None,
                effective_df=None,
                r_squared=None,
                coefficients=None,
                original_coefficients=None,
                reference=_REFERENCES[rule],
                note=note,
            )
        kk = np.array([k])
        mv = None if (k == 0.0 and zero_aliased) else float(eig.vifs(kk).max())
        r2 = b_t = orig = None
        if have_y:
            r2 = float(1.0 - eig.rss(kk)[0])
            if not (k == 0.0 and zero_aliased):
                b = eig.coefficients(kk)[:, 0]
                b_t = tuple(b.tolist())
                units = regression.original(b)
                orig = None if units is None else tuple(units[0].tolist())
        return RidgeChoice(
            rule=rule,
            k=float(k),
            max_vif=mv,
            effective_df=float(eig.edf(kk)[0]),
            r_squared=r2,
            coefficients=b_t,
            original_coefficients=orig,
            reference=_REFERENCES[rule],
            note=note,
        )

    # The caller's own threshold first, then generalised cross-validation, then the two
    # closed forms in the order they were published.
    k_vif, note = _smallest_k_under(eig, float(threshold))
    choices = [choice(VIF_THRESHOLD, k_vif, note)]
    if not have_y:
        none = "needs the response's correlations with the predictors"
        choices += [choice(rule, None, none) for rule in (GCV, HKB, LAWLESS_WANG)]
    else:
        assert eig.c2 is not None
        k_gcv, gcv_note = _gcv(eig, dof)
        choices.append(choice(GCV, k_gcv, gcv_note))
        if zero_aliased:
            why = "not defined: an exact dependency leaves the least-squares fit not unique"
            choices += [choice(HKB, None, why), choice(LAWLESS_WANG, None, why)]
        elif residual_df <= 0:
            why = "not defined: no residual degrees of freedom (n - p - 1 <= 0)"
            choices += [choice(HKB, None, why), choice(LAWLESS_WANG, None, why)]
        else:
            ry2 = float(np.sum(eig.c2 / eig.l))
            bb = float(np.sum(eig.c2 / eig.l**2))
            s2 = (1.0 - ry2) / residual_df
            k_hkb = p * s2 / bb if bb > 0 else math.inf
            k_lw = p * s2 / ry2 if ry2 > 0 else math.inf
            zero = "not defined: the response is uncorrelated with every predictor"
            choices.append(
                choice(HKB, k_hkb, None) if math.isfinite(k_hkb) else choice(HKB, None, zero)
            )
            choices.append(
                choice(LAWLESS_WANG, k_lw, None)
                if math.isfinite(k_lw)
                else choice(LAWLESS_WANG, None, zero)
            )
    return Ridge(
        k_scale=K_SCALE,
        unit_variance_factor=dof,
        threshold=float(threshold),
        grid_rule=grid_rule,
        trace=tuple(trace),
        choices=tuple(choices),
        residual_df=float(residual_df),
        notes=_NOTES,
    )
