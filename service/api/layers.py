"""POST /v1/layers: steady conduction through plane, cylindrical and spherical layers."""

from __future__ import annotations

from flask import Blueprint

from schemas.layers import LayersRequestSchema, LayersResponseSchema
from service.api.common import solve_endpoint
from service.pictures import profile_picture
from service.solvers.layers import LayersProblem, LayersResult, solve_layers

bp = Blueprint("layers", __name__)

LAYERS_CAUTIONS = (
    "One-dimensional steady conduction: layers are uniform and complete, and heat crosses them "
    "only radially or through the wall; supports, flanges, valves, joints and damaged or wet "
    "insulation add losses this model does not see. Cylinder heat flows and resistances are "
    "per metre of length.",
    "A surface temperature below a limit is not a touch-safety verdict: the burn threshold "
    "depends on the surface material and the contact time. Defer to the applicable "
    "personnel-protection standard.",
    "Automatic 'air' coefficients come from published correlations for isolated surfaces in "
    "still air or steady wind, each valid over a stated range of Rayleigh and Reynolds numbers "
    "(a warning names any use outside it); nearby surfaces, gusts and enclosures change the "
    "real coefficient.",
)


@bp.route("/v1/layers", methods=["GET", "POST"])
@solve_endpoint("layers", "/v1/layers", LayersRequestSchema, LayersResponseSchema,
                summary="Steady 1D conduction through plane, cylindrical or spherical layers "
                        "(walls, insulated pipes and vessels); thickness for a target",
                cautions=LAYERS_CAUTIONS, picture=profile_picture)
def layers(problem: LayersProblem) -> LayersResult:
    return solve_layers(problem)
