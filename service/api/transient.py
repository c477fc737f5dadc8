"""POST /v1/transient: unsteady conduction in simple bodies."""

from __future__ import annotations

from typing import Any

from flask import Blueprint

from schemas.transient import TransientRequestSchema, TransientResponseSchema
from service.api.common import solve_endpoint
from service.pictures import curves_picture
from service.solvers.transient import TransientProblem, TransientResult, solve_transient

bp = Blueprint("transient", __name__)

TRANSIENT_CAUTIONS = (
    "Properties are taken as constant and the initial temperature as uniform; the surface "
    "condition applies from t = 0 on every exposed face.",
)
MAX_CURVES = 8


def transient_picture(body: dict[str, Any]) -> bytes:
    """Temperature against time at up to eight of the requested positions."""
    results = body["results"]
    unit = body["units"]["length"]
    series = {}
    for j, position in enumerate(results["positions"][:MAX_CURVES]):
        label = (f"{position:.4g} {unit}" if not isinstance(position, list)
                 else "(" + ", ".join(f"{p:.4g}" for p in position) + f") {unit}")
        series[label] = [row[j] for row in results["temperatures"]]
    return curves_picture(body, results["times"], series,
                          f"Transient temperatures, {results['shape'].replace('_', ' ')}")


def with_picture_times(payload: dict[str, Any]) -> dict[str, Any]:
    """Smooth curves: add 200 evenly spaced times up to the last requested one (bare numbers
    only; times given with units are drawn as they are)."""
    times = payload.get("times")
    if not (isinstance(times, list) and times
            and all(isinstance(t, int | float) and not isinstance(t, bool) for t in times)):
        return payload
    last = max(times)
    dense = sorted({*times, *(last * i / 200 for i in range(201))})
    return {**payload, "times": dense}


@bp.route("/v1/transient", methods=["GET", "POST"])
@solve_endpoint("transient", "/v1/transient", TransientRequestSchema, TransientResponseSchema,
                summary="Unsteady conduction: slab, cylinder, sphere, semi-infinite solid, "
                        "lumped body and their products; time to reach a temperature",
                cautions=TRANSIENT_CAUTIONS, picture=transient_picture,
                picture_payload=with_picture_times)
def transient(problem: TransientProblem) -> TransientResult:
    return solve_transient(problem)
