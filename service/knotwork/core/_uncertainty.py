"""Sampling uncertainty of VIFs and of the removal decision.

Two ways to say how far a sample VIF may be from the population value:

- ``normal``: the exact sampling distribution of the squared multiple correlation
  :math:`R_j^2` when the predictors are jointly normal (Fisher 1928), inverted for an interval
  on the population VIF and a one-sided p-value against the threshold. Needs only the VIFs, n
  and p, so it works for every input kind.
- ``bootstrap``: resampling rows (Efron & Tibshirani 1993); percentile intervals for every VIF
  and GVIF, the share of replicates above the threshold, and how stable the proposed removal
  sequence is. Needs the rows.

Everything here is pure numpy/scipy; :func:`knotwork.core.assess` calls it when
``options.uncertainty`` is set (``core/_assess.py``), with the design's rows for the bootstrap.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Collection, Mapping, Sequence
from dataclasses import dataclass

import numpy as np
from scipy import special

from knotwork_contract import OptionsError
from knotwork_contract import check_options as contract_check_options
from knotwork_contract import escape as esc

from ._dependencies import NULL_RTOL, Spectrum, find_dependencies
from ._errors import InputError, KnotworkError, OptionError, Problem, TooFewDataError
from ._inflation import generalized_inflation, variance_inflation
from ._interrupt import checkpoint
from ._removal import removal_sequence
from ._summary import Summary

# The bounds of level, replicates and seed (and the cost of a replicate) are the contract's:
# knotwork_contract.UncertaintyOptions, REPLICATES_MIN, REPLICATES_MAX, SEED_MAX.

#: Truncation bound of the mixture series: every CDF value computed here is within this of the
#: exact value, apart from rounding (see :func:`r2_cdf`).
SERIES_TAIL = 1e-13
#: Windows of up to this many consecutive mixture terms are summed term by term; longer ones
#: (large n with a large VIF) are summed by quadrature (see :class:`_Series`).
EXACT_TERMS = 1 << 13
#: Largest n for the distribution of R^2 and the normal intervals. Measured: with VIF = 30 the
#: computed intervals keep their expected width (shrinking as 1/sqrt(n)) up to n = 1e13 and
#: collapse too early from about 3e13, as the series' terms lose their digits; 1e12 keeps a
#: margin. Beyond it the sampling error is below a millionth of the VIF anyway.
MAX_N = 1e12
#: Quadrature points per smoothness scale of the summand, and the smallest scale (in terms)
#: from which a sum is replaced by an integral.
_KAPPA = 4.0
_SMOOTH = 16.0
#: Segments sharing one running sum in :func:`_segment_cumsum`.
_SEGMENTS = 64

_NORMALITY_NOTE = (
    "The normal intervals assume the predictors are jointly normal (Fisher's exact "
    "distribution of R_j^2); indicator columns of a categorical variable are not normal, so "
    "for them the interval is an approximation."
)
_PVALUE_NOTE = (
    "threshold_p_value is one-sided, for the hypothesis that the population VIF is at most the "
    "threshold; the threshold itself is a rule of thumb from common practice."
)
_BOOTSTRAP_NOTE = (
    "Percentile intervals (Efron & Tibshirani 1993, ch. 13) from resampling rows with "
    "replacement; shares count replicates. Replicates differ only by sampling, so a share near "
    "0 or 1 says the decision is stable for samples of this size, not that it is right."
)


# --------------------------------------------------------------------------------------------
# Options: the contract's rules, in its own words


def _is_number(x: object) -> bool:
    return isinstance(x, int | float | np.integer | np.floating) and not isinstance(x, bool)


def _is_whole(x: object) -> bool:
    return isinstance(x, int | np.integer) and not isinstance(x, bool)


def _plain(x: object) -> object:
    """numpy scalars as the Python values the contract checks (a float stays a float)."""
    return x.item() if isinstance(x, np.generic) else x


def _check_settings(
    *,
    threshold: object,
    level: object,
    replicates: object = None,
    seed: object = None,
    method: str = "normal",
) -> None:
    """Check the settings of :func:`normal_intervals` or :func:`bootstrap_intervals` by the
    contract's rules for ``threshold`` and ``uncertainty`` (the same bounds and wording as the
    service's answer to the same value in a request).

    Raises
    ------
    OptionError
        Pointers ``/threshold``, ``/uncertainty/level``, ``/uncertainty/replicates``,
        ``/uncertainty/seed``.
    """
    document: dict[str, object] = {"method": method, "level": _plain(level)}
    if replicates is not None:
        document["replicates"] = _plain(replicates)
    if seed is not None:
        document["seed"] = _plain(seed)
    try:
        contract_check_options({"threshold": _plain(threshold), "uncertainty": document})
    except OptionsError as exc:
        where = exc.pointer.removeprefix("/options")
        raise OptionError(exc.reason, [Problem(where, exc.reason)]) from None


# --------------------------------------------------------------------------------------------
# Fisher's distribution of R^2


def _bisect(
    pred: Callable[[np.ndarray], np.ndarray], left: np.ndarray, right: np.ndarray, steps: int
) -> tuple[np.ndarray, np.ndarray]:
    """Narrow integer brackets where ``pred(left)`` is False (or left = -1) and ``pred(right)``
    True, by at most ``steps`` halvings; returns the final (left, right): pred stays False at
    every left end and True at every right end."""
    left = left.copy()
    right = right.copy()
    for _ in range(steps):
        open_ = right - left > 1
        if not open_.any():
            break
        mid = np.floor((left + right) / 2)
        hit = pred(mid)
        right = np.where(open_ & hit, mid, right)
        left = np.where(open_ & ~hit, mid, left)
    return left, right


def _window(
    x: np.ndarray, y: np.ndarray, h: float, b: float, tail: float
) -> tuple[np.ndarray, np.ndarray]:
    """Terms of the mixture whose beta CDF is neither 1 nor 0 to within ``tail``.

    With :math:`I_i = I_x(h + i, b)` (decreasing in i) and :math:`J_i = 1 - I_i`, returns the
    first and last term ``lo``, ``hi`` such that :math:`J_i \\le` tail for every i < lo and
    :math:`I_i \\le` tail for every i > hi. Starts from the normal approximation of the
    transition (centre :math:`b x / (1 - x) - h` terms, spread
    :math:`\\sqrt{\\alpha(\\alpha + b)/b}`), widens until the ends are verified with
    ``betainc``, then trims each end by bisection to within a fraction of the spread.
    """
    alpha = b * x / y
    centre = alpha - h
    sd = np.sqrt(alpha * (alpha + b) / b) + 1.0
    z = math.sqrt(2.0 * math.log(1.0 / tail)) + 1.0

    def upper_done(i: np.ndarray) -> np.ndarray:
        return _ibeta(h + i, b, x, y) <= tail

    def lower_done(i: np.ndarray) -> np.ndarray:
        return _ibeta(b, h + i, y, x) > tail

    hi = np.maximum(np.ceil(centre + z * sd), 0.0)
    while True:
        bad = ~upper_done(hi)
        if not bad.any():
            break
        hi = np.where(bad, hi + np.maximum(hi - centre, sd), hi)
    lo = np.clip(np.floor(centre - z * sd), 0.0, hi)
    while True:
        bad = (lo > 0) & lower_done(lo)
        if not bad.any():
            break
        lo = np.where(bad, np.maximum(lo - np.maximum(centre - lo, sd), 0.0), lo)
    # Trim: the first i with I_i <= tail lies in (inner, hi]; the first with J_i > tail in
    # (lo, inner], or it is lo itself.
    inner = np.clip(np.floor(centre), lo, hi)
    start = np.where(upper_done(inner), lo - 1.0, inner)
    _, hi = _bisect(upper_done, start, hi, 6)
    inner = np.minimum(inner, hi)
    stop = np.where(lower_done(inner), inner, hi)
    # The window must start where J is still <= tail: the bracket's left end, not its right.
    below, _ = _bisect(lower_done, np.where(lo > 0, lo, -1.0), stop, 6)
    lo = np.maximum(below, 0.0)
    return lo, hi


class _Series:
    """Fisher's mixture for fixed observed values of R^2, ready to evaluate at any rho^2.

    For element e (an observed :math:`x_e = R^2`, with :math:`y_e = 1 - x_e` given separately so
    that it keeps its digits near 1) it holds the mixture terms that matter for every rho^2:
    the window ``lo..hi`` of :func:`_window` depends on x only, so the beta CDFs are computed
    once and each evaluation at a new rho^2 costs one weight per term.

    Two ways to sum a window:

    - term by term (windows of at most ``EXACT_TERMS`` terms, the usual case): weights in log
      space relative to the window's first term, :math:`\\log w_i = \\log w_{lo}
      + (i - lo)\\log\\rho^2 + c_i` with :math:`c_i = \\ln\\frac{\\Gamma(a + i)\\, lo!}
      {\\Gamma(a + lo)\\, i!}` (:func:`_lgamma_diff`) and :math:`\\log w_{lo}` in Loader's
      saddle-point form (:func:`_nb_logpmf`), so no log term is a small remainder of huge
      ``gammaln`` values; the terms below the window (where :math:`I_i = 1` to within the
      tail) are added exactly as the negative-binomial CDF
      :math:`P(X < lo) = I_{1-\\rho^2}(a, lo)`. The beta CDFs :math:`I_i` and
      :math:`J_i = 1 - I_i` are sums of the positive steps :math:`D_i` from the end where each
      is small, so both keep their relative accuracy.
    - by quadrature (longer windows, which come with a large n and a large VIF): summation by
      parts turns the series into :math:`\\sum_m D_m P(X \\le m)` with
      :math:`D_m = I_m - I_{m+1} = \\frac{\\Gamma(a + m)}{\\Gamma(h + m + 1)\\Gamma(b)}
      x^{h + m} (1 - x)^b`, a smooth bell independent of rho^2, times the negative-binomial CDF
      :math:`I_{1 - \\rho^2}(a, m + 1)`, a smooth step. Where both vary over at least
      ``_SMOOTH`` terms the sum equals the integral up to a Poisson-summation term of order
      :math:`e^{-2\\pi^2 16^2}`, and the integral is taken by the trapezoidal rule in
      :math:`\\log m` with ``_KAPPA`` points per smoothness scale (an error of order
      :math:`e^{-2\\pi^2\\kappa^2}` for such bell-shaped integrands; Trefethen & Weideman
      2014). Terms below the smooth region are summed one by one, joined to the integral by a
      smooth ``erfc`` partition of unity so that neither part has a sharp end.

    References
    ----------
    .. [1] Loader, C. (2000). Fast and accurate computation of binomial probabilities.
       Technical note (the algorithm behind R's ``dbinom`` and ``dnbinom``).
    .. [2] Trefethen, L. N. and Weideman, J. A. C. (2014). The exponentially convergent
       trapezoidal rule. SIAM Review 56(3), 385-458.
    .. [3] Maechler, M. (2012). Accurately computing log(1 - exp(-|a|)). Vignette of the R
       package Rmpfr.

    (The details of these three references are from memory, not checked.)
    """

    def __init__(self, x: np.ndarray, y: np.ndarray, n: float, k: int, tail: float) -> None:
        self.a = (n - 1.0) / 2.0
        self.b = b = (n - 1.0 - k) / 2.0
        self.h = h = k / 2.0
        self.size = e_count = x.shape[0]
        self.f0 = _ibeta(h, b, x, y)  # F at rho = 0: the central beta CDF
        self.s0 = _ibeta(b, h, y, x)
        lo, hi = _window(x, y, h, b, tail)
        self.lo, self.hi = lo, hi
        self.terms = hi - lo + 1.0
        lx = np.log1p(-y)
        ly = np.log(y)
        self.exact = np.flatnonzero(self.terms <= EXACT_TERMS)
        self.quad = np.flatnonzero(self.terms > EXACT_TERMS)
        self._build_exact(lx, ly, x, y)
        self._build_quad(x, y)
        self.count = e_count

    # -- term by term ---------------------------------------------------------------------

    def _build_exact(self, lx: np.ndarray, ly: np.ndarray, x: np.ndarray, y: np.ndarray) -> None:
        a, b, h = self.a, self.b, self.h
        el = self.exact
        m = self.terms[el].astype(np.intp)
        starts = np.zeros(el.shape[0], dtype=np.intp)
        np.cumsum(m[:-1], out=starts[1:])
        lo = self.lo[el]
        first = float(lo.min()) if el.size else 0.0
        at = np.arange(int(m.sum())) - np.repeat(starts - (lo - first).astype(np.intp), m)
        i = at + first
        step = i - np.repeat(lo, m)
        # Every term relative to the window's first one: log w_i - log w_lo =
        # (i - lo) log rho^2 + c_i and log D_i - log D_lo = (i - lo) log x + e_i, with c_i and
        # e_i differences of ln Gamma taken in the stable form of _lgamma_diff. The first terms
        # themselves are negative-binomial probabilities in the saddle-point form of
        # _nb_logpmf. Summing the huge ln Gamma values directly would cost about
        # eps * ln Gamma(a + i) (1e-9 at n = 1e6) in every log term.
        span = int(self.hi[el].max() - first) + 1 if el.size else 0
        if 0 < span <= i.shape[0]:
            # One n, many overlapping windows: tabulate over their union, from its start.
            r = first + np.arange(span, dtype=float)
            g_a = _lgamma_diff(a + r, a + first)
            g_1 = _lgamma_diff(r + 1.0, first + 1.0)
            g_h = _lgamma_diff(h + r + 1.0, h + first + 1.0)
            base = (lo - first).astype(np.intp)
            c = (g_a - g_1)[at] - np.repeat((g_a - g_1)[base], m)
            e = (g_a - g_h)[at] - np.repeat((g_a - g_h)[base], m)
        else:
            lo_r = np.repeat(lo, m)
            g_a = _lgamma_diff(a + i, a + lo_r)
            c = g_a - _lgamma_diff(i + 1.0, lo_r + 1.0)
            e = g_a - _lgamma_diff(h + i + 1.0, h + lo_r + 1.0)
        log_d = step * np.repeat(lx[el], m)
        log_d += np.repeat(_nb_logpmf(h + lo, b, y[el], x[el]), m)
        log_d += e
        d = np.exp(log_d, out=log_d)
        self.c = c
        self.step = step
        self.i = i
        self.starts = starts
        self.counts = m
        # I_i and J_i = 1 - I_i by sums of positive steps from the end where each is small, so
        # each keeps its relative accuracy where it matters.
        i_top = _ibeta(h + self.hi[el] + 1.0, b, x[el], y[el])
        j_low = _ibeta(b, h + lo, y[el], x[el])
        upto, beyond = _segment_cumsum(d, starts, m)
        upto -= d
        upto += np.repeat(j_low, m)
        beyond += np.repeat(i_top, m)
        self.big_i = beyond
        self.big_j = upto

    def _eval_exact(
        self, s: np.ndarray, pick: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Exact sums for the term-by-term elements ``self.exact[pick]`` at their s."""
        a = self.a
        if pick.shape[0] == 0:
            z = np.zeros(0)
            return z, z, z
        if pick.shape[0] == self.exact.shape[0]:
            counts, starts = self.counts, self.starts
            i, step, c = self.i, self.step, self.c
            big_i, big_j = self.big_i, self.big_j
        else:
            counts = self.counts[pick]
            starts = np.zeros(pick.shape[0], dtype=np.intp)
            np.cumsum(counts[:-1], out=starts[1:])
            pos = np.arange(int(counts.sum())) + np.repeat(self.starts[pick] - starts, counts)
            i, step, c = self.i[pos], self.step[pos], self.c[pos]
            big_i, big_j = self.big_i[pos], self.big_j[pos]
        el = self.exact[pick]
        lo, hi = self.lo[el], self.hi[el]
        p, r2, lr = _rho(s)
        t = np.repeat(lr, counts)
        t *= step
        t += c
        t += np.repeat(_nb_logpmf(lo, a, p, r2), counts)
        # Weights below e^-600 add nothing; clipping keeps exp (and the products below) out of
        # subnormal numbers, which are many times slower.
        np.maximum(t, -600.0, out=t)
        w = np.exp(t, out=t)
        wi = w * big_i
        f = np.add.reduceat(wi, starts)
        wi *= i
        fi = np.add.reduceat(wi, starts)
        w *= big_j
        sf = np.add.reduceat(w, starts)
        below = np.where(lo > 0, _ibeta(a, np.maximum(lo, 1.0), p, r2), 0.0)
        above = 1.0 - _ibeta(a, hi + 1.0, p, r2)  # P(X > hi) = 1 - I_p(a, hi + 1)
        # d/ds of the negative-binomial CDF below the window (p = e^-s, dp/ds = -p):
        # -p^a (1 - p)^(lo - 1) / B(a, lo) = -(a + lo - 1) P(X = lo - 1).
        last = np.maximum(lo - 1.0, 0.0)
        d_below = np.where(lo > 0, -(a + last) * np.exp(_nb_logpmf(last, a, p, r2)), 0.0)
        df = fi / np.expm1(s) - a * f + d_below
        return f + below, sf + above, df

    # -- by quadrature --------------------------------------------------------------------

    def _build_quad(self, x: np.ndarray, y: np.ndarray) -> None:
        a, b, h = self.a, self.b, self.h
        qd = self.quad
        lo, hi = self.lo[qd], self.hi[qd]
        smooth = _scale(lo, a, b, h) >= _SMOOTH
        # Smooth from the window's start (the usual case): trapezoidal nodes in log t for all
        # such windows at once; the others start term by term (_quadrature_nodes).
        rel = _scale(hi, a, b, h) / hi / _KAPPA
        u0, u1 = np.log(np.maximum(lo, 1.0)), np.log(hi)
        steps = np.maximum(np.ceil((u1 - u0) / rel), 2.0).astype(np.intp)
        du = (u1 - u0) / steps
        ts: list[np.ndarray] = []
        logws: list[np.ndarray] = []
        for e in range(qd.shape[0]):
            if smooth[e]:
                u = u0[e] + du[e] * np.arange(steps[e] + 1)
                t = np.exp(u)
                logw = np.log(du[e]) + u
                logw[[0, -1]] -= math.log(2.0)
            else:
                t, logw = _quadrature_nodes(float(lo[e]), float(hi[e]), a, b, h)
            ts.append(t)
            logws.append(logw)
        counts = np.array([t.shape[0] for t in ts], dtype=np.intp)
        self.q_counts = counts
        self.q_starts = np.zeros(counts.shape[0], dtype=np.intp)
        np.cumsum(counts[:-1], out=self.q_starts[1:])
        seg = np.repeat(np.arange(counts.shape[0]), counts)
        self.q_t = t_all = np.concatenate(ts) if ts else np.zeros(0)
        log_d = _nb_logpmf(h + t_all, b, y[qd][seg], x[qd][seg])
        self.q_w = np.exp(np.concatenate(logws) + log_d) if ts else np.zeros(0)
        # For the derivative only (Newton's steps), where 1e-9 relative is plenty.
        self.q_betaln = special.betaln(a, t_all + 1.0)

    def _eval_quad(
        self, s: np.ndarray, pick: np.ndarray
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Quadrature sums for the elements ``self.quad[pick]`` at their s."""
        a = self.a
        if pick.shape[0] == 0:
            z = np.zeros(0)
            return z, z, z
        counts = self.q_counts[pick]
        starts = np.zeros(pick.shape[0], dtype=np.intp)
        np.cumsum(counts[:-1], out=starts[1:])
        seg = np.repeat(np.arange(pick.shape[0]), counts)
        pos = np.arange(seg.shape[0]) + (self.q_starts[pick] - starts)[seg]
        t, w = self.q_t[pos], self.q_w[pos]
        sv = s[seg]
        p, r2, lr = _rho(sv)
        cdf = _ibeta(a, t + 1.0, p, r2)  # P(X <= t)
        sf = 1.0 - cdf
        dens = -np.exp(-a * sv + t * lr - self.q_betaln[pos])  # -p^a (1-p)^t / B(a, t + 1)
        f = np.add.reduceat(w * cdf, starts)
        g = np.add.reduceat(w * sf, starts) + self.s0[self.quad[pick]]
        df = np.add.reduceat(w * dens, starts)
        return f, g, df

    def evaluate(
        self, s: np.ndarray, which: np.ndarray | None = None
    ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """F = P(R^2 <= x), S = P(R^2 >= x) and dF/ds at s = -log(1 - rho^2) > 0.

        ``which`` (sorted element indices, default all) selects the elements; ``s`` has one
        value per selected element.
        """
        which = np.arange(self.size) if which is None else which
        f = np.empty(which.shape[0])
        g = np.empty(which.shape[0])
        df = np.empty(which.shape[0])
        for part, evaluate in ((self.exact, self._eval_exact), (self.quad, self._eval_quad)):
            pick = np.flatnonzero(np.isin(part, which))
            at = np.searchsorted(which, part[pick])
            f[at], g[at], df[at] = evaluate(s[at], pick)
        np.clip(f, 0.0, 1.0, out=f)
        np.clip(g, 0.0, 1.0, out=g)
        return f, g, df


def _ibeta(a: object, b: object, x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """Regularized incomplete beta :math:`I_x(a, b)` given both x and y = 1 - x, to an
    absolute accuracy of about machine epsilon.

    ``betainc`` forms 1 - x itself, which loses the digits of a small y; for x > 1/2 this
    uses :math:`I_x(a, b) = 1 - I_y(b, a)` with the y given. (``betaincc`` would also keep the
    relative accuracy of a small result, at about six times the cost; every use here needs
    only the absolute accuracy.)
    """
    a_, b_, x_, y_ = np.broadcast_arrays(
        np.asarray(a, dtype=float), np.asarray(b, dtype=float), x, y
    )
    out = np.empty(x_.shape)
    low = x_ <= 0.5
    out[low] = special.betainc(a_[low], b_[low], x_[low])
    high = ~low
    out[high] = 1.0 - special.betainc(b_[high], a_[high], y_[high])
    return out


def _rho(s: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """1 - rho^2 = e^-s, rho^2 and log rho^2, each to full relative accuracy (the last by
    log1p(-e^-s) for s > ln 2 and log(-expm1(-s)) below; Maechler 2012)."""
    p = np.exp(-s)
    r2 = -np.expm1(-s)
    lr = np.where(s > math.log(2.0), np.log1p(-p), np.log(r2))
    return p, r2, lr


_HALF_LOG_2PI = 0.5 * math.log(2.0 * math.pi)


def _stirlerr(z: np.ndarray) -> np.ndarray:
    """Stirling's error :math:`\\ln\\Gamma(z + 1) - (z + 1/2)\\ln z + z - \\ln\\sqrt{2\\pi}` for
    z > 0: its asymptotic series above 15 (next term below 3e-16), ``gammaln`` below."""
    z = np.asarray(z, dtype=float)
    out = np.empty(z.shape)
    big = z > 15.0
    zb = z[big]
    z2 = zb * zb
    out[big] = (1 / 12 - (1 / 360 - (1 / 1260 - (1 / 1680 - 1 / (1188 * z2)) / z2) / z2) / z2) / zb
    zs = z[~big]
    out[~big] = special.gammaln(zs + 1.0) - (zs + 0.5) * np.log(zs) + zs - _HALF_LOG_2PI
    return out


def _lgamma_diff(u: np.ndarray, v: np.ndarray | float) -> np.ndarray:
    """:math:`\\ln\\Gamma(u) - \\ln\\Gamma(v)` without the cancellation of two huge values.

    For u, v > 16: :math:`(v - 1/2)\\,\\mathrm{log1p}(d/v) + d\\ln u - d` plus the
    difference of Stirling errors (:math:`\\ln\\Gamma(z) = (z - 1/2)\\ln z - z + \\ln\\sqrt{2\\pi}
    + \\mathrm{stirlerr}(z)`), with d = u - v (exact here: the arguments are integers or
    half-integers apart); otherwise ``gammaln`` of each (then the difference is not a small
    remainder of large values).
    """
    u, v = np.broadcast_arrays(np.asarray(u, dtype=float), np.asarray(v, dtype=float))
    out = np.empty(u.shape)
    big = (u > 16.0) & (v > 16.0)
    ub, vb = u[big], v[big]
    d = ub - vb
    out[big] = (vb - 0.5) * np.log1p(d / vb) + d * np.log(ub) - d + _stirlerr(ub) - _stirlerr(vb)
    out[~big] = special.gammaln(u[~big]) - special.gammaln(v[~big])
    return out


def _bd0(x: np.ndarray, m: np.ndarray) -> np.ndarray:
    """:math:`x \\ln(x/m) + m - x` (the deviance term of Loader 2000), stably for x near m."""
    x, m = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(m, dtype=float))
    out = np.empty(x.shape)
    close = np.abs(x - m) < 0.1 * (x + m)
    xc, mc = x[close], m[close]
    v = (xc - mc) / (xc + mc)
    total = (xc - mc) * v
    term = 2.0 * xc * v
    v2 = v * v
    for j in range(1, 60):
        term = term * v2
        add = term / (2 * j + 1)
        total = total + add
        if not np.any(np.abs(add) > 1e-17 * np.abs(total)):
            break
    out[close] = total
    far = ~close
    with np.errstate(divide="ignore"):
        out[far] = special.xlogy(x[far], x[far] / m[far]) + m[far] - x[far]
    return out


def _nb_logpmf(k: np.ndarray, r: float, p: np.ndarray, q: np.ndarray) -> np.ndarray:
    """Log of :math:`\\frac{\\Gamma(r + k)}{\\Gamma(r)\\,\\Gamma(k + 1)} p^r q^k` for real k >= 0,
    with q = 1 - p given separately.

    Loader's saddle-point form (as in R's ``dnbinom``): the negative-binomial probability is
    r/(r + k) times the binomial probability of r successes in r + k trials, whose log is
    :math:`\\mathrm{stirlerr}(n) - \\mathrm{stirlerr}(r) - \\mathrm{stirlerr}(k)
    - \\mathrm{bd0}(r, n p) - \\mathrm{bd0}(k, n q) - \\tfrac12\\ln(2\\pi r k / n)` with n = r + k;
    every piece is small where the probability is not, so the result keeps its relative
    accuracy for arguments in the millions.
    """
    k, p, q = np.broadcast_arrays(
        np.asarray(k, dtype=float), np.asarray(p, dtype=float), np.asarray(q, dtype=float)
    )
    out = np.empty(k.shape)
    zero = k <= 0.0
    with np.errstate(divide="ignore"):
        out[zero] = r * np.log(p[zero])
    kk, pp, qq = k[~zero], p[~zero], q[~zero]
    n = r + kk
    with np.errstate(divide="ignore", invalid="ignore"):
        lc = (
            _stirlerr(n)
            - _stirlerr(np.full(kk.shape, r))
            - _stirlerr(kk)
            - _bd0(np.full(kk.shape, r), n * pp)
            - _bd0(kk, n * qq)
        )
        log_n = np.log(n)
        # ln(r/n) + lc - ln(2 pi r k / n) / 2
        out[~zero] = 0.5 * math.log(r) - 0.5 * log_n - 0.5 * np.log(kk) + lc - _HALF_LOG_2PI
    return out


def _segment_cumsum(
    values: np.ndarray, starts: np.ndarray, counts: np.ndarray
) -> tuple[np.ndarray, np.ndarray]:
    """Inclusive prefix and suffix sums within each contiguous segment.

    The values are non-negative and each segment sums to at most 1. One running sum serves
    ``_SEGMENTS`` segments at a time, and each segment's sums are differences of it, so the
    absolute rounding error stays below about ``_SEGMENTS`` machine epsilons.
    """
    upto = np.empty_like(values)
    beyond = np.empty_like(values)
    ends = starts + counts
    for c0 in range(0, counts.shape[0], _SEGMENTS):
        c1 = min(c0 + _SEGMENTS, counts.shape[0])
        lo, hi = int(starts[c0]), int(ends[c1 - 1])
        part = values[lo:hi]
        cs = np.cumsum(part)
        cnt = counts[c0:c1]
        before = np.zeros(c1 - c0)
        before[1:] = cs[starts[c0 + 1 : c1] - 1 - lo]
        last = cs[ends[c0:c1] - 1 - lo]
        np.subtract(cs, np.repeat(before, cnt), out=upto[lo:hi])
        np.subtract(np.repeat(last, cnt), cs, out=beyond[lo:hi])
        beyond[lo:hi] += part
    return upto, beyond


def _scale(t: np.ndarray, a: float, b: float, h: float) -> np.ndarray:
    """Smallest local width (in terms) of the summand near term t: of the negative-binomial
    CDF step (:func:`_sigma_w`) and of the beta CDF step D (:func:`_sigma_d`)."""
    al = h + t
    return np.minimum(np.sqrt((t + 1.0) * (a + t) / a), np.sqrt(al * (al + b) / b))


def _sigma_w(t: float, a: float) -> float:
    """Local width (in terms) of the negative-binomial weights or CDF step near term t."""
    return math.sqrt((t + 1.0) * (a + t) / a)


def _sigma_d(t: float, b: float, h: float) -> float:
    """Local width (in terms) of the beta CDF step D near term t."""
    al = h + t
    return math.sqrt(al * (al + b) / b)


def _quadrature_nodes(
    lo: float, hi: float, a: float, b: float, h: float
) -> tuple[np.ndarray, np.ndarray]:
    """Nodes t and log weights replacing ``sum_{m=lo}^{hi} g(m)`` for a smooth summand g.

    Terms where g may vary within ``_SMOOTH`` terms are summed one by one with weight phi(m);
    the rest is the integral of g (1 - phi) by the trapezoidal rule in log t, with phi a smooth
    step down (erfc of width ``_SMOOTH``) past the last rough term. Both widths grow with t, so
    the rough region is at the low end.
    """

    def scale(t: float) -> float:
        return min(_sigma_w(t, a), _sigma_d(t, b, h))

    tau = _SMOOTH
    rough = lo
    if scale(lo) < _SMOOTH:
        # the first t with scale(t) >= _SMOOTH (both widths increase with t)
        left, right = lo, hi
        while right - left > 1.0:
            mid = math.floor((left + right) / 2)
            if scale(mid) >= _SMOOTH:
                right = mid
            else:
                left = mid
        rough = right
    t_parts: list[np.ndarray] = []
    w_parts: list[np.ndarray] = []
    if rough > lo:
        # phi = erfc((t - centre) / tau) / 2, centre far enough past the rough terms that the
        # integral's part (1 - phi) is below 1e-17 there.
        centre = rough + 6.0 * tau
        stop = min(hi, math.ceil(centre + 6.0 * tau))
        m = np.arange(lo, stop + 1.0)
        t_parts.append(m)
        w_parts.append(np.log(0.5 * special.erfc((m - centre) / tau)))
        start = centre - 6.0 * tau
        finest = tau / (centre + 6.0 * tau)
    else:
        centre = -math.inf
        start = lo
        finest = math.inf
    if start < hi:
        rel = min(scale(hi) / hi, finest) / _KAPPA
        u0, u1 = math.log(start), math.log(hi)
        count = max(math.ceil((u1 - u0) / rel), 2)
        u = np.linspace(u0, u1, count + 1)
        du = (u1 - u0) / count
        t = np.exp(u)
        w = du * t
        w[0] *= 0.5
        w[-1] *= 0.5
        if math.isfinite(centre):
            w *= 1.0 - 0.5 * special.erfc((t - centre) / tau)
        keep = w > 0
        t_parts.append(t[keep])
        w_parts.append(np.log(w[keep]))
    return np.concatenate(t_parts), np.concatenate(w_parts)


MAX_N_REASON = (
    f"the distribution of R^2 is computed for n up to {MAX_N:g} observations, where the "
    "intervals are already narrower than a millionth of the VIF"
)


def _check_nk(n: object, k: object) -> tuple[float, int]:
    if not _is_number(n) or not math.isfinite(n):  # type: ignore[arg-type]
        raise InputError.at("/n", f"n must be a finite number; got {n!r}")
    if not _is_whole(k) or int(k) < 0:  # type: ignore[call-overload]
        raise InputError.at(
            "/p", f"the number of other predictors must be a whole number; got {k!r}"
        )
    n_, k_ = float(n), int(k)  # type: ignore[arg-type,call-overload]
    if n_ > MAX_N:
        raise InputError.at("/n", f"n = {n_:g}: {MAX_N_REASON}")
    if n_ <= k_ + 1:
        raise TooFewDataError.at(
            "/n",
            f"n = {n_:g} observations for {k_ + 1} predictors; the distribution of R^2 needs "
            "more observations than predictors",
        )
    return n_, k_


def _r2_both(
    x: object, rho2: object, n: object, k: object, tail: float
) -> tuple[np.ndarray, np.ndarray]:
    n_, k_ = _check_nk(n, k)
    xb, rb = np.broadcast_arrays(np.asarray(x, dtype=float), np.asarray(rho2, dtype=float))
    shape = xb.shape
    xs = xb.ravel().copy()
    rs = rb.ravel().copy()
    if np.isnan(xs).any() or np.isnan(rs).any():
        raise InputError.at("/x", "R^2 and rho^2 must be numbers, not NaN")
    if ((rs < 0) | (rs > 1)).any():
        raise InputError.at("/rho2", "rho^2 must lie between 0 and 1")
    cdf = np.empty(xs.shape)
    sf = np.empty(xs.shape)
    if k_ == 0:  # no other predictor: R^2 is 0 with certainty
        cdf[:] = np.where(xs >= 0, 1.0, 0.0)
        sf[:] = np.where(xs <= 0, 1.0, 0.0)
        return cdf.reshape(shape), sf.reshape(shape)
    low = xs <= 0
    high = xs >= 1
    cdf[low], sf[low] = 0.0, 1.0
    cdf[high], sf[high] = 1.0, 0.0
    sure = ~low & ~high & (rs == 1)  # R^2 = 1 almost surely
    cdf[sure], sf[sure] = 0.0, 1.0
    mid = ~low & ~high & ~sure
    idx = np.flatnonzero(mid)
    if idx.size:
        xm = xs[idx]
        series = _Series(xm, 1.0 - xm, n_, k_, tail)
        s = -np.log1p(-rs[idx])
        at0 = s == 0
        f, g, _ = series.evaluate(np.where(at0, 1.0, s))
        cdf[idx] = np.where(at0, series.f0, f)
        sf[idx] = np.where(at0, series.s0, g)
    return cdf.reshape(shape), sf.reshape(shape)


def r2_cdf(x: object, rho2: object, n: object, k: object) -> np.ndarray:
    """CDF of the sample squared multiple correlation under multivariate normal data.

    Parameters
    ----------
    x
        Values of :math:`R^2` (array-like; broadcast with ``rho2``).
    rho2
        Population squared multiple correlations :math:`\\rho^2 \\in [0, 1]`.
    n
        Observations (a real number is accepted, e.g. a sum of frequency weights).
    k
        Regressors besides the intercept (for a VIF: the other predictors, p - 1).

    Returns
    -------
    numpy.ndarray
        :math:`P(R^2 \\le x \\mid \\rho^2)`, shaped like the broadcast inputs.

    Raises
    ------
    InputError, TooFewDataError
        NaN values, rho^2 outside [0, 1], or n not above k + 1 (pointer ``/n``).

    Notes
    -----
    With an intercept, k regressors and n observations from a multivariate normal population,
    :math:`R^2` given :math:`\\rho^2` is a mixture of beta distributions (Fisher 1928):

    .. math::

        P(R^2 \\le x) = \\sum_{i \\ge 0} w_i\\, I_x\\!\\left(\\tfrac{k}{2} + i,
        \\tfrac{n - 1 - k}{2}\\right), \\qquad
        w_i = \\frac{\\Gamma(\\tfrac{n-1}{2} + i)}{\\Gamma(\\tfrac{n-1}{2})\\, i!}\\,
        \\rho^{2i} (1 - \\rho^2)^{(n-1)/2},

    the weights being the negative-binomial probabilities of :math:`X \\sim
    \\mathrm{NB}(a = \\tfrac{n-1}{2}, 1 - \\rho^2)` (Muirhead 1982, ch. 5, the theorem on the
    distribution of the sample multiple correlation coefficient; the theorem's number is not
    verified here). At :math:`\\rho = 0` it is the central :math:`\\mathrm{Beta}(k/2, (n-1-k)/2)`.
    The CDF decreases in :math:`\\rho^2`: X grows stochastically with :math:`\\rho^2` and
    :math:`I_x(k/2 + i, b)` decreases in i.

    Truncation: only the terms i in a window ``lo..hi`` where :math:`I_i` is neither 1 nor 0
    to within :math:`\\varepsilon` = ``SERIES_TAIL`` = 1e-13 are summed; the mass below is
    added exactly as :math:`P(X < lo) = I_{1-\\rho^2}(a, lo)` and the mass above dropped.
    Because :math:`0 \\le I_i \\le 1` is monotone in i, the error is at most
    :math:`\\varepsilon \\max(P(X < lo), P(X > hi)) \\le \\varepsilon`, for every
    :math:`\\rho^2`, plus rounding (in the tests the CDF and its complement, two separate
    sums, add to 1 within 1e-12, also at n = 1e6 and VIF = 1e12).

    Choice of window: the negative-binomial weights have mean :math:`a\\rho^2/(1 - \\rho^2)` and
    variance :math:`a\\rho^2/(1 - \\rho^2)^2`, so a window of their mean plus or minus some
    standard deviations would move with every :math:`\\rho^2` a root search tries. The beta
    side gives a window that does not: it is centred near :math:`b x/(1 - x) - k/2` terms with
    spread :math:`\\sqrt{\\alpha(\\alpha + b)/b}`, :math:`\\alpha = b x/(1 - x)` (of the same
    order as the weights' spread at the :math:`\\rho^2` where the CDF is neither 0 nor 1), it
    never starts at 0 when n is large, and the beta CDFs are computed once per observed value.

    Verification: ``tests/core/test_uncertainty.py`` compares the CDF with a direct simulation
    of :math:`R^2` (numpy regressions on normal samples) and, at :math:`\\rho = 0`, with
    ``scipy.stats.beta``; the quadrature used for very long windows is checked against the
    term-by-term sum.

    Implementation: :class:`_Series` (``betainc``, ``betaincc`` and ``gammaln`` from
    scipy.special; weights in log space; windows longer than ``EXACT_TERMS`` by quadrature).
    Inputs are parameterised by :math:`s = -\\log(1 - \\rho^2)` and incomplete beta functions
    are given both x and 1 - x, so that :math:`\\rho^2` and :math:`R^2` near 1 keep their
    digits.

    References
    ----------
    .. [1] Fisher, R. A. (1928). The general sampling distribution of the multiple correlation
       coefficient. Proceedings of the Royal Society of London A 121, 654-673.
    .. [2] Muirhead, R. J. (1982). Aspects of Multivariate Statistical Theory. Wiley, ch. 5.
    """
    return _r2_both(x, rho2, n, k, SERIES_TAIL)[0]


def r2_sf(x: object, rho2: object, n: object, k: object) -> np.ndarray:
    """Upper tail :math:`P(R^2 \\ge x \\mid \\rho^2)` of the distribution in :func:`r2_cdf`.

    Computed from the complementary beta terms directly (not as 1 - CDF), so small tail
    probabilities keep their relative accuracy down to about ``SERIES_TAIL``.
    """
    return _r2_both(x, rho2, n, k, SERIES_TAIL)[1]


# --------------------------------------------------------------------------------------------
# Normal-theory intervals


@dataclass(frozen=True, slots=True)
class VariableInterval:
    """Normal-theory interval of one predictor's population VIF.

    Attributes
    ----------
    name
        The predictor.
    vif
        The sample VIF (echoed); None when aliased.
    vif_interval
        (low, high): interval for the population VIF at the requested level, from inverting
        the exact distribution of R_j^2; None when aliased (the sample VIF is infinite).
    p_value
        One-sided p-value for "the population VIF is at most the threshold":
        P(R_j^2 >= observed | rho_j^2 = 1 - 1/threshold); small values are evidence that it is
        above. 0 when aliased.
    aliased
        Whether the predictor is in an exact dependency.
    approximate
        Whether the predictor is an indicator column (not normal), for which the interval is
        an approximation.
    """

    name: str
    vif: float | None
    vif_interval: tuple[float, float] | None
    p_value: float
    aliased: bool
    approximate: bool


@dataclass(frozen=True, slots=True)
class NormalIntervals:
    """Normal-theory intervals for every predictor's VIF.

    Attributes
    ----------
    method
        ``"normal"``.
    level
        Confidence level of the intervals.
    threshold
        The VIF threshold the p-values refer to (a rule of thumb, common practice).
    n
        Observations the distribution assumes.
    p
        Predictors in the model (k = p - 1 others in each auxiliary regression).
    variables
        One interval per predictor, in input order.
    notes
        How to read the intervals (the normality assumption, indicator columns).
    """

    method: str
    level: float
    threshold: float
    n: float
    p: int
    variables: tuple[VariableInterval, ...]
    notes: tuple[str, ...]


def _invert(
    series: _Series,
    sel: np.ndarray,
    upper_tail: bool,
    target: float,
    start: np.ndarray,
    first: tuple[np.ndarray, np.ndarray, np.ndarray] | None = None,
) -> np.ndarray:
    """Solve G(s) = target for s > 0 on the elements ``sel`` (sorted), all evaluated together.

    G is S = P(R^2 >= x) (increasing in s) when ``upper_tail``, else F (decreasing). Newton's
    method on the probit scale, :math:`h(s) = \\Phi^{-1}(G(s)) - \\Phi^{-1}(\\text{target})`,
    which is nearly linear in s, inside a bracket that every evaluation narrows. A step that
    would leave the bracket is replaced by the secant of h through the bracket's ends, or by
    bisection when that is not well inside; while no upper end is known, s is doubled. Stops
    when the bracket is below 1e-12 relative, or after a Newton step below 1e-7 relative (the
    next one would be about its square: Newton's method converges quadratically). ``first``
    is the evaluation at ``start`` when the caller has it already.
    """
    m = sel.shape[0]
    s = start.copy()
    left = np.zeros(m)
    right = np.full(m, np.inf)
    z_target = float(special.ndtri(target))
    with np.errstate(divide="ignore"):
        g0 = series.s0[sel] if upper_tail else series.f0[sel]
        h_left = special.ndtri(g0) - z_target
    h_right = np.full(m, np.nan)
    done = np.zeros(m, dtype=bool)
    for _ in range(200):
        checkpoint()
        act = np.flatnonzero(~done)
        if act.size == 0:
            break
        sa = s[act]
        if first is not None:
            f, g, df = first
            first = None
        else:
            f, g, df = series.evaluate(sa, sel[act])
        val, slope = (g, -df) if upper_tail else (f, df)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            z = special.ndtri(val)
            resid = z - z_target
            # For increasing G a value below the target means the root is to the right.
            right_of = (resid < 0) if upper_tail else (resid > 0)
            left[act] = np.where(right_of, sa, left[act])
            h_left[act] = np.where(right_of, resid, h_left[act])
            right[act] = np.where(right_of, right[act], sa)
            h_right[act] = np.where(right_of, h_right[act], resid)
            lo_, hi_ = left[act], right[act]
            step = resid * (np.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)) / slope
            newton = sa - step
            width = hi_ - lo_
            secant = lo_ - h_left[act] * width / (h_right[act] - h_left[act])
        scale = np.maximum(1.0, sa)
        usable = np.isfinite(newton) & (val > 0.0) & (val < 1.0)
        finished = (usable & (np.abs(step) <= 1e-7 * scale)) | (width <= 1e-12 * scale)
        inside = usable & (newton > lo_) & (newton < hi_)
        margin = 0.05 * np.where(np.isfinite(width), width, 0.0)
        good_secant = np.isfinite(secant) & (secant > lo_ + margin) & (secant < hi_ - margin)
        fallback = np.where(
            np.isfinite(hi_),
            np.where(good_secant, secant, 0.5 * (lo_ + hi_)),
            np.maximum(2.0 * sa, sa + 1.0),
        )
        new = np.where(inside | (finished & usable), newton, fallback)
        new = np.where(finished & ~usable, 0.5 * (lo_ + hi_), new)
        s[act] = new
        done[act] = finished
    return s


def normal_intervals(
    vifs: Sequence[float | None] | np.ndarray,
    n: float,
    p: int,
    *,
    level: float = 0.95,
    threshold: float = 5.0,
    names: Sequence[str] | None = None,
    indicators: Collection[str] = (),
) -> NormalIntervals:
    """Exact normal-theory intervals for population VIFs, and p-values against the threshold.

    Parameters
    ----------
    vifs
        Sample VIFs; None or infinity for an aliased predictor. Any number of them (one per
        predictor, or many samples of one predictor: each is treated on its own).
    n
        Observations behind the VIFs (with frequency weights, their sum).
    p
        Predictors in the model, so each auxiliary regression has k = p - 1 others. With exact
        dependencies pass the rank (predictors left after dropping one per relation), as the
        finite VIFs are computed on that set.
    level
        Confidence level, strictly between 0 and 1.
    threshold
        VIF threshold for the p-values (a rule of thumb: 5 or 10 in common practice).
    names
        Predictor names (default ``x0, x1, ...``).
    indicators
        Names of indicator columns; their intervals are flagged ``approximate``.

    Returns
    -------
    NormalIntervals

    Raises
    ------
    OptionError
        ``/uncertainty/level`` outside (0, 1), ``/threshold`` not above 1.
    InputError, TooFewDataError
        A VIF below 1 or NaN (``/vifs/j``), names not matching, n not above p (``/n``).

    Notes
    -----
    With :math:`x = R_j^2 = 1 - 1/\\mathrm{VIF}_j` and :math:`F(x; \\rho^2)` the CDF of
    :func:`r2_cdf` (k = p - 1), which decreases in :math:`\\rho^2`, the bounds for
    :math:`\\rho_j^2` solve

    .. math:: F(x; \\rho_L^2) = 1 - \\alpha/2, \\qquad F(x; \\rho_U^2) = \\alpha/2,

    with :math:`\\rho_L^2 = 0` when :math:`F(x; 0) \\le 1 - \\alpha/2` already (and
    :math:`\\rho_U^2 = 0` when :math:`F(x; 0) \\le \\alpha/2`); the interval for the population
    VIF is :math:`(1/(1 - \\rho_L^2), 1/(1 - \\rho_U^2))`. Inverting the CDF of a statistic
    whose distribution is stochastically monotone in the parameter gives exact coverage.
    The p-value is :math:`P(R_j^2 \\ge x \\mid \\rho^2 = 1 - 1/\\text{threshold})`.

    The sample :math:`R_j^2` is biased upwards (by about k/(n - 1) at :math:`\\rho = 0`), so
    with many predictors for the rows the interval can lie wholly below the sample VIF.
    Indicator columns (and other non-normal predictors) break the normality assumption, so
    their intervals are approximations; the bootstrap makes no such assumption. With a single
    predictor (k = 0) the VIF is 1 exactly: interval (1, 1), p-value 1. An aliased predictor
    has interval None and p-value 0.

    Verification: ``tests/core/test_uncertainty.py`` checks coverage by simulation (1,000+
    normal samples with a known covariance, n = 30 and 200: 93-97% at level 0.95), every bound
    against Brent's method (``scipy.optimize.brentq``) on the same CDF, and the limits above.

    Implementation: in :math:`s = \\log \\mathrm{VIF} = -\\log(1 - \\rho^2)` (so bounds near
    :math:`\\rho^2 = 1` keep their relative accuracy), all bounds at once: :class:`_Series`
    evaluates the CDF and its derivative for every predictor in one pass, and a safeguarded
    Newton iteration on the probit scale (:func:`_invert`) needs about four passes per bound
    after one shared pass at the start. Brent's method (``scipy.optimize.brentq``) one bound
    at a time on the same series gives the same bounds (to 1e-12 in the bench) but took
    seconds at p = 200, where this takes 20-30 ms (bench/bench_uncertainty.py). For levels so
    high that :math:`\\alpha/2` nears the series' truncation bound, the bound is tightened to
    :math:`10^{-8}\\alpha/2`.

    References
    ----------
    .. [1] Fisher, R. A. (1928). The general sampling distribution of the multiple correlation
       coefficient. Proceedings of the Royal Society of London A 121, 654-673.
    .. [2] Muirhead, R. J. (1982). Aspects of Multivariate Statistical Theory. Wiley, ch. 5.
    """
    _check_settings(threshold=threshold, level=level)
    if not _is_whole(p) or int(p) < 1:
        raise InputError.at("/p", f"p must be a whole number >= 1; got {p!r}")
    p = int(p)
    n_, k = _check_nk(n, p - 1)
    values = [math.inf if v is None else v for v in vifs]
    v = np.asarray(values, dtype=float)
    if v.ndim != 1:
        raise InputError.at("/vifs", "vifs must be a flat list of numbers")
    if names is None:
        names = [f"x{j}" for j in range(v.shape[0])]
    if len(names) != v.shape[0]:
        raise InputError.at(
            "/names", f"expected {v.shape[0]} names (one per VIF); got {len(names)}"
        )
    bad = np.flatnonzero(np.isnan(v) | (v < 1.0))
    if bad.size:
        j = int(bad[0])
        raise InputError.at(
            f"/vifs/{j}", f"a VIF is a number >= 1 (or null when aliased); got {values[j]!r}"
        )
    alpha = 1.0 - float(level)
    target = alpha / 2.0
    tail = min(SERIES_TAIL, 1e-8 * target)
    aliased = np.isinf(v)
    low = np.ones(v.shape[0])
    high = np.ones(v.shape[0])
    pval = np.where(aliased, 0.0, 1.0)
    work = np.flatnonzero(~aliased & (v > 1.0)) if k > 0 else np.zeros(0, dtype=np.intp)
    if work.size:
        vw = v[work]
        y = 1.0 / vw
        series = _Series(1.0 - y, y, n_, k, tail)
        # Bound for rho^2 = 0 unless the CDF at 0 is already past the target.
        need_low = np.flatnonzero(series.s0 < target)
        need_high = np.flatnonzero(series.f0 > target)
        # Start near the bias-corrected VIF (from the adjusted R^2), inside the interval.
        # One evaluation there serves the first step towards both bounds.
        start = np.log(np.maximum(vw * (n_ - p) / (n_ - 1.0), np.sqrt(vw)))
        at_start = series.evaluate(start)
        for need, upper_tail, bound in ((need_low, True, low), (need_high, False, high)):
            if need.size:
                first = (at_start[0][need], at_start[1][need], at_start[2][need])
                roots = _invert(series, need, upper_tail, target, start[need], first)
                bound[work[need]] = np.exp(roots)
        _, g, _ = series.evaluate(np.full(work.size, math.log(float(threshold))))
        pval[work] = g
    marked = set(indicators)
    out = []
    for j, name in enumerate(names):
        out.append(
            VariableInterval(
                name=name,
                vif=None if aliased[j] else float(v[j]),
                vif_interval=None if aliased[j] else (float(low[j]), float(high[j])),
                p_value=float(pval[j]),
                aliased=bool(aliased[j]),
                approximate=name in marked,
            )
        )
    notes = [_NORMALITY_NOTE, _PVALUE_NOTE]
    if marked & set(names):
        flagged = ", ".join(nm for nm in names if nm in marked)
        notes.append(f"Intervals of indicator columns are approximate: {flagged}.")
    return NormalIntervals(
        method="normal",
        level=float(level),
        threshold=float(threshold),
        n=n_,
        p=p,
        variables=tuple(out),
        notes=tuple(notes),
    )


# --------------------------------------------------------------------------------------------
# Bootstrap

#: Memory for the per-row products [w, w x, w x_j x_k] when kept for all rows at once; beyond it
#: they are rebuilt per row block for every block of replicates.
_PRODUCT_BYTES = 64 << 20
#: Memory for one block of resampling counts (replicates x rows, float64).
_COUNT_BYTES = 16 << 20
#: Replicates per block at most (each block is one matrix product, then a checkpoint).
_BLOCK_REPLICATES = 128
#: A column is constant in a replicate when its centred sum of squares is below this share of
#: its sum of squares about the full-sample mean (a resample of distinct values cannot get
#: there; a category missing from the resample gets exactly 0 up to rounding).
_CONSTANT_SHARE = 1e-10


@dataclass(frozen=True, slots=True)
class VariableSpread:
    """Bootstrap spread of one predictor's VIF and of its removal.

    Attributes
    ----------
    name
        The predictor.
    vif
        VIF on the full sample; None when aliased.
    vif_interval
        (low, high): percentile interval of the VIF over the usable replicates; None when
        aliased or when no replicate was usable.
    share_above
        Share of usable replicates in which the VIF exceeds the threshold (1 when aliased).
    share_dropped
        Share of usable replicates in which the removal sequence drops this predictor (or the
        term it belongs to).
    aliased
        Whether the predictor is in an exact dependency on the full sample (then in every
        replicate too).
    """

    name: str
    vif: float | None
    vif_interval: tuple[float, float] | None
    share_above: float | None
    share_dropped: float | None
    aliased: bool


@dataclass(frozen=True, slots=True)
class TermSpread:
    """Bootstrap spread of one multi-column term's GVIF and of its removal.

    Attributes
    ----------
    name
        The term.
    columns
        Its columns.
    gvif
        GVIF on the full sample; None when aliased.
    gvif_interval
        (low, high): percentile interval of the GVIF over the usable replicates.
    gvif_scaled_interval
        The same interval for the scaled GVIF, compared with sqrt(threshold).
    share_above
        Share of usable replicates in which the scaled GVIF exceeds sqrt(threshold).
    share_dropped
        Share of usable replicates in which the removal sequence drops the term.
    aliased
        Whether any of its columns is in an exact dependency on the full sample.
    """

    name: str
    columns: tuple[str, ...]
    gvif: float | None
    gvif_interval: tuple[float, float] | None
    gvif_scaled_interval: tuple[float, float] | None
    share_above: float | None
    share_dropped: float | None
    aliased: bool


@dataclass(frozen=True, slots=True)
class BootstrapSpread:
    """Row-bootstrap intervals for every VIF and GVIF, and the stability of the removal.

    Attributes
    ----------
    method
        ``"bootstrap"``.
    level
        Level of the percentile intervals.
    threshold
        VIF threshold of the shares and of the removal sequence (a rule of thumb).
    replicates
        Replicates drawn.
    seed
        Seed of ``numpy.random.default_rng``; the same seed and input give the same answer.
    usable_replicates
        Replicates whose resampled design was not singular; every interval and share counts
        these only.
    singular_replicates
        Replicates left out because the resampled design was singular (a column constant in
        the resample, such as a rare category drawn no time, or a new exact dependency).
    variables
        One entry per predictor, in input order.
    terms
        One entry per multi-column term.
    kept
        The predictors and terms the removal sequence keeps on the full sample.
    share_same_kept
        Share of usable replicates whose removal sequence keeps exactly that set.
    notes
        How to read the result.
    """

    method: str
    level: float
    threshold: float
    replicates: int
    seed: int
    usable_replicates: int
    singular_replicates: int
    variables: tuple[VariableSpread, ...]
    terms: tuple[TermSpread, ...]
    kept: tuple[str, ...]
    share_same_kept: float | None
    notes: tuple[str, ...]


def _design(
    x: object, names: Sequence[str], weights: object
) -> tuple[np.ndarray, np.ndarray | None, tuple[str, ...]]:
    names_t = tuple(str(nm) for nm in names)
    try:
        arr = np.asarray(x, dtype=float)
    except (TypeError, ValueError):
        raise InputError.at("/columns", "the design must be an n x p array of numbers") from None
    if arr.ndim != 2 or arr.shape[1] != len(names_t):
        raise InputError.at(
            "/columns",
            f"the design must be an n x p array with one column per name ({len(names_t)}); "
            f"got shape {arr.shape}",
        )
    seen: dict[str, int] = {}
    for j, nm in enumerate(names_t):
        if nm in seen:
            raise InputError.at(f"/names/{j}", f"duplicate name {nm!r}")
        seen[nm] = j
    bad = ~np.isfinite(arr)
    if bad.any():
        col = int(np.flatnonzero(bad.any(axis=0))[0])
        row = int(np.flatnonzero(bad[:, col])[0])
        raise InputError.at(
            f"/columns/{esc(names_t[col])}",
            f"values must be finite; row {row} is not (the bootstrap needs complete rows)",
        )
    w = None
    if weights is not None:
        w = np.asarray(weights, dtype=float)
        if w.shape != (arr.shape[0],):
            raise InputError.at(
                "/weights", f"expected {arr.shape[0]} weights (one per row); got shape {w.shape}"
            )
        wrong = np.flatnonzero(~np.isfinite(w) | (w < 0))
        if wrong.size:
            raise InputError.at(
                "/weights", f"weights must be finite and non-negative; row {int(wrong[0])} is not"
            )
        if not (w > 0).any():
            raise InputError.at("/weights", "at least one weight must be positive")
    return np.ascontiguousarray(arr), w, names_t


def _term_indices(
    terms: Mapping[str, Sequence[str]], names: tuple[str, ...]
) -> list[tuple[str, tuple[int, ...]]]:
    index = {nm: j for j, nm in enumerate(names)}
    owner: dict[str, str] = {}
    out = []
    for tname, cols in terms.items():
        idx = []
        for c_pos, col in enumerate(cols):
            where = f"/terms/{esc(tname)}/{c_pos}"
            if col not in index:
                raise InputError.at(where, f"term {tname!r} names unknown column {col!r}")
            if col in owner:
                raise InputError.at(where, f"column {col!r} already belongs to term {owner[col]!r}")
            owner[col] = tname
            idx.append(index[col])
        if not idx:
            raise InputError.at(f"/terms/{esc(tname)}", f"term {tname!r} has no columns")
        out.append((tname, tuple(idx)))
    return out


def _draw_counts(rng: np.random.Generator, n: int, replicates: int) -> np.ndarray:
    """Resampling counts (replicates x rows): each row of the result counts how often each of
    the n rows is drawn in n uniform draws with replacement (a multinomial vector)."""
    idx = rng.integers(0, n, size=(replicates, n))
    idx += np.arange(replicates, dtype=idx.dtype)[:, None] * n
    return np.bincount(idx.ravel(), minlength=replicates * n).reshape(replicates, n).astype(float)


def _percentiles(values: np.ndarray, level: float) -> np.ndarray:
    """Percentile interval ends per column: the B alpha/2-th and B(1 - alpha/2)-th ordered
    values (Efron & Tibshirani 1993, ch. 13), numpy's ``inverted_cdf`` rule."""
    alpha = 1.0 - level
    bounds: np.ndarray = np.quantile(
        values, [alpha / 2.0, 1.0 - alpha / 2.0], axis=0, method="inverted_cdf"
    )
    return bounds


class _Resampler:
    """Weighted Gram sums of many row resamples: one matrix product per block of replicates.

    Rows are shifted by the full-sample weighted mean and divided by the full-sample root mean
    square deviation once (the correlations do not depend on the units, and the products stay
    far from overflow whatever the data's scale); each row contributes the products
    :math:`z_r = w_r [1, x_r, x_{rj} x_{rk} (j \\le k)]`, and a block of replicates with
    resampling counts C (replicates x rows) gets every replicate's total weight, weighted sums
    and cross-products as the rows of :math:`C Z`.
    """

    def __init__(
        self,
        x: np.ndarray,
        w: np.ndarray | None,
        shift: np.ndarray,
        scale: np.ndarray | None = None,
    ) -> None:
        self.n, self.p = x.shape
        self.xc = x - shift if scale is None else (x - shift) / scale
        self.w = w
        self.ju, self.ku = np.triu_indices(self.p)
        self.q = 1 + self.p + self.ju.shape[0]
        self.rows_per_block = max(1, (8 << 20) // (8 * self.q))
        self.z: np.ndarray | None = None
        if self.n * self.q * 8 <= _PRODUCT_BYTES:
            self.z = self._products(0, self.n)

    def _products(self, r0: int, r1: int) -> np.ndarray:
        xc = self.xc[r0:r1]
        p = self.p
        z = np.empty((r1 - r0, self.q))
        z[:, 0] = 1.0
        z[:, 1 : p + 1] = xc
        np.multiply(xc[:, self.ju], xc[:, self.ku], out=z[:, p + 1 :])
        if self.w is not None:
            z *= self.w[r0:r1, None]
        return z

    def sums(self, counts: np.ndarray) -> np.ndarray:
        """Rows of C Z for a block of counts (replicates x rows)."""
        if self.z is not None:
            sums: np.ndarray = counts @ self.z
            return sums
        out = np.zeros((counts.shape[0], self.q))
        for r0 in range(0, self.n, self.rows_per_block):
            r1 = min(r0 + self.rows_per_block, self.n)
            out += counts[:, r0:r1] @ self._products(r0, r1)
        return out

    def moments(self, sums: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
        """Centred co-moments (B, p, p) and the constant-column mask (B, p) of each replicate."""
        p = self.p
        total = sums[:, 0]
        s = sums[:, 1 : p + 1]
        raw = np.empty((sums.shape[0], p, p))
        raw[:, self.ju, self.ku] = sums[:, p + 1 :]
        raw[:, self.ku, self.ju] = sums[:, p + 1 :]
        # A replicate that drew only rows of weight 0 has no total: every column counts as
        # constant there (the replicate is singular), without a division by zero.
        empty = ~(total > 0)
        safe = np.where(empty, 1.0, total)
        com = raw - s[:, :, None] * s[:, None, :] / safe[:, None, None]
        diag_raw = np.diagonal(raw, axis1=1, axis2=2)
        diag = np.diagonal(com, axis1=1, axis2=2)
        constant = (diag <= _CONSTANT_SHARE * diag_raw) | empty[:, None]
        return com, constant


def _correlations(com: np.ndarray) -> np.ndarray:
    d = np.sqrt(np.maximum(np.diagonal(com, axis1=1, axis2=2), np.finfo(float).tiny))
    r: np.ndarray = com / d[:, :, None] / d[:, None, :]
    r = 0.5 * (r + np.swapaxes(r, 1, 2))
    idx = np.arange(r.shape[1])
    r[:, idx, idx] = 1.0
    return r


def _replicate_inflation(
    r: np.ndarray,
    keep: np.ndarray,
    term_sets: Sequence[tuple[np.ndarray, np.ndarray]],
    skip: np.ndarray | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """VIFs (B, |keep|), log GVIFs (B, terms) and a singular mask (B,) of a block.

    The VIFs come from the correlation matrix over the full sample's independent predictors;
    a replicate is singular when it is in ``skip`` (a column constant in the resample), when
    that matrix is not positive definite or cannot be inverted, or when it has an exact
    dependency by the core's rule (smallest eigenvalue at or below ``NULL_RTOL`` times the
    largest; checked only where the bound trace(R^-1) * max row sum says it may).
    """
    rk = r[:, keep][:, :, keep]
    b = rk.shape[0]
    singular = np.zeros(b, dtype=bool) if skip is None else skip.copy()
    vif = np.full((b, keep.shape[0]), np.nan)
    logdet = np.full(b, np.nan)
    ok = np.flatnonzero(~singular)
    try:
        chol = np.linalg.cholesky(rk[ok])
    except np.linalg.LinAlgError:
        good = []
        for j in ok:
            try:
                np.linalg.cholesky(rk[j])
                good.append(j)
            except np.linalg.LinAlgError:
                singular[j] = True
        ok = np.asarray(good, dtype=np.intp)
        chol = np.linalg.cholesky(rk[ok]) if ok.size else np.zeros((0, *rk.shape[1:]))
    if ok.size:
        try:
            inv = np.linalg.inv(rk[ok])
        except np.linalg.LinAlgError:
            # A factor with a pivot that rounds to a singular matrix: one at a time.
            kept_q, parts = [], []
            for pos, j in enumerate(ok):
                try:
                    parts.append(np.linalg.inv(rk[j]))
                    kept_q.append(pos)
                except np.linalg.LinAlgError:
                    singular[j] = True
            ok, chol = ok[kept_q], chol[kept_q]
            inv = np.stack(parts) if parts else np.zeros((0, *rk.shape[1:]))
    if ok.size:
        diag = np.diagonal(inv, axis1=1, axis2=2)
        bad = ~np.isfinite(diag).all(axis=1)
        singular[ok[bad]] = True
        bound = np.abs(rk[ok]).sum(axis=2).max(axis=1) * diag.sum(axis=1) * NULL_RTOL
        for q in np.flatnonzero(~bad & (bound >= 1.0)):  # rare: only near an exact dependency
            ev = np.linalg.eigvalsh(rk[ok[q]])
            if ev[0] <= NULL_RTOL * ev[-1]:
                singular[ok[q]] = True
        with np.errstate(invalid="ignore"):
            vif[ok] = np.maximum(diag, 1.0)
        logdet[ok] = 2.0 * np.log(np.diagonal(chol, axis1=1, axis2=2)).sum(axis=1)
    log_gvif = np.full((b, len(term_sets)), np.nan)
    for t, (cols, others) in enumerate(term_sets):
        if not ok.size:
            break
        sub = rk[ok]
        _, ld_t = np.linalg.slogdet(sub[:, cols][:, :, cols])
        ld_o = np.linalg.slogdet(sub[:, others][:, :, others])[1] if others.size else 0.0
        log_gvif[ok, t] = np.maximum(ld_t + ld_o - logdet[ok], 0.0)
    vif[singular] = np.nan
    log_gvif[singular] = np.nan
    return vif, log_gvif, singular


def bootstrap_intervals(
    x: object,
    names: Sequence[str],
    *,
    terms: Mapping[str, Sequence[str]] | None = None,
    weights: object = None,
    threshold: float = 5.0,
    protect: Collection[str] = (),
    replicates: int = 1000,
    level: float = 0.95,
    seed: int = 0,
) -> BootstrapSpread:
    """Row bootstrap of every VIF and GVIF and of the proposed removal sequence.

    Parameters
    ----------
    x
        The design after categorical expansion, n x p (rows x predictors), finite.
    names
        Predictor names, one per column.
    terms
        Multi-column terms: term name to its column names (a categorical variable's
        indicator columns).
    weights
        Prior (frequency or survey) weights, one per row, non-negative; None for none.
    threshold
        VIF threshold of the shares and of the removal sequence (a rule of thumb: 5 or 10 in
        common practice).
    protect
        Predictors or terms the removal sequence never drops.
    replicates
        Number of resamples, ``REPLICATES_MIN`` to ``REPLICATES_MAX``.
    level
        Level of the percentile intervals, strictly between 0 and 1.
    seed
        Seed of ``numpy.random.default_rng``.

    Returns
    -------
    BootstrapSpread

    Raises
    ------
    OptionError
        ``/uncertainty/level``, ``/uncertainty/replicates``, ``/uncertainty/seed``,
        ``/threshold``, ``/protect/i``.
    InputError, TooFewDataError
        A design that is not n x p, non-finite values, bad weights or terms, a constant
        column, or no more rows than predictors.

    Notes
    -----
    Each replicate draws n rows with replacement, uniformly (Efron & Tibshirani 1993, ch. 6):
    row r enters with a multinomial count :math:`c_r` (:math:`\\sum_r c_r = n`), and with
    prior weights :math:`w_r` with weight :math:`c_r w_r`. Its co-moments are

    .. math::

        T = \\sum_r c_r w_r, \\quad s = \\sum_r c_r w_r \\tilde x_r, \\quad
        C = \\sum_r c_r w_r \\tilde x_r \\tilde x_r^\\top - s s^\\top / T

    with :math:`\\tilde x_r` the rows shifted by the full-sample weighted mean; from them the
    replicate's correlation matrix, VIFs (diagonal of its inverse), GVIFs
    (:math:`\\det R_{TT} \\det R_{OO} / \\det R`, Fox & Monette 1992) and its removal sequence
    (:func:`removal_sequence` with the same threshold, protection and terms). The percentile
    interval is :math:`(\\hat\\theta^*_{(B\\alpha/2)}, \\hat\\theta^*_{(B(1-\\alpha/2))})` over
    the B usable replicates (Efron & Tibshirani 1993, ch. 13). Predictors aliased on the full
    sample are aliased in every resample (the relation holds row by row): their interval is
    None, their share above the threshold 1, and the other VIFs are computed without them, as
    in the assessment. A replicate whose design is singular (a column constant in the
    resample, such as a category drawn no time, or a new exact dependency) is counted in
    ``singular_replicates`` and left out of every interval and share. The percentile method
    assumes nothing about normality, but with a rare category the usable replicates are those
    in which it was drawn, so its share of singular replicates says how far to trust them.

    Verification: ``tests/core/test_uncertainty.py`` checks each replicate's VIFs against the
    core's VIFs of the explicitly resampled rows, reproducibility bit for bit with the same
    seed, coverage by simulation at n = 200, and the shares against removal sequences run
    one replicate at a time.

    Implementation: counts come from ``Generator.integers`` (n row indices per replicate)
    and ``bincount``, in blocks of replicates; a block's weighted sums are one matrix product
    of its counts against the per-row products (kept for all rows when they fit in 64 MiB,
    else rebuilt per row block), then batched Cholesky factors and inverses. The removal
    sequence runs only in replicates where some inflation is within 1e-8 of the threshold or
    above it (elsewhere it drops nothing, as :func:`removal_sequence` would). The cooperative
    stop is checked between blocks. Cost: O(B n p^2) for the sums plus one removal sequence per
    replicate that needs it; 0.5-0.8 s for 1,000 replicates at n = 10,000, p = 20
    (bench/bench_uncertainty.py).

    References
    ----------
    .. [1] Efron, B. and Tibshirani, R. J. (1993). An Introduction to the Bootstrap. Chapman &
       Hall, ch. 6 and 13.
    .. [2] Fox, J. and Monette, G. (1992). Generalized collinearity diagnostics. Journal of
       the American Statistical Association 87(417), 178-183.
    """
    _check_settings(
        threshold=threshold, level=level, replicates=replicates, seed=seed, method="bootstrap"
    )
    arr, w, names_t = _design(x, names, weights)
    n, p = arr.shape
    term_idx = _term_indices(dict(terms or {}), names_t)
    # The full sample, through the core's own summary checks (constant columns, n > p).
    total = float(n) if w is None else float(w.sum())
    shift = arr.mean(axis=0) if w is None else (w @ arr) / total
    xc = arr - shift
    # Each column divided by a power of two near its largest deviation: exact (the same
    # correlations to the bit), and the products below stay far from overflow at any scale.
    big = np.max(np.abs(xc), axis=0, initial=0.0)
    col_scale = np.exp2(np.floor(np.log2(np.where(big > 0, big, 1.0))))
    xc /= col_scale
    xw = xc if w is None else xc * w[:, None]
    com = xw.T @ xc
    del xc, xw  # the resampler keeps its own shifted copy: two copies of the design at most
    com = 0.5 * (com + com.T)
    d = np.sqrt(np.maximum(np.diag(com), np.finfo(float).tiny))
    corr = com / np.outer(d, d)
    np.fill_diagonal(corr, 1.0)
    rows = n if w is None else int(np.count_nonzero(w))
    Summary(
        names=names_t,
        n=total,
        correlation=corr,
        means=shift / col_scale,
        comoments=com,
        input_kind="table",
        rows=rows,
        sources=tuple(f"/columns/{esc(nm)}" for nm in names_t),
    ).check()
    deps = find_dependencies(Spectrum.of(corr), names_t)
    full_vif = variance_inflation(corr, names_t, threshold=threshold, dependencies=deps)
    full_terms = generalized_inflation(
        corr, names_t, term_idx, threshold=threshold, dependencies=deps
    )
    full_removal = removal_sequence(
        corr,
        names_t,
        threshold=threshold,
        protect=protect,
        terms=term_idx,
        dependencies=deps,
        tables=False,
    )
    units = full_removal.units
    unit_index = {u: j for j, u in enumerate(units)}
    unit_of = np.empty(p, dtype=np.intp)
    for j, nm in enumerate(names_t):
        unit_of[j] = unit_index.get(nm, -1)
    for tname, cols in term_idx:
        unit_of[list(cols)] = unit_index[tname]
    kept_full = full_removal.kept
    aliased = deps.involved
    keep = np.asarray(deps.independent, dtype=np.intp)
    pos_in_keep = {int(j): q for q, j in enumerate(keep)}
    term_sets = []
    term_live = []
    for t, (_, cols) in enumerate(term_idx):
        if aliased[list(cols)].any():
            continue
        tc = np.asarray([pos_in_keep[c] for c in cols], dtype=np.intp)
        others = np.asarray([q for q in range(keep.shape[0]) if q not in set(tc)], dtype=np.intp)
        term_sets.append((tc, others))
        term_live.append(t)
    df = np.array([len(cols) for _, cols in term_idx], dtype=float)
    df_live = df[term_live] if term_live else np.zeros(0)
    has_aliased = bool(aliased.any())
    near = threshold * (1.0 - 1e-8)

    rng = np.random.default_rng(seed)
    sampler = _Resampler(arr, w, shift, col_scale * d / math.sqrt(total))
    block = int(min(_BLOCK_REPLICATES, max(1, _COUNT_BYTES // (8 * n))))
    vifs = np.full((replicates, keep.shape[0]), np.nan)
    log_gvifs = np.full((replicates, len(term_sets)), np.nan)
    singular = np.zeros(replicates, dtype=bool)
    dropped = np.zeros((replicates, len(units)), dtype=bool)
    same_kept = np.zeros(replicates, dtype=bool)
    for b0 in range(0, replicates, block):
        checkpoint()
        b1 = min(b0 + block, replicates)
        nb = b1 - b0
        counts = _draw_counts(rng, n, nb)
        sums = sampler.sums(counts)
        com_b, constant = sampler.moments(sums)
        r_b = _correlations(com_b)
        skip = np.asarray(constant.any(axis=1), dtype=bool)
        vif_b, lg_b, sing_b = _replicate_inflation(r_b, keep, term_sets, skip)
        vifs[b0:b1] = vif_b
        log_gvifs[b0:b1] = lg_b
        singular[b0:b1] = sing_b
        # Removal: only where something is above (or within rounding of) the threshold.
        for j in range(nb):
            if sing_b[j]:
                continue
            infl = vif_b[j]
            scaled = np.exp(lg_b[j] / df_live) if term_sets else np.zeros(0)
            if not has_aliased and infl.max() < near and (scaled.size == 0 or scaled.max() < near):
                same_kept[b0 + j] = len(kept_full) == len(units)
                continue
            checkpoint()  # a removal sequence per replicate: the stop applies between them
            try:
                rem = removal_sequence(
                    r_b[j],
                    names_t,
                    threshold=threshold,
                    protect=protect,
                    terms=term_idx,
                    tables=False,
                )
            except (KnotworkError, np.linalg.LinAlgError):
                # A resample the full-sample checks could not foresee (near singular).
                singular[b0 + j] = True
                continue
            for step in rem.steps:
                dropped[b0 + j, unit_index[step.drop]] = True
            same_kept[b0 + j] = rem.kept == kept_full
    usable = ~singular
    used = int(usable.sum())
    notes = [_BOOTSTRAP_NOTE]
    if used < replicates:
        notes.append(
            f"{replicates - used} of {replicates} replicates had a singular resampled design "
            "(a column constant in the resample, such as a category drawn no time, or a new "
            "exact dependency) and were left out of every interval and share."
        )
    alpha = 1.0 - level
    if used and min(alpha / 2.0, 1.0 - alpha / 2.0) * used < 5:
        notes.append(
            f"With {used} usable replicates each end of the {level:g} interval rests on fewer "
            "than five replicates; ask for more replicates."
        )
    if has_aliased:
        notes.append(
            "Predictors aliased on the full sample are aliased in every resample; their "
            "intervals are not defined, and the other VIFs are computed without them."
        )
    good_vifs = vifs[usable]
    ends = _percentiles(good_vifs, level) if used else None
    share_vif = (good_vifs > threshold).mean(axis=0) if used else None
    drop_share = dropped[usable].mean(axis=0) if used else None
    variables = []
    for j, nm in enumerate(names_t):
        u = int(unit_of[j])
        share_d = float(drop_share[u]) if drop_share is not None else None
        if aliased[j]:
            variables.append(VariableSpread(nm, None, None, 1.0, share_d, True))
            continue
        q = pos_in_keep[j]
        variables.append(
            VariableSpread(
                name=nm,
                vif=full_vif[j].vif,
                vif_interval=(float(ends[0, q]), float(ends[1, q])) if ends is not None else None,
                share_above=float(share_vif[q]) if share_vif is not None else None,
                share_dropped=share_d,
                aliased=False,
            )
        )
    term_out = []
    lg_good = log_gvifs[usable]
    t_ends = _percentiles(lg_good, level) if used and term_sets else None
    for t, (tname, _) in enumerate(term_idx):
        u = unit_index[tname]
        share_d = float(drop_share[u]) if drop_share is not None else None
        info = full_terms[t]
        if t not in term_live:
            term_out.append(
                TermSpread(tname, tuple(info.columns), None, None, None, 1.0, share_d, True)
            )
            continue
        c = term_live.index(t)
        interval = scaled_interval = None
        share_t = None
        if t_ends is not None:
            lo_g, hi_g = math.exp(t_ends[0, c]), math.exp(t_ends[1, c])
            interval = (lo_g, hi_g)
            power = 1.0 / (2.0 * df[t])
            scaled_interval = (float(lo_g**power), float(hi_g**power))
            limit = math.log(threshold) * df[t]  # log of sqrt(threshold)^(2 df)
            share_t = float((lg_good[:, c] > limit).mean())
        term_out.append(
            TermSpread(
                name=tname,
                columns=tuple(info.columns),
                gvif=info.gvif,
                gvif_interval=interval,
                gvif_scaled_interval=scaled_interval,
                share_above=share_t,
                share_dropped=share_d,
                aliased=False,
            )
        )
    return BootstrapSpread(
        method="bootstrap",
        level=float(level),
        threshold=float(threshold),
        replicates=int(replicates),
        seed=int(seed),
        usable_replicates=used,
        singular_replicates=replicates - used,
        variables=tuple(variables),
        terms=tuple(term_out),
        kept=tuple(kept_full),
        share_same_kept=float(same_kept[usable].mean()) if used else None,
        notes=tuple(notes),
    )
