"""GLM reference cases on datasets shipped with statsmodels (spector, randhie, scotland, fair,
star98), with their statsmodels fit and their request body; shared by the core and HTTP tests.

statsmodels (0.15.0) is fitted with ``tol=1e-13`` on its parameters, so its own stopping error
is far below every tolerance the tests check.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import statsmodels.api as sm

SM_FIT = {"tol": 1e-13, "tol_criterion": "params", "maxiter": 500}


@dataclass(frozen=True)
class Case:
    x: pd.DataFrame
    y: np.ndarray
    family: str
    var_power: float | None = None
    trials: np.ndarray | None = None

    def statsmodels_family(self) -> sm.families.Family:
        log = sm.families.links.Log()
        return {
            "binomial": sm.families.Binomial(),
            "poisson": sm.families.Poisson(),
            "gamma": sm.families.Gamma(link=log),
            "tweedie": sm.families.Tweedie(var_power=self.var_power or 1.5, link=log),
            "gaussian": sm.families.Gaussian(),
        }[self.family]

    def statsmodels_endog(self) -> np.ndarray:
        if self.trials is None:
            return self.y
        # statsmodels takes (successes, failures) for a binomial with trials.
        return np.column_stack([self.y * self.trials, (1.0 - self.y) * self.trials])

    def statsmodels_fit(self, **model: Any) -> Any:
        """statsmodels' GLM of y on x with a constant (``model``: offset, var_weights, ...)."""
        glm = sm.GLM(
            self.statsmodels_endog(),
            sm.add_constant(self.x),
            family=self.statsmodels_family(),
            **model,
        )
        return glm.fit(**SM_FIT)

    def columns(self) -> dict[str, list[float]]:
        """The table as JSON columns: the predictors, ``outcome`` and ``trials_n``."""
        cols = {str(c): self.x[c].astype(float).tolist() for c in self.x.columns}
        cols["outcome"] = self.y.tolist()
        if self.trials is not None:
            cols["trials_n"] = self.trials.tolist()
        return cols

    def body(self, **options: Any) -> dict[str, Any]:
        """A JSON request for this case under its family, with ``options`` added."""
        inp: dict[str, Any] = {"kind": "table", "columns": self.columns(), "response": "outcome"}
        if self.trials is not None:
            inp["trials"] = "trials_n"
        opts: dict[str, Any] = {"family": self.family, **options}
        if self.var_power is not None:
            opts["var_power"] = self.var_power
        return {"input": inp, "options": opts}


def _cases() -> dict[str, Case]:
    spector = sm.datasets.spector.load_pandas()
    randhie = sm.datasets.randhie.load_pandas()
    scotland = sm.datasets.scotland.load_pandas()
    fair = sm.datasets.fair.load_pandas()
    star98 = sm.datasets.star98.load_pandas()
    counts = star98.endog.to_numpy(dtype=float)
    trials = counts.sum(axis=1)
    return {
        # GRADE (0/1) on GPA, TUCE, PSI: logit.
        "spector": Case(spector.exog, spector.endog.to_numpy(dtype=float), "binomial"),
        # mdvis (doctor visits, counts) on nine insurance and health variables: log.
        "randhie": Case(randhie.exog, randhie.endog.to_numpy(dtype=float), "poisson"),
        # YES (percentage voting yes, positive) on seven council variables: gamma, log link.
        "scotland": Case(scotland.exog, scotland.endog.to_numpy(dtype=float), "gamma"),
        # affairs (non-negative, 68% zeros) on eight variables: tweedie, v = 1.5, log link.
        "fair": Case(fair.exog, fair.endog.to_numpy(dtype=float), "tweedie", var_power=1.5),
        # NABOVE of NABOVE + NBELOW on twenty school variables: binomial with trials.
        "star98": Case(star98.exog, counts[:, 0] / trials, "binomial", trials=trials),
    }


CASES = _cases()
