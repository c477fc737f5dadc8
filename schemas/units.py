"""Units: every quantity field takes a bare number in its default unit or a "value unit" string.

One pint registry is built once, at import. Conversions are reduced to a cached affine map
(value * scale + offset) per unit string, so a request that uses units pays pint's price once
per distinct unit string per worker, and a request with bare numbers never touches pint.

Temperatures are absolute (degC by default, K, degF and degR accepted); temperature
*differences* (margins, K in compound units) are converted without the offset, so "18 degF"
as a margin is 10 K and "0.5 BTU/(h*ft*degF)" is a conductivity.
"""

from __future__ import annotations

import math
import re
import warnings
from contextvars import ContextVar
from dataclasses import dataclass, field
from functools import lru_cache
from typing import Any

import numpy as np

with warnings.catch_warnings():
    warnings.simplefilter("ignore")
    import pint

    UREG: pint.UnitRegistry = pint.UnitRegistry(cache_folder=None)

ABSOLUTE_ZERO_C = -273.15

#: Every kind of quantity the service reads or reports, with its default unit. The keys are the
#: names callers use in `output_units` and find in a response's `units` object.
DEFAULT_UNITS: dict[str, str] = {
    "temperature": "degC",
    "temperature_difference": "K",
    "length": "m",
    "area": "m^2",
    "volume": "m^3",
    "time": "s",
    "conductivity": "W/(m*K)",
    "conductivity_slope": "1/K",
    "density": "kg/m^3",
    "specific_heat": "J/(kg*K)",
    "diffusivity": "m^2/s",
    "film_coefficient": "W/(m^2*K)",
    "heat_flux": "W/m^2",
    "generation": "W/m^3",
    "heat_flow": "W",
    "heat_flow_per_length": "W/m",
    "energy": "J",
    "energy_per_length": "J/m",
    "energy_per_area": "J/m^2",
    "contact_resistance": "m^2*K/W",
    "thermal_resistance": "K/W",
    "resistance_per_length": "m*K/W",
    "speed": "m/s",
}

_NUMBER = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(.*?)\s*$")
_OFFSET_IN_COMPOUND = re.compile(r"(?<![A-Za-z_])(degF|degC|°F|°C|degree_Fahrenheit|degree_Celsius)"
                                 r"(?![A-Za-z_])")
_DELTA = {"degF": "delta_degF", "°F": "delta_degF", "degree_Fahrenheit": "delta_degF",
          "degC": "delta_degC", "°C": "delta_degC", "degree_Celsius": "delta_degC"}


class UnitError(ValueError):
    """A unit string that cannot be used for a quantity of the given kind."""


@dataclass(frozen=True)
class Affine:
    """value_in_target = value_in_source * scale + offset."""

    scale: float
    offset: float

    def apply(self, value: Any) -> Any:
        if self.scale == 1.0 and self.offset == 0.0:
            return value
        return value * self.scale + self.offset


IDENTITY = Affine(1.0, 0.0)


def _unit_expression(kind: str, unit: str) -> str:
    unit = unit.strip()
    if kind == "temperature":
        return unit
    if kind == "temperature_difference" and unit in _DELTA:
        return _DELTA[unit]
    # inside a compound unit a degree means a temperature step
    return _OFFSET_IN_COMPOUND.sub(lambda m: _DELTA[m.group(1)], unit)


@lru_cache(maxsize=512)
def to_default(kind: str, unit: str) -> Affine:
    """Affine map from `unit` to the default unit of `kind`; raises UnitError."""
    return _affine(kind, unit, forward=True)


@lru_cache(maxsize=512)
def from_default(kind: str, unit: str) -> Affine:
    """Affine map from the default unit of `kind` to `unit`; raises UnitError."""
    return _affine(kind, unit, forward=False)


def _affine(kind: str, unit: str, *, forward: bool) -> Affine:
    if kind not in DEFAULT_UNITS:
        raise UnitError(f"unknown quantity kind {kind!r}")
    default = DEFAULT_UNITS[kind]
    if not unit.strip():
        raise UnitError("empty unit")
    expression = _unit_expression(kind, unit)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            parsed = UREG.parse_units(expression)
        except Exception as exc:  # pint raises several unrelated types for bad strings
            raise UnitError(f"unknown unit {unit!r}") from exc
        target = UREG.parse_units(default)
        if parsed.dimensionality != target.dimensionality:
            raise UnitError(f"{unit!r} is not a unit of {kind.replace('_', ' ')} "
                            f"(expected something like {default!r})")
        src, dst = (parsed, target) if forward else (target, parsed)
        zero = UREG.Quantity(0.0, src).to(dst).magnitude
        one = UREG.Quantity(1.0, src).to(dst).magnitude
    return Affine(scale=float(one - zero), offset=float(zero))


def parse_quantity(value: str, kind: str) -> float:
    """Parse "150 mm" for a quantity of `kind` into the default unit; raises UnitError."""
    match = _NUMBER.match(value)
    if not match:
        raise UnitError("expected a number, or a string of a number and a unit such as "
                        f"'{_example(kind)}'")
    magnitude, unit = float(match.group(1)), match.group(2)
    if not unit:
        raise UnitError(f"a string must carry a unit (such as '{_example(kind)}'); give a bare "
                        f"number for the default unit {DEFAULT_UNITS[kind]}")
    result = to_default(kind, unit).apply(magnitude)
    if not math.isfinite(result):
        raise UnitError("value is not finite")
    return float(result)


def _example(kind: str) -> str:
    return {"temperature": "300 degF", "length": "150 mm", "time": "2 h",
            "conductivity": "0.5 BTU/(h*ft*degF)"}.get(kind, f"1 {DEFAULT_UNITS[kind]}")


# --------------------------------------------------------------------------- output units


@dataclass(frozen=True)
class OutputUnits:
    """Units the caller wants in the response, by kind; missing kinds use the defaults."""

    chosen: tuple[tuple[str, str], ...] = ()
    _maps: dict[str, Affine] = field(default_factory=dict, compare=False, repr=False)

    @classmethod
    def from_mapping(cls, mapping: dict[str, str]) -> OutputUnits:
        """Validate and freeze; a temperature unit also sets the temperature-difference unit."""
        chosen = dict(mapping)
        temp = chosen.get("temperature")
        if temp is not None and "temperature_difference" not in chosen:
            chosen["temperature_difference"] = {"degF": "delta_degF", "degR": "delta_degF",
                                                "°F": "delta_degF"}.get(temp.strip(), "K")
        maps = {kind: from_default(kind, unit) for kind, unit in chosen.items()}
        return cls(chosen=tuple(sorted(chosen.items())), _maps=maps)

    def unit(self, kind: str) -> str:
        return dict(self.chosen).get(kind, DEFAULT_UNITS[kind])

    def convert(self, kind: str, value: Any) -> Any:
        return self._maps.get(kind, IDENTITY).apply(value)


DEFAULT_OUTPUT_UNITS = OutputUnits()

#: The output units of the response being written (set per request by the HTTP layer).
CURRENT_OUTPUT_UNITS: ContextVar[OutputUnits] = ContextVar("output_units",
                                                           default=DEFAULT_OUTPUT_UNITS)

#: Significant digits kept in reported floats: beyond any solver's accuracy, half the body size.
SIGNIFICANT_DIGITS = 10


def round_significant(value: Any, digits: int = SIGNIFICANT_DIGITS) -> Any:
    """Round a float or array to `digits` significant digits (non-finite values pass through)."""
    if isinstance(value, float | int) and not isinstance(value, bool):
        return float(f"{value:.{digits}g}")  # the scalar path: 30x cheaper than numpy's
    arr = np.asarray(value, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        magnitude = np.floor(np.log10(np.abs(arr)))
        magnitude = np.where(np.isfinite(magnitude), magnitude, 0.0)
        factor = 10.0 ** (digits - 1 - magnitude)
        rounded = np.round(arr * factor) / factor
    rounded = np.where(np.isfinite(rounded), rounded, arr)
    if np.ndim(value) == 0:
        return float(rounded)
    return rounded
