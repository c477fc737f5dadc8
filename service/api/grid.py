"""POST /v1/grid: numerical (finite-volume) 2D conduction on a rectangle."""

from __future__ import annotations

from typing import Any

from flask import Blueprint

from schemas.grid import GridRequestSchema, GridResponseSchema
from service.api.common import solve_endpoint
from service.pictures import field_picture
from service.problems import ProblemError
from service.solvers.grid import GridProblem
from service.solvers.methods import GridMethodResult, solve_grid_method

bp = Blueprint("grid", __name__)

GRID_CAUTIONS = (
    "A 2D model: planar bodies carry no heat along their depth (results per metre of depth); "
    "axisymmetric bodies are the same all round the axis.",
    "A numerical solution: its accuracy depends on the grid. Ask verify_mesh for an estimate "
    "of the discretisation error at your points.",
)


def grid_picture(body: dict[str, Any]) -> bytes:
    """The cell-centre field (the last time of a transient), extended to the outline by
    holding each edge row and column at the boundary."""
    results = body["results"]
    grid = results["grid"]
    if grid is None:
        raise ProblemError("/problems/not-converged",
                           "There is no finite temperature field to draw.")
    x = [grid["x_faces"][0], *grid["x"], grid["x_faces"][-1]]
    y = [grid["y_faces"][0], *grid["y"], grid["y_faces"][-1]]
    rows = [[row[0], *row, row[-1]] for row in grid["temperature"]]
    rows = [rows[0], *rows, rows[-1]]
    title = "Steady temperature field" if results["history"] is None else (
        f"Temperature field at {results['history']['times'][-1]:.4g} {body['units']['time']}")
    return field_picture(body, x, y, rows, title)


def with_output_grid(payload: dict[str, Any]) -> dict[str, Any]:
    """A picture needs the field."""
    return {**payload, "output_grid": True}


@bp.route("/v1/grid", methods=["GET", "POST"])
@solve_endpoint("grid", "/v1/grid", GridRequestSchema, GridResponseSchema,
                summary="Numerical (finite-volume) 2D conduction on a rectangle: planar or "
                        "axisymmetric, zones, edge segments, radiation, tables, steady or "
                        "transient",
                cautions=GRID_CAUTIONS, picture=grid_picture, picture_payload=with_output_grid)
def grid(problem: GridProblem) -> GridMethodResult:
    return solve_grid_method(problem)
