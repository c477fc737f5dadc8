"""One matched 422 per input rule of the layers request."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from marshmallow import ValidationError

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.layers import LayersRequestSchema
from service.problems import flatten_errors
from service.solvers.errors import TooLargeError
from tests.conftest import LAYERS_PAYLOAD

DELETE = object()

AIR = {"type": "air", "ambient": 20, "emissivity": 0.9}
PLANE = {"geometry": "plane", "inner_radius": DELETE, "length": DELETE, "area": 2.0}
SOLID_CORE = {"inner_radius": 0, "inside": {"type": "flux", "value": 0}}


def apply(payload: dict, changes: dict) -> dict:
    """Set or delete dotted paths ("layers.0.thickness") in a copy of payload."""
    out = copy.deepcopy(payload)
    for path, value in changes.items():
        *parents, last = path.split(".")
        node = out
        for part in parents:
            node = node[int(part)] if isinstance(node, list) else node[part]
        if isinstance(node, list):
            node[int(last)] = value
        elif value is DELETE:
            node.pop(last, None)
        else:
            node[last] = value
    return out


def _errors(changes: dict) -> dict[str, list[str]]:
    with pytest.raises(ValidationError) as info:
        LayersRequestSchema().load(apply(LAYERS_PAYLOAD, changes))
    return flatten_errors(info.value.messages)


RULES = [
    # geometry and sizes
    ({"geometry": "cube"}, "geometry", "Must be one of"),
    ({"inner_radius": DELETE}, "inner_radius", "Required for geometry 'cylinder'"),
    ({"inner_radius": -0.01}, "inner_radius", "at least 0"),
    ({"inner_radius": "20 km"}, "inner_radius", "at most 10000 m"),
    ({"area": 2.0}, "area", "Not used by geometry 'cylinder'"),
    (PLANE | {"inner_radius": 0.05}, "inner_radius", "Not used by geometry 'plane'"),
    ({"geometry": "sphere", "length": 2.0}, "length", "Not used by geometry 'sphere'"),
    ({"length": 0}, "length", "at least 1e-09 m"),
    (PLANE | {"area": 0}, "area", "at least 1e-12 m^2"),
    # layers
    ({"layers": []}, "layers", "Shorter than minimum"),
    ({"layers.0.thickness": 0}, "layers.0.thickness", "at least 1e-09 m"),
    ({"layers.0.thickness": DELETE}, "layers.0.thickness", "required"),
    ({"layers.1.conductivity": -0.04}, "layers.1.conductivity", "at least 1e-05"),
    ({"layers.1.conductivity": "1 MW/(m*K)"}, "layers.1.conductivity", "at most 100000"),
    ({"layers.1.conductivity_slope": 5000}, "layers.1.conductivity_slope", "at most 1000"),
    ({"layers.0.generation": "5 kg"}, "layers.0.generation", "not a unit of generation"),
    ({"layers.0.generation": 1e14}, "layers.0.generation", "at most 1e+13"),
    ({"layers.0.conductivity_temperature": 2e4}, "layers.0.conductivity_temperature",
     "at most 10000 degC"),
    ({"layers.1.max_temperature": "-500 degC"}, "layers.1.max_temperature",
     "below absolute zero"),
    ({"layers.0.name": "x" * 201}, "layers.0.name", "Longer than maximum"),
    ({"layers.0.colour": "grey"}, "layers.0.colour", "Unknown field"),
    # contact resistances
    ({"contact_resistances": [0.001, 0.002]}, "contact_resistances",
     "one value per interface (1 for 2 layers)"),
    ({"contact_resistances": [-1e-4]}, "contact_resistances.0", "at least 0"),
    ({"contact_resistances": [20]}, "contact_resistances.0", "at most 10 m^2*K/W"),
    # surfaces: types and their fields
    ({"inside": {"type": "radiation"}}, "inside.type", "Must be one of"),
    ({"inside": "hot"}, "inside", "Must be an object with a 'type'"),
    ({"inside.film_coefficient": 0}, "inside.film_coefficient", "at least 1e-06"),
    ({"inside.ambient": DELETE}, "inside.ambient", "required"),
    ({"inside.ambient": 2e4}, "inside.ambient", "at most 10000 degC"),
    ({"outside.emissivity": 0}, "outside.emissivity", "greater than 0"),
    ({"outside.emissivity": 1.2}, "outside.emissivity", "at most 1"),
    ({"outside.emissivity": DELETE}, "outside.emissivity", "required"),
    ({"outside.surroundings": "-300 degC"}, "outside.surroundings", "below absolute zero"),
    ({"outside": {"type": "temperature"}}, "outside.value", "required"),
    ({"outside": {"type": "flux", "value": 2e9}}, "outside.value", "at most 1e+09"),
    ({"outside": {"type": "convection", "film_coefficient": 8, "ambient": 20,
                  "emissivity": 0.9}}, "outside.emissivity", "Unknown field"),
    # air surfaces
    ({"inside": AIR}, "inside.type", "plane walls only"),
    ({"outside": AIR | {"orientation": "facing_up"}}, "outside.orientation",
     "Must be one of: horizontal, vertical for a cylinder"),
    (PLANE | {"outside": AIR | {"orientation": "horizontal"}}, "outside.orientation",
     "Must be one of: vertical, facing_up, facing_down for a plane"),
    ({"outside": AIR | {"orientation": "sideways"}}, "outside.orientation", "Must be one of"),
    ({"geometry": "sphere", "length": DELETE, "outside": AIR | {"orientation": "vertical"}},
     "outside.orientation", "Not used by a sphere"),
    ({"outside": AIR | {"characteristic_length": 2.0}}, "outside.characteristic_length",
     "Not used by a horizontal cylinder"),
    ({"outside": AIR | {"orientation": "vertical", "characteristic_length": 0}},
     "outside.characteristic_length", "at least 1e-09"),
    ({"outside": AIR | {"wind_speed": -1}}, "outside.wind_speed", "at least 0"),
    ({"outside": AIR | {"wind_speed": "500 km/h"}}, "outside.wind_speed", "at most 100 m/s"),
    ({"outside": AIR | {"ambient": "50 K"}}, "outside.ambient", "at least -173.15 degC"),
    # solid core
    ({"inner_radius": 0}, "inside.type", "solid core"),
    # solve_for
    ({"solve_for": {"layer": 2, "target": {"surface_temperature": 55}}}, "solve_for.layer",
     "layer index, 0 to 1"),
    ({"solve_for": {"layer": -1, "target": {"surface_temperature": 55}}}, "solve_for.layer",
     "at least 0"),
    (SOLID_CORE | {"solve_for": {"layer": 0, "target": {"surface_temperature": 55}}},
     "solve_for.layer", "solid core"),
    ({"solve_for": {"layer": 1, "target": {"surface_temperature": 55, "heat_flux": 40}}},
     "solve_for.target", "exactly one"),
    ({"solve_for": {"layer": 1, "target": {}}}, "solve_for.target", "exactly one"),
    ({"solve_for": {"layer": 1}}, "solve_for.target", "required"),
    ({"solve_for": {"layer": 1, "target": {"heat_flow": -5}}}, "solve_for.target.heat_flow",
     "greater than 0"),
    ({"solve_for": {"layer": 1, "target": {"heat_flow": 1e16}}}, "solve_for.target.heat_flow",
     "at most 1e+15 W"),
    ({"solve_for": {"layer": 1, "target": {"heat_flow_per_length": 1e13}}},
     "solve_for.target.heat_flow_per_length", "at most 1e+12 W/m"),
    ({"solve_for": {"layer": 1, "target": {"heat_flux": 0}}}, "solve_for.target.heat_flux",
     "greater than 0"),
    ({"solve_for": {"layer": 1, "target": {"heat_flux": 2e9}}}, "solve_for.target.heat_flux",
     "at most 1e+09 W/m^2"),
    ({"solve_for": {"layer": 1, "target": {"surface_temperature": 2e4}}},
     "solve_for.target.surface_temperature", "at most 10000 degC"),
    (PLANE | {"solve_for": {"layer": 1, "target": {"heat_flow_per_length": 20}}},
     "solve_for.target.heat_flow_per_length", "Applies to cylinders"),
    ({"outside": {"type": "temperature", "value": 40},
      "solve_for": {"layer": 1, "target": {"surface_temperature": 55}}},
     "solve_for.target.surface_temperature", "fixed by the outside condition"),
    ({"outside": {"type": "flux", "value": -50},
      "solve_for": {"layer": 1, "target": {"heat_flux": 40}}},
     "solve_for.target.heat_flux", "heat loss cannot be a target"),
    # numerics and unknown keys
    ({"profile_points": 1}, "profile_points", "at least 2"),
    ({"profile_points": 2.5}, "profile_points", "Not an integer"),
    ({"tolerance": 0}, "tolerance", "greater than 0"),
    ({"tolerance": 5000}, "tolerance", "at most 1000 K"),
    ({"max_iterations": 0}, "max_iterations", "at least 1"),
    ({"max_iterations": 5000}, "max_iterations", "at most 1000"),
    ({"colour": "red"}, "colour", "Unknown field"),
]


@pytest.mark.parametrize(("changes", "path", "message"), RULES)
def test_rule(changes, path, message):
    errors = _errors(changes)
    assert path in errors, errors
    assert any(message in m for m in errors[path]), errors[path]


@pytest.mark.parametrize("changes", [
    {},
    PLANE,
    {"geometry": "sphere", "length": DELETE},
    SOLID_CORE | {"solve_for": {"layer": 1, "target": {"surface_temperature": 55}}},
    PLANE | {"outside": AIR | {"orientation": "facing_up", "characteristic_length": 0.5,
                               "wind_speed": "10 km/h"}},
    {"outside": AIR | {"orientation": "vertical", "characteristic_length": "6 ft"}},
    {"contact_resistances": []},
    {"solve_for": {"layer": 1, "target": {"heat_flow_per_length": "50 BTU/(h*ft)"}}},
], ids=["cylinder", "plane", "sphere", "solid-core", "plane-air", "vertical-pipe-air",
        "no-contacts", "per-length-target"])
def test_valid_variants_build_the_problem(changes):
    problem = LayersRequestSchema().load(apply(LAYERS_PAYLOAD, changes)).problem
    assert len(problem.layers) == 2
    assert problem.geometry == apply(LAYERS_PAYLOAD, changes)["geometry"]


def test_request_maps_onto_the_solver_input():
    payload = apply(LAYERS_PAYLOAD, {
        "layers.1.thickness": "50 mm", "outside": AIR | {"orientation": "vertical",
                                                          "characteristic_length": "2 m"},
        "solve_for": {"layer": 1, "target": {"surface_temperature": "131 degF"}},
        "tolerance": 0.01, "max_iterations": 50})
    problem = LayersRequestSchema().load(payload).problem
    # 50 mm = 0.05 m (SI prefix definition)
    np.testing.assert_allclose(problem.layers[1].thickness, 0.05, rtol=1e-12, atol=0)
    assert problem.layers[1].name == "mineral wool"
    assert problem.layers[1].max_temperature == 650
    assert problem.outside.characteristic_length == 2.0
    # 131 degF = 55 degC (definition of the Fahrenheit scale)
    np.testing.assert_allclose(problem.solve_for.target.surface_temperature, 55.0, rtol=1e-12,
                               atol=1e-12)
    assert problem.atol == 0.01 and problem.max_iterations == 50
    assert problem.contact_resistances == (0.0,)
    assert problem.limits.max_surface_temperature == 60


def test_default_air_length_is_the_solvers():
    payload = apply(LAYERS_PAYLOAD, {"outside": AIR})
    problem = LayersRequestSchema().load(payload).problem
    assert problem.outside.characteristic_length == 1.0
    assert problem.length == 1.0 and problem.area == 1.0


def test_too_many_profile_points_refused_before_parsing():
    token = CURRENT_BUDGETS.set(Budgets(max_profile_points=100))
    try:
        with pytest.raises(TooLargeError, match="limit is 100"):
            LayersRequestSchema().load(apply(LAYERS_PAYLOAD, {"profile_points": 101}))
        too_many = [{"thickness": 0.01, "conductivity": 1.0}] * 51
        with pytest.raises(TooLargeError, match="51 layers"):
            LayersRequestSchema().load(apply(LAYERS_PAYLOAD, {"layers": too_many}))
    finally:
        CURRENT_BUDGETS.reset(token)
