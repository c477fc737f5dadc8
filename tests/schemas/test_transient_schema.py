"""One matched 422 per input rule of the transient request."""

from __future__ import annotations

import copy

import pytest
from marshmallow import ValidationError

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.transient import TransientRequestSchema
from service.problems import flatten_errors
from service.solvers.errors import TooLargeError
from tests.conftest import TRANSIENT_PAYLOAD

DELETE = object()


def _errors(changes):
    payload = copy.deepcopy(TRANSIENT_PAYLOAD)
    for key, value in changes.items():
        if value is DELETE:
            payload.pop(key)
        else:
            payload[key] = value
    with pytest.raises(ValidationError) as info:
        TransientRequestSchema().load(payload)
    return flatten_errors(info.value.messages)


RULES = [
    ({"shape": "cube"}, "shape", "Must be one of"),
    ({"half_thickness": 0}, "half_thickness", "greater than 0"),
    ({"half_thickness": DELETE}, "half_thickness", "Required for shape 'slab'"),
    ({"radius": 0.1}, "radius", "Not used by shape 'slab'"),
    ({"shape": "bar", "half_thickness": DELETE, "half_widths": [0.1, 0.2, 0.3],
      "positions": [[0, 0]]}, "half_widths", "takes 2 half-widths"),
    ({"shape": "bar", "half_thickness": DELETE, "half_widths": [0.1, 0.2],
      "positions": [0.1]}, "positions.0", "points of 2 coordinates"),
    ({"positions": [[0.1, 0.1]]}, "positions.0", "single distance"),
    ({"positions": [-0.01]}, "positions.0", "at least 0"),
    ({"times": []}, "times", "Shorter than minimum"),
    ({"times": [10, 5]}, "times", "strictly increasing"),
    ({"times": [-1]}, "times.0", "at least 0"),
    ({"times": DELETE}, "times", "required"),
    ({"conductivity": -1}, "conductivity", "greater than 0"),
    ({"density": DELETE}, "density", "Give density and specific_heat, or diffusivity"),
    ({"initial_temperature": "-500 degC"}, "initial_temperature", "below absolute zero"),
    ({"surface": {"type": "flux", "value": 100}}, "surface.type", "semi_infinite only"),
    ({"surface": {"type": "convection", "ambient": 20}}, "surface.film_coefficient",
     "required"),
    ({"surface": {"type": "radiation"}}, "surface.type", "Must be one of"),
    ({"target": {"position": 0}}, "target.temperature", "required"),
    ({"tolerance": -1}, "tolerance", "greater than 0"),
    ({"colour": "red"}, "colour", "Unknown field"),
]


@pytest.mark.parametrize(("changes", "path", "message"), RULES)
def test_rule(changes, path, message):
    errors = _errors(changes)
    assert path in errors, errors
    assert any(message in m for m in errors[path]), errors[path]


def test_too_many_values_refused_before_parsing():
    token = CURRENT_BUDGETS.set(Budgets(max_output_values=10))
    try:
        payload = copy.deepcopy(TRANSIENT_PAYLOAD)
        payload["times"] = list(range(1, 5))
        with pytest.raises(TooLargeError, match="limit is 10"):
            TransientRequestSchema().load(payload)
    finally:
        CURRENT_BUDGETS.reset(token)
