"""One matched 422 per input rule of the fin request."""

from __future__ import annotations

import numpy as np
import pytest
from marshmallow import ValidationError

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.fin import FinRequestSchema
from service.problems import flatten_errors
from service.solvers.errors import TooLargeError
from tests.conftest import FIN_PAYLOAD
from tests.schemas.test_layers_schema import DELETE, apply

PIN = {"shape": "pin", "thickness": DELETE, "width": DELETE, "diameter": 0.006}
ANNULAR = {"shape": "annular", "length": DELETE, "width": DELETE, "inner_radius": 0.0125,
           "outer_radius": 0.035}


def _errors(changes: dict) -> dict[str, list[str]]:
    with pytest.raises(ValidationError) as info:
        FinRequestSchema().load(apply(FIN_PAYLOAD, changes))
    return flatten_errors(info.value.messages)


RULES = [
    ({"shape": "wedge"}, "shape", "Must be one of"),
    # sizes per shape
    ({"thickness": DELETE}, "thickness", "Required for shape 'straight'."),
    ({"length": DELETE}, "length", "Required for shape 'straight' unless the tip is infinite"),
    ({"diameter": 0.01}, "diameter", "Not used by shape 'straight'"),
    (PIN | {"diameter": DELETE}, "diameter", "Required for shape 'pin'."),
    (PIN | {"thickness": 0.002}, "thickness", "Not used by shape 'pin'"),
    (ANNULAR | {"inner_radius": DELETE}, "inner_radius", "Required for shape 'annular'."),
    (ANNULAR | {"outer_radius": DELETE}, "outer_radius",
     "Required for shape 'annular' unless the tip is infinite"),
    (ANNULAR | {"outer_radius": 0.01}, "outer_radius", "Must exceed inner_radius"),
    (ANNULAR | {"width": 0.3}, "width", "Not used by shape 'annular'"),
    ({"length": 0}, "length", "at least 1e-06 m"),
    ({"length": "50 ft"}, "length", "at most 10 m"),
    ({"width": -1}, "width", "at least 1e-06 m"),
    # material, film and temperatures
    ({"conductivity": 0}, "conductivity", "at least 0.001"),
    ({"conductivity": 1e6}, "conductivity", "at most 100000"),
    ({"film_coefficient": 0}, "film_coefficient", "at least 1e-06"),
    ({"film_coefficient": DELETE}, "film_coefficient", "required"),
    ({"film_coefficient": 2e6}, "film_coefficient", "at most 1e+06"),
    ({"base_temperature": "-300 degC"}, "base_temperature", "below absolute zero"),
    ({"ambient": 2e4}, "ambient", "at most 10000 degC"),
    # tips
    ({"tip": "adiabatic"}, "tip", "Must be one of: convective, insulated, infinite"),
    ({"tip": 5}, "tip", "Must be a string"),
    ({"tip": {"temp": 50}}, "tip.temperature", "required"),
    ({"tip": {"temperature": 50, "colour": "red"}}, "tip.colour", "Unknown field"),
    ({"tip": {"temperature": "5 m"}}, "tip.temperature", "not a unit of temperature"),
    ({"tip": "insulated", "tip_film_coefficient": 10}, "tip_film_coefficient",
     "only with a convective tip"),
    ({"tip_film_coefficient": -1}, "tip_film_coefficient", "at least 0"),
    ({"tip_film_coefficient": 2e6}, "tip_film_coefficient", "at most 1e+06"),
    ({"tip": {"temperature": 2e4}}, "tip.temperature", "at most 10000 degC"),
    # arrays and profile
    ({"count": 0}, "count", "at least 1"),
    ({"count": 1.5}, "count", "Not an integer"),
    ({"count": 10**8}, "count", "at most 10000000"),
    ({"base_area": -0.1}, "base_area", "at least 0"),
    ({"base_area": 1e9}, "base_area", "at most 1e+08 m^2"),
    ({"profile_points": 1}, "profile_points", "at least 2"),
    ({"colour": "red"}, "colour", "Unknown field"),
]


@pytest.mark.parametrize(("changes", "path", "message"), RULES)
def test_rule(changes, path, message):
    errors = _errors(changes)
    assert path in errors, errors
    assert any(message in m for m in errors[path]), errors[path]


def test_infinite_tip_needs_no_length():
    problem = FinRequestSchema().load(apply(FIN_PAYLOAD, {"tip": "infinite",
                                                          "length": DELETE})).problem
    assert problem.tip == "infinite" and problem.length is None
    problem = FinRequestSchema().load(apply(FIN_PAYLOAD, ANNULAR | {
        "tip": "infinite", "outer_radius": DELETE})).problem
    assert problem.outer_radius is None


def test_request_maps_onto_the_solver_input():
    payload = apply(FIN_PAYLOAD, PIN | {"tip": {"temperature": "212 degF"}, "length": "80 mm"})
    problem = FinRequestSchema().load(payload).problem
    assert problem.shape == "pin" and problem.tip == "temperature"
    # 212 degF = 100 degC and 80 mm = 0.08 m (unit definitions)
    np.testing.assert_allclose(problem.tip_temperature, 100.0, rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(problem.length, 0.08, rtol=1e-12, atol=0)
    assert problem.count == 12 and problem.base_area == 0.02
    straight = FinRequestSchema().load(apply(FIN_PAYLOAD, {"width": DELETE})).problem
    assert straight.width == 1.0 and straight.tip == "convective"
    assert FinRequestSchema().load(apply(FIN_PAYLOAD, {"tip": DELETE})).problem.tip == \
        "convective"


def test_too_many_profile_points_refused_before_parsing():
    token = CURRENT_BUDGETS.set(Budgets(max_profile_points=100))
    try:
        with pytest.raises(TooLargeError, match="limit is 100"):
            FinRequestSchema().load(apply(FIN_PAYLOAD, {"profile_points": 101}))
    finally:
        CURRENT_BUDGETS.reset(token)
