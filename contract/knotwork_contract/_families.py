"""Variance functions, links, working weights and deviances of the GLM families (numpy only).

The service fits a GLM to the rows it receives with this arithmetic, and the client fits the
same model where the rows live (a Dask dataframe's partitions) with the same functions, so the
two fits meet the same numbers. Every quantity is written to stay finite as fitted values
approach the boundary of their range (no division by mu (1 - mu); ``logaddexp`` and
``y log y`` with 0 log 0 = 0 for the deviances).

References
----------
1. Nelder, J. A. and Wedderburn, R. W. M. (1972). Generalized linear models. Journal of the
   Royal Statistical Society, Series A 135(3), 370-384.
2. McCullagh, P. and Nelder, J. A. (1989). Generalized Linear Models, 2nd ed. Chapman and
   Hall, London.
"""

from __future__ import annotations

import math
from collections.abc import Mapping
from dataclasses import dataclass

import numpy as np

__all__ = ["BOUNDARY", "GLM_LINKS", "IRLS_MAX_ITER", "IRLS_TOLERANCE", "GlmFamily"]

#: The link of each family (the canonical one, or log for gamma and tweedie).
GLM_LINKS: Mapping[str, str] = {
    "gaussian": "identity",
    "binomial": "logit",
    "poisson": "log",
    "gamma": "log",
    "tweedie": "log",
}

#: IRLS has converged when no linear predictor moved by more than this times (1 + max |eta|) in
#: the last iteration (the service's ``model.tolerance``).
IRLS_TOLERANCE = 1e-9
#: IRLS iterations allowed before the fit counts as not converging.
IRLS_MAX_ITER = 100

#: A fitted probability within this distance of 0 or 1 (or a fitted mean this small against
#: the mean response, for a zero count) counts as having reached the boundary.
BOUNDARY = 1e-10


def _expit(x: np.ndarray) -> np.ndarray:
    """The logistic function 1 / (1 + exp(-x)), without overflow for large |x|."""
    e = np.exp(-np.abs(x))
    out: np.ndarray = np.where(x >= 0, 1.0 / (1.0 + e), e / (1.0 + e))
    return out


def _xlogy(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    """x log y, 0 where x is 0 (whatever y is)."""
    with np.errstate(all="ignore"):
        out: np.ndarray = np.where(x == 0, 0.0, x * np.log(y))
    return out


@dataclass(frozen=True, slots=True)
class GlmFamily:
    """Variance, link and deviance of one family; ``a`` is prior weight times trials.

    Attributes
    ----------
    name
        ``"gaussian"``, ``"binomial"``, ``"poisson"``, ``"gamma"`` or ``"tweedie"``.
    power
        The variance power: 0 gaussian, 1 poisson, 2 gamma, v tweedie (unused for binomial).
    """

    name: str
    power: float  # variance power: 0 gaussian, 1 poisson, 2 gamma, v tweedie (binomial: unused)

    def start(self, y: np.ndarray, a: np.ndarray, mean: float | None = None) -> np.ndarray:
        """Starting linear predictor (not in the design's column space; IRLS projects it).

        ``mean`` is the a-weighted mean response over every row (computed here when None; a
        caller that sees the rows in parts passes the total's)."""
        if self.name == "gaussian":
            return y.copy()
        if self.name == "binomial":
            mu = (a * y + 0.5) / (a + 1.0)
            logit: np.ndarray = np.log(mu / (1.0 - mu))
            return logit
        if mean is None:
            mean = float(np.dot(a, y) / np.sum(a))
        start: np.ndarray = np.log((y + mean) / 2.0)
        return start

    def mean(self, eta: np.ndarray) -> np.ndarray:
        if self.name == "gaussian":
            return eta
        if self.name == "binomial":
            fitted: np.ndarray = _expit(eta)
            return fitted
        exp: np.ndarray = np.exp(eta)
        return exp

    def working(self, eta: np.ndarray, y: np.ndarray, a: np.ndarray) -> tuple[np.ndarray, ...]:
        """Working weights w and score terms s = a (y - mu) mu'(eta) / V(mu), both at eta.

        Neither divides by a small quantity, so both stay finite as fitted values approach the
        boundary; the working response is eta + s / w.
        """
        with np.errstate(all="ignore"):
            if self.name == "gaussian":
                return a.copy(), a * (y - eta)
            if self.name == "binomial":
                p, q = _expit(eta), _expit(-eta)
                return a * (p * q), a * (y * q - (1.0 - y) * p)
            if self.name == "poisson":
                mu = np.exp(eta)
                return a * mu, a * (y - mu)
            if self.name == "gamma":
                return a.copy(), a * (y * np.exp(-eta) - 1.0)
            v = self.power
            mu1 = np.exp((1.0 - v) * eta)
            mu2 = np.exp((2.0 - v) * eta)
            return a * mu2, a * (y * mu1 - mu2)

    def deviance(self, eta: np.ndarray, y: np.ndarray, a: np.ndarray) -> float:
        """Sum of a_i times the unit deviance at eta (inf or NaN when eta is out of range)."""
        with np.errstate(all="ignore"):
            if self.name == "gaussian":
                d = (y - eta) ** 2
            elif self.name == "binomial":
                d = 2.0 * (
                    _xlogy(y, y)
                    + _xlogy(1.0 - y, 1.0 - y)
                    + y * np.logaddexp(0.0, -eta)
                    + (1.0 - y) * np.logaddexp(0.0, eta)
                )
            elif self.name == "poisson":
                d = 2.0 * (_xlogy(y, y) - y * eta - y + np.exp(eta))
            elif self.name == "gamma":
                ratio = y * np.exp(-eta)
                d = 2.0 * (-np.log(ratio) + ratio - 1.0)
            else:
                v = self.power
                d = 2.0 * (
                    y ** (2.0 - v) / ((1.0 - v) * (2.0 - v))
                    - y * np.exp((1.0 - v) * eta) / (1.0 - v)
                    + np.exp((2.0 - v) * eta) / (2.0 - v)
                )
            return float(np.dot(a, d))

    def pearson(self, eta: np.ndarray, y: np.ndarray, a: np.ndarray) -> float:
        """Pearson chi-square: sum of a_i (y_i - mu_i)^2 / V(mu_i)."""
        mu = self.mean(eta)
        if self.name == "gaussian":
            var = np.ones_like(mu)
        elif self.name == "binomial":
            var = _expit(eta) * _expit(-eta)
        else:
            var = mu**self.power
        return float(np.dot(a, (y - mu) ** 2 / var))

    def at_boundary(self, eta: np.ndarray, y: np.ndarray, mean: float | None = None) -> np.ndarray:
        """Rows whose fitted value has reached the boundary of its range: a probability
        within ``BOUNDARY`` of 0 or 1, or a fitted mean of a zero count below ``BOUNDARY``
        times the mean response (``mean``, computed here when None)."""
        if self.name == "binomial":
            return np.abs(eta) > -math.log(BOUNDARY)  # type: ignore[no-any-return]
        if self.name in ("poisson", "tweedie"):
            scale = float(np.mean(y)) if mean is None else mean
            return (y == 0) & (eta < math.log(BOUNDARY * scale))  # type: ignore[no-any-return]
        return np.zeros(eta.shape, dtype=bool)
