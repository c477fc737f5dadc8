"""POST /v1/plate: steady 2D conduction in a rectangle."""

from __future__ import annotations

from flask import Blueprint

from schemas.plate import PlateRequestSchema, PlateResponseSchema
from service.api.common import solve_endpoint
from service.solvers.plate import PlateProblem, PlateResult, solve_plate

bp = Blueprint("plate", __name__)

PLATE_CAUTIONS = (
    "A 2D model: no heat flows along the depth, and results are per metre of depth.",
)


@bp.post("/v1/plate")
@solve_endpoint("plate", "/v1/plate", PlateRequestSchema, PlateResponseSchema,
                summary="Steady 2D conduction in a rectangle (series solution)",
                cautions=PLATE_CAUTIONS)
def plate(problem: PlateProblem) -> PlateResult:
    return solve_plate(problem)
