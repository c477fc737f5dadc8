"""POST /v1/fin: straight, pin and annular fins and fin arrays."""

from __future__ import annotations

from flask import Blueprint

from schemas.fin import FinRequestSchema, FinResponseSchema
from service.api.common import solve_endpoint
from service.solvers.fin import FinProblem, FinResult, solve_fin

bp = Blueprint("fin", __name__)

FIN_CAUTIONS = (
    "The film coefficient is taken as uniform over the whole fin (and the exposed base of an "
    "array), and temperatures as uniform across the fin's thickness (Biot number h (A_c/P) / k "
    "well below 0.1); real coefficients vary along a fin and fall between closely spaced fins, "
    "so treat heat flows as estimates.",
    "Fins of an array are taken not to interact (no shading of radiation, no preheated air "
    "between them); radiation counts only as far as it is folded into the film coefficient.",
)


@bp.route("/v1/fin", methods=["GET", "POST"])
@solve_endpoint("fin", "/v1/fin", FinRequestSchema, FinResponseSchema,
                summary="Extended surfaces: straight, pin and annular fins with any tip "
                        "condition, and fin arrays",
                cautions=FIN_CAUTIONS)
def fin(problem: FinProblem) -> FinResult:
    return solve_fin(problem)
