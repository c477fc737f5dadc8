"""Custom marshmallow fields: quantities with units, strict numbers, numpy-aware output."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from marshmallow import ValidationError, fields

from schemas.units import (
    ABSOLUTE_ZERO_C,
    CURRENT_OUTPUT_UNITS,
    DEFAULT_UNITS,
    UnitError,
    parse_quantity,
    round_significant,
)


def _sentence(text: str) -> str:
    return text[:1].upper() + text[1:] + ("" if text.endswith(".") else ".")


def _format(value: float) -> str:
    return f"{value:g}"


class Number(fields.Field):
    """A finite JSON number (no strings, no booleans), with optional bounds."""

    default_error_messages = {
        "invalid": "Not a number.",
        "non_finite": "Must be a finite number.",
    }

    def __init__(self, *, minimum: float | None = None, maximum: float | None = None,
                 exclusive_minimum: bool = False, exclusive_maximum: bool = False,
                 **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.minimum = minimum
        self.maximum = maximum
        self.exclusive_minimum = exclusive_minimum
        self.exclusive_maximum = exclusive_maximum

    def _unit_label(self) -> str:
        return ""

    def _to_float(self, value: Any) -> float:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.make_error("invalid")
        return float(value)

    def _check_range(self, number: float) -> float:
        if not math.isfinite(number):
            raise self.make_error("non_finite")
        unit = self._unit_label()
        suffix = f" {unit}" if unit else ""
        if self.minimum is not None:
            if self.exclusive_minimum and not number > self.minimum:
                raise ValidationError(f"Must be greater than {_format(self.minimum)}{suffix}.")
            if not self.exclusive_minimum and not number >= self.minimum:
                raise ValidationError(f"Must be at least {_format(self.minimum)}{suffix}.")
        if self.maximum is not None:
            if self.exclusive_maximum and not number < self.maximum:
                raise ValidationError(f"Must be less than {_format(self.maximum)}{suffix}.")
            if not self.exclusive_maximum and not number <= self.maximum:
                raise ValidationError(f"Must be at most {_format(self.maximum)}{suffix}.")
        return number

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> float:
        return self._check_range(self._to_float(value))

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        if value is None:
            return None
        return round_significant(value)


class Integer(fields.Field):
    """A JSON integer (no strings, booleans or fractions), with optional bounds."""

    default_error_messages = {"invalid": "Not an integer."}

    def __init__(self, *, minimum: int | None = None, maximum: int | None = None,
                 **kwargs: Any) -> None:
        super().__init__(**kwargs)
        self.minimum = minimum
        self.maximum = maximum

    def _deserialize(self, value: Any, attr: str | None, data: Any, **kwargs: Any) -> int:
        if isinstance(value, bool) or not isinstance(value, int | float):
            raise self.make_error("invalid")
        if isinstance(value, float) and not (math.isfinite(value) and value.is_integer()):
            raise self.make_error("invalid")
        number = int(value)
        if self.minimum is not None and number < self.minimum:
            raise ValidationError(f"Must be at least {self.minimum}.")
        if self.maximum is not None and number > self.maximum:
            raise ValidationError(f"Must be at most {self.maximum}.")
        return number

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        return None if value is None else int(value)


class Quantity(Number):
    """A physical quantity: a bare number in the default unit of `kind`, or "value unit".

    Deserialises to a float in the default unit (SI, temperatures in degC). Bounds are given in
    the default unit. Temperatures below absolute zero are rejected. Serialises floats and numpy
    arrays into the caller's output units (`CURRENT_OUTPUT_UNITS`).
    """

    default_error_messages = {
        "invalid": "Not a number or a quantity string such as '150 mm'.",
        "non_finite": "Must be a finite number.",
    }

    def __init__(self, kind: str, **kwargs: Any) -> None:
        if kind not in DEFAULT_UNITS:
            raise ValueError(f"unknown quantity kind {kind!r}")
        metadata = dict(kwargs.pop("metadata", {}) or {})
        metadata.setdefault("x-unit", DEFAULT_UNITS[kind])
        metadata.setdefault("x-quantity", kind)
        super().__init__(metadata=metadata, **kwargs)
        self.kind = kind

    def _unit_label(self) -> str:
        return DEFAULT_UNITS[self.kind]

    def _to_float(self, value: Any) -> float:
        if isinstance(value, str):
            try:
                number = parse_quantity(value, self.kind)
            except UnitError as exc:
                raise ValidationError(_sentence(str(exc))) from exc
        else:
            number = super()._to_float(value)
        if self.kind == "temperature" and number < ABSOLUTE_ZERO_C - 1e-9:
            raise ValidationError("Temperature is below absolute zero (-273.15 degC).")
        return number

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        if value is None:
            return None
        if isinstance(value, list | tuple):
            value = np.asarray(value, dtype=float)
        converted = CURRENT_OUTPUT_UNITS.get().convert(self.kind, value)
        return round_significant(converted)


class Array(fields.Field):
    """Output-only numeric array (any shape) of a plain number kind, dumped as nested lists."""

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        if value is None:
            return None
        return round_significant(np.asarray(value, dtype=float))


class QuantityArray(Quantity):
    """Output-only array of a quantity kind (converted to output units, any shape)."""

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        if value is None:
            return None
        return super()._serialize(np.asarray(value, dtype=float), attr, obj, **kwargs)
