"""The compiled dumper (schemas/dumping.py) against marshmallow's own `Schema.dump`.

The reference for every identity check here is marshmallow's `schema.dump(obj)` under the same
output units (an independent implementation: the library the compiled dumper stands in for),
compared with `dump_difference` (types, key order, floats bit for bit, NaN equal to NaN).
"""

from __future__ import annotations

import copy
import datetime
import math
import pathlib
import subprocess
import sys
import types
from typing import Any

import numpy as np
import pytest
from marshmallow import Schema, fields, post_dump, pre_dump

import service.api.common as common
from schemas import dumping
from schemas.common import ConvergenceSchema
from schemas.dumping import DumpMismatchError, compiled_dumper, dump_difference
from schemas.fields import Array, Integer, Number, Quantity, QuantityArray
from schemas.units import CURRENT_OUTPUT_UNITS, OutputUnits
from tests.conftest import (
    FIN_PAYLOAD,
    GRID_PAYLOAD,
    LAYERS_PAYLOAD,
    PLATE_PAYLOAD,
    TRANSIENT_PAYLOAD,
)

IMPERIAL = {"temperature": "degF", "length": "in", "heat_flow": "BTU/h",
            "heat_flow_per_length": "BTU/(h*ft)", "heat_flux": "BTU/(h*ft^2)", "time": "h",
            "energy": "BTU", "energy_per_length": "BTU/ft", "energy_per_area": "BTU/ft^2",
            "area": "ft^2", "thermal_resistance": "degF*h/BTU",
            "resistance_per_length": "degF*h*ft/BTU", "overall_coefficient": "BTU/(h*ft^2*degF)",
            "reciprocal_length": "1/ft"}


def identical(schema: Schema, obj: Any, units: OutputUnits) -> Any:
    """Dump both ways and require identity; returns the compiled dump."""
    token = CURRENT_OUTPUT_UNITS.set(units)
    try:
        reference = schema.dump(obj)
        compiled = compiled_dumper(schema)(obj, units)
    finally:
        CURRENT_OUTPUT_UNITS.reset(token)
    difference = dump_difference(reference, compiled)
    assert difference is None, difference
    return compiled


# --------------------------------------------------------------------------- solve responses


def _grid_transient() -> dict[str, Any]:
    # a refractory tile cooled on both faces (demo scenario, invented), with history and fields
    return {"width": 0.02, "height": 0.01, "cells": {"nx": 8, "ny": 2},
            "conductivity": 1.2, "density": 2000, "specific_heat": 900,
            "edges": {"left": {"type": "temperature", "value": 0},
                      "right": {"type": "convection", "film_coefficient": 30, "ambient": 20},
                      "bottom": {"type": "insulated"}, "top": {"type": "insulated"}},
            "points": [[0.005, 0.005]],
            "transient": {"initial_temperature": 100, "times": [20, 60], "time_step": 2},
            "output_grid": True}


CASES = {
    "plate": ("/v1/plate", PLATE_PAYLOAD),
    "plate-both": ("/v1/plate", {**PLATE_PAYLOAD, "method": "both"}),
    "plate-101": ("/v1/plate", {**PLATE_PAYLOAD, "grid": {"nx": 101, "ny": 101}}),
    "plate-no-points": ("/v1/plate", {**PLATE_PAYLOAD, "points": [], "grid": None}),
    "layers": ("/v1/layers", LAYERS_PAYLOAD),
    "layers-solve-for": ("/v1/layers", {**LAYERS_PAYLOAD, "solve_for": {
        "layer": 1, "target": {"surface_temperature": 50}}}),
    "fin": ("/v1/fin", FIN_PAYLOAD),
    "fin-infinite": ("/v1/fin", {**FIN_PAYLOAD, "tip": "infinite"}),
    "transient": ("/v1/transient", TRANSIENT_PAYLOAD),
    "grid": ("/v1/grid", GRID_PAYLOAD),
    "grid-transient": ("/v1/grid", _grid_transient()),
}


#: Solve and dump anew even where the service keeps finished answers for identical problems.
FRESH = {"Cache-Control": "no-store"}


@pytest.fixture
def captured(client, monkeypatch):
    """Run a request and return every (schema, object, units) it dumped."""
    seen: list[tuple[Schema, Any, OutputUnits]] = []
    real = common.dump_with_units

    def capture(schema: Schema, obj: Any, units: OutputUnits) -> Any:
        seen.append((schema, obj, units))
        return real(schema, obj, units)

    monkeypatch.setattr(common, "dump_with_units", capture)

    def run(path: str, payload: dict[str, Any]) -> list[tuple[Schema, Any, OutputUnits]]:
        seen.clear()
        response = client.post(path, json=payload, headers=FRESH)
        assert response.status_code == 200, response.get_json()
        return list(seen)

    return run


@pytest.mark.parametrize("units", [None, IMPERIAL], ids=["default-units", "imperial"])
@pytest.mark.parametrize("case", list(CASES))
def test_solve_responses_identical(captured, case, units):
    path, payload = CASES[case]
    payload = copy.deepcopy(payload)
    if units is not None:
        payload["output_units"] = units
    dumps = captured(path, payload)
    assert dumps, "the request dumped nothing"
    for schema, obj, output_units in dumps:
        identical(schema, obj, output_units)
        # twice: the second run uses the kept dumper and the remembered small arrays
        identical(schema, obj, output_units)


def test_imperial_output_is_converted(captured):
    # 100 degC is 212 degF (definition of the Fahrenheit scale, common practice, no source)
    payload = copy.deepcopy(PLATE_PAYLOAD)
    payload["output_units"] = {"temperature": "degF"}
    schema, obj, units = captured("/v1/plate", payload)[-1]
    body = identical(schema, obj, units)
    assert body["units"]["temperature"] == "degF"
    # the bottom edge is held at 100 degC, so the hottest point is on it
    np.testing.assert_allclose(body["results"]["extremes"]["hottest"]["temperature"], 212.0,
                               rtol=1e-9, atol=1e-9)


@pytest.mark.parametrize("accept", [False, True])
def test_unconverged_diagnostics_identical(client, monkeypatch, accept):
    seen: list[Any] = []
    real = common.dump_with_units
    monkeypatch.setattr(common, "dump_with_units",
                        lambda s, o, u: seen.append((s, o, u)) or real(s, o, u))
    payload = copy.deepcopy(GRID_PAYLOAD)  # radiation with one Picard iteration cannot converge
    payload["edges"]["top"] = {"type": "radiation", "emissivity": 0.9, "surroundings": -25}
    payload.update(max_iterations=1, accept_unconverged=accept,
                   output_units={"temperature": "degF"})
    response = client.post("/v1/grid", json=payload, headers=FRESH)
    assert response.status_code == (200 if accept else 422), response.get_json()
    assert type(seen[0][0]) is ConvergenceSchema
    for schema, obj, units in seen:
        identical(schema, obj, units)


# --------------------------------------------------------------------------- field coverage


class PointSchema(Schema):
    x = Quantity("length")
    temperature = Quantity("temperature", allow_none=True)


class AllFieldsSchema(Schema):
    label = fields.String()
    flag = fields.Boolean()
    raw = fields.Raw()
    count = Integer(allow_none=True)
    plain_count = fields.Integer()
    ratio = fields.Float()
    share = Number(allow_none=True)
    temperature = Quantity("temperature", allow_none=True)
    step = Quantity("temperature_difference", data_key="margin")
    length = Quantity("length", attribute="size")
    deep = Quantity("length", attribute="inner.depth")
    values = Array(allow_none=True)
    temperatures = QuantityArray("temperature", allow_none=True)
    names = fields.List(fields.String())
    shares = fields.List(Number(allow_none=True))
    pair = fields.Tuple((Quantity("length"), Quantity("temperature")), allow_none=True)
    pairs = fields.List(fields.Tuple((Quantity("length"), Integer())))
    units = fields.Dict(keys=fields.String(), values=fields.String())
    anything = fields.Dict()
    flows = fields.Dict(keys=fields.String(), values=Quantity("heat_flow"))
    point = fields.Nested(PointSchema, allow_none=True)
    points = fields.List(fields.Nested(PointSchema))
    many_points = fields.Nested(PointSchema, many=True)
    only_x = fields.Nested(PointSchema, only=("x",))
    without_x = fields.List(fields.Nested(PointSchema, exclude=("x",)))
    defaulted = Quantity("temperature", dump_default=20.0)
    called = fields.String(dump_default=lambda: "made")


def _full(**changes: Any) -> dict[str, Any]:
    data: dict[str, Any] = {
        "label": "kiln door lining", "flag": True, "raw": {"a": [1, 2.5]}, "count": 3,
        "plain_count": 7.9, "ratio": 2, "share": 0.123456789012345, "temperature": 451.123456789,
        "step": 12.5, "size": 0.333333333333333, "inner": {"depth": 1.0 / 7.0},
        "values": [1.0 / 3.0, 2.0 / 3.0], "temperatures": [[1.0, 2.0], [3.0, 4.0]],
        "names": ["a", "b"], "shares": [0.1, None, 1.0 / 9.0],
        "pair": (0.1, 20.0), "pairs": [(0.2, 1), (0.3, 2)],
        "units": {"temperature": "degF"}, "anything": {"k": 1},
        "flows": {"left": 12.3456789012345, "right": None},
        "point": {"x": 0.5, "temperature": 30.0},
        "points": [{"x": 0.1, "temperature": None}, {"x": 0.2, "temperature": 1e-320}],
        "many_points": [{"x": 1.0, "temperature": 2.0}],
        "only_x": {"x": 0.25, "temperature": 99.0},
        "without_x": [{"x": 3.0, "temperature": 4.0}],
    }
    data.update(changes)
    return data


UNITS = [OutputUnits(), OutputUnits.from_mapping(IMPERIAL),
         OutputUnits.from_mapping({"temperature": "K", "length": "mm"})]


@pytest.mark.parametrize("units", UNITS, ids=["default", "imperial", "kelvin-mm"])
@pytest.mark.parametrize("changes", [
    {},
    # None everywhere the fields allow it, empty lists and mappings
    {"count": None, "share": None, "temperature": None, "values": None, "temperatures": None,
     "pair": None, "point": None, "names": [], "shares": [], "pairs": [], "points": [],
     "many_points": [], "units": {}, "flows": {}, "label": None, "flag": None},
    # numpy scalars of several types
    {"count": np.int64(4), "share": np.float64(0.7071067811865476),
     "temperature": np.float32(21.5), "step": np.int32(3), "size": np.float64(2.0 / 3.0),
     "plain_count": np.float64(2.9), "ratio": np.float32(0.1), "label": np.str_("np")},
    # numpy arrays: 0-d, 1-d, 2-d
    {"temperature": np.array(37.77777777777777), "size": np.array([0.1, 0.2, 1.0 / 3.0]),
     "values": np.array(1.0 / 3.0), "temperatures": np.linspace(0, 100, 12).reshape(3, 4),
     "share": np.array([[1.0 / 7.0, 2.0], [np.nan, -0.0]]),
     "flows": {"left": np.arange(3.0) / 7.0}},
    # Python ints, booleans, non-finite values, negative zero, bytes
    {"temperature": 20, "share": True, "step": -0.0, "size": math.inf, "ratio": math.nan,
     "values": [math.nan, math.inf, -math.inf, 0.0, -0.0, 5e-324, 1.7e308],
     "label": b"bytes", "count": True},
    # large and tiny magnitudes, rounding ties at the tenth digit
    {"temperature": 1234567.8915, "share": 0.99999999995, "step": 1e-300, "size": 9.9999999995e-5,
     "values": [0.5, 1.5, 2.5, 12345.678905, 1e22, 1e-22]},
], ids=["full", "none-and-empty", "numpy-scalars", "numpy-arrays", "odd-values", "rounding"])
def test_field_types_identical(changes, units):
    schema = AllFieldsSchema()
    identical(schema, _full(**changes), units)


def _wide(shape: tuple[int, ...], seed: int) -> np.ndarray:
    """Random values over the float64 range (short of overflow in unit conversions), with
    zeros, signed zeros, NaN, infinities and subnormals sprinkled in."""
    rng = np.random.default_rng(seed)
    values = rng.standard_normal(shape) * 10.0 ** rng.integers(-320, 296, shape)
    flat = values.reshape(-1)
    specials = [0.0, -0.0, math.nan, math.inf, -math.inf, 5e-324, -2.5e-310, 1e300]
    flat[rng.choice(flat.size, len(specials), replace=False)] = specials
    return values


@pytest.mark.parametrize("seed", range(4))
def test_large_arrays_identical(seed):
    # arrays above the small-array size take the table-of-powers rounding
    assert dumping._powers_of_ten() is not None
    arrays = {"values": _wide((9,), seed), "temperatures": _wide((37, 41), seed + 10),
              "size": _wide((3, 5, 7), seed + 20), "share": _wide((300,), seed + 30),
              "temperature": np.asfortranarray(_wide((20, 30), seed + 40)) * 1e-300}
    for units in UNITS:
        identical(AllFieldsSchema(), _full(**arrays), units)


def test_missing_attributes_are_left_out():
    schema = AllFieldsSchema()
    # an object, not a dict: marshmallow would read a dict's missing "values" as dict.values
    sparse = types.SimpleNamespace(label="only this", inner={})
    body = identical(schema, sparse, OutputUnits())
    # missing values are left out; dump_default fills in where one is set
    assert list(body) == ["label", "defaulted", "called"]
    assert body["called"] == "made"


class _Record:
    """An object read by attribute, with one property and one missing attribute."""

    def __init__(self) -> None:
        self.label = "bracket"
        self.count = 2
        self.size = 0.25

    @property
    def temperature(self) -> float:
        return 99.5


class _Keyed:
    """Has __getitem__ that fails for some keys: marshmallow falls back to attributes."""

    label = "from attribute"

    def __getitem__(self, key: str) -> Any:
        if key == "count":
            return 5
        raise KeyError(key)


class _DefaultDict(dict):
    def __missing__(self, key: str) -> Any:
        return 1.5 if key == "share" else None


@pytest.mark.parametrize("obj", [_Record(), _Keyed(), _DefaultDict(label="d"), None],
                         ids=["attributes", "keyed", "dict-subclass", "none"])
def test_objects_and_mappings_read_like_marshmallow(obj):
    identical(AllFieldsSchema(), obj, OutputUnits.from_mapping({"temperature": "degF"}))


class HookedSchema(Schema):
    value = Quantity("temperature")
    note = fields.String()

    @pre_dump
    def _wrap(self, obj: Any, **kwargs: Any) -> dict[str, Any]:
        return {"value": obj["t"], "note": "hooked"}

    @post_dump
    def _add(self, data: dict[str, Any], **kwargs: Any) -> dict[str, Any]:
        data["extra"] = [1, 2]
        return data

    @post_dump(pass_collection=True, pass_original=True)
    def _envelope(self, data: Any, original: Any, many: bool, **kwargs: Any) -> Any:
        return {"items": data, "count": len(original)} if many else data


class HolderSchema(Schema):
    one = fields.Nested(HookedSchema)
    several = fields.Nested(HookedSchema, many=True)
    listed = fields.List(fields.Nested(HookedSchema))


def test_hooks_and_many():
    obj = {"one": {"t": 10.0}, "several": [{"t": 1.0}, {"t": 2.0}], "listed": [{"t": 3.0}]}
    body = identical(HolderSchema(), obj, OutputUnits.from_mapping({"temperature": "degF"}))
    assert body["several"]["count"] == 2
    identical(HookedSchema(many=True), [{"t": 5.0}], OutputUnits())


# --------------------------------------------------------------------------- fallback


class Celsius100(Quantity):
    """A subclass the compiler must not treat as a Quantity: it changes _serialize."""

    calls = 0

    def _serialize(self, value: Any, attr: str | None, obj: Any, **kwargs: Any) -> Any:
        Celsius100.calls += 1
        return None if value is None else f"{value:.1f} (custom)"


class UnknownFieldsSchema(Schema):
    custom = Celsius100("temperature")
    custom_in_list = fields.List(Celsius100("temperature"))
    when = fields.DateTime()
    method = fields.Method("_describe")
    constant = fields.Constant("fixed")
    known = Quantity("temperature")

    def _describe(self, obj: Any) -> str:
        return f"known is {obj['known']}"


def test_unknown_fields_fall_back_to_marshmallow():
    obj = {"custom": 21.0, "custom_in_list": [1.0, 2.0], "known": 100.0,
           "when": datetime.datetime(2026, 1, 2, 3, 4, 5)}
    before = Celsius100.calls
    body = identical(UnknownFieldsSchema(), obj, OutputUnits.from_mapping({"temperature": "K"}))
    assert body["custom"] == "21.0 (custom)" and body["constant"] == "fixed"
    # both dumps went through the field's own _serialize (1 + 2 values each)
    assert Celsius100.calls - before == 6


class OwnAccessSchema(Schema):
    value = Quantity("length")

    def get_attribute(self, obj: Any, attr: str, default: Any) -> Any:
        return 2.0 if attr == "value" else default


def test_schema_with_own_attribute_access_falls_back():
    body = identical(OwnAccessSchema(), {}, OutputUnits.from_mapping({"length": "mm"}))
    np.testing.assert_allclose(body["value"], 2000.0, rtol=0, atol=1e-12)  # 2 m in mm, SI


# --------------------------------------------------------------------------- the machinery


def test_dumper_is_kept_per_class():
    assert compiled_dumper(PointSchema()) is compiled_dumper(PointSchema())
    assert compiled_dumper(PointSchema(only=("x",))) is not compiled_dumper(PointSchema())


def test_remembered_arrays_are_not_shared():
    schema = PointSchema()
    first = dumping.dump(schema, {"x": [0.5, 0.25]}, OutputUnits())
    first["x"][0] = -1.0
    second = dumping.dump(schema, {"x": [0.5, 0.25]}, OutputUnits())
    assert dump_difference(np.array([0.5, 0.25]), second["x"]) is None


@pytest.mark.parametrize(("expected", "actual"), [
    (1, 1.0), ([1.0], (1.0,)), ({"a": 1, "b": 2}, {"b": 2, "a": 1}), (0.0, -0.0),
    (np.array([1.0]), np.array([1.0], dtype=np.float32)), (np.array([1.0]), np.array([[1.0]])),
    (np.array([0.0, 1.0]), np.array([-0.0, 1.0])), ({"a": [1.0, 2.0]}, {"a": [1.0, 2.0000001]}),
    (np.float64(1.0), 1.0), (None, 0.0), ("a", "b"),
])
def test_difference_found(expected, actual):
    assert dump_difference(expected, actual) is not None


@pytest.mark.parametrize("value", [
    {"a": [1.0, math.nan, (2, "x")], "b": None}, np.array([[math.nan, -0.0], [1.0, 2.0]]),
    math.nan, np.float32(math.nan), np.array(["a", "b"]), np.array([{"a": 1}], dtype=object),
])
def test_no_difference_for_identical(value):
    assert dump_difference(value, copy.deepcopy(value)) is None


def test_reference_check_is_on_and_raises(monkeypatch):
    # the whole suite's identity proof rests on this switch being on (tests/conftest.py)
    enabled, count, _ = dumping.reference_checks()
    assert enabled
    monkeypatch.setattr(dumping, "_MISMATCHES", [])  # this mismatch is meant
    wrong = {"x": 1.0}

    class Broken:
        def __call__(self, obj: Any, units: OutputUnits) -> Any:
            return wrong

    monkeypatch.setattr(dumping, "compiled_dumper", lambda schema: Broken())
    with pytest.raises(DumpMismatchError, match="PointSchema"):
        dumping.dump(PointSchema(), {"x": 2.0}, OutputUnits())
    assert dumping.reference_checks()[1:] == (count, ("PointSchema: compiled dump differs from "
                                                     "marshmallow's at $.x: 2.0 expected, 1.0 "
                                                     "found",))


def test_reference_check_is_off_outside_the_tests():
    # the server (and the integration tests' gunicorn) dumps once, without marshmallow
    code = ("from service.app import create_app; from schemas.dumping import reference_checks; "
            "create_app(); print(reference_checks())")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True, cwd=pathlib.Path(__file__).parents[2])
    assert out.stdout.strip().splitlines()[-1] == "(False, 0, ())"
