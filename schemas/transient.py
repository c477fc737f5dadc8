"""POST /v1/transient: heat-up, cool-down and time-to-temperature of simple bodies."""

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

from schemas.budgets import CURRENT_BUDGETS
from schemas.common import (
    BaseSchema,
    SolveRequestSchema,
    SolveResponseSchema,
    unused_size_errors,
)
from schemas.fields import Array, Number, Quantity
from schemas.polymorphic import Polymorphic
from service.solvers.errors import TooLargeError
from service.solvers.transient import SHAPES, Surface, Target, TransientProblem

#: Geometry fields each shape needs.
SHAPE_FIELDS = {
    "slab": ("half_thickness",),
    "cylinder": ("radius",),
    "sphere": ("radius",),
    "semi_infinite": (),
    "lumped": ("volume", "area"),
    "bar": ("half_widths",),
    "box": ("half_widths",),
    "short_cylinder": ("radius", "half_length"),
}
GEOMETRY_FIELDS = ("half_thickness", "radius", "half_length", "half_widths", "volume", "area")
DIMENSIONS = {"bar": 2, "box": 3, "short_cylinder": 2}


class Position(fields.Field):
    """A distance (number or "25 mm"), or [x, y] / [x, y, z] for products."""

    def __init__(self, **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self._scalar = Quantity("length", minimum=0.0)

    def _deserialize(self, value: Any, attr: str | None, data: Any,
                     **kwargs: Any) -> float | tuple[float, ...]:
        if isinstance(value, list):
            if not 2 <= len(value) <= 3:
                raise ValidationError("A point of a product shape has 2 or 3 coordinates.")
            return tuple(self._distance(v) for v in value)
        return self._distance(value)

    def _distance(self, value: Any) -> float:
        distance = self._scalar.deserialize(value)
        assert distance is not None  # Quantity fields reject null
        return float(distance)


class ConvectionSurfaceSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("convection"))
    film_coefficient = Quantity("film_coefficient", required=True, minimum=0.0,
                                exclusive_minimum=True)
    ambient = Quantity("temperature", required=True)


class TemperatureSurfaceSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("temperature"))
    value = Quantity("temperature", required=True, metadata={
        "description": "Surface temperature held from t = 0 (the infinite-Biot limit)."})


class FluxSurfaceSchema(BaseSchema):
    type = fields.String(required=True, validate=validate.Equal("flux"))
    value = Quantity("heat_flux", required=True, metadata={
        "description": "Heat flux into the body (semi_infinite only)."})


class TargetSchema(BaseSchema):
    temperature = Quantity("temperature", required=True)
    position = Position(load_default=0.0, metadata={
        "description": "Where the target applies (same frame as positions); default the centre "
                       "(the surface for semi_infinite)."})


class TransientRequestSchema(SolveRequestSchema):
    """Positions are measured from the centre (slab mid-plane, cylinder axis, sphere centre), or
    from the surface for semi_infinite; products take [x, y] or [x, y, z] (short_cylinder:
    [r, z]) from the centre."""

    shape = fields.String(required=True, validate=validate.OneOf(SHAPES))
    half_thickness = Quantity("length", minimum=0.0, exclusive_minimum=True)
    radius = Quantity("length", minimum=0.0, exclusive_minimum=True)
    half_length = Quantity("length", minimum=0.0, exclusive_minimum=True)
    half_widths = fields.List(Quantity("length", minimum=0.0, exclusive_minimum=True),
                              validate=validate.Length(min=2, max=3))
    volume = Quantity("volume", minimum=0.0, exclusive_minimum=True)
    area = Quantity("area", minimum=0.0, exclusive_minimum=True, metadata={
        "description": "Lumped body: surface area exchanging heat."})
    conductivity = Quantity("conductivity", required=True, minimum=0.0, exclusive_minimum=True)
    density = Quantity("density", minimum=0.0, exclusive_minimum=True)
    specific_heat = Quantity("specific_heat", minimum=0.0, exclusive_minimum=True)
    diffusivity = Quantity("diffusivity", minimum=0.0, exclusive_minimum=True, metadata={
        "description": "May replace density and specific heat."})
    initial_temperature = Quantity("temperature", required=True)
    surface = Polymorphic({"convection": ConvectionSurfaceSchema,
                           "temperature": TemperatureSurfaceSchema,
                           "flux": FluxSurfaceSchema}, required=True)
    times = fields.List(Quantity("time", minimum=0.0), required=True,
                        validate=validate.Length(min=1), metadata={
                            "description": "Output times, increasing."})
    positions = fields.List(Position(), load_default=list, metadata={
        "description": "Output positions; default the centre and the surface."})
    target = fields.Nested(TargetSchema, load_default=None, metadata={
        "description": "Find the time at which a position reaches a temperature."})
    tolerance = Quantity("temperature_difference", load_default=None, minimum=0.0,
                         exclusive_minimum=True, metadata={
                             "description": "Absolute temperature accuracy; default 1e-6 of "
                                            "|initial - ambient|."})

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        if not isinstance(data, dict):
            return data
        budgets = CURRENT_BUDGETS.get()
        times, positions = data.get("times"), data.get("positions")
        n_times = len(times) if isinstance(times, list) else 1
        n_positions = len(positions) if isinstance(positions, list) else 1
        if isinstance(positions, list) and len(positions) > budgets.max_points:
            raise TooLargeError(f"positions: {len(positions)} asked, the limit is "
                                f"{budgets.max_points}", field="positions")
        if n_times * max(n_positions, 1) > budgets.max_output_values:
            raise TooLargeError(f"times x positions = {n_times * n_positions} values asked, the "
                                f"limit is {budgets.max_output_values}", field="times")
        return data

    @validates_schema
    def _shape_rules(self, data: dict[str, Any], **kwargs: Any) -> None:
        shape = data.get("shape")
        if shape not in SHAPE_FIELDS:
            return
        errors: dict[str, Any] = {}
        needed = SHAPE_FIELDS[shape]
        for name in needed:
            if data.get(name) is None:
                errors[name] = [f"Required for shape {shape!r}."]
        errors.update(unused_size_errors(data, GEOMETRY_FIELDS, needed, f"shape {shape!r}"))
        widths = data.get("half_widths")
        if widths is not None and shape in ("bar", "box") and len(widths) != DIMENSIONS[shape]:
            errors["half_widths"] = [f"Shape {shape!r} takes {DIMENSIONS[shape]} half-widths."]
        times = data.get("times") or []
        if any(b <= a for a, b in zip(times, times[1:], strict=False)):
            errors["times"] = ["Times must be strictly increasing."]
        surface = data.get("surface")
        if surface and surface["type"] == "flux" and shape != "semi_infinite":
            errors["surface"] = {"type": ["A flux surface is offered for semi_infinite only."]}
        if data.get("diffusivity") is None and (data.get("density") is None
                                                 or data.get("specific_heat") is None):
            errors["density"] = ["Give density and specific_heat, or diffusivity."]
        dims = DIMENSIONS.get(shape)
        for i, position in enumerate(data.get("positions") or []):
            is_point = isinstance(position, tuple)
            if dims and (not is_point or len(position) != dims):
                errors.setdefault("positions", {})[i] = [
                    f"Shape {shape!r} takes points of {dims} coordinates."]
            elif not dims and is_point:
                errors.setdefault("positions", {})[i] = [
                    f"Shape {shape!r} takes a single distance."]
        if errors:
            raise ValidationError(errors)

    def make_problem(self, data: dict[str, Any]) -> TransientProblem:
        target = data.get("target")
        widths = data.get("half_widths")
        return TransientProblem(
            shape=data["shape"], conductivity=data["conductivity"],
            initial_temperature=data["initial_temperature"],
            surface=Surface(**data["surface"]), times=tuple(data["times"]),
            positions=tuple(data["positions"]),
            half_thickness=data.get("half_thickness"), radius=data.get("radius"),
            half_length=data.get("half_length"),
            half_widths=tuple(widths) if widths else None,
            volume=data.get("volume"), area=data.get("area"), density=data.get("density"),
            specific_heat=data.get("specific_heat"), diffusivity=data.get("diffusivity"),
            target=Target(**target) if target else None, atol=data["tolerance"],
            limits=data["limits"],
        )


# --------------------------------------------------------------------------- response

_ENERGY_FIELDS = {"J": "energy", "J/m": "energy_per_length", "J/m^2": "energy_per_area"}


def _array(kind: str, description: str, depth: int = 1, **kwargs: Any) -> Quantity:
    items: dict[str, Any] = {"type": "number"}
    for _ in range(depth - 1):
        items = {"type": "array", "items": items}
    return Quantity(kind, metadata={"type": "array", "items": items,
                                    "description": description}, **kwargs)


class TransientResultsSchema(Schema):
    shape = fields.String()
    times = _array("time", "Output times.")
    positions = Quantity("length", metadata={
        "type": "array", "items": {}, "description": "Output positions (distances, or points "
                                                   "of product shapes)."})
    temperatures = _array("temperature", "temperatures[i][j] at times[i] and positions[j].",
                          depth=2)
    energy_fraction = Array(allow_none=True, metadata={
        "type": "array", "items": {"type": "number"},
        "description": "Q/Q0 per time: fraction of the largest possible heat exchange; null for "
                       "semi_infinite."})
    energy = _array("energy", "Heat taken up since t = 0 (J): sphere, box, short cylinder, "
                              "lumped body.", allow_none=True)
    energy_per_length = _array("energy_per_length", "Per metre of length: cylinder, bar.",
                               allow_none=True)
    energy_per_area = _array("energy_per_area", "Per square metre of face: slab (whole "
                                                "thickness), semi_infinite.", allow_none=True)
    directions = fields.List(fields.String())
    biot = fields.List(Number(allow_none=True), metadata={
        "description": "Biot number per direction (null: fixed surface temperature)."})
    fourier = Array(metadata={"type": "array", "items": {"type": "array",
                                                         "items": {"type": "number"}},
                              "description": "fourier[i][d]: Fourier number at times[i] for "
                                             "direction d."})
    terms = fields.List(fields.Integer(), metadata={"description": "Series terms per time."})
    short_time = fields.List(fields.Boolean(), metadata={
        "description": "Times evaluated with the short-time (Laplace) form."})
    time_constant = Quantity("time", allow_none=True, metadata={
        "description": "Lumped body: rho c V / (h A)."})
    target_time = Quantity("time", allow_none=True)

    @pre_dump
    def _arrange(self, result: Any, **kwargs: Any) -> dict[str, Any]:
        energy = dict.fromkeys(_ENERGY_FIELDS.values())
        energy[_ENERGY_FIELDS[result.energy_unit]] = result.energy
        return {
            "shape": result.shape, "times": result.times, "positions": result.positions,
            "temperatures": result.temperatures, "energy_fraction": result.energy_fraction,
            **energy, "directions": list(result.directions), "biot": list(result.biot),
            "fourier": result.fourier, "terms": [int(t) for t in result.terms],
            "short_time": [bool(v) for v in result.short_time],
            "time_constant": result.time_constant, "target_time": result.target_time,
        }


class TransientResponseSchema(SolveResponseSchema):
    results = fields.Nested(TransientResultsSchema)  # type: ignore[assignment]

