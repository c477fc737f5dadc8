"""POST /v1/grid: numerical (finite-volume) 2D conduction on a rectangle, planar or
axisymmetric, with zones, edge segments, tables, steady or transient."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

from marshmallow import (
    Schema,
    ValidationError,
    fields,
    post_load,
    pre_dump,
    pre_load,
    validate,
    validates_schema,
)

from schemas.budgets import CURRENT_BUDGETS, Budgets
from schemas.common import BaseSchema, LocationSchema, SolveRequestSchema, SolveResponseSchema
from schemas.fields import Array, Integer, Number, Quantity
from schemas.polymorphic import Polymorphic
from schemas.units import DEFAULT_UNITS
from service.solvers.errors import TooLargeError
from service.solvers.grid import (
    DIRECT_MAX_CELLS_TRANSIENT,
    Cells,
    Edges,
    GridProblem,
    Segment,
    Transient,
    Zone,
)
from service.solvers.grid_mesh import plan_mesh
from service.solvers.grid_model import EDGE_NAMES, GEOMETRIES, SCHEMES, step_plan
from service.solvers.plate_grid import DEFAULT_CELLS, cells_for, linear_solver_for_cells

_POSITIVE: dict[str, Any] = {"minimum": 0.0, "exclusive_minimum": True}
# Ranges (default units) that bound every input to engineering scale, so that no combination of
# in-range values can overflow the solver's arithmetic or make it run away.
SIZE = {"minimum": 1e-6, "maximum": 1e4}                 # m, width and height
POSITION = {"minimum": 0.0, "maximum": 1e4}              # m, coordinates inside the body
CONDUCTIVITY = {"minimum": 1e-5, "maximum": 1e5}         # W/(m K)
DENSITY = {"minimum": 1e-3, "maximum": 1e5}              # kg/m^3
SPECIFIC_HEAT = {"minimum": 1e-3, "maximum": 1e6}        # J/(kg K)
TEMPERATURE = {"maximum": 1e4}                           # degC (absolute zero always refused)
FILM_COEFFICIENT = {"minimum": 0.0, "maximum": 1e7}      # W/(m^2 K)
HEAT_FLUX = {"minimum": -1e9, "maximum": 1e9}            # W/m^2
GENERATION = {"minimum": -1e13, "maximum": 1e13}         # W/m^3
TIME = {"minimum": 0.0, "maximum": 1e10}                 # s, table abscissae
OUTPUT_TIME = {**_POSITIVE, "maximum": 1e10}             # s, output times and the time step
TOLERANCE = {**_POSITIVE, "maximum": 1e3}                # K
EMISSIVITY: dict[str, Any] = {**_POSITIVE, "maximum": 1.0}
MAX_ITERATIONS = 1000
MAX_ZONES = 50
MAX_SEGMENTS = 20           # per edge
MAX_NAME_LENGTH = 200
# The work model that bounds a request's solver time (steady linear solves are bounded by the
# cell budget alone: a million cells take about 4 s here). Measured through POST /v1/grid on
# this 2-core machine: a time step with the reused sparse LU costs 0.1-0.3 us per cell, a
# multigrid time step (above DIRECT_MAX_CELLS_TRANSIENT cells) 3.5-4.5 us, and a nonlinear
# (Picard) iteration, which builds a new factorisation or hierarchy, about as much.
#: Work units (about 0.3 us of solver time per cell) of one reused-LU time step per cell.
UNITS_REUSED_STEP = 1.0
#: Work units of one multigrid time step, or one Picard iteration, per cell.
UNITS_NEW_SOLVE = 15.0
#: A request may spend this many work units per cell of the cell budget (about 25 s at the
#: default budget), its verify_mesh solve included; verify_mesh coarsens instead of refining
#: when refining would not fit.
WORK_UNITS_PER_CELL = 80
DEFAULT_MAX_ITERATIONS = 200
#: Largest ratio between the conductivities of one problem (body, zones, tables): measured on
#: 1000 x 1000 cells, the multigrid solver converged in 11-16 cycles up to a ratio of 1e8 and
#: ran out of cycles at 1e10.
MAX_CONDUCTIVITY_RATIO = 1e8

_PROFILE_NOTE = ("Piecewise-linear [[s, value], ...] with s measured along the edge from its "
                 "start (x for bottom/top, y for left/right), strictly increasing; held "
                 "constant beyond its ends.")


# --------------------------------------------------------------------------- value or table


def _number_branch(kind: str, bounds: dict[str, Any]) -> dict[str, Any]:
    branch: dict[str, Any] = {"type": "number", "description": f"in {DEFAULT_UNITS[kind]}"}
    if bounds.get("minimum") is not None:
        branch["minimum"] = bounds["minimum"]
        if bounds.get("exclusive_minimum"):
            branch["exclusiveMinimum"] = True
    if bounds.get("maximum") is not None:
        branch["maximum"] = bounds["maximum"]
    return branch


class ValueOrTable(fields.Field):
    """A constant (a number in the default unit, or "value unit") or a table
    ``{"table": [[x, value], ...]}``: piecewise linear in x (strictly increasing), held constant
    beyond its ends. Loads to a float or a tuple of (x, value) pairs in default units."""

    default_error_messages = {"invalid": "Not a number, a quantity string or a {\"table\": ...}."}

    def __init__(self, kind: str, abscissa: str, *, bounds: dict[str, Any] | None = None,
                 abscissa_bounds: dict[str, Any] | None = None, what: str = "",
                 **kwargs: Any) -> None:
        bounds = bounds or {}
        abscissa_bounds = abscissa_bounds or {}
        metadata = dict(kwargs.pop("metadata", {}) or {})
        pair = {"type": "array", "minItems": 2, "maxItems": 2,
                "items": {"oneOf": [{"type": "number"}, {"type": "string"}]}}
        metadata.setdefault("oneOf", [
            _number_branch(kind, bounds),
            {"type": "string", "description": f"a number and a unit of {kind}, e.g. "
                                              f"'1 {DEFAULT_UNITS[kind]}'"},
            {"type": "object", "required": ["table"], "additionalProperties": False,
             "properties": {"table": {
                 "type": "array", "minItems": 1, "items": pair,
                 "description": f"[[{abscissa} ({DEFAULT_UNITS[abscissa]}), value "
                                f"({DEFAULT_UNITS[kind]})], ...]{what}"}}},
        ])
        metadata.setdefault("x-unit", DEFAULT_UNITS[kind])
        metadata.setdefault("x-quantity", kind)
        metadata.setdefault("x-table-abscissa", abscissa)
        super().__init__(metadata=metadata, **kwargs)
        self.kind = kind
        self.abscissa = abscissa
        self._value = Quantity(kind, **bounds)
        self._x = Quantity(abscissa, **abscissa_bounds)

    def _deserialize(self, value: Any, attr: str | None, data: Any,
                     **kwargs: Any) -> float | tuple[tuple[float, float], ...]:
        if not isinstance(value, dict):
            return self._value.deserialize(value)
        unknown = [key for key in value if key != "table"]
        if unknown:
            raise ValidationError({str(key): ["Unknown field."] for key in unknown})
        rows = value.get("table")
        if not isinstance(rows, list) or not rows:
            raise ValidationError({"table": ["Must be a non-empty list of [x, value] pairs."]})
        errors: dict[Any, Any] = {}
        table: list[tuple[float, float]] = []
        for i, row in enumerate(rows):
            if not isinstance(row, list) or len(row) != 2:
                errors[i] = ["Must be a pair [x, value]."]
                continue
            pair_errors: dict[int, Any] = {}
            parsed: list[float] = []
            for j, (field, item) in enumerate(((self._x, row[0]), (self._value, row[1]))):
                try:
                    parsed.append(float(field.deserialize(item)))  # type: ignore[arg-type]
                except ValidationError as exc:
                    pair_errors[j] = exc.messages
            if pair_errors:
                errors[i] = pair_errors
            else:
                table.append((parsed[0], parsed[1]))
        if errors:
            raise ValidationError({"table": errors})
        if any(b[0] <= a[0] for a, b in zip(table, table[1:], strict=False)):
            raise ValidationError({"table": [f"The {self.abscissa.replace('_', ' ')} column "
                                             "must increase strictly."]})
        return tuple(table)


def is_table(value: Any) -> bool:
    return isinstance(value, tuple)


def _time_value(kind: str, bounds: dict[str, Any], description: str, **kwargs: Any) -> Any:
    return ValueOrTable(kind, "time", bounds=bounds, abscissa_bounds=TIME,
                        what=" (time since the start; transient runs only)",
                        metadata={"description": description}, **kwargs)


def _conductivity(description: str, **kwargs: Any) -> ValueOrTable:
    return ValueOrTable("conductivity", "temperature", bounds=CONDUCTIVITY,
                        abscissa_bounds=TEMPERATURE, what=" (conductivity against temperature)",
                        metadata={"description": description}, **kwargs)


# --------------------------------------------------------------------------- segments


def _segment_type(name: str) -> fields.String:
    return fields.String(required=True, validate=validate.Equal(name), metadata={"enum": [name]})


def _extent() -> dict[str, Quantity]:
    return {
        "start": Quantity("length", data_key="from", load_default=None, **POSITION, metadata={
            "description": "Start along the edge (x for bottom/top, y for left/right); "
                           "default the edge's start."}),
        "end": Quantity("length", data_key="to", load_default=None, **POSITION, metadata={
            "description": "End along the edge; default the edge's end."}),
    }


def _profile(kind: str, bounds: dict[str, Any]) -> fields.List:
    return fields.List(fields.Tuple((Quantity("length", **POSITION), Quantity(kind, **bounds))),
                       validate=validate.Length(min=2), load_default=None,
                       metadata={"description": _PROFILE_NOTE + " Replaces value."})


class SegmentSchema(BaseSchema):
    """Shared rules of every segment: from < to; value or profile; builds `Segment`."""

    @validates_schema
    def _extent_and_value(self, data: dict[str, Any], **kwargs: Any) -> None:
        start, end = data.get("start"), data.get("end")
        if start is not None and end is not None and not end > start:
            raise ValidationError("Must be greater than from.", "to")
        if "profile" in self.fields:
            given = [name for name in ("value", "profile") if data.get(name) is not None]
            if len(given) != 1:
                raise ValidationError("Give exactly one of value or profile.", "value")
            profile = data.get("profile")
            if profile and any(b[0] <= a[0] for a, b in zip(profile, profile[1:], strict=False)):
                raise ValidationError("Positions must be strictly increasing.", "profile")

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Segment:
        profile = data.pop("profile", None)
        return Segment(**data, profile=tuple((float(s), float(v)) for s, v in profile)
                       if profile else None)


class GridTemperatureSegmentSchema(SegmentSchema):
    type = _segment_type("temperature")
    start, end = _extent().values()
    value = _time_value("temperature", TEMPERATURE, "Surface temperature.", load_default=None)
    profile = _profile("temperature", TEMPERATURE)


class GridFluxSegmentSchema(SegmentSchema):
    type = _segment_type("flux")
    start, end = _extent().values()
    value = _time_value("heat_flux", HEAT_FLUX, "Heat flux into the body.", load_default=None)
    profile = _profile("heat_flux", HEAT_FLUX)


class GridConvectionSegmentSchema(SegmentSchema):
    """Convection, optionally with radiation (give emissivity; surroundings default to
    ambient)."""

    type = _segment_type("convection")
    start, end = _extent().values()
    film_coefficient = _time_value("film_coefficient", FILM_COEFFICIENT, "Convection "
                                   "coefficient.", required=True)
    ambient = _time_value("temperature", TEMPERATURE, "Fluid temperature.", required=True)
    emissivity = Number(load_default=None, **EMISSIVITY, metadata={
        "description": "Adds grey-body radiation to the surroundings."})
    surroundings = _time_value("temperature", TEMPERATURE, "Radiating surroundings (default: "
                               "ambient).", load_default=None)


class GridRadiationSegmentSchema(SegmentSchema):
    """Grey-body radiation, optionally with convection (give film_coefficient and ambient)."""

    type = _segment_type("radiation")
    start, end = _extent().values()
    emissivity = Number(required=True, **EMISSIVITY, metadata={
        "description": "Grey-body emissivity, above 0 and at most 1."})
    surroundings = _time_value("temperature", TEMPERATURE, "Radiating surroundings (default: "
                               "ambient).", load_default=None)
    film_coefficient = _time_value("film_coefficient", FILM_COEFFICIENT, "Convection "
                                   "coefficient (needs ambient).", load_default=None)
    ambient = _time_value("temperature", TEMPERATURE, "Fluid temperature.", load_default=None)

    @validates_schema
    def _needs(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("surroundings") is None and data.get("ambient") is None:
            raise ValidationError("Required (or give ambient).", "surroundings")
        if data.get("film_coefficient") is not None and data.get("ambient") is None:
            raise ValidationError("Required with film_coefficient.", "ambient")


class GridInsulatedSegmentSchema(SegmentSchema):
    type = _segment_type("insulated")
    start, end = _extent().values()


SEGMENT_SCHEMAS = {
    "temperature": GridTemperatureSegmentSchema,
    "flux": GridFluxSegmentSchema,
    "convection": GridConvectionSegmentSchema,
    "radiation": GridRadiationSegmentSchema,
    "insulated": GridInsulatedSegmentSchema,
}


class Single(list):  # type: ignore[type-arg]
    """An edge given as one condition object (error paths then carry no segment index)."""


class EdgeConditions(fields.List):
    """One condition object, or a list of segments (documented as the list)."""

    def __init__(self, note: str = "", **kwargs: Any) -> None:
        super().__init__(Polymorphic(SEGMENT_SCHEMAS), required=True,
                         validate=validate.Length(min=1, max=MAX_SEGMENTS), metadata={
                             "description": "A list of segments (from, to along the edge; "
                                            "parts not covered are insulated), or one "
                                            "condition object for the whole edge." + note},
                         **kwargs)

    def _deserialize(self, value: Any, attr: str | None, data: Any,
                     **kwargs: Any) -> list[Any]:
        if isinstance(value, dict):
            return Single([self.inner.deserialize(value, **kwargs)])
        return list(super()._deserialize(value, attr, data, **kwargs))


class GridEdgesSchema(BaseSchema):
    bottom = EdgeConditions()
    right = EdgeConditions()
    top = EdgeConditions()
    left = EdgeConditions(note=" Axisymmetric bodies: the axis (x = 0), which must be "
                               "insulated.")


# --------------------------------------------------------------------------- the rest


class GridCellsSchema(BaseSchema):
    nx = Integer(required=True, minimum=1, metadata={"description": "Cells along x."})
    ny = Integer(required=True, minimum=1, metadata={"description": "Cells along y."})

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Cells:
        return Cells(**data)


class GridZoneSchema(BaseSchema):
    """A rectangle of another material; properties left out are the body's. Later zones win
    where zones overlap."""

    name = fields.String(load_default=None, validate=validate.Length(max=MAX_NAME_LENGTH),
                         metadata={"description": "Used in safety locations (default "
                                                  "'zone <index>')."})
    region = fields.Tuple((Quantity("length", **POSITION), Quantity("length", **POSITION),
                           Quantity("length", **POSITION), Quantity("length", **POSITION)),
                          required=True, metadata={"description": "[x0, y0, x1, y1]: corners "
                                                                  "from the bottom-left origin."})
    conductivity = _conductivity("Conductivity, or a table against temperature.",
                                 load_default=None)
    generation = _time_value("generation", GENERATION, "Volumetric heat generation.",
                             load_default=None)
    density = Quantity("density", load_default=None, **DENSITY)
    specific_heat = Quantity("specific_heat", load_default=None, **SPECIFIC_HEAT)
    max_temperature = Quantity("temperature", load_default=None, **TEMPERATURE, metadata={
        "description": "Service limit of the material, checked against the zone's hottest "
                       "point."})


class GridTransientSchema(BaseSchema):
    initial_temperature = Quantity("temperature", required=True, **TEMPERATURE, metadata={
        "description": "Uniform temperature at t = 0."})
    times = fields.List(Quantity("time", **OUTPUT_TIME), required=True,
                        validate=validate.Length(min=1), metadata={
                            "description": "Output times, strictly increasing."})
    time_step = Quantity("time", required=True, **OUTPUT_TIME, metadata={
        "description": "Largest step; each interval between output times is split into equal "
                       "steps no longer than this."})
    scheme = fields.String(load_default="backward_euler", validate=validate.OneOf(SCHEMES),
                           metadata={"description": "backward_euler (first order, never "
                                                    "oscillates) or crank_nicolson (second "
                                                    "order)."})

    @validates_schema
    def _increasing(self, data: dict[str, Any], **kwargs: Any) -> None:
        times = data.get("times") or []
        if any(b <= a for a, b in zip(times, times[1:], strict=False)):
            raise ValidationError("Times must be strictly increasing.", "times")

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Transient:
        return Transient(initial_temperature=data["initial_temperature"],
                         times=tuple(data["times"]), time_step=data["time_step"],
                         scheme=data["scheme"])


Point = fields.Tuple((Quantity("length", **POSITION), Quantity("length", **POSITION)))


def _try(kind: str, value: Any) -> float | None:
    """A number from a raw request value (number or "value unit"), or None when it is not one
    (validation reports it later)."""
    try:
        return Quantity(kind).deserialize(value)
    except ValidationError:
        return None


def _whole(value: Any) -> int | None:
    if isinstance(value, bool) or not isinstance(value, int | float):
        return None
    if isinstance(value, float) and not (math.isfinite(value) and value.is_integer()):
        return None
    return int(value)


def _tables(data: dict[str, Any]) -> list[tuple[str, Any]]:
    """(path, raw table or profile) of every table a raw request holds."""
    found: list[tuple[str, Any]] = []

    def visit(path: str, value: Any) -> None:
        if isinstance(value, dict) and isinstance(value.get("table"), list):
            found.append((path, value["table"]))

    visit("conductivity", data.get("conductivity"))
    visit("generation", data.get("generation"))
    zones = data.get("zones")
    for i, zone in enumerate(zones if isinstance(zones, list) else []):
        if isinstance(zone, dict):
            visit(f"zones.{i}.conductivity", zone.get("conductivity"))
            visit(f"zones.{i}.generation", zone.get("generation"))
    edges = data.get("edges")
    for name, edge in (edges.items() if isinstance(edges, dict) else []):
        segments = [edge] if isinstance(edge, dict) else edge if isinstance(edge, list) else []
        for n, seg in enumerate(segments):
            if not isinstance(seg, dict):
                continue
            path = f"edges.{name}" + ("" if isinstance(edge, dict) else f".{n}")
            for key in ("value", "film_coefficient", "ambient", "surroundings"):
                visit(f"{path}.{key}", seg.get(key))
            if isinstance(seg.get("profile"), list):
                found.append((f"{path}.profile", seg["profile"]))
    return found


class GridRequestSchema(SolveRequestSchema):
    """A rectangle, origin at the bottom-left corner, x along width and y along height;
    axisymmetric bodies turn about the axis x = 0 (x is the radius, y the axial position)."""

    width = Quantity("length", required=True, **SIZE, metadata={
        "description": "Along x (the radius of an axisymmetric body)."})
    height = Quantity("length", required=True, **SIZE, metadata={
        "description": "Along y (axial for an axisymmetric body)."})
    geometry = fields.String(load_default="planar", validate=validate.OneOf(GEOMETRIES), metadata={
        "description": "planar (per metre of depth) or axisymmetric (the whole body of "
                       "revolution, axis at x = 0)."})
    cells = fields.Nested(GridCellsSchema, load_default=None, metadata={
        "description": f"Cells along x and y (default about {DEFAULT_CELLS} nearly square "
                       "cells). A few are added where needed so that every zone and segment "
                       "boundary is a grid line."})
    conductivity = _conductivity("The body's conductivity, or a table against temperature "
                                 "(solved by Picard iteration).", required=True)
    density = Quantity("density", load_default=None, **DENSITY, metadata={
        "description": "Needed for transient runs."})
    specific_heat = Quantity("specific_heat", load_default=None, **SPECIFIC_HEAT, metadata={
        "description": "Needed for transient runs."})
    generation = _time_value("generation", GENERATION, "Volumetric heat generation in the "
                             "body (zones may set their own).", load_default=0.0)
    zones = fields.List(fields.Nested(GridZoneSchema), load_default=list,
                        validate=validate.Length(max=MAX_ZONES))
    edges = fields.Nested(GridEdgesSchema, required=True)
    points = fields.List(Point, load_default=list, metadata={
        "description": "Points [x, y] at which to report temperatures."})
    output_grid = fields.Boolean(load_default=False, metadata={
        "description": "Report the cell-centre field (transients: at every output time)."})
    verify_mesh = fields.Boolean(load_default=False, metadata={
        "description": "Solve again on a grid with every interval's cells doubled (halved near "
                       "the cell budget) and report a Richardson-style error estimate per "
                       "point."})
    transient = fields.Nested(GridTransientSchema, load_default=None, metadata={
        "description": "Time stepping from a uniform initial temperature; omit for a steady "
                       "solve."})
    tolerance = Quantity("temperature_difference", load_default=None, **TOLERANCE, metadata={
        "description": "Temperature tolerance of the nonlinear (Picard) iteration; default "
                       "1e-6 of the largest temperature difference in the problem."})
    max_iterations = Integer(load_default=None, minimum=1, maximum=MAX_ITERATIONS, metadata={
        "description": f"Picard iterations per steady solve or per time step (conductivity "
                       f"tables and radiation). Default {DEFAULT_MAX_ITERATIONS}, or fewer "
                       f"where the work budget needs (see the README)."})

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        """Count cells, points, table rows, output values and time steps before parsing
        anything (413 before any allocation)."""
        if not isinstance(data, dict):
            return data
        budgets = CURRENT_BUDGETS.get()
        points = data.get("points")
        n_points = len(points) if isinstance(points, list) else 0
        if n_points > budgets.max_points:
            raise TooLargeError(f"points: {n_points} points asked, the limit is "
                                f"{budgets.max_points} per request", field="points")
        for path, rows in _tables(data):
            if len(rows) > budgets.max_profile_points:
                raise TooLargeError(f"{path}: {len(rows)} rows, the limit is "
                                    f"{budgets.max_profile_points} per table", field=path)
        cells = _requested_cells(data, budgets)
        transient = data.get("transient")
        times = transient.get("times") if isinstance(transient, dict) else None
        n_times = len(times) if isinstance(times, list) else 0
        if n_times * max(n_points, 1) > budgets.max_output_values:
            raise TooLargeError(f"transient.times: {n_times} times x {n_points} points asked, "
                                f"the limit is {budgets.max_output_values} values",
                                field="transient.times")
        if data.get("output_grid") is True and cells * max(n_times, 1) > budgets.max_output_values:
            raise TooLargeError(f"output_grid: {cells} cells x {max(n_times, 1)} output times "
                                f"asked, the limit is {budgets.max_output_values} values",
                                field="output_grid")
        if isinstance(transient, dict) and isinstance(times, list):
            step = _try("time", transient.get("time_step"))
            values = [v for v in (_try("time", t) for t in times) if v is not None]
            if step is not None and step > 0.0 and len(values) == n_times:
                steps = sum(n for _, n, _ in step_plan(values, step))
                if steps > budgets.max_time_steps:
                    raise TooLargeError(f"transient: {steps} time steps asked, the limit is "
                                        f"{budgets.max_time_steps}", field="transient.time_step")
                if steps * cells * UNITS_REUSED_STEP > work_budget(budgets):
                    raise TooLargeError(
                        f"transient: {steps} time steps on {cells} cells = {steps * cells:.3g} "
                        f"cell-steps, beyond the work budget of {work_budget(budgets):.3g}",
                        field="transient.time_step")
        return data

    @validates_schema
    def _domain_rules(self, data: dict[str, Any], **kwargs: Any) -> None:
        width, height = data.get("width"), data.get("height")
        if width is None or height is None:
            return
        errors: dict[str, Any] = {}
        for i, (x, y) in enumerate(data.get("points") or []):
            if not (x <= width * (1 + 1e-12) and y <= height * (1 + 1e-12)):
                errors.setdefault("points", {})[i] = [
                    f"Point ({x:g}, {y:g}) m lies outside the {width:g} m by {height:g} m "
                    "rectangle."]
        for i, zone in enumerate(data.get("zones") or []):
            x0, y0, x1, y1 = zone["region"]
            if not (x0 < x1 <= width * (1 + 1e-12) and y0 < y1 <= height * (1 + 1e-12)):
                errors.setdefault("zones", {})[i] = {"region": [
                    f"Need 0 <= x0 < x1 <= width ({width:g} m) and 0 <= y0 < y1 <= height "
                    f"({height:g} m)."]}
        for name, segments in (data.get("edges") or {}).items():
            length = width if name in ("bottom", "top") else height
            problems = _segment_rules(segments, length)
            if problems:
                errors.setdefault("edges", {})[name] = problems
        transient = data.get("transient")
        if transient is None:
            for path in _time_tables(data):
                _put(errors, path, "A time table needs a transient run.")
        else:
            for name in ("density", "specific_heat"):
                if data.get(name) is None:
                    errors[name] = ["Required for a transient run (the body's value is used "
                                    "wherever a zone gives none)."]
        ratio = _conductivity_ratio(data)
        if ratio > MAX_CONDUCTIVITY_RATIO:
            errors.setdefault("conductivity", []).append(
                f"The conductivities of this problem (body, zones and tables) span a ratio of "
                f"{ratio:.3g}, beyond {MAX_CONDUCTIVITY_RATIO:g}: the linear solver is not "
                "reliable there; a material that much more conductive than its neighbour can be "
                "modelled by a fixed temperature, one that much less by an insulated edge.")
        if data.get("geometry") == "axisymmetric":
            for n, seg in enumerate((data.get("edges") or {}).get("left") or []):
                if seg.type != "insulated":
                    _put(errors, _segment_path("left", data["edges"]["left"], n, "type"),
                         "The left edge is the axis of an axisymmetric body (x = 0) and must "
                         "be insulated.")
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> GridProblem:
        budgets = CURRENT_BUDGETS.get()
        cells = data.get("cells") or cells_for(data["width"], data["height"],
                                               min(DEFAULT_CELLS, budgets.max_cells))
        zones = tuple(
            Zone(name=zone.get("name") or f"zone {i}", region=tuple(zone["region"]),
                 conductivity=zone.get("conductivity"), generation=zone.get("generation"),
                 density=zone.get("density"), specific_heat=zone.get("specific_heat"),
                 max_temperature=zone.get("max_temperature"))
            for i, zone in enumerate(data["zones"]))
        problem = GridProblem(
            width=data["width"], height=data["height"], cells=cells,
            conductivity=data["conductivity"], geometry=data["geometry"],
            density=data.get("density"), specific_heat=data.get("specific_heat"),
            generation=data["generation"], zones=zones,
            edges=Edges(**{name: tuple(segs) for name, segs in data["edges"].items()}),
            transient=data.get("transient"),
            points=tuple((float(x), float(y)) for x, y in data["points"]),
            output_grid=data["output_grid"], verify_mesh=data["verify_mesh"],
            atol=data["tolerance"], max_iterations=DEFAULT_MAX_ITERATIONS,
            linear_solver=linear_solver_for_cells(cells),
            limits=data["limits"], max_cells=budgets.max_cells,
            max_time_steps=budgets.max_time_steps,
        )
        if _cells_of(problem) > budgets.max_cells:
            raise TooLargeError(
                f"cells: the zone and segment boundaries need a grid of {_cells_of(problem)} "
                f"cells, beyond the limit of {budgets.max_cells}", field="cells")
        plan = plan_work(problem, data.get("max_iterations"), budgets)
        return replace(problem, max_iterations=plan.max_iterations, max_cells=plan.max_cells,
                       max_cell_steps=plan.max_cell_steps)


def _conductivity_ratio(data: dict[str, Any]) -> float:
    values: list[float] = []
    for k in [data.get("conductivity"), *(z.get("conductivity") for z in data.get("zones") or [])]:
        if is_table(k):
            values.extend(v for _, v in k)
        elif k is not None:
            values.append(k)
    return max(values) / min(values) if values else 1.0


def _nonlinear(problem: GridProblem) -> bool:
    """Conductivity tables or radiation: solved by Picard iteration."""
    if any(is_table(k) for k in [problem.conductivity, *(z.conductivity for z in problem.zones)]):
        return True
    return any(seg.type == "radiation" or (seg.type == "convection" and seg.emissivity)
               for _, segments in problem.edges.named() for seg in segments)


@dataclass(frozen=True)
class WorkPlan:
    """Caps passed to the solver so that a request stays within its work budget."""

    max_iterations: int
    max_cells: int
    max_cell_steps: int


def work_budget(budgets: Budgets) -> float:
    """Work units one request may spend (see WORK_UNITS_PER_CELL)."""
    return WORK_UNITS_PER_CELL * budgets.max_cells


def _run_units(cells: int, steps: int, iterations: int, nonlinear: bool,
               transient: bool) -> float:
    """Work units of one solve of `cells` cells (0 for a steady linear solve)."""
    if nonlinear:
        return cells * steps * iterations * UNITS_NEW_SOLVE
    if not transient:
        return 0.0
    reused = cells <= DIRECT_MAX_CELLS_TRANSIENT
    return cells * steps * (UNITS_REUSED_STEP if reused else UNITS_NEW_SOLVE)


def _cells_of(problem: GridProblem, scale: float = 1.0) -> int:
    """Cells of the grid the solver will build (lines on zone and segment ends included)."""
    _, _, cx, cy = plan_mesh(problem, scale)
    return sum(cx) * sum(cy)


def plan_work(problem: GridProblem, asked_iterations: int | None,
              budgets: Budgets) -> WorkPlan:
    """The Picard cap and the solver's cell caps: as asked where the work fits the budget, the
    verification coarsened where refining would not fit, the default max_iterations lowered
    where needed; 413 when even that cannot fit.

    Work of a run: cells x time steps x units per cell-step (a reused-LU step 1, a multigrid
    step 15), or for nonlinear problems cells x time steps x max_iterations x 15; steady linear
    runs are bounded by the cell budget alone. verify_mesh adds a run on the refined grid (4 x
    the cells) or the coarsened one.
    """
    n = _cells_of(problem)
    tr = problem.transient
    steps = sum(k for _, k, _ in step_plan(tr.times, tr.time_step)) if tr is not None else 1
    nonlinear = _nonlinear(problem)
    transient = tr is not None
    budget = work_budget(budgets)
    verify = problem.verify_mesh
    refined = _cells_of(problem, 2.0) if verify else 0
    coarse = _cells_of(problem, 0.5) if verify else 0

    def total(iterations: int, refine: bool) -> float:
        main = _run_units(n, steps, iterations, nonlinear, transient)
        if not verify:
            return main
        other = refined if refine else coarse
        return main + _run_units(other, steps, iterations, nonlinear, transient)

    # the solver refines when the refined grid fits its caps; keep that only if the work fits
    refine = verify and refined <= budgets.max_cells
    if refine and total(asked_iterations or 1, True) > budget:
        refine = False
    if nonlinear:
        per_iteration = total(1, refine)
        allowed = int(budget // per_iteration)
        limit = asked_iterations if asked_iterations is not None \
            else min(DEFAULT_MAX_ITERATIONS, allowed)
        if limit < 1 or limit > allowed:
            raise TooLargeError(
                f"max_iterations: a nonlinear problem (conductivity table or radiation) of {n} "
                f"cells x {steps} time step(s){' with verify_mesh' if verify else ''} allows at "
                f"most {allowed} Picard iterations within the work budget; use fewer cells or "
                "time steps", field="max_iterations")
    else:
        limit = asked_iterations or DEFAULT_MAX_ITERATIONS
        if total(1, refine) > budget:
            raise TooLargeError(
                f"transient: {steps} time steps on {n} cells exceed the work budget (a "
                f"multigrid time step above {DIRECT_MAX_CELLS_TRANSIENT} cells costs about "
                f"{UNITS_NEW_SOLVE:g} times a reused-factorisation step); use fewer cells or "
                "time steps", field="transient.time_step")
    # caps just below the refined grid make the solver coarsen the verification instead
    max_cells = budgets.max_cells if refine or not verify else min(budgets.max_cells,
                                                                   refined - 1)
    max_cell_steps = max(n, refined if refine else refined - 1) * steps
    return WorkPlan(max_iterations=limit, max_cells=max(max_cells, n),
                    max_cell_steps=max_cell_steps)


def _requested_cells(data: dict[str, Any], budgets: Budgets) -> int:
    """Cells asked for (the default count when none are given); 413 beyond the budget."""
    cells = data.get("cells")
    if not isinstance(cells, dict):
        return min(DEFAULT_CELLS, budgets.max_cells)
    nx, ny = _whole(cells.get("nx")), _whole(cells.get("ny"))
    if nx is None or ny is None:
        return min(DEFAULT_CELLS, budgets.max_cells)
    if nx * ny > budgets.max_cells:
        raise TooLargeError(f"cells: {nx} x {ny} = {nx * ny} cells asked, the limit is "
                            f"{budgets.max_cells}", field="cells")
    return max(nx * ny, 1)


def _segment_path(edge: str, segments: list[Segment], n: int, key: str) -> str:
    return f"edges.{edge}." + ("" if isinstance(segments, Single) else f"{n}.") + key


def _put(errors: dict[str, Any], path: str, message: str) -> None:
    node = errors
    parts = path.split(".")
    for part in parts[:-1]:
        key: Any = int(part) if part.isdigit() else part
        node = node.setdefault(key, {})
    node.setdefault(parts[-1], []).append(message)


def _segment_rules(segments: list[Segment], length: float) -> dict[Any, Any]:
    """Segments lie within the edge, do not overlap, and profiles lie within the edge."""
    single = isinstance(segments, Single)
    errors: dict[Any, Any] = {}

    def add(n: int, key: str, message: str) -> None:
        target = errors if single else errors.setdefault(n, {})
        target.setdefault(key, []).append(message)

    spans = []
    slack = 1e-12 * length
    for n, seg in enumerate(segments):
        start = 0.0 if seg.start is None else seg.start
        end = length if seg.end is None else seg.end
        if seg.start is not None and start >= length:
            add(n, "from", f"Must be below the edge length, {length:g} m.")
        elif seg.end is not None and end > length + slack:
            add(n, "to", f"Must be at most the edge length, {length:g} m.")
        elif not end > start:
            add(n, "to", "Must be greater than from.")
        else:
            spans.append((start, end, n))
        if seg.profile and (seg.profile[0][0] < -slack or seg.profile[-1][0] > length + slack):
            add(n, "profile", f"Positions must lie within the edge, 0 to {length:g} m.")
    spans.sort()
    for (_, end0, _), (start1, _, n1) in zip(spans, spans[1:], strict=False):
        if start1 < end0 - 1e-9 * length:
            add(n1, "from", f"Overlaps another segment of this edge (which ends at {end0:g} m).")
    return errors


def _time_tables(data: dict[str, Any]) -> list[str]:
    """Paths of the time tables in a loaded request."""
    paths = []
    if is_table(data.get("generation")):
        paths.append("generation")
    for i, zone in enumerate(data.get("zones") or []):
        if is_table(zone.get("generation")):
            paths.append(f"zones.{i}.generation")
    for name, segments in (data.get("edges") or {}).items():
        for n, seg in enumerate(segments):
            for key in ("value", "film_coefficient", "ambient", "surroundings"):
                if is_table(getattr(seg, key)):
                    paths.append(_segment_path(name, segments, n, key))
    return paths


# --------------------------------------------------------------------------- response

_BASIS = {
    "W/m": "planar: heat flows per metre of depth (the *_per_length fields, W/m and J/m); "
           "the whole-body fields are null",
    "W": "axisymmetric: heat flows of the whole body of revolution (W and J); the "
         "*_per_length fields are null",
}
_INTO = "Positive into the body."
_PER_LENGTH = "Planar bodies (per metre of depth); null for axisymmetric ones."
_WHOLE = "Axisymmetric bodies (the whole body of revolution); null for planar ones."
_NULL_NON_FINITE = " Null when the solve produced no finite field."


def _array(kind: str | None, description: str, depth: int = 1, **kwargs: Any) -> fields.Field:
    items: dict[str, Any] = {"type": "number", "nullable": True}
    for _ in range(depth - 1):
        items = {"type": "array", "items": items}
    metadata = {"type": "array", "items": items, "description": description}
    if kind is None:
        return Array(metadata=metadata, **kwargs)
    return Quantity(kind, metadata=metadata, **kwargs)


def _pair(value: Any, per_length: bool) -> tuple[Any, Any]:
    """(whole-body value, per-metre value): the solver's value goes to one of them."""
    return (None, value) if per_length else (value, None)


def _finite(value: Any) -> Any:
    """A float, or None when it is not finite (NaN has no JSON form)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


class GridPointSchema(Schema):
    x = Quantity("length")
    y = Quantity("length")
    temperature = Quantity("temperature", allow_none=True, metadata={
        "description": "Interpolated from the cell and its face values." + _NULL_NON_FINITE})
    error_estimate = Quantity("temperature_difference", allow_none=True, metadata={
        "description": "verify_mesh: Richardson-style estimate of the discretisation error "
                       "here (transients: the largest over the output times); else null."})


class GridFieldSchema(Schema):
    x = _array("length", "Cell centres along x.")
    y = _array("length", "Cell centres along y.")
    x_faces = _array("length", "Grid lines along x (nx + 1, the edges included).")
    y_faces = _array("length", "Grid lines along y (ny + 1).")
    temperature = _array("temperature", "temperature[j][i] at (x[i], y[j]), cell centres; ny "
                                        "rows of nx values (transients: the last time).",
                         depth=2)


class GridSegmentFlowSchema(Schema):
    index = Integer(metadata={"description": "Position in the edge's list of segments."})
    start = Quantity("length", data_key="from")
    end = Quantity("length", data_key="to")
    type = fields.String(metadata={"enum": list(SEGMENT_SCHEMAS)})
    heat_flow = Quantity("heat_flow", allow_none=True, metadata={
        "description": f"{_INTO} {_WHOLE}"})
    heat_flow_per_length = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": f"{_INTO} {_PER_LENGTH}"})
    mean_surface_temperature = Quantity("temperature", allow_none=True, metadata={
        "description": "Area-weighted mean surface temperature."})


class GridEdgeFlowSchema(Schema):
    heat_flow = Quantity("heat_flow", allow_none=True, metadata={
        "description": f"Through the whole edge (uncovered parts are insulated). {_INTO} "
                       f"{_WHOLE}"})
    heat_flow_per_length = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": f"Through the whole edge. {_INTO} {_PER_LENGTH}"})
    segments = fields.List(fields.Nested(GridSegmentFlowSchema))


class GridEdgeFlowsSchema(Schema):
    bottom = fields.Nested(GridEdgeFlowSchema)
    right = fields.Nested(GridEdgeFlowSchema)
    top = fields.Nested(GridEdgeFlowSchema)
    left = fields.Nested(GridEdgeFlowSchema)


class GridSteadyBalanceSchema(Schema):
    """boundary_inflow + generation = imbalance (zero for an exact solution)."""

    boundary_inflow = Quantity("heat_flow", allow_none=True, metadata={"description": _WHOLE})
    boundary_inflow_per_length = Quantity("heat_flow_per_length", allow_none=True,
                                          metadata={"description": _PER_LENGTH})
    generation = Quantity("heat_flow", allow_none=True, metadata={"description": _WHOLE})
    generation_per_length = Quantity("heat_flow_per_length", allow_none=True,
                                     metadata={"description": _PER_LENGTH})
    imbalance = Quantity("heat_flow", allow_none=True, metadata={"description": _WHOLE})
    imbalance_per_length = Quantity("heat_flow_per_length", allow_none=True,
                                    metadata={"description": _PER_LENGTH})


class GridTransientBalanceSchema(Schema):
    """From t = 0 to the last time: boundary_inflow + generation - stored = imbalance."""

    boundary_inflow = Quantity("energy", allow_none=True, metadata={"description": _WHOLE})
    boundary_inflow_per_length = Quantity("energy_per_length", allow_none=True,
                                          metadata={"description": _PER_LENGTH})
    generation = Quantity("energy", allow_none=True, metadata={"description": _WHOLE})
    generation_per_length = Quantity("energy_per_length", allow_none=True,
                                     metadata={"description": _PER_LENGTH})
    stored = Quantity("energy", allow_none=True, metadata={
        "description": "Change of stored energy. " + _WHOLE})
    stored_per_length = Quantity("energy_per_length", allow_none=True,
                                 metadata={"description": "Change of stored energy. "
                                                          + _PER_LENGTH})
    imbalance = Quantity("energy", allow_none=True, metadata={"description": _WHOLE})
    imbalance_per_length = Quantity("energy_per_length", allow_none=True,
                                    metadata={"description": _PER_LENGTH})


class GridEnergyBalanceSchema(Schema):
    steady = fields.Nested(GridSteadyBalanceSchema, allow_none=True, metadata={
        "description": "Steady runs: heat flows; null for transients."})
    transient = fields.Nested(GridTransientBalanceSchema, allow_none=True, metadata={
        "description": "Transient runs: energies from t = 0 to the last time; null for steady "
                       "runs."})
    relative_error = Number(allow_none=True, metadata={
        "description": "|imbalance| relative to the gross heat throughput."})


class GridExtremesSchema(Schema):
    hottest = fields.Nested(LocationSchema)
    coldest = fields.Nested(LocationSchema)


class GridEdgeSeriesSchema(Schema):
    """One value per output time."""

    bottom = _array("heat_flow", "Per output time.")
    right = _array("heat_flow", "Per output time.")
    top = _array("heat_flow", "Per output time.")
    left = _array("heat_flow", "Per output time.")


class GridEdgeSeriesPerLengthSchema(Schema):
    """One value per output time."""

    bottom = _array("heat_flow_per_length", "Per output time.")
    right = _array("heat_flow_per_length", "Per output time.")
    top = _array("heat_flow_per_length", "Per output time.")
    left = _array("heat_flow_per_length", "Per output time.")


class GridHistorySchema(Schema):
    times = _array("time", "Output times.")
    point_temperatures = _array("temperature", "point_temperatures[i][p] at times[i] and "
                                               "points[p].", depth=2)
    edge_heat_flow = fields.Nested(GridEdgeSeriesSchema, allow_none=True, metadata={
        "description": f"{_INTO} {_WHOLE}"})
    edge_heat_flow_per_length = fields.Nested(GridEdgeSeriesPerLengthSchema, allow_none=True,
                                              metadata={"description": f"{_INTO} {_PER_LENGTH}"})
    segment_heat_flow = _array("heat_flow", f"[i][s] at times[i] for each segment s, in the "
                                            f"order of results.edges (bottom, right, top, left). "
                                            f"{_INTO} {_WHOLE}", depth=2, allow_none=True)
    segment_heat_flow_per_length = _array("heat_flow_per_length", f"[i][s] as segment_heat_"
                                                                  f"flow. {_INTO} {_PER_LENGTH}",
                                          depth=2, allow_none=True)
    stored_energy = _array("energy", "Change of stored energy since t = 0. " + _WHOLE,
                           allow_none=True)
    stored_energy_per_length = _array("energy_per_length", "Change of stored energy since "
                                                           "t = 0. " + _PER_LENGTH,
                                      allow_none=True)
    net_inflow = _array("energy", "Time integral of boundary inflow plus generation. " + _WHOLE,
                        allow_none=True)
    net_inflow_per_length = _array("energy_per_length", "Time integral of boundary inflow plus "
                                                        "generation. " + _PER_LENGTH,
                                   allow_none=True)
    balance_error = _array(None, "|stored - net inflow| relative to the gross throughput, per "
                                 "time.")
    fields_ = _array("temperature", "output_grid: fields[i][j][k] at times[i] and the cell "
                                    "centre (x[k], y[j]) of results.grid; else null.", depth=3,
                     allow_none=True, data_key="fields", attribute="fields")


class GridSolverSchema(Schema):
    nx = Integer(metadata={"description": "Cells along x (zone and segment boundaries may "
                                          "add some to the request)."})
    ny = Integer()
    cells = Integer()
    linear_solver = fields.String(metadata={"enum": ["direct", "multigrid"]})
    factorizations = Integer(metadata={
        "description": "Matrices factorised (direct) or multigrid hierarchies built."})
    linear_iterations = Integer(metadata={"description": "Multigrid cycles in total (0 for "
                                                         "direct)."})
    iterations = Integer(allow_none=True, metadata={
        "description": "Picard iterations (largest per step for transients)."})


class GridResultsSchema(Schema):
    geometry = fields.String(metadata={"enum": list(GEOMETRIES)})
    heat_flow_basis = fields.String(metadata={
        "description": "How heat flows are reported for this geometry."})
    points = fields.List(fields.Nested(GridPointSchema))
    grid = fields.Nested(GridFieldSchema, allow_none=True, metadata={
        "description": "output_grid: the cell-centre field; else null."})
    edges = fields.Nested(GridEdgeFlowsSchema, allow_none=True, metadata={
        "description": "Heat flow through each edge and each of its segments (transients: at "
                       "the last time)." + _NULL_NON_FINITE})
    energy_balance = fields.Nested(GridEnergyBalanceSchema, allow_none=True, metadata={
        "description": _NULL_NON_FINITE.strip()})
    extremes = fields.Nested(GridExtremesSchema, allow_none=True, metadata={
        "description": "Hottest and coldest over cell centres and boundary faces (transients: "
                       "over every time step)." + _NULL_NON_FINITE})
    history = fields.Nested(GridHistorySchema, allow_none=True, metadata={
        "description": "Transient runs: values at each output time; null for steady runs."})
    solver = fields.Nested(GridSolverSchema)

    @pre_dump
    def _arrange(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        per_length = result.heat_flow_unit == "W/m"
        finite = result.convergence.status != "non_finite"
        errs = result.point_error_estimates
        points = [
            {"x": x, "y": y, "temperature": _finite(t),
             "error_estimate": None if errs is None else _finite(errs[p])}
            for p, ((x, y), t) in enumerate(zip(result.points.tolist(),
                                                result.point_temperatures.tolist(), strict=True))
        ]
        grid = None
        if result.field is not None:
            grid = {"x": result.x, "y": result.y, "x_faces": result.x_faces,
                    "y_faces": result.y_faces, "temperature": result.field}
        return {
            "geometry": result.geometry,
            "heat_flow_basis": _BASIS[result.heat_flow_unit],
            "points": points,
            "grid": grid,
            "edges": _edges(result.edges, per_length) if finite else None,
            "energy_balance": _balance(result, per_length) if finite else None,
            "extremes": {"hottest": result.hottest, "coldest": result.coldest}
            if finite else None,
            "history": _history(result.transient, per_length) if finite else None,
            "solver": {"nx": int(result.x.size), "ny": int(result.y.size),
                       "cells": int(result.x.size * result.y.size),
                       "linear_solver": result.linear_solver,
                       "factorizations": result.factorizations,
                       "linear_iterations": result.linear_iterations,
                       "iterations": result.convergence.iterations},
        }


def _edges(edges: Any, per_length: bool) -> dict[str, Any]:
    out = {}
    for edge in edges:
        whole, metre = _pair(edge.heat_flow, per_length)
        segments = []
        for seg in edge.segments:
            s_whole, s_metre = _pair(seg.heat_flow, per_length)
            segments.append({"index": seg.index, "start": seg.start, "end": seg.end,
                             "type": seg.type, "heat_flow": s_whole,
                             "heat_flow_per_length": s_metre,
                             "mean_surface_temperature": _finite(seg.mean_surface_temperature)})
        out[edge.edge] = {"heat_flow": whole, "heat_flow_per_length": metre,
                          "segments": segments}
    return out


def _balance(result: Any, per_length: bool) -> dict[str, Any]:
    b = result.energy_balance
    values: dict[str, Any] = {}
    names = ["boundary_inflow", "generation", "imbalance"]
    if result.transient is not None:
        names.append("stored")
    for name in names:
        whole, metre = _pair(getattr(b, name), per_length)
        values[name], values[f"{name}_per_length"] = whole, metre
    steady = result.transient is None
    return {"steady": values if steady else None, "transient": None if steady else values,
            "relative_error": _finite(b.relative_error)}


def _history(history: Any, per_length: bool) -> dict[str, Any] | None:
    if history is None:
        return None
    flows = {name: history.edge_heat_flow[:, i] for i, name in enumerate(EDGE_NAMES)}
    seg_whole, seg_metre = _pair(history.segment_heat_flow, per_length)
    stored_whole, stored_metre = _pair(history.stored_energy, per_length)
    net_whole, net_metre = _pair(history.net_inflow, per_length)
    return {
        "times": history.times, "point_temperatures": history.point_temperatures,
        "edge_heat_flow": None if per_length else flows,
        "edge_heat_flow_per_length": flows if per_length else None,
        "segment_heat_flow": seg_whole, "segment_heat_flow_per_length": seg_metre,
        "stored_energy": stored_whole, "stored_energy_per_length": stored_metre,
        "net_inflow": net_whole, "net_inflow_per_length": net_metre,
        "balance_error": history.balance_error, "fields": history.fields,
    }


class GridResponseSchema(SolveResponseSchema):
    results = fields.Nested(GridResultsSchema)  # type: ignore[assignment]
