"""One matched 422 (or 413) per input rule of the grid request."""

from __future__ import annotations

import copy

import numpy as np
import pytest
from marshmallow import ValidationError

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.grid import GridRequestSchema
from service.problems import flatten_errors
from service.solvers.errors import TooLargeError
from service.solvers.grid import Cells, Segment, Transient, Zone
from tests.conftest import GRID_PAYLOAD

DELETE = object()
TRANSIENT = {"initial_temperature": 20, "times": [60, 600], "time_step": 30}


def _payload(changes):
    payload = copy.deepcopy(GRID_PAYLOAD)
    for path, value in changes.items():
        target = payload
        keys = path.split(".")
        for key in keys[:-1]:
            target = target[int(key)] if isinstance(target, list) else target[key]
        last = keys[-1]
        if value is DELETE:
            del target[last]
        elif isinstance(target, list):
            target[int(last)] = value
        else:
            target[last] = value
    return payload


def _errors(changes):
    with pytest.raises(ValidationError) as info:
        GridRequestSchema().load(_payload(changes))
    return flatten_errors(info.value.messages)


def _transient(**more):
    return {"density": 30, "specific_heat": 1400, "transient": copy.deepcopy(TRANSIENT), **more}


SEGMENTS = [{"from": 0, "to": 0.2, "type": "insulated"},
            {"from": 0.1, "to": 0.3, "type": "insulated"}]

RULES = [
    # sizes and geometry
    ({"width": -1}, "width", "at least 1e-06"),
    ({"width": DELETE}, "width", "required"),
    ({"width": "5 kg"}, "width", "not a unit of length"),
    ({"height": 2e4}, "height", "at most 10000"),
    ({"geometry": "spherical"}, "geometry", "Must be one of"),
    ({"cells.nx": 0}, "cells.nx", "at least 1"),
    ({"cells.ny": 2.5}, "cells.ny", "Not an integer"),
    ({"cells.nz": 3}, "cells.nz", "Unknown field"),
    # materials
    ({"conductivity": -1}, "conductivity", "at least 1e-05"),
    ({"conductivity": DELETE}, "conductivity", "required"),
    ({"conductivity": {"table": []}}, "conductivity.table", "non-empty"),
    ({"conductivity": {"table": [[20, 1], [10, 2]]}}, "conductivity.table",
     "temperature column must increase strictly"),
    ({"conductivity": {"table": [[20, -1]]}}, "conductivity.table.0.1", "at least 1e-05"),
    ({"conductivity": {"table": [[20]]}}, "conductivity.table.0", "pair"),
    ({"conductivity": {"table": [["-300 degC", 1]]}}, "conductivity.table.0.0",
     "below absolute zero"),
    ({"conductivity": {"tabel": [[20, 1]]}}, "conductivity.tabel", "Unknown field"),
    ({"conductivity": True}, "conductivity", "Not a number"),
    ({"conductivity": 1e-5, "zones.0.conductivity": 1e4}, "conductivity",
     "span a ratio of 1e+09, beyond 1e+08"),
    ({"density": -1}, "density", "at least 0.001"),
    ({"specific_heat": 2e6}, "specific_heat", "at most 1e+06"),
    ({"generation": 1e14}, "generation", "at most 1e+13"),
    ({"generation": {"table": [[0, 1]]}}, "generation", "needs a transient run"),
    # zones
    ({"zones.0.region": [0, 0, 0.4, 0.1]}, "zones.0.region", "0 <= x0 < x1 <= width"),
    ({"zones.0.region": [0.2, 0, 0.1, 0.1]}, "zones.0.region", "0 <= x0 < x1 <= width"),
    ({"zones.0.region": [0, 0, 0.1]}, "zones.0.region", "Length must be 4"),
    ({"zones.0.region": [-0.1, 0, 0.1, 0.1]}, "zones.0.region.0", "at least 0"),
    ({"zones.0.colour": "red"}, "zones.0.colour", "Unknown field"),
    ({"zones.0.name": "x" * 201}, "zones.0.name", "Longer than maximum length 200"),
    ({"zones.0.conductivity": {"table": [[0, 1e6]]}}, "zones.0.conductivity.table.0.1",
     "at most 100000"),
    ({"zones.0.max_temperature": 2e4}, "zones.0.max_temperature", "at most 10000"),
    ({"zones": [GRID_PAYLOAD["zones"][0]] * 51}, "zones", "Longer than maximum length 50"),
    # edges and segments
    ({"edges.left": DELETE}, "edges.left", "required"),
    ({"edges.top.type": "hot"}, "edges.top.type", "Must be one of"),
    ({"edges.top": "hot"}, "edges.top", "Not a valid list"),
    ({"edges.bottom": []}, "edges.bottom", "Length must be between 1 and 20"),
    ({"edges.bottom": [{"type": "insulated"}] * 21}, "edges.bottom",
     "Length must be between 1 and 20"),
    ({"edges.bottom.1.to": 0.5}, "edges.bottom.1.to", "at most the edge length"),
    ({"edges.bottom.0.to": 0.0}, "edges.bottom.0.to", "greater than from"),
    ({"edges.bottom.1.from": 0.35, "edges.bottom.1.to": DELETE}, "edges.bottom.1.from",
     "below the edge length"),
    ({"edges.bottom": SEGMENTS}, "edges.bottom.1.from", "Overlaps"),
    ({"edges.bottom.0.from": -0.1}, "edges.bottom.0.from", "at least 0"),
    ({"edges.left": {"type": "temperature"}}, "edges.left.value", "exactly one of value or "
                                                                  "profile"),
    ({"edges.left": {"type": "temperature", "value": 20, "profile": [[0, 1], [0.1, 2]]}},
     "edges.left.value", "exactly one of value or profile"),
    ({"edges.left": {"type": "temperature", "profile": [[0.05, 1], [0.01, 2]]}},
     "edges.left.profile", "strictly increasing"),
    ({"edges.left": {"type": "flux", "profile": [[0, 1], [0.2, 2]]}}, "edges.left.profile",
     "within the edge"),
    ({"edges.left": {"type": "temperature", "profile": [[0, 1]]}}, "edges.left.profile",
     "Shorter than minimum length 2"),
    ({"edges.left": {"type": "temperature", "value": -300}}, "edges.left.value",
     "below absolute zero"),
    ({"edges.bottom.1.value": 1e10}, "edges.bottom.1.value", "at most 1e+09"),
    ({"edges.top.ambient": DELETE}, "edges.top.ambient", "required"),
    ({"edges.top.film_coefficient": -1}, "edges.top.film_coefficient", "at least 0"),
    ({"edges.top.emissivity": 0}, "edges.top.emissivity", "greater than 0"),
    ({"edges.top.emissivity": 1.5}, "edges.top.emissivity", "at most 1"),
    ({"edges.left": {"type": "insulated", "emissivity": 0.9}}, "edges.left.emissivity",
     "Unknown field"),
    ({"edges.top": {"type": "radiation", "surroundings": 20}}, "edges.top.emissivity",
     "required"),
    ({"edges.top": {"type": "radiation", "emissivity": 0.9}}, "edges.top.surroundings",
     "Required (or give ambient)"),
    ({"edges.top": {"type": "radiation", "emissivity": 0.9, "surroundings": 20,
                    "film_coefficient": 5}}, "edges.top.ambient", "Required with "
                                                                  "film_coefficient"),
    ({"edges.top.ambient": {"table": [[0, 20], [60, 10]]}}, "edges.top.ambient",
     "needs a transient run"),
    ({"edges.bottom.1.value": {"table": [[0, 20], [60, 10]]}}, "edges.bottom.1.value",
     "needs a transient run"),
    ({**_transient(), "edges.top.ambient": {"table": [[-1, 20]]}},
     "edges.top.ambient.table.0.0", "at least 0"),
    ({"geometry": "axisymmetric", "edges.left": {"type": "convection", "film_coefficient": 5,
                                                 "ambient": 20}},
     "edges.left.type", "axis of an axisymmetric body"),
    # points and output
    ({"points": [[0.4, 0.05]]}, "points.0", "outside"),
    ({"points": [[0.1]]}, "points.0", "Length must be 2"),
    ({"points": [[-0.1, 0.05]]}, "points.0.0", "at least 0"),
    ({"output_grid": "yes please"}, "output_grid", "Not a valid boolean"),
    ({"verify_mesh": 3}, "verify_mesh", "Not a valid boolean"),
    # transient runs
    ({"transient": copy.deepcopy(TRANSIENT)}, "density", "Required for a transient run"),
    ({"transient": copy.deepcopy(TRANSIENT), "density": 30}, "specific_heat",
     "Required for a transient run"),
    ({**_transient(), "transient.times": []}, "transient.times", "Shorter than minimum"),
    ({**_transient(), "transient.times": [60, 30]}, "transient.times", "strictly increasing"),
    ({**_transient(), "transient.times": [0]}, "transient.times.0", "greater than 0"),
    ({**_transient(), "transient.time_step": 0}, "transient.time_step", "greater than 0"),
    ({**_transient(), "transient.time_step": DELETE}, "transient.time_step", "required"),
    ({**_transient(), "transient.scheme": "explicit"}, "transient.scheme", "Must be one of"),
    ({**_transient(), "transient.initial_temperature": DELETE},
     "transient.initial_temperature", "required"),
    # iteration and the envelope
    ({"tolerance": 0}, "tolerance", "greater than 0"),
    ({"tolerance": 1e4}, "tolerance", "at most 1000"),
    ({"max_iterations": 0}, "max_iterations", "at least 1"),
    ({"max_iterations": 1001}, "max_iterations", "at most 1000"),
    ({"limits": {"max_temp": 50}}, "limits.max_temp", "Unknown field"),
    ({"widht": 1}, "widht", "Unknown field"),
]


@pytest.mark.parametrize(("changes", "path", "message"), RULES,
                         ids=[f"{r[1]}:{r[2]}" for r in RULES])
def test_rule(changes, path, message):
    errors = _errors(changes)
    assert path in errors, errors
    assert any(message in m for m in errors[path]), errors[path]


def test_valid_payload_builds_the_solver_problem():
    token = CURRENT_BUDGETS.set(Budgets())
    try:
        problem = GridRequestSchema().load(copy.deepcopy(GRID_PAYLOAD)).problem
    finally:
        CURRENT_BUDGETS.reset(token)
    assert problem.cells == Cells(30, 10)
    assert problem.zones[0] == Zone(name="steel stud", region=(0.14, 0.0, 0.16, 0.1),
                                    conductivity=50.0, max_temperature=80.0)
    assert problem.edges.bottom[1] == Segment("flux", start=0.2, end=0.3, value=40.0)
    assert problem.edges.top == (Segment("convection", film_coefficient=25.0, ambient=-25.0),)
    assert problem.transient is None and problem.points == ((0.0, 0.0), (0.15, 0.05))
    assert problem.max_cells == Budgets().max_cells
    assert problem.max_time_steps == Budgets().max_time_steps


def test_transient_and_tables_load_in_default_units():
    conductivity = {"table": [["32 degF", 0.02], ["212 degF", "0.03 W/(m*K)"]]}
    payload = _payload({**_transient(), "transient.times": ["1 min", "10 min"],
                        "conductivity": conductivity,
                        "edges.top.ambient": {"table": [["0 h", 20], ["0.5 h", "-13 degF"]]}})
    problem = GridRequestSchema().load(payload).problem
    # 1 min = 60 s, 32 degF = 0 degC, 212 degF = 100 degC, -13 degF = -25 degC (definitions)
    assert problem.transient == Transient(initial_temperature=20.0, times=(60.0, 600.0),
                                          time_step=30.0)
    np.testing.assert_allclose(problem.conductivity, ((0.0, 0.02), (100.0, 0.03)),
                               rtol=1e-12, atol=1e-12)
    np.testing.assert_allclose(problem.edges.top[0].ambient, ((0.0, 20.0), (1800.0, -25.0)),
                               rtol=1e-12, atol=1e-12)


def test_default_cells_are_nearly_square():
    payload = _payload({"cells": DELETE})
    token = CURRENT_BUDGETS.set(Budgets())
    try:
        cells = GridRequestSchema().load(payload).problem.cells
    finally:
        CURRENT_BUDGETS.reset(token)
    # 0.3 m x 0.1 m: about 40,000 cells three times as many along x (common practice, no source)
    assert cells.nx * cells.ny <= 40_000 and abs(cells.nx / cells.ny - 3.0) < 0.05


def _too_large(changes, budgets, match):
    token = CURRENT_BUDGETS.set(budgets)
    try:
        with pytest.raises(TooLargeError, match=match):
            GridRequestSchema().load(_payload(changes))
    finally:
        CURRENT_BUDGETS.reset(token)


@pytest.mark.parametrize(("changes", "budgets", "match"), [
    ({"cells": {"nx": 100_000, "ny": 100_000}}, Budgets(), "cells asked, the limit is 1000000"),
    ({"cells": DELETE}, Budgets(max_cells=100), None),
    ({"points": [[0, 0]] * 4}, Budgets(max_points=3), "limit is 3"),
    ({"conductivity": {"table": [[0, 1], [1, 2], [2, 3]]}}, Budgets(max_profile_points=2),
     "conductivity: 3 rows"),
    ({"edges.bottom.0.ambient": {"table": [[0, 1], [1, 2], [2, 3]]}},
     Budgets(max_profile_points=2), "edges.bottom.0.ambient: 3 rows"),
    ({"output_grid": True, **_transient()}, Budgets(max_output_values=500),
     "output_grid: 300 cells x 2 output times"),
    ({**_transient(), "transient.time_step": 1e-3}, Budgets(), "600000 time steps"),
    ({**_transient(), "transient.time_step": "0.05 s"}, Budgets(max_cells=300),
     "cell-steps, beyond the work budget of 2.4e"),
    ({**_transient(), "cells": {"nx": 30, "ny": 20}}, Budgets(max_cells=600),
     None),
    # above 300,000 cells a time step is a multigrid solve, priced 15 times a reused LU step
    ({**_transient(), "cells": {"nx": 800, "ny": 500}, "transient.times": [600]},
     Budgets(max_cells=400_000), "20 time steps on 400000 cells exceed the work budget"),
])
def test_budgets_refused_before_parsing(changes, budgets, match):
    if match is None:  # within the budget: the grid fits it
        token = CURRENT_BUDGETS.set(budgets)
        try:
            cells = GridRequestSchema().load(_payload(changes)).problem.cells
        finally:
            CURRENT_BUDGETS.reset(token)
        assert cells.nx * cells.ny <= budgets.max_cells
        return
    _too_large(changes, budgets, match)


def test_nonlinear_work_budget_sets_or_refuses_max_iterations():
    table = {"table": [[0, 0.02], [100, 0.03]]}
    token = CURRENT_BUDGETS.set(Budgets(max_cells=300))
    try:
        # 300 cells, steady: 5 x 300 cell-iterations allow 5 Picard iterations by default
        problem = GridRequestSchema().load(_payload({"conductivity": table})).problem
        assert problem.max_iterations == 5
        with pytest.raises(TooLargeError, match="at most 5 Picard iterations"):
            GridRequestSchema().load(_payload({"conductivity": table, "max_iterations": 6}))
        # a linear problem keeps the default whatever its size
        assert GridRequestSchema().load(_payload({})).problem.max_iterations == 200
    finally:
        CURRENT_BUDGETS.reset(token)


def test_thin_grids_are_solved_directly():
    token = CURRENT_BUDGETS.set(Budgets())
    try:
        thin = GridRequestSchema().load(_payload({"cells": {"nx": 3000, "ny": 2}})).problem
        wide = GridRequestSchema().load(_payload({"cells": {"nx": 300, "ny": 100}})).problem
    finally:
        CURRENT_BUDGETS.reset(token)
    assert thin.linear_solver == "direct" and wide.linear_solver == "auto"


def test_work_plan_coarsens_the_verification_that_would_not_fit():
    from service.solvers.methods import solve_grid_method

    table = {"table": [[-50, 0.02], [100, 0.03]]}
    token = CURRENT_BUDGETS.set(Budgets(max_cells=2000))
    try:
        # nonlinear, 300 cells: refining (1200 cells) x 10 iterations would pass the work
        # budget of 80 x 2000 units (15 per cell-iteration), coarsening fits
        problem = GridRequestSchema().load(_payload({
            "conductivity": table, "verify_mesh": True, "max_iterations": 10})).problem
        assert problem.max_cells < 1200 and problem.max_iterations == 10
        result = solve_grid_method(problem)
        assert "coarsened grid" in result.convergence.message
        # without an explicit cap the default fits the refined verification instead
        problem = GridRequestSchema().load(_payload({"conductivity": table,
                                                      "verify_mesh": True})).problem
        assert problem.max_cells == 2000 and problem.max_iterations == 160_000 // (1500 * 15)
    finally:
        CURRENT_BUDGETS.reset(token)
