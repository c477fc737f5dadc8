from __future__ import annotations

import copy
from typing import Any

import pytest

from schemas.dumping import reference_checks, set_reference_check
from service.app import create_app

# Every response dumped in this process by the compiled dumper (schemas/dumping.py) is also dumped
# by marshmallow and compared exactly; a difference fails the test that produced it, even where
# the exception became a response (a batch item, a 500 problem). The integration tests' gunicorn
# runs without it.
set_reference_check(True)


@pytest.fixture(autouse=True)
def _compiled_dumps_match_marshmallow():
    before = len(reference_checks()[2])
    yield
    found = reference_checks()[2][before:]
    assert not found, "compiled dump differs from marshmallow's: " + "; ".join(found)


def pytest_terminal_summary(terminalreporter: Any) -> None:
    enabled, count, mismatches = reference_checks()
    terminalreporter.write_line(f"compiled dumps identical to marshmallow's: {count}, differing: "
                                f"{len(mismatches)}" + ("" if enabled else " (check off)"))

PLATE_PAYLOAD: dict[str, Any] = {
    # a cast-iron inspection cover: hot bottom, cooled right side (demo scenario, invented)
    "width": 0.6, "height": 1.0, "conductivity": 52, "generation": 0,
    "edges": {"bottom": {"type": "temperature", "value": 100},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 750, "ambient": 0},
              "top": {"type": "flux", "value": -200}},
    "points": [[0.6, 0.2], [0.3, 0.5]], "grid": {"nx": 7, "ny": 11},
    "method": "auto", "limits": {"max_temperature": 90},
}


@pytest.fixture(scope="session")
def app():
    return create_app({"TESTING": True})


@pytest.fixture
def client(app):
    return app.test_client()


@pytest.fixture
def plate_payload() -> dict[str, Any]:
    return copy.deepcopy(PLATE_PAYLOAD)


TRANSIENT_PAYLOAD: dict[str, Any] = {
    # a forged steel die block quenched in an oil bath (demo scenario, invented)
    "shape": "slab", "half_thickness": 0.05, "conductivity": 45, "density": 7800,
    "specific_heat": 460, "initial_temperature": 900,
    "surface": {"type": "convection", "film_coefficient": 500, "ambient": 30},
    "times": [60, 600, 3600], "positions": [0, 0.025, 0.05],
    "target": {"temperature": 200, "position": 0},
}


@pytest.fixture
def transient_payload() -> dict[str, Any]:
    return copy.deepcopy(TRANSIENT_PAYLOAD)


LAYERS_PAYLOAD: dict[str, Any] = {
    # a thermal-oil line to a platen press: steel pipe lagged with mineral wool under a painted
    # jacket (demo scenario, invented)
    "geometry": "cylinder", "inner_radius": 0.0545, "length": 1.0,
    "layers": [{"name": "pipe wall", "thickness": 0.004, "conductivity": 45},
               {"name": "mineral wool", "thickness": 0.05, "conductivity": 0.04,
                "max_temperature": 650}],
    "contact_resistances": [0.0],
    "inside": {"type": "convection", "film_coefficient": 1000, "ambient": 250},
    "outside": {"type": "convection_radiation", "film_coefficient": 8, "ambient": 20,
                "emissivity": 0.9, "surroundings": 20},
    "limits": {"max_surface_temperature": 60},
}


@pytest.fixture
def layers_payload() -> dict[str, Any]:
    return copy.deepcopy(LAYERS_PAYLOAD)


FIN_PAYLOAD: dict[str, Any] = {
    # aluminium cooling fins cast on a gearbox housing (demo scenario, invented)
    "shape": "straight", "length": 0.05, "thickness": 0.002, "width": 0.3,
    "conductivity": 200, "film_coefficient": 25, "base_temperature": 100, "ambient": 25,
    "tip": "convective", "count": 12, "base_area": 0.02,
}


@pytest.fixture
def fin_payload() -> dict[str, Any]:
    return copy.deepcopy(FIN_PAYLOAD)


GRID_PAYLOAD: dict[str, Any] = {
    # a cold-store wall panel: polyurethane foam between steel skins, bridged by a steel stud;
    # the warm side is split where a door frame heater runs (demo scenario, invented)
    "width": 0.3, "height": 0.1, "geometry": "planar", "cells": {"nx": 30, "ny": 10},
    "conductivity": 0.025,
    "zones": [{"name": "steel stud", "region": [0.14, 0.0, 0.16, 0.1], "conductivity": 50,
               "max_temperature": 80}],
    "edges": {"bottom": [{"from": 0, "to": 0.2, "type": "convection", "film_coefficient": 8,
                          "ambient": 20},
                         {"from": 0.2, "to": 0.3, "type": "flux", "value": 40}],
              "top": {"type": "convection", "film_coefficient": 25, "ambient": -25},
              "left": {"type": "insulated"}, "right": {"type": "insulated"}},
    "points": [[0.0, 0.0], [0.15, 0.05]],
    "limits": {"min_temperature": -40},
}


@pytest.fixture
def grid_payload() -> dict[str, Any]:
    return copy.deepcopy(GRID_PAYLOAD)
