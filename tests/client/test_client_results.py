"""Typed results: decoding the wire document, tolerance of new fields, and the frames."""

from __future__ import annotations

import math

import msgspec
import numpy as np
import pandas as pd
import pytest
from answer_fields import VARIABLE_FIELDS

from knotwork_client import Assessment, ProblemDetails

DOCUMENT = {
    "variables": [
        {
            "name": "oven_hours",
            "vif": 12.5,
            "tolerance": 0.08,
            "r_squared": 0.92,
            "se_inflation": math.sqrt(12.5),
            "above_threshold": True,
            "aliased": False,
        },
        {
            "name": "flour_kg",
            "vif": None,
            "tolerance": 0.0,
            "r_squared": 1.0,
            "se_inflation": None,
            "above_threshold": True,
            "aliased": True,
        },
        {
            "name": "staff_shifts",
            "vif": 1,  # an integer on the wire is still a float here
            "tolerance": 1,
            "r_squared": 0,
            "se_inflation": 1,
            "above_threshold": False,
            "aliased": False,
        },
    ],
    "terms": [
        {
            "name": "region",
            "columns": ["region[hill]", "region[market]"],
            "df": 2,
            "gvif": 1.8,
            "gvif_scaled": 1.158,
        },
    ],
    "conditioning": {
        "basis": "scaled design, intercept uncentred",
        "eigenvalues": [2.5, 0.4, 0.1],
        "condition_number": 31.6,
        "indices": [1.0, 2.5, 31.6],
        "proportions": [[0.1, 0.2, 0.7]],
        "tangles": [{"index": 31.6, "variables": ["oven_hours", "flour_kg"]}],
        "a_later_field": 1,
    },
    "tests": {
        "determinant": 0.01,
        "farrar_glauber": {"chi_square": 123.4, "df": 3, "p_value": 1e-20},
        "variable_f": [{"name": "oven_hours", "f": 40.0}],
    },
    "dependencies": [{"variables": ["flour_kg", "oven_hours"], "weights": [1.0, -11.0]}],
    "removal": {
        "threshold": 5.0,
        "steps": [
            {"drop": "flour_kg", "vif": None, "max_vif_after": 1.3},
            {"drop": "staff_shifts", "vif": 1.3, "max_vif_after": 1.0},
        ],
        "kept": ["oven_hours"],
        "stopped_by_protection": False,
    },
    "ridge": {
        "k_scale": "correlation",
        "trace": [
            {
                "k": 0.0,
                "vif": [12.5, None, 1.0],
                "max_vif": None,
                "effective_df": 3.0,
                "coefficients": [0.5, 0.2, 0.1],
            },
            {
                "k": 0.1,
                "vif": [3.0, 2.0, 0.9],
                "max_vif": 3.0,
                "effective_df": 2.4,
                "coefficients": [0.4, 0.25, 0.1],
            },
        ],
        "choices": [{"rule": "hoerl_kennard_baldwin", "k": 0.004}, {"rule": "gcv", "k": None}],
    },
    "components": {
        "eigenvalues": [2.5, 0.4, 0.1],
        "explained": [0.83, 0.13, 0.04],
        "cumulative": [0.83, 0.96, 1.0],
        "condition_indices": [1.0, 2.5, 5.0],
        "loadings": [[0.6, 0.6, 0.5]],
        "kept": [0, 1],
        "rule": "cumulative",  # the wire shape: the rule and its limit side by side
        "limit": 0.9,
        "coefficients": None,
    },
    "warnings": [{"code": "exact_dependency", "message": "flour_kg is aliased"}],
    "cautions": ["VIF thresholds are rules of thumb"],
    "n": 400,
    "p": 3,
    "input_kind": "moments",
    "field_added_by_a_newer_service": {"anything": [1, 2]},
}


@pytest.fixture
def assessment() -> Assessment:
    return msgspec.json.decode(msgspec.json.encode(DOCUMENT), type=Assessment)


def test_decodes_every_section(assessment):
    assert [v.name for v in assessment.variables] == ["oven_hours", "flour_kg", "staff_shifts"]
    assert assessment.variables[1].vif is None and assessment.variables[1].aliased
    assert assessment.variables[2].vif == 1.0 and isinstance(assessment.variables[2].vif, float)
    assert assessment.terms[0].gvif_scaled == 1.158
    assert assessment.conditioning.tangles[0].variables == ["oven_hours", "flour_kg"]
    assert assessment.tests.farrar_glauber.df == 3
    assert assessment.dependencies[0].weights == [1.0, -11.0]
    assert assessment.ridge.choices[1].k is None
    assert assessment.components.kept == [0, 1]
    assert assessment.warnings[0].code == "exact_dependency"
    assert assessment.n == 400 and assessment.p == 3 and assessment.input_kind == "moments"
    assert assessment.max_vif == math.inf


def test_results_are_immutable(assessment):
    with pytest.raises(AttributeError):
        assessment.n = 3  # type: ignore[misc]


def test_sections_may_be_absent():
    a = msgspec.convert({"variables": DOCUMENT["variables"][:1], "n": 10, "p": 1}, Assessment)
    assert a.removal is None and a.ridge is None and a.conditioning is None
    assert a.removal_frame().empty and a.ridge_frame().empty
    assert a.max_vif == 12.5


def test_variables_frame(assessment):
    frame = assessment.to_frame()
    assert list(frame.index) == ["oven_hours", "flour_kg", "staff_shifts"]
    assert frame.index.name == "name"
    assert tuple(frame.columns) == VARIABLE_FIELDS
    assert frame.loc["oven_hours", "vif"] == 12.5
    assert np.isnan(frame.loc["flour_kg", "vif"])  # aliased: not finite, shown as NaN
    assert frame["aliased"].tolist() == [False, True, False]


def test_removal_frame(assessment):
    frame = assessment.removal_frame()
    assert frame.index.tolist() == [1, 2]
    assert frame["drop"].tolist() == ["flour_kg", "staff_shifts"]
    assert np.isnan(frame.loc[1, "vif"]) and frame.loc[2, "max_vif_after"] == 1.0


def test_ridge_frame(assessment):
    frame = assessment.ridge_frame()
    assert frame.index.name == "k" and frame.index.tolist() == [0.0, 0.1]
    assert frame.loc[0.1, "vif[flour_kg]"] == 2.0
    assert np.isnan(frame.loc[0.0, "vif[flour_kg]"])
    assert frame.loc[0.0, "coef[oven_hours]"] == 0.5
    pd.testing.assert_index_equal(
        frame.columns,
        pd.Index(
            ["max_vif", "effective_df"]
            + [f"vif[{n}]" for n in ("oven_hours", "flour_kg", "staff_shifts")]
            + [f"coef[{n}]" for n in ("oven_hours", "flour_kg", "staff_shifts")]
        ),
    )


def test_problem_details_defaults():
    p = msgspec.convert({"title": "x", "status": 400, "extra": 1}, ProblemDetails)
    assert p.type == "about:blank" and p.errors == [] and p.detail is None
