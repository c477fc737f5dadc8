"""Meta endpoints: health, readiness, the OpenAPI document, the docs page, eigenvalue tables."""

from __future__ import annotations

import html
import math
from typing import Any

from flask import Blueprint, Response, current_app, request
from marshmallow import Schema, fields, post_load, pre_load, validate

from schemas.common import BaseSchema
from schemas.fields import Array, Integer, Number
from service.solvers import eigen

bp = Blueprint("meta", __name__)

PAIR_GEOMETRIES = [f"{a}-{b}" for a in eigen.PAIR_KINDS for b in eigen.PAIR_KINDS]


class EigenvaluesQuerySchema(BaseSchema):
    geometry = fields.String(required=True, validate=validate.OneOf(
        [*eigen.GEOMETRIES, *PAIR_GEOMETRIES]), metadata={
        "description": "slab, cylinder or sphere (transient bodies), or an edge pair "
                       "'<start>-<end>' with ends fixed, insulated or convective (plate series)."})
    biot = Number(load_default=None, minimum=0.0, maximum=1e12, metadata={
        "description": "Biot number h L / k; omitted means a fixed surface (infinite Biot) for "
                       "bodies. For edge pairs it applies to convective ends."})
    start_biot = Number(load_default=None, minimum=0.0, maximum=1e12, metadata={
        "description": "Edge pairs: Biot number of the start end if it differs from biot."})
    count = Integer(load_default=10, minimum=1, maximum=1000)

    @pre_load
    def _numbers_from_query(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        """Query strings carry text: read the numeric parameters as JSON numbers."""
        out = dict(data)
        for key, kind in (("biot", float), ("start_biot", float), ("count", int)):
            if isinstance(out.get(key), str):
                try:
                    out[key] = kind(out[key])
                except ValueError:
                    pass  # left as text: the field reports it
        return out

    @post_load
    def _defaults(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        if data["biot"] is None:
            data["biot"] = math.inf if data["geometry"] in eigen.GEOMETRIES else 1.0
        if data["start_biot"] is None:
            data["start_biot"] = data["biot"]
        return data


class EigenvaluesResponseSchema(Schema):
    geometry = fields.String()
    biot = Number(allow_none=True, metadata={"description": "null means infinite."})
    count = Integer()
    roots = Array(metadata={"type": "array", "items": {"type": "number"}})
    coefficients = Array(allow_none=True, metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Bodies: temperature coefficients C_n. Pairs: null."})
    energy_coefficients = Array(allow_none=True, metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Bodies: energy coefficients E_n with Q/Q0 = 1 - sum E_n exp(-mu_n^2 Fo)."})
    norms = Array(allow_none=True, metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Pairs: integral over [0, 1] of the squared eigenfunction."})


EIGENVALUES_QUERY = EigenvaluesQuerySchema()
EIGENVALUES_RESPONSE = EigenvaluesResponseSchema()


@bp.get("/healthz")
def healthz() -> Any:
    return current_app.json.response({"status": "ok"})


@bp.get("/readyz")
def readyz() -> Any:
    return current_app.json.response({"status": "ready"})


@bp.get("/v1/eigenvalues")
def eigenvalues() -> Any:
    query = EIGENVALUES_QUERY.load(request.args.to_dict())
    return current_app.json.response(EIGENVALUES_RESPONSE.dump(eigen_table(**query)))


def eigen_table(geometry: str, biot: float, start_biot: float, count: int) -> dict[str, Any]:
    """Look up one table (the view's only call)."""
    if geometry in eigen.GEOMETRIES:
        coefficients, energy = eigen.body_coefficients(geometry, biot, count)
        return {"geometry": geometry, "biot": None if math.isinf(biot) else biot, "count": count,
                "roots": eigen.body_roots(geometry, biot, count), "coefficients": coefficients,
                "energy_coefficients": energy, "norms": None}
    start, end = geometry.split("-")
    roots = eigen.pair_roots(start, end, start_biot, biot, count)
    return {"geometry": geometry, "biot": biot, "count": count, "roots": roots,
            "coefficients": None, "energy_coefficients": None,
            "norms": eigen.pair_norm(start, start_biot, roots, end, biot)}


@bp.get("/v1/openapi.json")
def openapi_document() -> Any:
    return current_app.json.response(current_app.extensions["conduction"]["openapi"]())


@bp.get("/v1/docs")
def docs() -> Any:
    page = current_app.extensions["conduction"]["docs"]()
    return Response(page, mimetype="text/html")


def render_docs(spec: dict[str, Any]) -> str:
    """A self-contained HTML page from the OpenAPI document (no external assets)."""
    schemas = spec.get("components", {}).get("schemas", {})
    out = ["<!doctype html><html lang='en'><head><meta charset='utf-8'>",
           f"<title>{html.escape(spec['info']['title'])}</title><style>",
           "body{font:15px/1.45 system-ui,sans-serif;max-width:70em;margin:2em auto;padding:0 1em}",
           "table{border-collapse:collapse;margin:.5em 0 1.5em}td,th{border:1px solid #ccc;",
           "padding:.2em .5em;vertical-align:top;text-align:left}code{background:#f4f4f4}",
           "h2{border-top:2px solid #333;padding-top:.5em}</style></head><body>",
           f"<h1>{html.escape(spec['info']['title'])} {html.escape(spec['info']['version'])}</h1>",
           f"<p>{html.escape(spec['info'].get('description', ''))}</p>",
           "<p>Machine-readable document: <a href='/v1/openapi.json'>/v1/openapi.json</a></p>"]
    for path, operations in sorted(spec["paths"].items()):
        for method, op in operations.items():
            out.append(f"<h2><code>{method.upper()} {html.escape(path)}</code></h2>")
            out.append(f"<p>{html.escape(op.get('summary', ''))}</p>")
            body = op.get("requestBody", {}).get("content", {}).get("application/json", {})
            ref = body.get("schema", {}).get("$ref", "")
            if ref:
                out.append(_schema_table(ref.rsplit("/", 1)[-1], schemas))
    out.append("<h2>Schemas</h2>")
    for name in sorted(schemas):
        out.append(f"<h3 id='{html.escape(name)}'>{html.escape(name)}</h3>")
        out.append(_schema_table(name, schemas))
    out.append("</body></html>")
    return "\n".join(out)


def _describe(prop: dict[str, Any]) -> str:
    if "$ref" in prop:
        name = prop["$ref"].rsplit("/", 1)[-1]
        return f"<a href='#{html.escape(name)}'>{html.escape(name)}</a>"
    if "oneOf" in prop:
        return " or ".join(_describe(p) for p in prop["oneOf"])
    kind = prop.get("type", "any")
    if kind == "array" and "items" in prop:
        return f"array of {_describe(prop['items'])}"
    return html.escape(str(kind))


def _schema_table(name: str, schemas: dict[str, Any]) -> str:
    schema = schemas.get(name, {})
    required = set(schema.get("required", []))
    rows = ["<table><tr><th>field</th><th>type</th><th>unit</th><th>required</th>"
            "<th>description</th></tr>"]
    for field, prop in schema.get("properties", {}).items():
        rows.append(
            f"<tr><td><code>{html.escape(field)}</code></td><td>{_describe(prop)}</td>"
            f"<td>{html.escape(str(prop.get('x-unit', '')))}</td>"
            f"<td>{'yes' if field in required else ''}</td>"
            f"<td>{html.escape(str(prop.get('description', '')))}</td></tr>")
    rows.append("</table>")
    return "".join(rows)
