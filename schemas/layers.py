"""POST /v1/layers: steady conduction through plane, cylindrical and spherical layers."""

from __future__ import annotations

from typing import Any

from marshmallow import (
    Schema,
    ValidationError,
    fields,
    pre_dump,
    pre_load,
    validate,
    validates_schema,
)

from schemas.budgets import CURRENT_BUDGETS, refuse_profile_points
from schemas.common import (
    BaseSchema,
    SolveRequestSchema,
    SolveResponseSchema,
    unused_size_errors,
)
from schemas.fields import Integer, Number, Quantity
from schemas.polymorphic import Polymorphic
from service.solvers.air import CYLINDER_ORIENTATIONS, PLANE_ORIENTATIONS, TABLE_RANGE
from service.solvers.errors import TooLargeError
from service.solvers.layers import (
    GEOMETRIES,
    TARGET_QUANTITIES,
    DesignTarget,
    Layer,
    LayersProblem,
    SolveFor,
    SurfaceCondition,
)

#: Geometry fields each geometry takes (the others are refused so that a misplaced size fails).
GEOMETRY_FIELDS = {"plane": ("area",), "cylinder": ("inner_radius", "length"),
                   "sphere": ("inner_radius",)}
#: Orientations an ``air`` surface accepts, by geometry (spheres take none).
ORIENTATIONS = {"plane": PLANE_ORIENTATIONS, "cylinder": CYLINDER_ORIENTATIONS, "sphere": ()}
MAX_NAME_LENGTH = 200
MAX_ITERATIONS = 1000

_POSITIVE = {"minimum": 0.0, "exclusive_minimum": True}
# Ranges (default units) that bound every input to engineering scale, so that no combination of
# in-range values can overflow or underflow the solvers' arithmetic.
LENGTH = {"minimum": 1e-9, "maximum": 1e4}              # m
RADIUS = {"minimum": 0.0, "maximum": 1e4}               # m (0: solid core)
AREA = {"minimum": 1e-12, "maximum": 1e8}               # m^2
CONDUCTIVITY = {"minimum": 1e-5, "maximum": 1e5}        # W/(m K)
CONDUCTIVITY_SLOPE = {"minimum": -1e3, "maximum": 1e3}  # W/(m K^2)
TEMPERATURE = {"maximum": 1e4}                          # degC (absolute zero is always refused)
FILM_COEFFICIENT = {"minimum": 1e-6, "maximum": 1e7}    # W/(m^2 K)
HEAT_FLUX = {"minimum": -1e9, "maximum": 1e9}           # W/m^2
GENERATION = {"minimum": -1e13, "maximum": 1e13}        # W/m^3
CONTACT_RESISTANCE = {"minimum": 0.0, "maximum": 10.0}  # m^2 K/W
WIND_SPEED = {"minimum": 0.0, "maximum": 100.0}         # m/s
#: Lowest air temperature of an 'air' surface, degC: the start of the air-property table (and
#: the correlations' buoyancy term 1/T_film needs T_film > 0 K).
AIR_MIN_TEMPERATURE = round(TABLE_RANGE[0], 9)


# --------------------------------------------------------------------------- request


class LayerSchema(BaseSchema):
    name = fields.String(load_default="", validate=validate.Length(max=MAX_NAME_LENGTH),
                         metadata={"description": "Used in messages, resistances and safety "
                                                  "locations (default 'layer <index>')."})
    thickness = Quantity("length", required=True, **LENGTH, metadata={
        "description": "With solve_for on this layer: the first guess."})
    conductivity = Quantity("conductivity", required=True, **CONDUCTIVITY, metadata={
        "description": "At conductivity_temperature."})
    conductivity_slope = Quantity("conductivity_temperature_slope", load_default=0.0,
                                  **CONDUCTIVITY_SLOPE, metadata={
        "description": "dk/dT: k(T) = conductivity + conductivity_slope (T - "
                       "conductivity_temperature)."})
    conductivity_temperature = Quantity("temperature", load_default=0.0, **TEMPERATURE, metadata={
        "description": "Temperature at which conductivity is given (default 0 degC)."})
    generation = Quantity("generation", load_default=0.0, **GENERATION, metadata={
        "description": "Uniform volumetric heat generation in the layer."})
    max_temperature = Quantity("temperature", load_default=None, **TEMPERATURE, metadata={
        "description": "Service limit of the material, checked against the layer's hottest "
                       "point."})


def _surface_type(name: str) -> fields.String:
    return fields.String(required=True, validate=validate.Equal(name), metadata={"enum": [name]})


class LayersTemperatureSurfaceSchema(BaseSchema):
    type = _surface_type("temperature")
    value = Quantity("temperature", required=True, **TEMPERATURE, metadata={
        "description": "Fixed surface temperature."})


class LayersFluxSurfaceSchema(BaseSchema):
    type = _surface_type("flux")
    value = Quantity("heat_flux", required=True, **HEAT_FLUX, metadata={
        "description": "Heat flux into the body through this surface."})


def _film_coefficient() -> Quantity:
    return Quantity("film_coefficient", required=True, **FILM_COEFFICIENT)


def _emissivity(required: bool = True) -> Number:
    return Number(required=required, minimum=0.0, exclusive_minimum=True, maximum=1.0, metadata={
        "description": "Grey-body emissivity of the surface, above 0 and at most 1."})


def _ambient() -> Quantity:
    return Quantity("temperature", required=True, **TEMPERATURE,
                    metadata={"description": "Fluid temperature."})


def _surroundings() -> Quantity:
    return Quantity("temperature", load_default=None, **TEMPERATURE, metadata={
        "description": "Temperature of the radiating surroundings (default: ambient)."})


class LayersConvectionSurfaceSchema(BaseSchema):
    type = _surface_type("convection")
    film_coefficient = _film_coefficient()
    ambient = _ambient()


class LayersConvectionRadiationSurfaceSchema(BaseSchema):
    type = _surface_type("convection_radiation")
    film_coefficient = _film_coefficient()
    ambient = _ambient()
    emissivity = _emissivity()
    surroundings = _surroundings()


class LayersAirSurfaceSchema(BaseSchema):
    """A surface in still or moving air: the convective coefficient comes from published
    natural- and forced-convection correlations, plus grey-body radiation."""

    type = _surface_type("air")
    ambient = Quantity("temperature", required=True, minimum=AIR_MIN_TEMPERATURE,
                       **TEMPERATURE, metadata={
                           "description": "Air temperature; the correlations' property table "
                                          "starts at -173.15 degC (100 K)."})
    emissivity = _emissivity()
    surroundings = _surroundings()
    wind_speed = Quantity("speed", load_default=0.0, **WIND_SPEED, metadata={
        "description": "0 for still air; wind runs along a plane and across a cylinder."})
    orientation = fields.String(load_default=None, validate=validate.OneOf(
        sorted({*PLANE_ORIENTATIONS, *CYLINDER_ORIENTATIONS})), metadata={
        "description": "Plane: vertical (default), facing_up, facing_down (the way the exposed "
                       "face looks); cylinder: horizontal (default), vertical; not for spheres."})
    characteristic_length = Quantity("length", load_default=None, **LENGTH, metadata={
        "description": "Height of vertical surfaces, area/perimeter of horizontal plane faces, "
                       "length along the wind on plane faces (default 1 m). Not used by "
                       "spheres and horizontal cylinders (the diameter is)."})


SURFACE_SCHEMAS = {
    "temperature": LayersTemperatureSurfaceSchema,
    "flux": LayersFluxSurfaceSchema,
    "convection": LayersConvectionSurfaceSchema,
    "convection_radiation": LayersConvectionRadiationSurfaceSchema,
    "air": LayersAirSurfaceSchema,
}


class DesignTargetSchema(BaseSchema):
    """Exactly one key. Heat-flow targets are magnitudes: a loss for hot lines, a gain for cold
    ones."""

    surface_temperature = Quantity("temperature", **TEMPERATURE, metadata={
        "description": "Outside surface temperature (personnel protection, condensation)."})
    heat_flow_per_length = Quantity("heat_flow_per_length", **_POSITIVE, maximum=1e12, metadata={
        "description": "Heat flow through the outside surface per metre (cylinders)."})
    heat_flux = Quantity("heat_flux", **_POSITIVE, maximum=HEAT_FLUX["maximum"], metadata={
        "description": "Heat flux through the outside surface."})
    heat_flow = Quantity("heat_flow", **_POSITIVE, maximum=1e15, metadata={
        "description": "Heat flow through the outside surface of the whole body (plane: the "
                       "given area; cylinder: the given length)."})

    @validates_schema
    def _exactly_one(self, data: dict[str, Any], **kwargs: Any) -> None:
        given = [name for name in TARGET_QUANTITIES if data.get(name) is not None]
        if len(given) != 1:
            raise ValidationError(f"Give exactly one of: {', '.join(TARGET_QUANTITIES)}.")


class SolveForSchema(BaseSchema):
    layer = Integer(required=True, minimum=0, metadata={
        "description": "Index of the layer whose thickness is found (inside = 0)."})
    target = fields.Nested(DesignTargetSchema, required=True)


class LayersRequestSchema(SolveRequestSchema):
    """Positions are depths from the inside face for plane walls and radii for cylinders and
    spheres; layers are listed from the inside out."""

    geometry = fields.String(required=True, validate=validate.OneOf(GEOMETRIES))
    inner_radius = Quantity("length", **RADIUS, metadata={
        "description": "Cylinder and sphere: radius of the inside surface (0 for a solid core, "
                       "whose inside condition must be a zero flux)."})
    length = Quantity("length", **LENGTH, metadata={
        "description": "Cylinder length (default 1 m): heat_flow is for this length; "
                       "per-metre values do not depend on it."})
    area = Quantity("area", **AREA, metadata={
        "description": "Plane wall area (default 1 m^2)."})
    layers = fields.List(fields.Nested(LayerSchema), required=True,
                         validate=validate.Length(min=1))
    contact_resistances = fields.List(Quantity("contact_resistance", **CONTACT_RESISTANCE),
                                      load_default=list, metadata={
                                          "description": "One per interface (layers - 1), or "
                                                         "none."})
    inside = Polymorphic(SURFACE_SCHEMAS, required=True)
    outside = Polymorphic(SURFACE_SCHEMAS, required=True)
    solve_for = fields.Nested(SolveForSchema, load_default=None, metadata={
        "description": "Find the thickness of one layer that meets an outside target."})
    profile_points = Integer(load_default=51, minimum=2, metadata={
        "description": "About this many temperature-profile points in total (at least two per "
                       "layer)."})
    tolerance = Quantity("temperature_difference", load_default=None, **_POSITIVE,
                         maximum=1e3, metadata={
        "description": "Absolute temperature accuracy of the iterative solves; default 1e-6 of "
                       "the largest temperature difference in the problem (at least 1e-6 K)."})
    max_iterations = Integer(load_default=100, minimum=1, maximum=MAX_ITERATIONS, metadata={
        "description": "Per root finder (state and thickness)."})

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        """Count profile points and layers before parsing (413 before any allocation)."""
        refuse_profile_points(data)
        if not isinstance(data, dict):
            return data
        limit = CURRENT_BUDGETS.get().max_profile_points
        layers = data.get("layers")
        if isinstance(layers, list) and 2 * len(layers) > limit:
            raise TooLargeError(f"layers: {len(layers)} layers need at least {2 * len(layers)} "
                                f"profile points, the limit is {limit}", field="layers")
        return data

    @validates_schema
    def _cross_field_rules(self, data: dict[str, Any], **kwargs: Any) -> None:
        geometry = data.get("geometry")
        if geometry not in GEOMETRY_FIELDS:
            return
        errors: dict[str, Any] = {}
        needed = GEOMETRY_FIELDS[geometry]
        if geometry != "plane" and data.get("inner_radius") is None:
            errors["inner_radius"] = [f"Required for geometry {geometry!r}."]
        errors.update(unused_size_errors(data, ("inner_radius", "length", "area"), needed,
                                         f"geometry {geometry!r}"))
        layers = data.get("layers") or []
        contacts = data.get("contact_resistances") or []
        if contacts and len(contacts) != len(layers) - 1:
            errors["contact_resistances"] = [
                f"Give one value per interface ({len(layers) - 1} for {len(layers)} layers) or "
                f"none; got {len(contacts)}."]
        for side in ("inside", "outside"):
            surface = data.get(side)
            if surface:
                problems = _surface_rules(surface, side, geometry)
                if problems:
                    errors[side] = problems
        inside = data.get("inside") or {}
        solid_core = geometry != "plane" and data.get("inner_radius") == 0.0
        if solid_core and not (inside.get("type") == "flux" and inside.get("value") == 0.0):
            errors.setdefault("inside", {}).setdefault("type", []).append(
                "An inner_radius of 0 makes layer 0 a solid core: the inside condition must "
                "then be {type: flux, value: 0}.")
        solve_for = data.get("solve_for")
        if solve_for:
            problems = _solve_for_rules(solve_for, len(layers), geometry, solid_core,
                                        (data.get("outside") or {}).get("type"))
            if problems:
                errors["solve_for"] = problems
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> LayersProblem:
        solve_for = data.get("solve_for")
        geometry = data["geometry"]
        return LayersProblem(
            geometry=geometry,
            layers=tuple(Layer(**layer) for layer in data["layers"]),
            inside=_surface(data["inside"]), outside=_surface(data["outside"]),
            inner_radius=data.get("inner_radius"),
            length=data.get("length") or 1.0, area=data.get("area") or 1.0,
            contact_resistances=tuple(data["contact_resistances"]),
            solve_for=SolveFor(layer=solve_for["layer"],
                               target=DesignTarget(**solve_for["target"]))
            if solve_for else None,
            profile_points=data["profile_points"], limits=data["limits"],
            atol=data["tolerance"], max_iterations=data["max_iterations"],
        )


def _surface_rules(surface: dict[str, Any], side: str, geometry: str) -> dict[str, list[str]]:
    """Rules of one surface condition that depend on the geometry or the side."""
    errors: dict[str, list[str]] = {}
    if surface["type"] != "air":
        return errors
    if side == "inside" and geometry != "plane":
        errors["type"] = ["An 'air' inside surface applies to plane walls only: the bore of a "
                          "pipe or vessel needs a convection condition."]
    orientation = surface.get("orientation")
    allowed = ORIENTATIONS[geometry]
    if orientation is not None and orientation not in allowed:
        errors["orientation"] = (
            [f"Must be one of: {', '.join(allowed)} for a {geometry}."] if allowed
            else ["Not used by a sphere."])
    length_unused = geometry == "sphere" or (geometry == "cylinder"
                                             and (orientation or "horizontal") == "horizontal")
    if surface.get("characteristic_length") is not None and length_unused:
        errors["characteristic_length"] = [
            f"Not used by a {'sphere' if geometry == 'sphere' else 'horizontal cylinder'}: its "
            "diameter is the characteristic length."]
    return errors


def _solve_for_rules(solve_for: dict[str, Any], count: int, geometry: str, solid_core: bool,
                     outside_type: str | None) -> dict[str, Any]:
    errors: dict[str, Any] = {}
    layer = solve_for["layer"]
    if layer >= count:
        errors["layer"] = [f"Must be a layer index, 0 to {count - 1}."]
    elif layer == 0 and solid_core:
        errors["layer"] = ["The solid core (layer 0 with inner_radius 0) cannot be solved for."]
    target = solve_for["target"]
    quantity = next(name for name in TARGET_QUANTITIES if target.get(name) is not None)
    message = None
    if quantity == "heat_flow_per_length" and geometry != "cylinder":
        message = "Applies to cylinders; use heat_flux or heat_flow."
    elif quantity == "surface_temperature" and outside_type == "temperature":
        message = ("The outside surface temperature is fixed by the outside condition, so it "
                   "cannot be a target.")
    elif quantity != "surface_temperature" and outside_type == "flux":
        message = ("The outside heat flux is fixed by the outside condition, so the heat loss "
                   "cannot be a target.")
    if message:
        errors["target"] = {quantity: [message]}
    return errors


def _surface(data: dict[str, Any]) -> SurfaceCondition:
    values = dict(data)
    if values.get("characteristic_length") is None:
        values.pop("characteristic_length", None)
    return SurfaceCondition(**values)


# --------------------------------------------------------------------------- response

_PER_LENGTH = "Cylinders only (per metre of length); null for plane walls and spheres."
_PER_BODY = "Plane walls (for the given area) and spheres; null for cylinders, which report the " \
            "per-metre value."
_OUTWARD = "Positive outward (from the inside face towards the outside face)."

#: How heat flows are reported, by the solver's basis.
BASIS_TEXT = {
    "W": "heat_flow is for the whole body (plane wall: the given area; sphere: the whole "
         "sphere); per-layer values and resistances are for the whole body too",
    "W/m": "cylinder: heat flows and resistances are per metre of length (the *_per_length "
           "fields); heat_flow alone is the total for the given length",
}
CYLINDER_NOTE = ("Cylinder: heat flows and resistances are reported per metre of length "
                 "(heat_flow_per_length, resistance_per_length); heat_flow is the total for the "
                 "given length.")


def _array(kind: str, description: str) -> Quantity:
    return Quantity(kind, metadata={"type": "array", "items": {"type": "number"},
                                    "description": description})


def _basis_pair(value: float | None, basis: str) -> tuple[float | None, float | None]:
    """(whole-body value, per-metre value): the solver's per-basis value goes to one of them."""
    return (None, value) if basis == "W/m" else (value, None)


class SideValuesSchema(Schema):
    inside = Quantity("temperature")
    outside = Quantity("temperature")


class SideFluxSchema(Schema):
    inside = Quantity("heat_flux", metadata={"description": _OUTWARD})
    outside = Quantity("heat_flux", metadata={"description": _OUTWARD})


class SurfaceDetailSchema(Schema):
    position = Quantity("length", metadata={"description": "Depth (plane) or radius."})
    temperature = Quantity("temperature")
    heat_flux = Quantity("heat_flux", metadata={"description": _OUTWARD})
    convective_coefficient = Quantity("film_coefficient", allow_none=True, metadata={
        "description": "Convective surfaces: on (surface - ambient)."})
    radiative_coefficient = Quantity("film_coefficient", allow_none=True, metadata={
        "description": "Radiating surfaces: linearised, on (surface - surroundings)."})
    correlation = fields.String(allow_none=True, metadata={
        "description": "'air' surfaces: the correlations used."})
    nusselt = Number(allow_none=True)
    rayleigh = Number(allow_none=True)
    reynolds = Number(allow_none=True)


class SurfacesSchema(Schema):
    inside = fields.Nested(SurfaceDetailSchema)
    outside = fields.Nested(SurfaceDetailSchema)


class LayerResultSchema(Schema):
    index = Integer()
    name = fields.String()
    inner_position = Quantity("length")
    outer_position = Quantity("length")
    thickness = Quantity("length")
    inner_temperature = Quantity("temperature")
    outer_temperature = Quantity("temperature")
    hottest_temperature = Quantity("temperature")
    hottest_position = Quantity("length")
    coldest_temperature = Quantity("temperature")
    coldest_position = Quantity("length")
    mean_conductivity = Quantity("conductivity", metadata={
        "description": "Kirchhoff mean: k at the mean of the face temperatures."})
    heat_flow_inner = Quantity("heat_flow", allow_none=True, metadata={
        "description": f"Through the inner face. {_OUTWARD} {_PER_BODY}"})
    heat_flow_outer = Quantity("heat_flow", allow_none=True, metadata={
        "description": f"Through the outer face. {_OUTWARD} {_PER_BODY}"})
    heat_flow_inner_per_length = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": f"Through the inner face. {_OUTWARD} {_PER_LENGTH}"})
    heat_flow_outer_per_length = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": f"Through the outer face. {_OUTWARD} {_PER_LENGTH}"})
    resistance = Quantity("thermal_resistance", allow_none=True, metadata={
        "description": f"Conduction resistance at the mean conductivity. {_PER_BODY} Null for "
                       "a solid core."})
    resistance_per_length = Quantity("resistance_per_length", allow_none=True, metadata={
        "description": f"Conduction resistance at the mean conductivity. {_PER_LENGTH}"})
    share = Number(allow_none=True, metadata={
        "description": "Fraction of the total resistance."})


class InterfaceTemperaturesSchema(Schema):
    index = Integer(metadata={"description": "Between layer index and index + 1."})
    position = Quantity("length")
    inner_side = Quantity("temperature", metadata={"description": "On layer index's face."})
    outer_side = Quantity("temperature", metadata={
        "description": "On layer index + 1's face; lower by the drop across the contact "
                       "resistance for outward heat flow."})
    contact_resistance = Quantity("contact_resistance")
    heat_flux = Quantity("heat_flux", metadata={"description": _OUTWARD})


class ResistanceElementSchema(Schema):
    name = fields.String()
    kind = fields.String(metadata={"enum": ["film", "layer", "contact"]})
    resistance = Quantity("thermal_resistance", allow_none=True, metadata={
        "description": f"{_PER_BODY} Films are linearised at the solution (convection plus "
                       "radiation); null for a solid core or a zero coefficient."})
    resistance_per_length = Quantity("resistance_per_length", allow_none=True, metadata={
        "description": _PER_LENGTH})
    share = Number(allow_none=True, metadata={"description": "Fraction of the total."})


class LayersProfileSchema(Schema):
    positions = _array("length", "Depth (plane) or radius; interfaces appear twice (both sides "
                                 "of a contact resistance).")
    temperatures = _array("temperature", "Temperature at each position.")
    layer = fields.List(Integer(), metadata={"description": "Layer index of each point."})


def _target_field(kind: str, description: str) -> Quantity:
    return Quantity(kind, allow_none=True, metadata={"description": description})


class TargetValuesSchema(Schema):
    """The one quantity of the design target; the other keys are null."""

    surface_temperature = _target_field("temperature", "Outside surface temperature.")
    heat_flow_per_length = _target_field("heat_flow_per_length",
                                         "Heat flow per metre (cylinders), a magnitude.")
    heat_flux = _target_field("heat_flux", "Outside heat flux, a magnitude.")
    heat_flow = _target_field("heat_flow", "Heat flow of the whole body, a magnitude.")


class SolvedThicknessSchema(Schema):
    layer = Integer()
    name = fields.String()
    thickness = Quantity("length", metadata={"description": "The thickness found; every other "
                                                           "result is for it."})
    outer_position = Quantity("length", metadata={
        "description": "Depth or radius of the layer's outer face."})
    quantity = fields.String(metadata={"enum": list(TARGET_QUANTITIES)})
    target = fields.Nested(TargetValuesSchema)
    achieved = fields.Nested(TargetValuesSchema)
    iterations = Integer(metadata={"description": "Thickness root-finder iterations."})
    alternative_thickness = Quantity("length", allow_none=True, metadata={
        "description": "A thinner layer giving the same heat flow (below the critical radius)."})
    note = fields.String(allow_none=True)


class CriticalRadiusSchema(Schema):
    layer = Integer(metadata={"description": "The outermost layer."})
    radius = Quantity("length", metadata={"description": "k/h (cylinder) or 2k/h (sphere)."})
    outer_radius = Quantity("length")
    conductivity = Quantity("conductivity", metadata={"description": "Layer mean conductivity."})
    film_coefficient = Quantity("film_coefficient", metadata={
        "description": "Outside convective plus radiative coefficient at the solution."})
    insulation_increases_heat_flow = fields.Boolean(metadata={
        "description": "True when the outer radius is below the critical radius."})
    note = fields.String()


class LayersResultsSchema(Schema):
    """Every heat flow and flux here is positive outward (from the inside face towards the
    outside face), whatever the surface."""

    geometry = fields.String(metadata={"enum": list(GEOMETRIES)})
    heat_flow_basis = fields.String(metadata={
        "description": "How heat flows and resistances are reported for this geometry."})
    heat_flow = Quantity("heat_flow", metadata={
        "description": "Heat flow leaving through the outside surface, for the whole body: "
                       "plane wall of the given area, cylinder of the given length, whole "
                       "sphere. " + _OUTWARD})
    heat_flow_per_length = Quantity("heat_flow_per_length", allow_none=True, metadata={
        "description": "Heat flow leaving through the outside surface per metre of length. "
                       + _PER_LENGTH})
    heat_flux = fields.Nested(SideFluxSchema, metadata={
        "description": "Heat flux through each surface. " + _OUTWARD})
    surface_temperatures = fields.Nested(SideValuesSchema)
    interface_temperatures = fields.List(fields.Nested(InterfaceTemperaturesSchema), metadata={
        "description": "Both sides of each interface (they differ across a contact "
                       "resistance)."})
    surfaces = fields.Nested(SurfacesSchema, metadata={
        "description": "Surface details: coefficients and, for 'air' surfaces, the "
                       "correlations and dimensionless groups."})
    layers = fields.List(fields.Nested(LayerResultSchema))
    resistances = fields.List(fields.Nested(ResistanceElementSchema), metadata={
        "description": "The series network from inside to outside, with each element's share."})
    total_resistance = Quantity("thermal_resistance", allow_none=True, metadata={
        "description": _PER_BODY + " Also null when an element has no resistance (solid core)."})
    total_resistance_per_length = Quantity("resistance_per_length", allow_none=True, metadata={
        "description": _PER_LENGTH})
    overall_coefficient = Quantity("overall_coefficient", allow_none=True, metadata={
        "description": "U on the outside area: heat flow / (outside area x (inside reference - "
                       "outside reference temperature)), the references being the fluid or "
                       "fixed surface temperatures; null with generation, a flux surface or a "
                       "solid core."})
    profile = fields.Nested(LayersProfileSchema)
    solved = fields.Nested(SolvedThicknessSchema, allow_none=True, metadata={
        "description": "The outcome of solve_for; null without it."})
    critical_radius = fields.Nested(CriticalRadiusSchema, allow_none=True, metadata={
        "description": "Cylinders and spheres with a convective outside surface; else null."})
    notes = fields.List(fields.String())

    @pre_dump
    def _arrange(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        basis = result.basis
        inside, outside = result.surfaces
        layers = []
        for lay in result.layers:
            flow_in, flow_in_m = _basis_pair(lay.heat_flow_inner, basis)
            flow_out, flow_out_m = _basis_pair(lay.heat_flow_outer, basis)
            res, res_m = _basis_pair(lay.resistance, basis)
            layers.append({
                "index": lay.index, "name": lay.name, "inner_position": lay.inner_position,
                "outer_position": lay.outer_position, "thickness": lay.thickness,
                "inner_temperature": lay.inner_temperature,
                "outer_temperature": lay.outer_temperature,
                "hottest_temperature": lay.hottest_temperature,
                "hottest_position": lay.hottest_position,
                "coldest_temperature": lay.coldest_temperature,
                "coldest_position": lay.coldest_position,
                "mean_conductivity": lay.mean_conductivity,
                "heat_flow_inner": flow_in, "heat_flow_outer": flow_out,
                "heat_flow_inner_per_length": flow_in_m,
                "heat_flow_outer_per_length": flow_out_m,
                "resistance": res, "resistance_per_length": res_m, "share": lay.share})
        resistances = []
        for element in result.resistances:
            res, res_m = _basis_pair(element.resistance, basis)
            resistances.append({"name": element.name, "kind": element.kind, "resistance": res,
                                "resistance_per_length": res_m, "share": element.share})
        total, total_m = _basis_pair(result.total_resistance, basis)
        solved = None
        if result.solved is not None:
            s = result.solved
            solved = {"layer": s.layer, "name": s.name, "thickness": s.thickness,
                      "outer_position": s.outer_position, "quantity": s.quantity,
                      "target": {**dict.fromkeys(TARGET_QUANTITIES), s.quantity: s.target},
                      "achieved": {**dict.fromkeys(TARGET_QUANTITIES), s.quantity: s.achieved},
                      "iterations": s.iterations,
                      "alternative_thickness": s.alternative_thickness, "note": s.note}
        notes = list(result.notes)
        if basis == "W/m":
            notes.insert(0, CYLINDER_NOTE)
        return {
            "geometry": result.geometry,
            "heat_flow_basis": BASIS_TEXT[basis],
            "heat_flow": result.heat_flow_total,
            "heat_flow_per_length": result.heat_flow if basis == "W/m" else None,
            # The inside surface's flux into the body is outward by construction.
            "heat_flux": {"inside": inside.heat_flux, "outside": result.outside_heat_flux},
            "surface_temperatures": {"inside": inside.temperature,
                                     "outside": outside.temperature},
            "interface_temperatures": [
                {"index": i.index, "position": i.position, "inner_side": i.temperature_inner_side,
                 "outer_side": i.temperature_outer_side,
                 "contact_resistance": i.contact_resistance, "heat_flux": i.heat_flux}
                for i in result.interfaces],
            "surfaces": {"inside": _surface_detail(inside, inside.heat_flux),
                         "outside": _surface_detail(outside, result.outside_heat_flux)},
            "layers": layers,
            "resistances": resistances,
            "total_resistance": total,
            "total_resistance_per_length": total_m,
            "overall_coefficient": result.overall_coefficient,
            "profile": {"positions": result.profile.positions,
                        "temperatures": result.profile.temperatures,
                        "layer": result.profile.layer.tolist()},
            "solved": solved,
            "critical_radius": result.critical_radius,
            "notes": notes,
        }


def _surface_detail(surface: Any, outward_flux: float) -> dict[str, Any]:
    return {"position": surface.position, "temperature": surface.temperature,
            "heat_flux": outward_flux,
            "convective_coefficient": surface.convective_coefficient,
            "radiative_coefficient": surface.radiative_coefficient,
            "correlation": surface.correlation, "nusselt": surface.nusselt,
            "rayleigh": surface.rayleigh, "reynolds": surface.reynolds}


class LayersResponseSchema(SolveResponseSchema):
    results = fields.Nested(LayersResultsSchema)  # type: ignore[assignment]
