"""Unit parsing and output conversion."""

from __future__ import annotations

import numpy as np
import pytest

from schemas.units import OutputUnits, UnitError, parse_quantity, round_significant


@pytest.mark.parametrize(("text", "kind", "expected"), [
    ("150 mm", "length", 0.15),                     # SI definition
    ("6 in", "length", 0.1524),                     # 1 in = 25.4 mm exactly (SI definition)
    ("300 degF", "temperature", 148.88888888888889),  # (300 - 32) * 5/9, exact definition
    ("273.15 K", "temperature", 0.0),               # definition of degC
    ("491.67 degR", "temperature", 0.0),            # definition of degR
    ("18 degF", "temperature_difference", 10.0),    # a step of 18 degF is 10 K
    ("10 degC", "temperature_difference", 10.0),
    # 1 BTU/(h ft degF) = 1.730735 W/(m K) (international table BTU; handbook conversion
    # tables, from memory)
    ("1 BTU/(h*ft*degF)", "conductivity", 1.730735),
    ("2 h", "time", 7200.0),
    ("1 kW/m^2", "heat_flux", 1000.0),
    ("5 W/(m^2*degC)", "film_coefficient", 5.0),
])
def test_parse_quantity(text, kind, expected):
    np.testing.assert_allclose(parse_quantity(text, kind), expected, rtol=2e-6, atol=1e-9)


@pytest.mark.parametrize(("text", "kind", "message"), [
    ("5 kg", "length", "not a unit of length"),
    ("5 furlongz", "length", "unknown unit"),
    ("5", "length", "must carry a unit"),
    ("hot", "temperature", "expected a number"),
    ("1e999 m", "length", "not finite"),
])
def test_parse_quantity_rejects(text, kind, message):
    with pytest.raises(UnitError, match=message):
        parse_quantity(text, kind)


def test_output_units_convert_temperature_and_difference():
    units = OutputUnits.from_mapping({"temperature": "degF", "length": "in"})
    # 100 degC = 212 degF; a 10 K step is 18 degF; 0.0254 m = 1 in (definitions)
    np.testing.assert_allclose(units.convert("temperature", 100.0), 212.0, rtol=1e-12, atol=0)
    np.testing.assert_allclose(units.convert("temperature_difference", 10.0), 18.0, rtol=1e-12,
                               atol=0)
    np.testing.assert_allclose(units.convert("length", np.array([0.0254])), [1.0], rtol=1e-12,
                               atol=0)
    assert units.unit("temperature_difference") == "delta_degF"
    assert units.unit("heat_flux") == "W/m^2"


def test_output_units_reject_wrong_dimension():
    with pytest.raises(UnitError, match="not a unit of temperature"):
        OutputUnits.from_mapping({"temperature": "m"})


def test_round_significant_keeps_non_finite_and_shape():
    out = round_significant(np.array([[1.23456789012345, np.nan], [-0.000123456789012345, 0.0]]))
    assert out.shape == (2, 2)
    np.testing.assert_allclose(out[0, 0], 1.234567890, rtol=0, atol=1e-12)
    np.testing.assert_allclose(out[1, 0], -0.0001234567890, rtol=1e-12, atol=0)
    assert np.isnan(out[0, 1])
