"""What every solve endpoint shares: read JSON, validate, solve, gate on convergence, dump.

A family's view is a plain function from the validated problem to the solver's result,
decorated with `solve_endpoint`; this module does everything around it.
"""

from __future__ import annotations

import functools
import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import orjson
from flask import Response, current_app, g, request
from marshmallow import Schema

from schemas.budgets import CURRENT_BUDGETS
from schemas.common import ConvergenceSchema, SolveRequest, quantity_kinds
from schemas.units import CURRENT_OUTPUT_UNITS, DEFAULT_OUTPUT_UNITS, OutputUnits
from service import __version__
from service.jsonio import loads
from service.ops.metrics import observe_solve
from service.problems import ProblemError

GENERAL_CAUTION = (
    "Results support engineering judgment and do not replace it: check inputs, units and model "
    "assumptions, and defer to the applicable local codes, standards and licensed professional "
    "practice.")
SAFETY_CAUTION = (
    "Limits are checked only where the model resolves temperatures. Touch-burn risk depends on "
    "surface material and contact time, and material limits on the actual product: confirm "
    "against the applicable standard and the manufacturer's data.")

JSON_TYPES = ("application/json",)


@dataclass(frozen=True)
class Family:
    """A solve endpoint: its kind, path, schemas and the view that calls the solver."""

    kind: str
    path: str
    request_schema: type[Schema]
    response_schema: type[Schema]
    solve: Callable[[Any], Any]
    cautions: tuple[str, ...]
    summary: str


#: Solve families by kind, filled as blueprints are imported (used by OpenAPI, batch, sweep).
FAMILIES: dict[str, Family] = {}


def read_json() -> Any:
    """The request body as JSON: 415 for other content types, 400 for malformed JSON."""
    mimetype = request.mimetype or ""
    if mimetype not in JSON_TYPES and not mimetype.endswith("+json"):
        raise ProblemError("/problems/unsupported-media-type",
                           f"Send the problem as application/json, not {mimetype or 'nothing'}.")
    body = request.get_data(cache=True)
    try:
        return loads(body)
    except orjson.JSONDecodeError as exc:
        raise ProblemError("/problems/malformed-json",
                           f"Request body is not valid JSON: {exc}.") from exc


@functools.lru_cache(maxsize=64)
def _kinds(schema_cls: type[Schema]) -> tuple[str, ...]:
    return tuple(quantity_kinds(schema_cls()))


def units_object(schema_cls: type[Schema], output_units: OutputUnits) -> dict[str, str]:
    return {kind: output_units.unit(kind) for kind in _kinds(schema_cls)}


def dump_with_units(schema: Schema, obj: Any, output_units: OutputUnits) -> Any:
    CURRENT_OUTPUT_UNITS.set(output_units)
    body = schema.dump(obj)
    CURRENT_OUTPUT_UNITS.set(DEFAULT_OUTPUT_UNITS)
    return body


def run_solve(family: Family, payload: Any) -> dict[str, Any]:
    """Validate, solve and envelope one problem; raises on every failure (used by batch too)."""
    CURRENT_BUDGETS.set(current_app.extensions["conduction"]["budgets"])
    started = time.perf_counter()
    solve_request: SolveRequest = family.request_schema().load(payload)
    solve_started = time.perf_counter()
    result = family.solve(solve_request.problem)
    observe_solve(family.kind, result.method, result.convergence,
                  time.perf_counter() - solve_started)
    units = solve_request.output_units
    warnings = list(result.warnings)
    convergence = result.convergence
    if not convergence.converged:
        diagnostics = dump_with_units(ConvergenceSchema(), convergence, units)
        if not solve_request.accept_unconverged:
            raise ProblemError("/problems/not-converged",
                               f"{convergence.message} Set accept_unconverged to true to receive "
                               "the result anyway.", diagnostics=diagnostics)
        warnings.append(f"Not converged ({convergence.status}): {convergence.message}")
    cautions = [GENERAL_CAUTION, *family.cautions]
    if result.safety.checks:
        cautions.append(SAFETY_CAUTION)
    envelope = {
        "kind": family.kind,
        "method": result.method,
        "units": units_object(family.response_schema, units),
        "results": result,
        "convergence": convergence,
        "safety": result.safety,
        "warnings": warnings,
        "cautions": cautions,
        "meta": {"service_version": __version__,
                 "elapsed_ms": (time.perf_counter() - started) * 1e3,
                 "request_id": getattr(g, "request_id", "")},
    }
    return dump_with_units(family.response_schema(), envelope, units)


def solve_endpoint(kind: str, path: str, request_schema: type[Schema],
                   response_schema: type[Schema], *, summary: str,
                   cautions: tuple[str, ...] = ()) -> Callable[[Callable[[Any], Any]], Any]:
    """Decorate `view(problem) -> result` into a Flask view answering the solve envelope."""

    def decorate(view: Callable[[Any], Any]) -> Callable[[], Response]:
        family = Family(kind, path, request_schema, response_schema, view, cautions, summary)
        FAMILIES[kind] = family

        @functools.wraps(view)
        def endpoint() -> Response:
            return current_app.json.response(  # type: ignore[return-value]
                run_solve(family, read_json()))

        return endpoint

    return decorate
