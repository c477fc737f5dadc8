"""The OpenAPI 3 document, generated from the marshmallow schemas (never written by hand).

`python -m service.openapi > docs/openapi.json` regenerates the committed copy; a test
regenerates it and diffs.
"""

from __future__ import annotations

import json
import sys
from typing import Any

from apispec import APISpec
from apispec.ext.marshmallow import MarshmallowPlugin
from marshmallow import fields

from schemas.fields import Integer, Number, Quantity
from schemas.polymorphic import Polymorphic
from schemas.units import DEFAULT_UNITS
from service import __version__
from service.problems import PROBLEM_TYPES

DESCRIPTION = (
    "Heat-conduction calculations for plant and equipment design, delivered as JSON. "
    "Quantities are bare numbers in the default unit of their field (SI, temperatures in degC) "
    "or strings such as '150 mm' or '300 degF'. Errors are RFC 9457 problem details. Results "
    "support engineering judgment and do not replace it; defer to local codes, standards and "
    "licensed practice."
)


def _number_properties(self: Any, field: fields.Field, **kwargs: Any) -> dict[str, Any]:
    """Bounds, units and the number-or-string form of our own numeric fields."""
    ret: dict[str, Any] = {}
    if isinstance(field, Number):
        for attr, key, exclusive in (("minimum", "minimum", "exclusive_minimum"),
                                     ("maximum", "maximum", "exclusive_maximum")):
            value = getattr(field, attr)
            if value is not None:
                ret[key] = value
                if getattr(field, exclusive):
                    ret["exclusiveM" + key[1:]] = True
    if isinstance(field, Integer):
        if field.minimum is not None:
            ret["minimum"] = field.minimum
        if field.maximum is not None:
            ret["maximum"] = field.maximum
    if isinstance(field, Quantity) and "type" not in field.metadata:
        unit = DEFAULT_UNITS[field.kind]
        ret["oneOf"] = [
            {"type": "number", "description": f"in {unit}"},
            {"type": "string", "description": f"a number and a unit of {field.kind}, "
                                              f"e.g. '1 {unit}'"},
        ]
    return ret


def _tuple_properties(self: Any, field: fields.Field, **kwargs: Any) -> dict[str, Any]:
    """A fixed-length array such as a point [x, y] (OpenAPI 3.0 has no prefixItems)."""
    if not isinstance(field, fields.Tuple):
        return {}
    items = [self.field2property(inner) for inner in field.tuple_fields]
    unique = [item for i, item in enumerate(items) if item not in items[:i]]
    return {"type": "array", "minItems": len(items), "maxItems": len(items),
            "items": unique[0] if len(unique) == 1 else {"anyOf": unique}}


def _polymorphic_properties(self: Any, field: fields.Field, **kwargs: Any) -> dict[str, Any]:
    if not isinstance(field, Polymorphic):
        return {}
    refs = {kind: self.resolve_nested_schema(schema) for kind, schema in field.choices.items()}
    return {
        "oneOf": list(refs.values()),
        "discriminator": {"propertyName": "type",
                          "mapping": {kind: ref["$ref"] for kind, ref in refs.items()}},
    }


def _problem_schema() -> dict[str, Any]:
    return {
        "type": "object",
        "description": "RFC 9457 problem details.",
        "required": ["type", "title", "status", "detail"],
        "properties": {
            "type": {"type": "string", "enum": sorted(PROBLEM_TYPES)},
            "title": {"type": "string"},
            "status": {"type": "integer"},
            "detail": {"type": "string"},
            "errors": {"type": "object", "additionalProperties": {
                "type": "array", "items": {"type": "string"}},
                "description": "JSON path of each bad field -> messages."},
            "diagnostics": {"type": "object", "description": "Solver diagnostics."},
            "request_id": {"type": "string"},
        },
    }


def _problem_responses(*statuses: int) -> dict[str, Any]:
    return {str(s): {"description": "Problem details",
                     "content": {"application/problem+json": {
                         "schema": {"$ref": "#/components/schemas/Problem"}}}}
            for s in statuses}


def build_spec() -> dict[str, Any]:
    """Build the document from the registered families and meta endpoints."""
    from service.api import blueprints
    from service.api.common import FAMILIES
    from service.api.meta import EigenvaluesQuerySchema, EigenvaluesResponseSchema

    blueprints()  # importing the blueprints registers every family
    plugin = MarshmallowPlugin()
    spec = APISpec(title="Conduction service", version=__version__, openapi_version="3.0.3",
                   plugins=[plugin], info={"description": DESCRIPTION})
    plugin.converter.add_attribute_function(_number_properties)  # type: ignore[union-attr]
    plugin.converter.add_attribute_function(_polymorphic_properties)  # type: ignore[union-attr]
    plugin.converter.add_attribute_function(_tuple_properties)  # type: ignore[union-attr]
    plugin.map_to_openapi_type(Number, "number", None)
    plugin.map_to_openapi_type(Integer, "integer", None)
    plugin.map_to_openapi_type(Quantity, None, None)  # number or "value unit" string
    plugin.map_to_openapi_type(Polymorphic, "object", None)
    spec.components.schema("Problem", _problem_schema())
    # API keys are optional (off unless configured): no scheme, or any one of these
    spec.components.security_scheme("bearer", {"type": "http", "scheme": "bearer"})
    spec.components.security_scheme("apiKeyHeader", {"type": "apiKey", "in": "header",
                                                     "name": "X-API-Key"})
    spec.components.security_scheme("apiKeyQuery", {
        "type": "apiKey", "in": "query", "name": "api_key",
        "description": "Spreadsheet GET requests only, when the operator enables it."})
    spec.options["security"] = [{}, {"bearer": []}, {"apiKeyHeader": []}, {"apiKeyQuery": []}]

    for kind in sorted(FAMILIES):
        family = FAMILIES[kind]
        spec.path(path=family.path, operations={"post": {
            "summary": family.summary,
            "operationId": f"solve_{kind}",
            "requestBody": {"required": True, "content": {
                "application/json": {"schema": type(family.request_schema)}}},
            "responses": {
                "200": {"description": "Solved", "content": {
                    "application/json": {"schema": type(family.response_schema)}}},
                **_problem_responses(400, 401, 403, 406, 413, 415, 422, 429),
            },
        }})
    from schemas.batch import (
        BatchRequestSchema,
        BatchResponseSchema,
        SweepRequestSchema,
        SweepResponseSchema,
    )

    spec.path(path="/v1/batch", operations={"post": {
        "summary": "Many problems of any family in one call; one result or problem per item",
        "operationId": "batch",
        "requestBody": {"required": True, "content": {
            "application/json": {"schema": BatchRequestSchema}}},
        "responses": {"200": {"description": "One entry per item, in order", "content": {
            "application/json": {"schema": BatchResponseSchema}}},
            **_problem_responses(400, 401, 403, 413, 415, 422, 429)},
    }})
    spec.path(path="/v1/sweep", operations={"post": {
        "summary": "One base problem with parameters varied; selected outputs as a table",
        "operationId": "sweep",
        "requestBody": {"required": True, "content": {
            "application/json": {"schema": SweepRequestSchema}}},
        "responses": {"200": {"description": "A table (JSON, or CSV with Accept: text/csv)",
                              "content": {"application/json": {"schema": SweepResponseSchema},
                                          "text/csv": {"schema": {"type": "string"}}}},
                      **_problem_responses(400, 401, 403, 406, 413, 415, 422, 429)},
    }})
    spec.path(path="/v1/eigenvalues", operations={"get": {
        "summary": "Cached eigenvalue tables used by the series solvers",
        "operationId": "eigenvalues",
        "parameters": [{"in": "query", "schema": EigenvaluesQuerySchema}],
        "responses": {"200": {"description": "Roots and coefficients", "content": {
            "application/json": {"schema": EigenvaluesResponseSchema}}},
            **_problem_responses(401, 403, 422)},
    }})
    spec.path(path="/metrics", operations={"get": {
        "summary": "Prometheus metrics (text exposition format)", "operationId": "metrics",
        "responses": {"200": {"description": "Metrics", "content": {
            "text/plain": {"schema": {"type": "string"}}}}, **_problem_responses(401, 403)}}})
    for path, summary in (("/healthz", "Liveness"), ("/readyz", "Readiness")):
        spec.path(path=path, operations={"get": {
            "summary": summary, "operationId": path.strip("/"),
            "responses": {"200": {"description": "OK", "content": {"application/json": {
                "schema": {"type": "object", "properties": {"status": {"type": "string"}}}}}},
                **_problem_responses(503)}}})
    return spec.to_dict()


def render() -> str:
    return json.dumps(build_spec(), indent=2, sort_keys=True) + "\n"


if __name__ == "__main__":
    sys.stdout.write(render())
