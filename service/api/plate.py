"""POST /v1/plate: steady 2D conduction in a rectangle."""

from __future__ import annotations

from typing import Any

from flask import Blueprint

from schemas.plate import PlateRequestSchema, PlateResponseSchema
from service.api.common import solve_endpoint
from service.pictures import plate_picture
from service.solvers.methods import PlateMethodProblem, PlateMethodResult, solve_plate_by_method

bp = Blueprint("plate", __name__)

PLATE_CAUTIONS = (
    "A 2D model: no heat flows along the depth, and results are per metre of depth.",
)


def with_picture_grid(payload: dict[str, Any]) -> dict[str, Any]:
    """A picture needs a field: ask for a 101 x 101 grid unless the caller chose one."""
    return payload if payload.get("grid") else {**payload, "grid": {"nx": 101, "ny": 101}}


@bp.route("/v1/plate", methods=["GET", "POST"])
@solve_endpoint("plate", "/v1/plate", PlateRequestSchema, PlateResponseSchema,
                summary="Steady 2D conduction in a rectangle (series solution, or the "
                        "finite-volume grid, or both as a cross-check)",
                cautions=PLATE_CAUTIONS, picture=plate_picture,
                picture_payload=with_picture_grid)
def plate(problem: PlateMethodProblem) -> PlateMethodResult:
    return solve_plate_by_method(problem)
