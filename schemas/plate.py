"""POST /v1/plate: steady 2D conduction in a rectangle."""

from __future__ import annotations

from typing import Any

import numpy as np
from marshmallow import (
    Schema,
    ValidationError,
    fields,
    pre_dump,
    pre_load,
    validate,
    validates_schema,
)

from schemas.budgets import CURRENT_BUDGETS
from schemas.common import (
    BaseSchema,
    LocationSchema,
    SolveRequestSchema,
    SolveResponseSchema,
)
from schemas.fields import Integer, Number, Quantity
from schemas.polymorphic import Polymorphic
from service.solvers.errors import TooLargeError
from service.solvers.plate import Edge, PlateProblem

EDGE_NAMES = ("bottom", "right", "top", "left")
METHODS = ("auto", "series", "grid", "both")
UNAVAILABLE_METHODS = ("grid", "both")


class TemperatureEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("temperature"))
    value = Quantity("temperature", metadata={"description": "Uniform edge temperature."})
    profile = fields.List(
        fields.Tuple((Quantity("length"), Quantity("temperature"))),
        validate=validate.Length(min=2),
        metadata={"description": "Piecewise-linear temperature [[s, T], ...] with s measured "
                                 "along the edge (x for bottom/top, y for left/right), strictly "
                                 "increasing; held constant beyond its ends."})

    @validates_schema
    def _value_or_profile(self, data: dict[str, Any], **kwargs: Any) -> None:
        if ("value" in data) == ("profile" in data):
            raise ValidationError("Give exactly one of value or profile.", "value")
        profile = data.get("profile")
        if profile:
            s = [p[0] for p in profile]
            if any(b <= a for a, b in zip(s, s[1:], strict=False)):
                raise ValidationError("Positions must be strictly increasing.", "profile")


class FluxEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("flux"))
    value = Quantity("heat_flux", required=True, metadata={
        "description": "Heat flux, positive into the body."})


class ConvectionEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("convection"))
    film_coefficient = Quantity("film_coefficient", required=True, minimum=0.0,
                                exclusive_minimum=True)
    ambient = Quantity("temperature", required=True)


class InsulatedEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("insulated"))


EDGE_SCHEMAS = {
    "temperature": TemperatureEdgeSchema,
    "flux": FluxEdgeSchema,
    "convection": ConvectionEdgeSchema,
    "insulated": InsulatedEdgeSchema,
}


def _edge_field() -> Polymorphic:
    return Polymorphic(EDGE_SCHEMAS, required=True)


class EdgesSchema(BaseSchema):
    bottom = _edge_field()
    right = _edge_field()
    top = _edge_field()
    left = _edge_field()


class OutputGridSchema(BaseSchema):
    nx = Integer(required=True, minimum=2, metadata={"description": "Columns, including edges."})
    ny = Integer(required=True, minimum=2, metadata={"description": "Rows, including edges."})


Point = fields.Tuple((Quantity("length"), Quantity("length")))


class PlateRequestSchema(SolveRequestSchema):
    """A rectangle, origin at the bottom-left corner, x along width and y along height."""

    width = Quantity("length", required=True, minimum=0.0, exclusive_minimum=True)
    height = Quantity("length", required=True, minimum=0.0, exclusive_minimum=True)
    conductivity = Quantity("conductivity", required=True, minimum=0.0, exclusive_minimum=True)
    generation = Quantity("generation", load_default=0.0, metadata={
        "description": "Uniform volumetric heat generation."})
    edges = fields.Nested(EdgesSchema, required=True)
    points = fields.List(Point, load_default=list, metadata={
        "description": "Points [x, y] at which to report temperatures."})
    grid = fields.Nested(OutputGridSchema, load_default=None, metadata={
        "description": "Report the field on nx by ny evenly spaced points, edges included."})
    method = fields.String(load_default="auto", validate=validate.OneOf(METHODS), metadata={
        "description": "auto: series where it applies; series; grid; both (cross-check)."})
    tolerance = Quantity("temperature_difference", load_default=None, minimum=0.0,
                         exclusive_minimum=True, metadata={
                             "description": "Absolute temperature accuracy asked of the series; "
                                            "default 1e-6 of the largest temperature difference "
                                            "in the problem."})

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        """Count points and grid values before parsing anything (413 before allocation)."""
        if not isinstance(data, dict):
            return data
        budgets = CURRENT_BUDGETS.get()
        points = data.get("points")
        if isinstance(points, list) and len(points) > budgets.max_points:
            raise TooLargeError(f"points: {len(points)} points asked, the limit is "
                                f"{budgets.max_points} per request", field="points")
        grid = data.get("grid")
        if isinstance(grid, dict):
            nx, ny = grid.get("nx"), grid.get("ny")
            if (isinstance(nx, int) and isinstance(ny, int) and not isinstance(nx, bool)
                    and not isinstance(ny, bool) and nx * ny > budgets.max_output_values):
                raise TooLargeError(f"grid: {nx} x {ny} = {nx * ny} output values asked, the "
                                    f"limit is {budgets.max_output_values}", field="grid")
        return data

    @validates_schema
    def _geometry_rules(self, data: dict[str, Any], **kwargs: Any) -> None:
        width, height = data.get("width"), data.get("height")
        if width is None or height is None:
            return
        errors: dict[str, Any] = {}
        for i, (x, y) in enumerate(data.get("points") or []):
            if not (-1e-12 * width <= x <= width * (1 + 1e-12)
                    and -1e-12 * height <= y <= height * (1 + 1e-12)):
                errors.setdefault("points", {})[i] = [
                    f"Point ({x:g}, {y:g}) m lies outside the {width:g} m by {height:g} m "
                    "rectangle."]
        for name, edge in (data.get("edges") or {}).items():
            profile = edge.get("profile")
            length = width if name in ("bottom", "top") else height
            if profile and (profile[0][0] < -1e-12 * length
                            or profile[-1][0] > length * (1 + 1e-12)):
                errors.setdefault("edges", {}).setdefault(name, {})["profile"] = [
                    f"Positions must lie within the edge, 0 to {length:g} m."]
        if data.get("method") in UNAVAILABLE_METHODS:
            errors["method"] = [f"Method {data['method']!r} needs the grid solver, which this "
                                "version does not have yet; use 'auto' or 'series'."]
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> PlateProblem:
        edges = {name: _edge(edge) for name, edge in data["edges"].items()}
        grid = data.get("grid")
        return PlateProblem(
            width=data["width"], height=data["height"], conductivity=data["conductivity"],
            generation=data["generation"], **edges,
            points=tuple((float(x), float(y)) for x, y in data["points"]),
            grid=(grid["nx"], grid["ny"]) if grid else None,
            atol=data["tolerance"], max_terms=CURRENT_BUDGETS.get().max_series_terms,
            limits=data["limits"],
        )


def _edge(data: dict[str, Any]) -> Edge:
    profile = data.get("profile")
    return Edge(type=data["type"], value=data.get("value"),
                profile=tuple((float(s), float(t)) for s, t in profile) if profile else None,
                film_coefficient=data.get("film_coefficient"), ambient=data.get("ambient"))


# --------------------------------------------------------------------------- response


class PointTemperatureSchema(Schema):
    x = Quantity("length")
    y = Quantity("length")
    temperature = Quantity("temperature")


class FieldGridSchema(Schema):
    x = Quantity("length", metadata={"type": "array", "items": {"type": "number"}})
    y = Quantity("length", metadata={"type": "array", "items": {"type": "number"}})
    temperature = Quantity("temperature", metadata={
        "type": "array", "items": {"type": "array", "items": {"type": "number"}},
        "description": "temperature[j][i] at (x[i], y[j]); ny rows of nx values."})


class EdgeHeatFlowSchema(Schema):
    bottom = Quantity("heat_flow_per_length", allow_none=True)
    right = Quantity("heat_flow_per_length", allow_none=True)
    top = Quantity("heat_flow_per_length", allow_none=True)
    left = Quantity("heat_flow_per_length", allow_none=True)


class EnergyBalanceSchema(Schema):
    generation = Quantity("heat_flow_per_length", metadata={
        "description": "Heat generated in the body per metre of depth."})
    net = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": "Sum of edge heat flows and generation; zero for an exact solution."})
    relative_error = Number(allow_none=True, metadata={
        "description": "|net| divided by the largest single heat flow."})


class ExtremesSchema(Schema):
    hottest = fields.Nested(LocationSchema)
    coldest = fields.Nested(LocationSchema)


class PlateResultsSchema(Schema):
    points = fields.List(fields.Nested(PointTemperatureSchema))
    grid = fields.Nested(FieldGridSchema, allow_none=True)
    edge_heat_flow = fields.Nested(EdgeHeatFlowSchema, metadata={
        "description": "Heat flow into the body through each edge, per metre of depth; null "
                       "where a corner between two different fixed temperatures makes it "
                       "unbounded."})
    energy_balance = fields.Nested(EnergyBalanceSchema)
    extremes = fields.Nested(ExtremesSchema)

    @pre_dump
    def _arrange(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        coords = np.asarray(result.point_coordinates, dtype=float).reshape(-1, 2)
        temps = np.asarray(result.point_temperatures, dtype=float)
        grid = None
        if result.grid_temperature is not None:
            grid = {"x": result.grid_x, "y": result.grid_y, "temperature": result.grid_temperature}
        return {
            "points": [{"x": x, "y": y, "temperature": t}
                       for (x, y), t in zip(coords.tolist(), temps.tolist(), strict=True)],
            "grid": grid,
            "edge_heat_flow": result.edge_heat_flow,
            "energy_balance": {"generation": result.generation_heat,
                               "net": result.energy_balance.net,
                               "relative_error": result.energy_balance.relative_error},
            "extremes": {"hottest": result.hottest, "coldest": result.coldest},
        }


class PlateResponseSchema(SolveResponseSchema):
    results = fields.Nested(PlateResultsSchema)  # type: ignore[assignment]
