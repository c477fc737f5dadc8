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
from service.solvers.methods import PLATE_METHODS, PlateMethodProblem
from service.solvers.plate import Edge, PlateProblem

EDGE_NAMES = ("bottom", "right", "top", "left")
METHODS = PLATE_METHODS
# Ranges (default units) that bound every input to engineering scale, so that no combination of
# in-range values can overflow the series or the grid (method grid and both).
SIZE = {"minimum": 1e-6, "maximum": 1e4}                 # m
POSITION = {"minimum": -1e4, "maximum": 1e4}             # m (inside the rectangle: checked)
CONDUCTIVITY = {"minimum": 0.0, "exclusive_minimum": True, "maximum": 1e5}  # W/(m K)
TEMPERATURE = {"maximum": 1e4}                           # degC (absolute zero always refused)
FILM_COEFFICIENT = {"minimum": 0.0, "exclusive_minimum": True, "maximum": 1e7}  # W/(m^2 K)
HEAT_FLUX = {"minimum": -1e9, "maximum": 1e9}            # W/m^2
GENERATION = {"minimum": -1e13, "maximum": 1e13}         # W/m^3


class TemperatureEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("temperature"))
    value = Quantity("temperature", **TEMPERATURE, metadata={
        "description": "Uniform edge temperature."})
    profile = fields.List(
        fields.Tuple((Quantity("length", **POSITION), Quantity("temperature", **TEMPERATURE))),
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
    value = Quantity("heat_flux", required=True, **HEAT_FLUX, metadata={
        "description": "Heat flux, positive into the body."})


class ConvectionEdgeSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("convection"))
    film_coefficient = Quantity("film_coefficient", required=True, **FILM_COEFFICIENT)
    ambient = Quantity("temperature", required=True, **TEMPERATURE)


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


Point = fields.Tuple((Quantity("length", **POSITION), Quantity("length", **POSITION)))


class PlateRequestSchema(SolveRequestSchema):
    """A rectangle, origin at the bottom-left corner, x along width and y along height."""

    width = Quantity("length", required=True, **SIZE)
    height = Quantity("length", required=True, **SIZE)
    conductivity = Quantity("conductivity", required=True, **CONDUCTIVITY)
    generation = Quantity("generation", load_default=0.0, **GENERATION, metadata={
        "description": "Uniform volumetric heat generation."})
    edges = fields.Nested(EdgesSchema, required=True)
    points = fields.List(Point, load_default=list, metadata={
        "description": "Points [x, y] at which to report temperatures."})
    grid = fields.Nested(OutputGridSchema, load_default=None, metadata={
        "description": "Report the field on nx by ny evenly spaced points, edges included."})
    method = fields.String(load_default="auto", validate=validate.OneOf(METHODS), metadata={
        "description": "auto: series where it applies (every plate this request describes); "
                       "series; grid: the finite-volume solver (about 40,000 cells, with a "
                       "mesh error estimate); both: the series answer with the grid's beside it "
                       "and the largest difference (results.cross_check)."})
    tolerance = Quantity("temperature_difference", load_default=None, minimum=0.0,
                         exclusive_minimum=True, maximum=1e3, metadata={
                             "description": "Absolute temperature accuracy asked of the series; "
                                            "default 1e-6 of the largest temperature difference "
                                            "in the problem. Method grid: when given, the grid "
                                            "is refined (within the cell budget) until its "
                                            "mesh error estimate meets it, else a warning."})

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
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> PlateMethodProblem:
        edges = {name: _edge(edge) for name, edge in data["edges"].items()}
        grid = data.get("grid")
        budgets = CURRENT_BUDGETS.get()
        plate = PlateProblem(
            width=data["width"], height=data["height"], conductivity=data["conductivity"],
            generation=data["generation"], **edges,
            points=tuple((float(x), float(y)) for x, y in data["points"]),
            grid=(grid["nx"], grid["ny"]) if grid else None,
            atol=data["tolerance"], max_terms=budgets.max_series_terms,
            limits=data["limits"],
        )
        return PlateMethodProblem(plate=plate, method=data["method"],
                                  max_cells=budgets.max_cells)


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


class CrossCheckSchema(Schema):
    """Method both: the grid's answer beside the series answer."""

    method = fields.String(metadata={"enum": ["grid"], "description": "The method checked "
                                                                      "against the series."})
    max_difference = Quantity("temperature_difference", allow_none=True, metadata={
        "description": "Largest |series - grid| over the requested points, the output grid and "
                       "a 10 x 10 interior sample (corners where two different fixed "
                       "temperatures meet are left out)."})
    at = Quantity("length", allow_none=True, metadata={
        "type": "array", "items": {"type": "number"}, "nullable": True,
        "description": "[x, y] where it occurs."})
    grid_cells = Integer()
    grid_error_estimate = Quantity("temperature_difference", allow_none=True, metadata={
        "description": "The grid's largest mesh error estimate (Richardson, two grids) over "
                       "the compared points."})
    series_error_estimate = Quantity("temperature_difference", allow_none=True, metadata={
        "description": "The series' tail bound."})
    agrees = fields.Boolean(metadata={
        "description": "max_difference is within the series estimate plus 3 times the grid "
                       "estimate (the safety factor of a two-grid convergence index)."})
    points = fields.List(fields.Nested(PointTemperatureSchema), metadata={
        "description": "The grid's temperatures at the requested points."})
    edge_heat_flow = fields.Nested(EdgeHeatFlowSchema, metadata={
        "description": "The grid's heat flow into the body through each edge, per metre of "
                       "depth."})


def _finite_or_none(value: Any) -> Any:
    return None if value is None or not np.isfinite(value) else float(value)


def _points(coords: Any, temperatures: Any) -> list[dict[str, Any]]:
    coords = np.asarray(coords, dtype=float).reshape(-1, 2)
    temps = np.asarray(temperatures, dtype=float)
    return [{"x": x, "y": y, "temperature": t}
            for (x, y), t in zip(coords.tolist(), temps.tolist(), strict=True)]


class PlateResultsSchema(Schema):
    points = fields.List(fields.Nested(PointTemperatureSchema))
    grid = fields.Nested(FieldGridSchema, allow_none=True)
    edge_heat_flow = fields.Nested(EdgeHeatFlowSchema, metadata={
        "description": "Heat flow into the body through each edge, per metre of depth; null "
                       "where a corner between two different fixed temperatures makes it "
                       "unbounded."})
    energy_balance = fields.Nested(EnergyBalanceSchema)
    extremes = fields.Nested(ExtremesSchema)
    cross_check = fields.Nested(CrossCheckSchema, allow_none=True, metadata={
        "description": "Method both: the grid's answer and the largest difference from the "
                       "series; null for the other methods."})

    @pre_dump
    def _arrange(self, answer: Any, **kwargs: Any) -> dict[str, Any]:
        result = answer.plate
        grid = None
        if result.grid_temperature is not None:
            grid = {"x": result.grid_x, "y": result.grid_y, "temperature": result.grid_temperature}
        check = answer.cross_check
        cross = None
        if check is not None:
            at = [_finite_or_none(v) for v in check.at]
            cross = {"method": check.method,
                     "max_difference": _finite_or_none(check.max_difference),
                     "at": None if None in at else at, "grid_cells": check.grid_cells,
                     "grid_error_estimate": check.grid_error_estimate,
                     "series_error_estimate": check.series_error_estimate,
                     "agrees": check.agrees,
                     "points": _points(result.point_coordinates, check.point_temperatures),
                     "edge_heat_flow": check.edge_heat_flow}
        return {
            "points": _points(result.point_coordinates, result.point_temperatures),
            "grid": grid,
            "edge_heat_flow": result.edge_heat_flow,
            "energy_balance": {"generation": result.generation_heat,
                               "net": result.energy_balance.net,
                               "relative_error": result.energy_balance.relative_error},
            "extremes": {"hottest": result.hottest, "coldest": result.coldest},
            "cross_check": cross,
        }


class PlateResponseSchema(SolveResponseSchema):
    results = fields.Nested(PlateResultsSchema)  # type: ignore[assignment]
