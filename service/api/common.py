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

from schemas.common import ConvergenceSchema, SolveRequest, quantity_kinds
from schemas.dumping import dump
from schemas.units import (
    CURRENT_OUTPUT_UNITS,
    DEFAULT_OUTPUT_UNITS,
    OutputUnits,
    round_significant,
)
from service import __version__
from service.api.answers import AnswerCache, AnswerKey
from service.jsonio import dumps_bytes, loads
from service.ops.metrics import observe_answer, observe_answer_bytes, observe_solve
from service.problems import ProblemError
from service.tables import SEPARATORS, SelectError, flatten, select, text_value, write_csv

GENERAL_CAUTION = (
    "Results support engineering judgment and do not replace it: check inputs, units and model "
    "assumptions, and defer to the applicable local codes, standards and licensed professional "
    "practice.")
SAFETY_CAUTION = (
    "Limits are checked only where the model resolves temperatures. Touch-burn risk depends on "
    "surface material and contact time, and material limits on the actual product: confirm "
    "against the applicable standard and the manufacturer's data.")

@dataclass(frozen=True)
class Family:
    """A solve endpoint: its kind, path, schemas and the view that calls the solver.

    `picture` draws a PNG from a dumped response; `picture_payload` adjusts a request before
    solving so the picture has something to draw (e.g. asks for an output grid).
    """

    kind: str
    path: str
    request_schema: Schema  # instances, built once: building a schema costs more than a solve
    response_schema: Schema
    solve: Callable[[Any], Any]
    cautions: tuple[str, ...]
    summary: str
    picture: Callable[[dict[str, Any]], bytes] | None = None
    picture_payload: Callable[[dict[str, Any]], dict[str, Any]] | None = None


#: Solve families by kind, filled as blueprints are imported (used by OpenAPI, batch, sweep).
FAMILIES: dict[str, Family] = {}

#: Request body types read as JSON. text/plain is accepted because browser add-ins send it to
#: avoid a CORS preflight.
JSON_TYPES = ("application/json", "text/plain")
FORMATS = {"json": "application/json", "csv": "text/csv", "png": "image/png",
           "text": "text/plain"}


def _check_json_type() -> None:
    """415 unless the body is declared as JSON."""
    mimetype = request.mimetype or ""
    if mimetype not in JSON_TYPES and not mimetype.endswith("+json"):
        raise ProblemError("/problems/unsupported-media-type",
                           f"Send the problem as application/json, not {mimetype or 'nothing'}.")


def read_json() -> Any:
    """The request body as JSON: 415 for other content types, 400 for malformed JSON."""
    _check_json_type()
    return _parse(request.get_data(cache=True), "Request body")


def problem_text() -> tuple[bytes, str]:
    """The problem as sent, unparsed, and what it was sent as (for error messages).
    POST: the JSON body (415 for other content types). GET: the `problem` query parameter
    (URL-encoded JSON; 422 when missing)."""
    if request.method == "POST":
        _check_json_type()
        return request.get_data(cache=True), "Request body"
    text = request.args.get("problem")
    if text is None:
        raise ProblemError("/problems/validation-failed",
                           "A GET solve needs the problem as URL-encoded JSON in ?problem=.",
                           errors={"problem": ["Missing data for required field."]})
    return text.encode(), "Query parameter 'problem'"


def _parse(data: bytes, what: str) -> Any:
    try:
        return loads(data)
    except orjson.JSONDecodeError as exc:
        raise ProblemError("/problems/malformed-json", f"{what} is not valid JSON: {exc}.") from exc


def wanted_format(allowed: tuple[str, ...]) -> str:
    """`?format=` wins over the Accept header; 406 when nothing allowed is acceptable."""
    asked = request.args.get("format")
    if asked is not None:
        if asked not in allowed:
            raise ProblemError("/problems/not-acceptable",
                               f"format {asked!r} is not offered here; choose one of "
                               f"{', '.join(allowed)}.")
        return asked
    if not request.accept_mimetypes or request.accept_mimetypes.provided is False:
        return "json"
    best = request.accept_mimetypes.best_match([FORMATS[f] for f in allowed])
    if best is None:
        raise ProblemError("/problems/not-acceptable",
                           f"None of {request.headers.get('Accept')} can be produced; this "
                           f"resource answers {', '.join(FORMATS[f] for f in allowed)}.")
    return next(f for f in allowed if FORMATS[f] == best)


def csv_separator() -> str:
    raw = request.args.get("sep", ",")
    if raw not in SEPARATORS:
        raise ProblemError("/problems/validation-failed", "Unknown CSV separator.",
                           errors={"sep": ["Must be ',' (comma) or ';' (semicolon)."]})
    return SEPARATORS[raw]


def selected_text(body: dict[str, Any]) -> str:
    """The value at ?select= as text for a spreadsheet cell."""
    path = request.args["select"]
    try:
        return text_value(select(body, path))
    except SelectError as exc:
        raise ProblemError("/problems/validation-failed", str(exc),
                           errors={"select": [str(exc)]}) from exc


CONVERGENCE_SCHEMA = ConvergenceSchema()


@functools.lru_cache(maxsize=64)
def _kinds(schema_cls: type[Schema]) -> tuple[str, ...]:
    return tuple(quantity_kinds(schema_cls()))


def units_object(schema_cls: type[Schema], output_units: OutputUnits) -> dict[str, str]:
    return {kind: output_units.unit(kind) for kind in _kinds(schema_cls)}


def dump_with_units(schema: Schema, obj: Any, output_units: OutputUnits) -> Any:
    CURRENT_OUTPUT_UNITS.set(output_units)
    body = dump(schema, obj, output_units)  # what schema.dump(obj) gives, compiled
    CURRENT_OUTPUT_UNITS.set(DEFAULT_OUTPUT_UNITS)
    return body


def run_solve(family: Family, payload: Any) -> dict[str, Any]:
    """Validate, solve and envelope one problem; raises on every failure (used by batch too)."""
    started = time.perf_counter()
    solve_request: SolveRequest = family.request_schema.load(payload)
    solve_started = time.perf_counter()
    result = family.solve(solve_request.problem)
    observe_solve(family.kind, result.method, result.convergence,
                  time.perf_counter() - solve_started)
    units = solve_request.output_units
    warnings = list(result.warnings)
    convergence = result.convergence
    if not convergence.converged:
        diagnostics = dump_with_units(CONVERGENCE_SCHEMA, convergence, units)
        # a non-finite result has nothing trustworthy to return, whatever the caller accepts
        if not solve_request.accept_unconverged or convergence.status == "non_finite":
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
        "units": units_object(type(family.response_schema), units),
        "results": result,
        "convergence": convergence,
        "safety": result.safety,
        "warnings": warnings,
        "cautions": cautions,
        "meta": {"service_version": __version__,
                 "elapsed_ms": (time.perf_counter() - started) * 1e3,
                 "request_id": getattr(g, "request_id", ""), "reused": False},
    }
    return dump_with_units(family.response_schema, envelope, units)


def _reuse_wanted() -> tuple[bool, bool]:
    """(look up, keep) for this request: `Cache-Control: no-cache` (or `Pragma: no-cache`)
    asks for a fresh solve, `no-store` also for nothing to be kept."""
    directives = request.headers.get("Cache-Control", "").lower()
    no_store = "no-store" in directives
    no_cache = no_store or "no-cache" in directives or (
        "no-cache" in request.headers.get("Pragma", "").lower())
    return not no_cache, not no_store


def solved_body(family: Family, picture: bool) -> tuple[bytes, dict[str, Any]]:
    """The dumped answer to this request's problem without `meta`, as JSON bytes (an object),
    and this request's `meta`: kept from an identical earlier problem when there is one
    (service/api/answers.py), else solved now and kept."""
    started = time.perf_counter()
    text, what = problem_text()
    cache: AnswerCache = current_app.extensions["conduction"]["answers"]
    key = AnswerKey(family.kind, picture, text, g.get("api_client") or "")
    look_up, keep = _reuse_wanted() if cache.enabled else (False, False)
    kept = cache.get(key) if look_up else None
    if kept is not None:
        g.answer_reused = True
        observe_answer(family.kind, reused=True)
        return kept, {"service_version": __version__,
                      "elapsed_ms": round_significant((time.perf_counter() - started) * 1e3),
                      "request_id": getattr(g, "request_id", ""), "reused": True}
    payload = _parse(text, what)
    if picture and isinstance(payload, dict):
        assert family.picture_payload is not None
        payload = family.picture_payload(payload)
    body = run_solve(family, payload)
    meta = body.pop("meta")
    encoded = dumps_bytes(body)
    if keep and cache.put(key, encoded):
        observe_answer_bytes(cache.nbytes())
    if cache.enabled:
        observe_answer(family.kind, reused=False)
    return encoded, meta


def answer(family: Family) -> Response:
    """Solve the request's problem (or reuse the answer to an identical one) and answer in the
    negotiated format."""
    allowed = ("json", "csv", "png") if family.picture else ("json", "csv")
    fmt = "text" if "select" in request.args else wanted_format(allowed)
    encoded, meta = solved_body(family, fmt == "png" and family.picture_payload is not None)
    if fmt == "json":
        # the kept bytes end with the object's closing brace: `meta` goes last, as in the
        # response schema
        return Response(b"".join((encoded[:-1], b',"meta":', dumps_bytes(meta), b"}")),
                        mimetype="application/json")
    body = loads(encoded)
    body["meta"] = meta
    if fmt == "text":
        return Response(selected_text(body), mimetype="text/plain")
    if fmt == "csv":
        units = body["units"]
        rows = flatten(family.response_schema, body, units)
        text = write_csv(["quantity", "value", "unit"], rows, csv_separator())
        return Response(text, mimetype="text/csv")
    assert family.picture is not None
    return Response(family.picture(body), mimetype="image/png")


def solve_endpoint(kind: str, path: str, request_schema: type[Schema],
                   response_schema: type[Schema], *, summary: str,
                   cautions: tuple[str, ...] = (),
                   picture: Callable[[dict[str, Any]], bytes] | None = None,
                   picture_payload: Callable[[dict[str, Any]], dict[str, Any]] | None = None,
                   ) -> Callable[[Callable[[Any], Any]], Any]:
    """Decorate `view(problem) -> result` into a Flask view answering the solve envelope
    (JSON, CSV, PNG where `picture` is given, or one selected value as text)."""

    def decorate(view: Callable[[Any], Any]) -> Callable[[], Response]:
        family = Family(kind, path, request_schema(), response_schema(), view, cautions,
                        summary, picture, picture_payload)
        FAMILIES[kind] = family

        @functools.wraps(view)
        def endpoint() -> Response:
            return answer(family)

        return endpoint

    return decorate
