"""One matched 422 (or 413) per input rule of the plate request."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from marshmallow import ValidationError

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.plate import PlateRequestSchema
from service.problems import flatten_errors
from service.solvers.errors import TooLargeError
from tests.conftest import PLATE_PAYLOAD


def _errors(payload):
    with pytest.raises(ValidationError) as info:
        PlateRequestSchema().load(payload)
    return flatten_errors(info.value.messages)


def _with(path, value):
    payload = copy.deepcopy(PLATE_PAYLOAD)
    target = payload
    keys = path.split(".")
    for key in keys[:-1]:
        target = target[int(key)] if isinstance(target, list) else target[key]
    if value is DELETE:
        del target[keys[-1]]
    else:
        target[keys[-1]] = value
    return payload


DELETE = object()

RULES = [
    ("width", -1, "width", "at least 1e-06"),
    ("width", 0, "width", "at least 1e-06"),
    ("height", 2e4, "height", "at most 10000"),
    ("width", DELETE, "width", "required"),
    ("width", "5 kg", "width", "not a unit of length"),
    ("width", "5 zorks", "width", "nknown unit"),
    ("width", "5", "width", "must carry a unit"),
    ("width", True, "width", "Not a number"),
    ("width", [1], "width", "Not a number"),
    ("height", "abc", "height", "xpected a number"),
    ("conductivity", -52, "conductivity", "greater than 0"),
    ("conductivity", 2e5, "conductivity", "at most 100000"),
    ("generation", -2e13, "generation", "at least -1e+13"),
    ("generation", "1e400 W/m^3", "generation", "not finite"),
    ("edges.top.type", "radiation", "edges.top.type", "Must be one of"),
    ("edges.top", "hot", "edges.top", "Must be an object"),
    ("edges.right.film_coefficient", 0, "edges.right.film_coefficient", "greater than 0"),
    ("edges.right.film_coefficient", 1e8, "edges.right.film_coefficient", "at most 1e+07"),
    ("edges.right.ambient", 2e4, "edges.right.ambient", "at most 10000"),
    ("edges.top.value", 2e9, "edges.top.value", "at most 1e+09"),
    ("edges.right.ambient", DELETE, "edges.right.ambient", "required"),
    ("edges.top.value", DELETE, "edges.top.value", "required"),
    ("edges.bottom.value", -300, "edges.bottom.value", "below absolute zero"),
    ("edges.bottom.value", 2e4, "edges.bottom.value", "at most 10000"),
    ("edges.bottom.colour", "red", "edges.bottom.colour", "Unknown field"),
    ("edges.left", DELETE, "edges.left", "required"),
    ("edges.bottom.profile", [[0, 10], [0.7, 20]], "edges.bottom.profile", "within the edge"),
    ("edges.bottom.profile", [[0.3, 10], [0.2, 20]], "edges.bottom.profile", "increasing"),
    ("points", [[0.7, 0.5]], "points.0", "outside"),
    ("points", [[0.1]], "points.0", "Length must be 2"),
    ("points", [[-2e4, 0.5]], "points.0.0", "at least -10000"),
    ("grid", {"nx": 1, "ny": 5}, "grid.nx", "at least 2"),
    ("grid", {"nx": 2.5, "ny": 5}, "grid.nx", "Not an integer"),
    ("method", "fastest", "method", "Must be one of"),
    ("tolerance", 0, "tolerance", "greater than 0"),
    ("tolerance", 1e4, "tolerance", "at most 1000"),
    ("limits", {"max_temperature": 50, "min_temperature": 60}, "limits.min_temperature",
     "below max_temperature"),
    ("limits", {"warning_margin": -1}, "limits.warning_margin", "at least 0"),
    ("limits", {"max_temp": 50}, "limits.max_temp", "Unknown field"),
    ("output_units", {"temperature": "kg"}, "output_units.temperature", "not a unit"),
    ("output_units", {"colour": "red"}, "output_units.colour", "Unknown quantity kind"),
    ("accept_unconverged", "yes please", "accept_unconverged", "Not a valid boolean"),
    ("widht", 1, "widht", "Unknown field"),
]


@pytest.mark.parametrize(("path", "value", "error_path", "message"), RULES)
def test_rule(path, value, error_path, message):
    if path == "edges.bottom.profile":
        payload = _with("edges.bottom.value", DELETE)
        payload["edges"]["bottom"]["profile"] = value
    else:
        payload = _with(path, value)
    errors = _errors(payload)
    assert error_path in errors, errors
    assert any(message in m for m in errors[error_path]), errors[error_path]


def test_value_and_profile_together_rejected():
    payload = _with("edges.bottom.profile", [[0, 10], [0.6, 20]])
    assert "edges.bottom.value" in _errors(payload)


def test_too_many_points_refused_before_parsing():
    token = CURRENT_BUDGETS.set(Budgets(max_points=3))
    try:
        with pytest.raises(TooLargeError, match="limit is 3"):
            PlateRequestSchema().load(_with("points", [[0, 0]] * 4))
    finally:
        CURRENT_BUDGETS.reset(token)


def test_absurd_grid_refused_before_allocation():
    with pytest.raises(TooLargeError, match="output values asked"):
        PlateRequestSchema().load(_with("grid", {"nx": 100000, "ny": 100000}))


def test_units_are_converted_on_load():
    payload = _with("width", "600 mm")
    payload["edges"]["bottom"]["value"] = "212 degF"
    problem = PlateRequestSchema().load(payload).problem.plate
    # 600 mm = 0.6 m; 212 degF = 100 degC (definitions)
    np.testing.assert_allclose(problem.width, 0.6, rtol=1e-12, atol=0)
    np.testing.assert_allclose(problem.bottom.value, 100.0, rtol=1e-12, atol=1e-12)


@pytest.mark.parametrize("method", ["auto", "series", "grid", "both"])
def test_every_method_is_accepted(method):
    token = CURRENT_BUDGETS.set(Budgets(max_cells=12345))
    try:
        problem = PlateRequestSchema().load(_with("method", method)).problem
    finally:
        CURRENT_BUDGETS.reset(token)
    assert problem.method == method and problem.max_cells == 12345
