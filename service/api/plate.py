"""POST /v1/plate: steady 2D conduction in a rectangle."""

from __future__ import annotations

import functools
from collections.abc import Callable
from typing import Any

from flask import Blueprint

from schemas.plate import PlateRequestSchema, PlateResponseSchema
from service.api.common import solve_endpoint
from service.ops.metrics import observe_plate_models
from service.pictures import plate_picture
from service.solvers.methods import PlateMethodProblem, PlateMethodResult, solve_plate_by_method
from service.solvers.plate import CORES

bp = Blueprint("plate", __name__)

PLATE_CAUTIONS = (
    "A 2D model: no heat flows along the depth, and results are per metre of depth.",
)


def with_picture_grid(payload: dict[str, Any]) -> dict[str, Any]:
    """A picture needs a field: ask for a 101 x 101 grid unless the caller chose one."""
    return payload if payload.get("grid") else {**payload, "grid": {"nx": 101, "ny": 101}}


def plate_models_counted(
        view: Callable[[PlateMethodProblem], PlateMethodResult],
) -> Callable[[PlateMethodProblem], PlateMethodResult]:
    """Count the plate models `view` took from the worker's cache (`CORES`) or built, and set
    the bytes the cache holds, after every solve, failed ones too (a model built before the
    time budget ran out stays kept). Wraps the family's view, so a batch or sweep item counts
    once, like a request."""

    @functools.wraps(view)
    def counted(problem: PlateMethodProblem) -> PlateMethodResult:
        # the cache's own running counts: two attribute reads, no work in the solver
        hits, misses = CORES.hits, CORES.misses
        try:
            return view(problem)
        finally:
            observe_plate_models(CORES.hits - hits, CORES.misses - misses, CORES.nbytes())

    return counted


@bp.route("/v1/plate", methods=["GET", "POST"])
@solve_endpoint("plate", "/v1/plate", PlateRequestSchema, PlateResponseSchema,
                summary="Steady 2D conduction in a rectangle (series solution, or the "
                        "finite-volume grid, or both as a cross-check)",
                cautions=PLATE_CAUTIONS, picture=plate_picture,
                picture_payload=with_picture_grid)
@plate_models_counted
def plate(problem: PlateMethodProblem) -> PlateMethodResult:
    return solve_plate_by_method(problem)
