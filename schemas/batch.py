"""POST /v1/batch and POST /v1/sweep: many problems per call."""

from __future__ import annotations

import itertools
from typing import Any

from marshmallow import Schema, ValidationError, fields, pre_load, validate, validates_schema

from schemas.budgets import CURRENT_BUDGETS
from schemas.common import BaseSchema, MetaSchema
from schemas.fields import Integer
from service.solvers.errors import TooLargeError


class BatchItemSchema(BaseSchema):
    kind = fields.String(required=True, metadata={
        "description": "Family of the problem: the path segment of its solve endpoint, e.g. "
                       "'plate' for POST /v1/plate."})
    problem = fields.Dict(required=True, metadata={
        "description": "The request body that family's endpoint takes."})
    id = fields.String(load_default=None, metadata={
        "description": "Optional caller's label, echoed in the result."})


class BatchRequestSchema(BaseSchema):
    items = fields.List(fields.Nested(BatchItemSchema), required=True,
                        validate=validate.Length(min=1))

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        limit = CURRENT_BUDGETS.get().max_batch_items
        if isinstance(data, dict) and isinstance(data.get("items"), list) \
                and len(data["items"]) > limit:
            raise TooLargeError(f"items: {len(data['items'])} items sent, the limit is {limit} "
                                "per batch; split the batch", field="items")
        return data


class BatchItemResultSchema(Schema):
    index = Integer()
    id = fields.String(allow_none=True)
    kind = fields.String()
    status = Integer(metadata={"description": "HTTP status this item would have had alone."})
    result = fields.Dict(allow_none=True, metadata={"description": "The solve response (200)."})
    problem = fields.Dict(allow_none=True, metadata={
        "description": "RFC 9457 problem details of a failed item."})


class BatchSummarySchema(Schema):
    count = Integer()
    succeeded = Integer()
    failed = Integer()


class BatchResponseSchema(Schema):
    items = fields.List(fields.Nested(BatchItemResultSchema))
    summary = fields.Nested(BatchSummarySchema)
    meta = fields.Nested(MetaSchema)


class VarySchema(BaseSchema):
    path = fields.String(required=True, validate=validate.Length(min=1), metadata={
        "description": "Dotted path into the base problem, list indices as numbers, e.g. "
                       "'edges.right.film_coefficient' or 'layers.1.thickness'."})
    values = fields.List(fields.Raw(), required=True, validate=validate.Length(min=1), metadata={
        "description": "Values to put there (numbers in the field's default unit, or strings "
                       "with units)."})


class SweepRequestSchema(BaseSchema):
    kind = fields.String(required=True)
    base = fields.Dict(required=True, metadata={"description": "The base problem."})
    vary = fields.List(fields.Nested(VarySchema), required=True, validate=validate.Length(min=1))
    combine = fields.String(load_default="product", validate=validate.OneOf(["product", "zip"]),
                            metadata={"description": "product: every combination of the "
                                                     "values; zip: the i-th value of each."})
    outputs = fields.List(fields.String(validate=validate.Length(min=1)), required=True,
                          validate=validate.Length(min=1), metadata={
                              "description": "Dotted paths into each solve response, e.g. "
                                             "'results.points.0.temperature' or "
                                             "'safety.status'."})

    @validates_schema
    def _zip_lengths(self, data: dict[str, Any], **kwargs: Any) -> None:
        if data.get("combine") == "zip":
            lengths = {len(v["values"]) for v in data.get("vary", [])}
            if len(lengths) > 1:
                raise ValidationError("With combine 'zip' every values list must have the same "
                                      "length.", "vary")

    @pre_load
    def _refuse_oversized(self, data: Any, **kwargs: Any) -> Any:
        if not isinstance(data, dict) or not isinstance(data.get("vary"), list):
            return data
        sizes = [len(v["values"]) for v in data["vary"]
                 if isinstance(v, dict) and isinstance(v.get("values"), list)]
        cases = (min(sizes, default=0) if data.get("combine") == "zip"
                 else _product(sizes))
        limit = CURRENT_BUDGETS.get().max_sweep_cases
        if cases > limit:
            raise TooLargeError(f"vary: {cases} cases asked, the limit is {limit} per sweep",
                                field="vary")
        return data


def _product(sizes: list[int]) -> int:
    total = 1
    for size in sizes:
        total *= size
    return total


def sweep_cases(vary: list[dict[str, Any]], combine: str) -> list[tuple[Any, ...]]:
    values = [v["values"] for v in vary]
    if combine == "zip":
        return list(zip(*values, strict=True))
    return list(itertools.product(*values))


class SweepColumnSchema(Schema):
    name = fields.String()
    unit = fields.String()
    role = fields.String(metadata={"enum": ["varied", "output"]})


class SweepErrorSchema(Schema):
    case = Integer()
    problem = fields.Dict()


class SweepResponseSchema(Schema):
    kind = fields.String()
    columns = fields.List(fields.Nested(SweepColumnSchema))
    rows = fields.List(fields.List(fields.Raw()), metadata={
        "description": "One row per case: varied values then outputs (null where a case "
                       "failed or an output does not exist for it)."})
    cases = Integer()
    failed = Integer()
    errors = fields.List(fields.Nested(SweepErrorSchema))
    cautions = fields.List(fields.String())
    meta = fields.Nested(MetaSchema)
