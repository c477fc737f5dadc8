from __future__ import annotations

import copy
from typing import Any

import pytest

from service.app import create_app

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
