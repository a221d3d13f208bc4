"""The regression the remedies fit, on the correlation scale, and its way back to original units."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np


@dataclass(frozen=True, slots=True, eq=False)
class Regression:
    """The regression of the response on the predictors, as ridge and the components fit it.

    Both work on the correlation scale (predictors and response standardized, or divided by
    their root mean squares without intercept); this record holds what they need besides the
    matrix: the sample size and the model's form, the response's correlations with the
    predictors, and the scales and means that state a fit in original units.

    Attributes
    ----------
    n
        Number of observations (or sum of weights).
    intercept
        Whether the model has an intercept (residual df n - 1 - parameters, else n - parameters).
    r_xy
        Correlations of the predictors with the response (cosines without intercept), (p,);
        None without a response.
    sds, response_sd
        Standard deviations of the predictors and the response, for coefficients in original
        units; None when they are not known (a correlation matrix, or a model without
        intercept).
    means, response_mean
        Means of the predictors and the response, for the intercept in original units (with
        an intercept only).
    """

    n: float
    intercept: bool = True
    r_xy: np.ndarray | None = None
    sds: np.ndarray | None = None
    response_sd: float | None = None
    means: np.ndarray | None = None
    response_mean: float | None = None

    def __post_init__(self) -> None:
        for name in ("r_xy", "sds", "means"):
            value = getattr(self, name)
            if value is not None:
                object.__setattr__(self, name, np.asarray(value, dtype=float))

    @property
    def dof(self) -> float:
        """n - 1 with an intercept, n without: the total degrees of freedom of the response."""
        return float(self.n) - (1.0 if self.intercept else 0.0)

    def _ratio(self) -> np.ndarray | None:
        """sd_y / sd_j for every predictor, or None when the scales are not known."""
        if self.sds is None or self.response_sd is None:
            return None
        return float(self.response_sd) / self.sds

    def original(self, b: np.ndarray) -> tuple[np.ndarray, np.ndarray | None] | None:
        """Coefficients on the correlation scale stated in original units, and the intercept.

        ``b`` is one fit (p,) or several side by side (p, m). Returns
        :math:`\\beta_j = b_j s_y / s_j` in the shape of ``b`` and the intercept
        :math:`\\bar y - \\sum_j \\beta_j \\bar x_j` (a scalar array, or one per fit; None
        without an intercept or the means), or None when the scales are not known.
        """
        ratio = self._ratio()
        if ratio is None:
            return None
        beta = b * (ratio if b.ndim == 1 else ratio[:, None])
        icpt = None
        if self.intercept and self.means is not None and self.response_mean is not None:
            icpt = self.response_mean - self.means @ beta
        return beta, icpt

    def original_variances(self, var: np.ndarray) -> np.ndarray | None:
        """Variances of coefficients on the correlation scale in original units.

        :math:`\\mathrm{Var}(\\beta_j) = \\mathrm{Var}(b_j) (s_y / s_j)^2`; None when the
        scales are not known.
        """
        ratio = self._ratio()
        return None if ratio is None else var * ratio**2
