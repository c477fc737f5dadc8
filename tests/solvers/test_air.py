"""Air-side coefficients: published worked examples, the property table against independent
fits, correlation limits and the monotonic loss the layers root finder relies on."""

from __future__ import annotations

import numpy as np
import pytest

from service.solvers import air
from service.solvers.air import (
    KELVIN,
    STEFAN_BOLTZMANN,
    air_coefficient,
    air_properties,
    combined_nusselt,
    cylinder_crossflow,
    horizontal_cylinder_natural,
    horizontal_plate_natural,
    plate_forced,
    radiative_coefficient,
    sphere_forced,
    sphere_natural,
    vertical_plate_natural,
)
from tests.solvers.reference_layers import AIR_CASES

SCREEN = next(c for c in AIR_CASES if c.id == "stove-glass-screen")
ROD = next(c for c in AIR_CASES if c.id == "heated-rod-cross-flow")


def test_churchill_chu_vertical_plate_published():
    nu = vertical_plate_natural(SCREEN.inputs["rayleigh"], SCREEN.inputs["prandtl"])
    # Source: SCREEN.source (Incropera worked example, from memory): Nu = 147.
    np.testing.assert_allclose(nu, SCREEN.expected["nusselt"], **SCREEN.tolerances("nusselt"))


def test_vertical_surface_coefficient_published():
    c = air_coefficient(SCREEN.inputs["surface_temperature"], SCREEN.inputs["ambient"],
                        shape="plane", orientation="vertical",
                        characteristic_length=SCREEN.inputs["height"])
    # Source: SCREEN.source: Ra = 1.813e9, h = 7.0 W/(m^2 K).
    np.testing.assert_allclose(c.rayleigh, SCREEN.expected["rayleigh"],
                               **SCREEN.tolerances("rayleigh"))
    np.testing.assert_allclose(c.convective_coefficient, SCREEN.expected["convective_coefficient"],
                               **SCREEN.tolerances("convective_coefficient"))
    assert "Churchill-Chu" in c.correlation


def test_churchill_bernstein_published():
    nu = cylinder_crossflow(ROD.inputs["reynolds"], ROD.inputs["prandtl"])
    # Source: ROD.source (Incropera worked example, from memory): Nu = 40.6.
    np.testing.assert_allclose(nu, ROD.expected["nusselt"], **ROD.tolerances("nusselt"))


def test_property_table_prandtl_column_consistent():
    # Transcription check: mu cp / k from the transcribed columns against the table's own
    # Prandtl column (Incropera Table A.4, from memory); a typo in any column shows here.
    t = np.array(air._TABLE_T)
    pr = (np.array(air._TABLE_VISCOSITY) * np.array(air._TABLE_SPECIFIC_HEAT)
          / np.array(air._TABLE_CONDUCTIVITY))
    np.testing.assert_allclose(pr, np.array(air._TABLE_PRANDTL), rtol=2e-3, atol=0)
    # Densities follow the ideal gas law at about 100 kPa, R = 287.05 J/(kg K) (common
    # practice), above 200 K.
    hot = t >= 200.0
    np.testing.assert_allclose(np.array(air._TABLE_DENSITY)[hot] * 287.05 * t[hot], 1e5,
                               rtol=3e-3, atol=0)


@pytest.mark.parametrize("temperature_k", [200.0, 275.0, 300.0, 425.0, 640.0, 1000.0, 1150.0])
def test_properties_against_sutherland(temperature_k):
    p = air_properties(temperature_k - KELVIN)
    # Sutherland's laws for air (White, Viscous Fluid Flow, from memory): mu0 = 1.716e-5 Pa s,
    # k0 = 0.0241 W/(m K) at 273 K, S = 111 K (viscosity) and 194 K (conductivity). The fits
    # are good to about 2 % (viscosity) and 3 % (conductivity) over this range.
    ratio = (temperature_k / 273.0) ** 1.5
    mu = 1.716e-5 * ratio * (273.0 + 111.0) / (temperature_k + 111.0)
    k = 0.0241 * ratio * (273.0 + 194.0) / (temperature_k + 194.0)
    np.testing.assert_allclose(p.viscosity, mu, rtol=0.025, atol=0)
    np.testing.assert_allclose(p.conductivity, k, rtol=0.03, atol=0)
    assert not p.extrapolated


def test_extrapolation_warns():
    c = air_coefficient(2000.0, 20.0, shape="cylinder", diameter=0.3, emissivity=0.8)
    assert any("outside the property table" in w for w in c.warnings)
    assert air_properties(1500.0).extrapolated


def test_conduction_limits_of_sphere_correlations():
    # Ra -> 0 and Re -> 0: Nu -> 2, pure conduction from a sphere into still, infinite air
    # (textbook, from memory).
    np.testing.assert_allclose(sphere_natural(0.0, 0.71), 2.0, rtol=1e-15, atol=0)
    np.testing.assert_allclose(sphere_forced(0.0, 0.71, 1.0), 2.0, rtol=1e-15, atol=0)


def test_piecewise_correlations_are_continuous():
    # The larger-of-two-branches forms used for horizontal plates and plates in wind are
    # continuous at their crossing (common practice, no source; needed by the root finder).
    ra = 3.6 ** 12
    lo, hi = horizontal_plate_natural(ra * (1 - 1e-9), True), horizontal_plate_natural(
        ra * (1 + 1e-9), True)
    np.testing.assert_allclose(lo, hi, rtol=1e-8, atol=0)
    res = np.linspace(4.0e5, 6.0e5, 2001)
    nus = np.array([plate_forced(r, 0.7) for r in res])
    assert np.max(np.abs(np.diff(nus))) < 0.2


def test_combined_nusselt_limits():
    # Nu^3 = F^3 + N^3: either mechanism alone gives itself (Churchill 1977, by construction).
    np.testing.assert_allclose(combined_nusselt(40.0, 0.0), 40.0, rtol=1e-15, atol=0)
    np.testing.assert_allclose(combined_nusselt(0.0, 12.0), 12.0, rtol=1e-15, atol=0)
    np.testing.assert_allclose(horizontal_cylinder_natural(0.0, 0.7), 0.36, rtol=1e-15, atol=0)


def test_radiative_coefficient_identity():
    ts, tsur, eps = 180.0, -5.0, 0.85
    h_r = radiative_coefficient(ts, tsur, eps)
    # h_r (Ts - Tsur) = eps sigma (Ts^4 - Tsur^4) exactly (definition, Incropera Eq. 1.9).
    np.testing.assert_allclose(h_r * (ts - tsur),
                               eps * STEFAN_BOLTZMANN * ((ts + KELVIN) ** 4 - (tsur + KELVIN) ** 4),
                               rtol=1e-13, atol=0)


CONFIGS = [
    dict(shape="plane", orientation="vertical", characteristic_length=2.0),
    dict(shape="plane", orientation="facing_up", characteristic_length=0.5),
    dict(shape="plane", orientation="facing_down", characteristic_length=0.5),
    dict(shape="plane", orientation="vertical", wind_speed=4.0),
    dict(shape="cylinder", diameter=0.2),
    dict(shape="cylinder", diameter=0.2, wind_speed=2.0),
    dict(shape="cylinder", diameter=0.05, orientation="vertical", characteristic_length=3.0),
    dict(shape="sphere", diameter=1.5),
    dict(shape="sphere", diameter=1.5, wind_speed=6.0),
]


@pytest.mark.parametrize("config", CONFIGS, ids=lambda c: "-".join(str(v) for v in c.values()))
def test_heat_loss_increases_with_surface_temperature(config):
    # The layers solver brackets the surface temperature and needs a loss that rises with it
    # (common practice, no source). Surfaces colder and hotter than the air.
    temps = np.linspace(-60.0, 600.0, 661)
    loss = np.array([air_coefficient(t, 20.0, emissivity=0.7, **config).heat_flux
                     for t in temps])
    assert np.all(np.diff(loss) > 0)
    np.testing.assert_allclose(air_coefficient(20.0, 20.0, emissivity=0.7, **config).heat_flux,
                               0.0, rtol=0, atol=1e-12)


def test_cold_face_up_uses_stable_correlation():
    cold = air_coefficient(5.0, 25.0, shape="plane", orientation="facing_up",
                           characteristic_length=0.5)
    hot = air_coefficient(45.0, 25.0, shape="plane", orientation="facing_down",
                          characteristic_length=0.5)
    assert "stable face" in cold.correlation and "stable face" in hot.correlation


def test_slender_vertical_cylinder_warns():
    c = air_coefficient(60.0, 20.0, shape="cylinder", orientation="vertical", diameter=0.005,
                        characteristic_length=2.0)
    assert any("slender" in w for w in c.warnings)
