"""Example requests for the OpenAPI document, the start-up curl line and the tests.

The scenario is our own and the numbers are generated (numpy, seed 20240611): sixteen orchard
plots, where soil moisture follows rainfall and irrigation closely, so the moisture reading is
nearly redundant given the other two. The correlation and moments examples summarize the same
plots (correlations rounded to 3 decimals, moments to 3). The estimates example is the
covariance of the least-squares estimates of yield on rainfall, irrigation, soil moisture and
sun hours with an intercept, fitted to the same plots (6 significant digits).
"""

from __future__ import annotations

from typing import Any

__all__ = [
    "CORRELATION_EXAMPLE",
    "ESTIMATES_EXAMPLE",
    "GLM_EXAMPLE",
    "MOMENTS_EXAMPLE",
    "PARTS_EXAMPLE",
    "TABLE_COLUMNS",
    "TABLE_EXAMPLE",
    "UNCERTAINTY_EXAMPLE",
]

#: The orchard plots, column by column.
TABLE_COLUMNS: dict[str, list[float]] = {
    "rainfall_mm": [56.8, 52.2, 62.2, 33.2, 64.3, 55.2, 49.1, 61.5,
                    30.7, 57.6, 49.0, 66.1, 66.6, 46.1, 46.0, 37.9],
    "irrigation_l": [32.1, 43.2, 48.6, 42.3, 40.3, 31.3, 42.0, 31.8,
                     42.4, 38.0, 48.6, 42.0, 53.7, 35.9, 47.6, 42.3],
    "soil_moisture": [32.4, 30.0, 39.4, 25.3, 34.1, 29.1, 29.3, 29.4,
                      25.4, 32.0, 31.3, 35.3, 41.2, 28.0, 31.8, 28.3],
    "sun_hours": [6.4, 8.4, 6.0, 7.1, 6.4, 8.0, 5.8, 8.1, 5.6, 5.4, 6.3, 7.1, 5.2, 6.4, 7.0, 7.0],
    "tree_age_y": [7.0, 15.0, 15.0, 12.0, 13.0, 16.0, 16.0, 17.0,
                   6.0, 7.0, 13.0, 15.0, 19.0, 6.0, 4.0, 11.0],
    "yield_kg": [33.9, 47.3, 42.6, 39.3, 38.6, 45.0, 36.1, 46.1,
                 30.3, 33.8, 41.5, 43.7, 44.3, 35.2, 42.9, 34.7],
}  # fmt: skip
ROOTSTOCK = ["semi", "dwarf", "dwarf", "dwarf", "dwarf", "standard", "semi", "semi",
             "semi", "semi", "standard", "standard", "semi", "semi", "dwarf", "dwarf"]  # fmt: skip

TABLE_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "table",
        "columns": TABLE_COLUMNS,
        "categorical": {"rootstock": ROOTSTOCK},
        "response": "yield_kg",
    },
    "options": {"threshold": 5, "protect": ["irrigation_l"]},
}

#: The same plots with intervals for every VIF from 500 resamples of the rows.
UNCERTAINTY_EXAMPLE: dict[str, Any] = {
    "input": TABLE_EXAMPLE["input"],
    "options": {
        "threshold": 5,
        "sections": ["variables", "terms", "removal"],
        "uncertainty": {"method": "bootstrap", "replicates": 500, "seed": 1},
    },
}

#: Codling moths caught in each plot's trap over a week (generated: poisson, log mean rising
#: with rainfall and falling with sun hours), for the GLM example.
MOTHS_CAUGHT = [2.0, 1.0, 2.0, 2.0, 4.0, 2.0, 0.0, 2.0, 2.0, 3.0, 1.0, 2.0, 3.0, 2.0, 1.0, 1.0]

GLM_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "table",
        "columns": {
            **{k: v for k, v in TABLE_COLUMNS.items() if k != "yield_kg"},
            "moths_caught": MOTHS_CAUGHT,
        },
        "response": "moths_caught",
    },
    "options": {"family": "poisson", "sections": ["variables", "conditioning", "removal"]},
}

CORRELATION_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "correlation",
        "names": ["rainfall_mm", "irrigation_l", "soil_moisture", "sun_hours"],
        "matrix": [
            [1.0, -0.016, 0.805, -0.015],
            [-0.016, 1.0, 0.493, -0.426],
            [0.805, 0.493, 1.0, -0.353],
            [-0.015, -0.426, -0.353, 1.0],
        ],
        "n": 16,
    },
    "options": {"threshold": 5, "sections": ["variables", "conditioning", "removal"]},
}

MOMENTS_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "moments",
        "names": ["rainfall_mm", "irrigation_l", "soil_moisture"],
        "n": 16,
        "means": [52.156, 41.381, 31.394],
        "covariance": [
            [127.733, -1.19, 40.31],
            [-1.19, 41.578, 14.067],
            [40.31, 14.067, 19.607],
        ],
    },
    "options": {"threshold": 10, "intercept": True},
}

PARTS_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "moments",
        "names": ["rainfall_mm", "irrigation_l", "soil_moisture"],
        "parts": [
            {
                "n": 8,
                "means": [54.312, 38.95, 31.125],
                "covariance": [
                    [99.71, -11.604, 31.261],
                    [-11.604, 41.443, 10.443],
                    [31.261, 10.443, 17.794],
                ],
            },
            {
                "n": 8,
                "means": [50.0, 43.812, 31.662],
                "covariance": [
                    [163.377, 21.037, 56.443],
                    [21.037, 34.141, 18.206],
                    [56.443, 18.206, 24.057],
                ],
            },
        ],
    },
}

ESTIMATES_EXAMPLE: dict[str, Any] = {
    "input": {
        "kind": "estimates",
        "names": ["intercept", "rainfall_mm", "irrigation_l", "soil_moisture", "sun_hours"],
        "covariance": [
            [58.8832, 0.288202, -0.105321, -1.29108, -4.33379],
            [0.288202, 0.0208158, 0.017884, -0.0587374, -0.0406705],
            [-0.105321, 0.017884, 0.0250758, -0.0559937, -0.0161592],
            [-1.29108, -0.0587374, -0.0559937, 0.184987, 0.130208],
            [-4.33379, -0.0406705, -0.0161592, 0.130208, 0.457397],
        ],
        "intercept": "intercept",
        "n": 16,
    },
    "options": {"threshold": 5},
}
