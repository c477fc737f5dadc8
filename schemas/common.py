"""Pieces shared by every family: base schemas, limits, output units, the response envelope."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any

from marshmallow import RAISE, Schema, ValidationError, fields, post_load, validates_schema

from schemas.fields import Array, Integer, Number, Quantity, _sentence
from schemas.units import DEFAULT_UNITS, OutputUnits, UnitError
from service.solvers.safety import Limits


class BaseSchema(Schema):
    """Unknown keys are rejected so that a misspelt key fails loudly."""

    class Meta:
        unknown = RAISE
        ordered = True


def unused_size_errors(data: dict[str, Any], candidates: tuple[str, ...],
                       chosen: tuple[str, ...], what: str) -> dict[str, list[str]]:
    """Errors for size fields the chosen shape or geometry does not use (a misplaced size is
    rejected rather than silently ignored). `what` reads e.g. "shape 'slab'"."""
    return {name: [f"Not used by {what}; it takes {', '.join(chosen) or 'no size'}."]
            for name in candidates if name not in chosen and data.get(name) is not None}


class LimitsSchema(BaseSchema):
    max_temperature = Quantity("temperature", metadata={
        "description": "Highest temperature allowed anywhere in the body."})
    min_temperature = Quantity("temperature", metadata={
        "description": "Lowest temperature allowed anywhere (freeze or condensation limit)."})
    max_surface_temperature = Quantity("temperature", metadata={
        "description": "Touch or coating limit on exposed surfaces."})
    warning_margin = Quantity("temperature_difference", minimum=0.0, load_default=10.0,
                              metadata={"description": "A margin smaller than this warns."})

    @validates_schema
    def _min_below_max(self, data: dict[str, Any], **kwargs: Any) -> None:
        low, high = data.get("min_temperature"), data.get("max_temperature")
        if low is not None and high is not None and low >= high:
            raise ValidationError("Must be below max_temperature.", "min_temperature")

    @post_load
    def _make(self, data: dict[str, Any], **kwargs: Any) -> Limits:
        return Limits(**data)


class OutputUnitsField(fields.Field):
    """`{"temperature": "degF", "length": "in"}`: unit per quantity kind for the response."""

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> OutputUnits:
        if not isinstance(value, dict):
            raise ValidationError("Must be an object mapping quantity kinds to unit strings.")
        errors: dict[str, list[str]] = {}
        for kind, unit in value.items():
            if kind not in DEFAULT_UNITS:
                errors[str(kind)] = [f"Unknown quantity kind; one of: {', '.join(DEFAULT_UNITS)}."]
            elif not isinstance(unit, str):
                errors[kind] = ["Must be a unit string."]
        if not errors:
            try:
                return OutputUnits.from_mapping(value)
            except UnitError as exc:
                bad = next(k for k, u in value.items() if _unit_fails(k, u))
                errors[bad] = [_sentence(str(exc))]
        raise ValidationError(errors)


def _unit_fails(kind: str, unit: str) -> bool:
    try:
        OutputUnits.from_mapping({kind: unit})
    except UnitError:
        return True
    return False


@dataclass(frozen=True)
class SolveRequest:
    """A validated solve request: the solver's input plus what only the HTTP layer needs."""

    problem: Any
    output_units: OutputUnits
    accept_unconverged: bool


class SolveRequestSchema(BaseSchema):
    """Fields every solve request may carry. Families subclass and implement `make_problem`."""

    limits = fields.Nested(LimitsSchema, load_default=None)
    output_units = OutputUnitsField(load_default=None, metadata={
        "description": "Units for the response by quantity kind, e.g. "
                       '{"temperature": "degF", "length": "in"}.',
        "type": "object", "additionalProperties": {"type": "string"}})
    accept_unconverged = fields.Boolean(load_default=False, metadata={
        "description": "Return an unconverged result (with a warning) instead of a 422."})

    def make_problem(self, data: dict[str, Any]) -> Any:  # pragma: no cover - abstract
        raise NotImplementedError

    @post_load
    def _make_request(self, data: dict[str, Any], **kwargs: Any) -> SolveRequest:
        output_units = data.pop("output_units", None) or OutputUnits()
        accept = data.pop("accept_unconverged", False)
        data["limits"] = data.get("limits") or Limits()
        return SolveRequest(problem=self.make_problem(data), output_units=output_units,
                            accept_unconverged=accept)


# --------------------------------------------------------------------------- responses


class ConvergenceSchema(Schema):
    converged = fields.Boolean()
    status = fields.String(metadata={"enum": ["converged", "max_terms", "max_iterations",
                                              "non_finite", "stagnated"]})
    message = fields.String()
    terms = Integer(allow_none=True)
    iterations = Integer(allow_none=True)
    error_estimate = Quantity("temperature_difference", allow_none=True)
    residual = Number(allow_none=True)
    tolerance = Quantity("temperature_difference", attribute="atol", allow_none=True)
    rtol = Number(allow_none=True)
    cells = Integer(allow_none=True)
    energy_balance_error = Number(allow_none=True, metadata={
        "description": "Global energy-balance error relative to the largest heat flow."})


class LocationSchema(Schema):
    temperature = Quantity("temperature")
    description = fields.String()
    position = Quantity("length", metadata={"type": "array", "items": {"type": "number"}})
    time = Quantity("time", allow_none=True)


class SafetyCheckSchema(Schema):
    limit = fields.String()
    limit_value = Quantity("temperature")
    extreme = Quantity("temperature")
    margin = Quantity("temperature_difference")
    status = fields.String(metadata={"enum": ["ok", "warning", "exceeded"]})
    where = fields.Nested(LocationSchema)
    first_crossed_time = Quantity("time", allow_none=True)


class SafetySchema(Schema):
    status = fields.String(metadata={"enum": ["ok", "warning", "exceeded", "not_checked"]})
    checks = fields.List(fields.Nested(SafetyCheckSchema))


class MetaSchema(Schema):
    service_version = fields.String()
    elapsed_ms = Number()
    request_id = fields.String()
    reused = fields.Boolean(metadata={
        "description": "True when this worker answered an identical problem (the same text) "
                       "earlier and this answer was served from it without solving again; "
                       "elapsed_ms is then this request's own time. Send Cache-Control: "
                       "no-cache to have it solved afresh."})


class SolveResponseSchema(Schema):
    """The envelope of every solve response; families set `results`."""

    kind = fields.String()
    method = fields.String()
    units = fields.Dict(keys=fields.String(), values=fields.String(), metadata={
        "description": "Unit of each reported quantity kind."})
    results = fields.Raw(metadata={"description": "Family-specific results."})
    convergence = fields.Nested(ConvergenceSchema)
    safety = fields.Nested(SafetySchema)
    warnings = fields.List(fields.String())
    cautions = fields.List(fields.String())
    meta = fields.Nested(MetaSchema)


def quantity_kinds(schema: Schema) -> list[str]:
    """Quantity kinds a response schema reports (for its `units` object), in a stable order."""
    found: set[str] = set()
    _collect(schema, found, set())
    return [kind for kind in DEFAULT_UNITS if kind in found]


def _collect(schema: Schema, found: set[str], seen: set[type]) -> None:
    if type(schema) in seen:
        return
    seen.add(type(schema))
    for field in schema.fields.values():
        _collect_field(field, found, seen)


def _collect_field(field: fields.Field, found: set[str], seen: set[type]) -> None:
    if isinstance(field, Quantity):
        found.add(field.kind)
    elif isinstance(field, fields.Nested):
        _collect(field.schema, found, seen)
    elif isinstance(field, fields.List):
        _collect_field(field.inner, found, seen)


__all__ = ["Array", "BaseSchema", "Integer", "Number", "Quantity", "SolveRequest",
           "SolveRequestSchema", "SolveResponseSchema", "quantity_kinds"]
