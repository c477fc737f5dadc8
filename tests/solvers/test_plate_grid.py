"""The plate solved by the finite-volume grid, and the series-versus-grid cross-check
(service/solvers/plate_grid.py, service/solvers/methods.py).

The reference everywhere is the plate series (service/solvers/plate.py), an independent method
whose own error bound is tested in test_plate_series.py.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from service.solvers.grid import Cells, Edges, GridProblem, Segment, solve_grid
from service.solvers.methods import (
    GRID_SAFETY_FACTOR,
    PlateMethodProblem,
    solve_grid_method,
    solve_plate_by_method,
)
from service.solvers.plate import Edge, PlateProblem, solve_plate, temperature_at
from service.solvers.plate_grid import (
    cells_for,
    fixed_edge_values,
    plate_to_grid,
    refined_cells,
    run_plate_grid,
    singular_corners,
    solve_plate_grid,
)

# a cast-iron inspection cover with a heated web (demo scenario, invented)
COVER = PlateProblem(
    width=0.6, height=1.0, conductivity=52.0, generation=2.0e4,
    bottom=Edge("temperature", value=100.0), left=Edge("insulated"),
    right=Edge("convection", film_coefficient=750.0, ambient=0.0),
    top=Edge("flux", value=-200.0),
    points=((0.6, 0.2), (0.3, 0.5), (0.1, 0.9)), grid=(4, 5),
)
# a furnace sight-glass frame: a temperature profile along the hot edge (demo, invented)
FRAME = dataclasses.replace(
    COVER, generation=0.0,
    bottom=Edge("temperature", profile=((0.0, 20.0), (0.3, 100.0), (0.6, 40.0))),
    top=Edge("convection", film_coefficient=20.0, ambient=25.0),
)


def test_series_versus_grid_cross_check():
    problem = PlateMethodProblem(COVER, method="both", grid_cells=2500)
    answer = solve_plate_by_method(problem)
    series = solve_plate(COVER)
    # the primary answer is the series answer, unchanged
    assert answer.method == "series" and answer.cross_check is not None
    np.testing.assert_array_equal(answer.plate.point_temperatures, series.point_temperatures)
    check = answer.cross_check
    assert check.agrees and check.method == "grid" and check.grid_cells >= 2400
    # the grid's answer at the points lies within the reported errors of the series answer
    # (reference: the series, an independent method; grid estimate with Roache's two-grid
    # safety factor)
    allowed = GRID_SAFETY_FACTOR * check.grid_error_estimate + check.series_error_estimate
    np.testing.assert_allclose(check.point_temperatures, series.point_temperatures, rtol=0,
                               atol=allowed)
    assert check.max_difference <= allowed
    # edge heat flows within 3 % of the series flows on this 2,500-cell grid (reference: the
    # series; the largest gap is the flow into the corner of the hot and convecting edges)
    flows = dataclasses.asdict(check.edge_heat_flow)
    np.testing.assert_allclose([flows[e] for e in ("bottom", "right", "top", "left")],
                               [getattr(series.edge_heat_flow, e)
                                for e in ("bottom", "right", "top", "left")],
                               rtol=3e-2, atol=1e-9)


def test_series_versus_grid_cross_check_with_a_profile_edge():
    answer = solve_plate_by_method(PlateMethodProblem(FRAME, method="both", grid_cells=2500))
    check = answer.cross_check
    assert check is not None and check.agrees, (check.max_difference, check.grid_error_estimate)
    # the profile reaches the grid as a position profile of one segment
    grid_problem = plate_to_grid(FRAME, Cells(6, 10))
    assert grid_problem.edges.bottom == (Segment("temperature", profile=FRAME.bottom.profile),)


def test_grid_converges_to_the_series_at_second_order():
    # error of the grid against the series at interior points over three refinements
    # (reference: the series; the log-log slope is the observed order, expected 2)
    points = ((0.3, 0.5), (0.15, 0.75), (0.45, 0.3), (0.3, 0.2))
    problem = dataclasses.replace(COVER, points=points, grid=None)
    exact = solve_plate(problem).point_temperatures
    sizes, errors = [], []
    for n in (20, 40, 80):
        result = solve_plate_grid(problem, cells=Cells(3 * n // 5, n))
        sizes.append(1.0 / n)
        errors.append(float(np.max(np.abs(result.point_temperatures - exact))))
    slope = float(np.polyfit(np.log(sizes), np.log(errors), 1)[0])
    np.testing.assert_allclose(slope, 2.0, rtol=0, atol=0.3)


def test_method_grid_result_and_error_estimate():
    answer = solve_plate_by_method(PlateMethodProblem(COVER, method="grid", grid_cells=2500))
    result = answer.plate
    assert answer.method == result.method == "grid" and answer.cross_check is None
    assert result.grid_temperature.shape == (5, 4)
    assert result.convergence.converged and result.convergence.error_estimate is not None
    assert result.convergence.cells >= 2400
    # the balance closes (the grid conserves energy; common practice, no source)
    np.testing.assert_allclose(result.energy_balance.net, 0.0, rtol=0, atol=1e-8)
    # points on the fixed-temperature edge take its value exactly (definition of the edge)
    np.testing.assert_allclose(result.grid_temperature[0], 100.0, rtol=0, atol=1e-12)
    # the same numbers as the grid solver on the same grid problem
    grid = solve_grid(plate_to_grid(COVER, cells_for(0.6, 1.0, 2500)))
    np.testing.assert_allclose(result.point_temperatures[1:], grid.point_temperatures[1:3],
                               rtol=1e-12, atol=0)


def test_auto_and_series_are_the_series():
    for method in ("auto", "series"):
        answer = solve_plate_by_method(PlateMethodProblem(COVER, method=method))
        assert answer.method == "series" and answer.cross_check is None
        np.testing.assert_array_equal(answer.plate.point_temperatures,
                                      solve_plate(COVER).point_temperatures)


def test_singular_corner_flows_are_null_and_excluded_from_the_check():
    problem = dataclasses.replace(COVER, left=Edge("temperature", value=0.0), generation=0.0,
                                  points=((0.0, 0.0), (0.3, 0.5)))
    assert singular_corners(problem) == (("bottom", "left"),)
    answer = solve_plate_by_method(PlateMethodProblem(problem, method="both", grid_cells=2500))
    grid = answer.cross_check.grid_result
    assert grid.edge_heat_flow.bottom is None and grid.edge_heat_flow.left is None
    assert grid.energy_balance.net is None
    assert any("corner bottom-left" in w for w in grid.warnings)
    # the corner point takes the mean of the two edge values, as the series does (convention)
    np.testing.assert_allclose(grid.point_temperatures[0], 50.0, rtol=0, atol=1e-12)
    assert answer.cross_check.at != (0.0, 0.0)


def test_fixed_edge_values_on_edges_and_corners():
    points = np.array([[0.3, 0.0], [0.0, 0.0], [0.6, 0.0], [0.3, 0.5]])
    values, known = fixed_edge_values(FRAME, points)
    assert known.tolist() == [True, True, True, False]
    # the profile interpolated linearly (definition of the profile)
    np.testing.assert_allclose(values[:3], [100.0, 20.0, 40.0], rtol=0, atol=1e-12)


def test_tolerance_refines_the_grid_within_the_budget():
    problem = dataclasses.replace(COVER, atol=5e-3)
    first = run_plate_grid(problem, initial_cells=400, max_cells=40_000)
    # refined once, keeping its verification (4 x the cells) within the budget
    assert 400 < first.result.convergence.cells <= 10_000
    start = solve_grid(plate_to_grid(problem, cells_for(0.6, 1.0, 400)))
    assert first.result.convergence.error_estimate < start.convergence.error_estimate
    capped = run_plate_grid(problem, initial_cells=400, max_cells=500)
    assert capped.result.convergence.cells <= 500
    assert any("above the tolerance" in w for w in capped.result.warnings)


def test_cells_for_and_refined_cells():
    for width, height in ((0.6, 1.0), (1e-6, 1e4), (1e4, 1e-6), (2.0, 1.0)):
        cells = cells_for(width, height, 40_000)
        assert 1 <= cells.nx * cells.ny <= 40_000
    cells = cells_for(2.0, 1.0, 40_000)
    # nearly square cells: nx / ny close to the aspect ratio (common practice, no source)
    np.testing.assert_allclose(cells.nx / cells.ny, 2.0, rtol=0.02, atol=0)
    finer = refined_cells(Cells(20, 20), error=0.1, atol=0.01, max_cells=1_000_000)
    assert finer is not None and finer.nx * finer.ny >= 400 * 10
    assert refined_cells(Cells(20, 20), error=0.001, atol=0.01, max_cells=1_000_000) is None
    assert refined_cells(Cells(20, 20), error=0.1, atol=0.01, max_cells=400) is None


def test_thin_plates_use_the_direct_solver():
    thin = dataclasses.replace(COVER, width=1e-3, height=10.0, points=(), grid=None)
    cells = cells_for(thin.width, thin.height, 40_000)
    assert plate_to_grid(thin, cells).linear_solver == "direct"
    assert plate_to_grid(COVER, Cells(100, 100)).linear_solver == "auto"


def test_grid_method_result_names_its_method():
    problem = GridProblem(width=1.0, height=1.0, cells=Cells(4, 4), conductivity=1.0,
                          edges=Edges(bottom=(Segment("temperature", value=1.0),)),
                          points=((0.5, 0.5),))
    tagged = solve_grid_method(problem)
    assert tagged.method == "grid"
    np.testing.assert_array_equal(tagged.point_temperatures,
                                  solve_grid(problem).point_temperatures)


@pytest.mark.parametrize("method", ["fastest"])
def test_unknown_method_is_refused(method):
    from service.solvers.errors import IllPosedError

    with pytest.raises(IllPosedError, match="method must be one of"):
        solve_plate_by_method(PlateMethodProblem(COVER, method=method))


def test_series_helper_agrees_with_the_series_points():
    # temperature_at is the series evaluator the cross-check samples with
    points = np.array(COVER.points)
    np.testing.assert_allclose(temperature_at(COVER, points[:, 0], points[:, 1]),
                               solve_plate(COVER).point_temperatures, rtol=1e-12, atol=1e-9)
