"""A field whose schema is chosen by the object's `type` key (edges, surfaces, tips)."""

from __future__ import annotations

from collections.abc import Mapping
from typing import Any

from marshmallow import Schema, ValidationError, fields


class Polymorphic(fields.Field):
    """Loads a JSON object with the schema named by its `type` value.

    The OpenAPI document shows it as `oneOf` the candidate schemas with a discriminator.
    """

    def __init__(self, choices: Mapping[str, type[Schema]], **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.choices = choices
        self._instances: dict[str, Schema] = {}

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> Any:
        if not isinstance(value, dict):
            raise ValidationError("Must be an object with a 'type'.")
        kind = value.get("type")
        if not isinstance(kind, str) or kind not in self.choices:
            raise ValidationError({"type": [f"Must be one of: {', '.join(self.choices)}."]})
        if kind not in self._instances:
            self._instances[kind] = self.choices[kind]()
        return self._instances[kind].load(value)
