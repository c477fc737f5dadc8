"""POST /v1/fin: straight, pin and annular fins and fin arrays."""

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

from schemas.budgets import refuse_profile_points
from schemas.common import (
    BaseSchema,
    SolveRequestSchema,
    SolveResponseSchema,
    unused_size_errors,
)
from schemas.fields import Integer, Number, Quantity
from schemas.layers import AREA, TEMPERATURE
from service.solvers.fin import SHAPES, FinProblem

#: Tip conditions named by a string; a fixed tip temperature is {"temperature": T}.
NAMED_TIPS = ("convective", "insulated", "infinite")
#: Size fields each shape takes; the optional ones may be left out for an infinite tip.
SHAPE_FIELDS = {
    "straight": ("length", "thickness", "width"),
    "pin": ("length", "diameter"),
    "annular": ("inner_radius", "outer_radius", "thickness"),
}
REQUIRED_FIELDS = {
    "straight": ("thickness",),
    "pin": ("diameter",),
    "annular": ("inner_radius", "thickness"),
}
#: The size an infinite tip makes optional (it then only sets the profile's extent).
EXTENT_FIELD = {"straight": "length", "pin": "length", "annular": "outer_radius"}
SIZE_FIELDS = ("length", "thickness", "width", "diameter", "inner_radius", "outer_radius")

MAX_COUNT = 10_000_000
# Ranges (default units) for fins. They keep the annular fin's Bessel arguments m r below about
# 5e8, inside the range where scipy's scaled Bessel functions are finite (NaN beyond about 1e9).
LENGTH = {"minimum": 1e-6, "maximum": 10.0}             # m
CONDUCTIVITY = {"minimum": 1e-3, "maximum": 1e5}        # W/(m K)
FILM_COEFFICIENT = {"minimum": 1e-6, "maximum": 1e6}    # W/(m^2 K)


class TipTemperatureSchema(BaseSchema):
    temperature = Quantity("temperature", required=True, **TEMPERATURE, metadata={
        "description": "Fixed tip temperature."})


class Tip(fields.Field):
    """"convective", "insulated", "infinite", or {"temperature": T}; loads to (tip, T or None)."""

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self._fixed = TipTemperatureSchema()

    def _deserialize(self, value: Any, attr: str | None, data: Any,
                     **kwargs: Any) -> tuple[str, float | None]:
        if isinstance(value, str):
            if value not in NAMED_TIPS:
                raise ValidationError(f"Must be one of: {', '.join(NAMED_TIPS)}, or "
                                      "{\"temperature\": T} for a fixed tip temperature.")
            return value, None
        if isinstance(value, dict):
            return "temperature", self._fixed.load(value)["temperature"]
        raise ValidationError("Must be a string (convective, insulated, infinite) or "
                              "{\"temperature\": T}.")

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        """The request form of a loaded tip (used for the documented default)."""
        tip, temperature = value
        return {"temperature": temperature} if tip == "temperature" else tip


class FinRequestSchema(SolveRequestSchema):
    """Positions are distances from the base (straight and pin fins) or radii (annular fins)."""

    shape = fields.String(required=True, validate=validate.OneOf(SHAPES))
    length = Quantity("length", **LENGTH, metadata={
        "description": "Straight and pin fins: base to tip (optional for an infinite tip, "
                       "where it only sets the profile's extent)."})
    thickness = Quantity("length", **LENGTH, metadata={
        "description": "Straight and annular fins."})
    width = Quantity("length", **LENGTH, metadata={
        "description": "Straight fins, along the base (default 1 m; the side edges count in "
                       "the perimeter)."})
    diameter = Quantity("length", **LENGTH, metadata={"description": "Pin fins."})
    inner_radius = Quantity("length", **LENGTH, metadata={
        "description": "Annular fins: radius of the base (the tube's outside)."})
    outer_radius = Quantity("length", **LENGTH, metadata={
        "description": "Annular fins: tip radius (optional for an infinite tip)."})
    conductivity = Quantity("conductivity", required=True, **CONDUCTIVITY)
    film_coefficient = Quantity("film_coefficient", required=True, **FILM_COEFFICIENT, metadata={
        "description": "Uniform over the fin sides (and the exposed base of an array)."})
    base_temperature = Quantity("temperature", required=True, **TEMPERATURE)
    ambient = Quantity("temperature", required=True, **TEMPERATURE)
    tip = Tip(load_default=("convective", None), metadata={
        "description": "convective (default), insulated, infinite, or {\"temperature\": T}.",
        "oneOf": [{"type": "string", "enum": list(NAMED_TIPS)},
                  {"type": "object", "required": ["temperature"],
                   "additionalProperties": False,
                   "properties": {"temperature": {"oneOf": [
                       {"type": "number", "description": "in degC", "minimum": -273.15,
                        "maximum": TEMPERATURE["maximum"]},
                       {"type": "string", "description": "a number and a unit of temperature, "
                                                         "e.g. '1 degC'"}]}}}]})
    tip_film_coefficient = Quantity("film_coefficient", minimum=0.0,
                                    maximum=FILM_COEFFICIENT["maximum"], metadata={
        "description": "Convective tip only: coefficient on the tip face (default: "
                       "film_coefficient)."})
    count = Integer(load_default=1, minimum=1, maximum=MAX_COUNT, metadata={
        "description": "Number of identical fins in an array."})
    base_area = Quantity("area", load_default=0.0, minimum=0.0, maximum=AREA["maximum"], metadata={
        "description": "Exposed (unfinned) base area between the fins of an array."})
    profile_points = Integer(load_default=51, minimum=2, metadata={
        "description": "Evenly spaced temperature-profile points from base to tip."})

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        refuse_profile_points(data)
        return data

    @validates_schema
    def _shape_rules(self, data: dict[str, Any], **kwargs: Any) -> None:
        shape = data.get("shape")
        if shape not in SHAPE_FIELDS:
            return
        tip, _ = data.get("tip") or ("convective", None)
        errors: dict[str, Any] = {}
        required = list(REQUIRED_FIELDS[shape])
        if tip != "infinite":
            required.append(EXTENT_FIELD[shape])
        for name in required:
            if data.get(name) is None:
                errors[name] = [f"Required for shape {shape!r}"
                                + (" unless the tip is infinite." if name == EXTENT_FIELD[shape]
                                   else ".")]
        errors.update(unused_size_errors(data, SIZE_FIELDS, SHAPE_FIELDS[shape],
                                         f"shape {shape!r}"))
        inner, outer = data.get("inner_radius"), data.get("outer_radius")
        if shape == "annular" and inner is not None and outer is not None and outer <= inner:
            errors["outer_radius"] = ["Must exceed inner_radius."]
        if data.get("tip_film_coefficient") is not None and tip != "convective":
            errors["tip_film_coefficient"] = ["Used only with a convective tip."]
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> FinProblem:
        tip, tip_temperature = data["tip"]
        width = data.get("width")
        return FinProblem(
            shape=data["shape"], conductivity=data["conductivity"],
            film_coefficient=data["film_coefficient"],
            base_temperature=data["base_temperature"], ambient=data["ambient"], tip=tip,
            tip_temperature=tip_temperature,
            tip_film_coefficient=data.get("tip_film_coefficient"),
            length=data.get("length"), thickness=data.get("thickness"),
            width=1.0 if width is None else width, diameter=data.get("diameter"),
            inner_radius=data.get("inner_radius"), outer_radius=data.get("outer_radius"),
            count=data["count"], base_area=data["base_area"],
            profile_points=data["profile_points"], limits=data["limits"],
        )


# --------------------------------------------------------------------------- response


class FinProfileSchema(Schema):
    positions = Quantity("length", metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Distance from the base (straight, pin) or radius (annular); an "
                       "infinite fin's profile runs five decay lengths 5/m unless a length "
                       "was given."})
    temperatures = Quantity("temperature", metadata={"type": "array",
                                                     "items": {"type": "number"}})


class FinArraySchema(Schema):
    count = Integer()
    base_area = Quantity("area", metadata={"description": "Exposed base between the fins."})
    fin_area = Quantity("area", allow_none=True, metadata={
        "description": "count x one fin's area; null for infinite fins."})
    total_area = Quantity("area", allow_none=True, metadata={
        "description": "fin_area + base_area; null for infinite fins."})
    heat_flow = Quantity("heat_flow", metadata={
        "description": "count x fin heat flow + h base_area (T_base - T_ambient)."})
    overall_efficiency = Number(allow_none=True, metadata={
        "description": "heat_flow / (h total_area (T_base - T_ambient))."})
    effectiveness = Number(allow_none=True, metadata={
        "description": "heat_flow over that of the bare base (base_area plus the fin "
                       "footprints); null when T_base = T_ambient."})


class FinResultsSchema(Schema):
    shape = fields.String(metadata={"enum": list(SHAPES)})
    tip = fields.String(metadata={"enum": [*NAMED_TIPS, "temperature"]})
    heat_flow = Quantity("heat_flow", metadata={
        "description": "One fin, entering at the base (positive when the base is hotter than "
                       "the ambient)."})
    efficiency = Number(allow_none=True, metadata={
        "description": "heat_flow / (h A_fin (T_base - T_ambient)); null for infinite and "
                       "fixed-temperature tips."})
    effectiveness = Number(allow_none=True, metadata={
        "description": "heat_flow / (h A_base (T_base - T_ambient)) with A_base the fin's "
                       "footprint; null for a fixed tip temperature with T_base = T_ambient."})
    tip_temperature = Quantity("temperature", metadata={
        "description": "The ambient for an infinite fin."})
    fin_parameter = Quantity("reciprocal_length", metadata={
        "description": "m = sqrt(h P / (k A_c)) (annular: sqrt(2 h / (k t)))."})
    fin_length = Quantity("length", allow_none=True, metadata={
        "description": "Base to tip (annular: outer - inner radius); null for infinite fins."})
    fin_area = Quantity("area", allow_none=True, metadata={
        "description": "Heat-transfer area of one fin (sides, plus the tip face for a "
                       "convective tip); null for infinite fins."})
    base_cross_section = Quantity("area", metadata={"description": "Footprint at the base."})
    biot = Number(metadata={
        "description": "h (A_c / P) / k (annular: h (t/2) / k); the one-dimensional model "
                       "wants it well below 0.1."})
    profile = fields.Nested(FinProfileSchema)
    array = fields.Nested(FinArraySchema)
    notes = fields.List(fields.String())

    @pre_dump
    def _arrange(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        return {
            "shape": result.shape, "tip": result.tip, "heat_flow": result.heat_flow,
            "efficiency": result.efficiency, "effectiveness": result.effectiveness,
            "tip_temperature": result.tip_temperature, "fin_parameter": result.fin_parameter,
            "fin_length": result.fin_length, "fin_area": result.fin_area,
            "base_cross_section": result.base_cross_section, "biot": result.biot,
            "profile": result.profile, "array": result.array, "notes": list(result.notes),
        }


class FinResponseSchema(SolveResponseSchema):
    results = fields.Nested(FinResultsSchema)  # type: ignore[assignment]
