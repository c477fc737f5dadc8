"""Fin solver: published example, textbook formulas, solve_bvp of the fin equations, the annular
efficiency formula in mpmath, overflow-free extremes, arrays, safety and input rules."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest
from scipy.integrate import solve_bvp
from scipy.optimize import brentq

from service.solvers.errors import IllPosedError
from service.solvers.fin import FinProblem, solve_fin
from service.solvers.safety import Limits
from tests.solvers.reference_layers import FIN_CASES

STRAIGHT = dict(shape="straight", conductivity=200.0, film_coefficient=25.0,
                base_temperature=100.0, ambient=25.0, length=0.05, thickness=0.002, width=1.0)
PIN = dict(shape="pin", conductivity=50.0, film_coefficient=40.0, base_temperature=150.0,
           ambient=20.0, length=0.08, diameter=0.006)
ANNULAR = dict(shape="annular", conductivity=180.0, film_coefficient=60.0,
               base_temperature=120.0, ambient=30.0, inner_radius=0.0125,
               outer_radius=0.035, thickness=0.001)


def fin(**kwargs) -> FinProblem:
    return FinProblem(**kwargs)


def straight_m(p: dict) -> float:
    area = p["thickness"] * p["width"] if p["shape"] == "straight" else math.pi * p[
        "diameter"] ** 2 / 4
    perimeter = (2 * (p["thickness"] + p["width"]) if p["shape"] == "straight"
                 else math.pi * p["diameter"])
    return math.sqrt(p["film_coefficient"] * perimeter / (p["conductivity"] * area)), area


@pytest.mark.parametrize("case", FIN_CASES, ids=lambda c: c.id)
def test_published_long_rods(case):
    res = solve_fin(fin(**case.inputs))
    # Source: case.source (see tests/solvers/reference_layers.py).
    np.testing.assert_allclose(res.heat_flow, case.expected["heat_flow"],
                               **case.tolerances("heat_flow"))


@pytest.mark.parametrize("base", [STRAIGHT, PIN], ids=["straight", "pin"])
def test_insulated_tip_efficiency_tanh(base):
    res = solve_fin(fin(**base, tip="insulated"))
    m, _ = straight_m(base)
    ml = m * base["length"]
    # eta = tanh(mL)/(mL) (textbook, from memory: Incropera Eq. 3.89).
    np.testing.assert_allclose(res.efficiency, math.tanh(ml) / ml, rtol=1e-13, atol=0)


def test_infinite_pin_effectiveness():
    res = solve_fin(fin(**PIN, tip="infinite"))
    m, area = straight_m(PIN)
    perimeter = math.pi * PIN["diameter"]
    # Infinite fin: q = sqrt(h P k A) theta_b, effectiveness sqrt(k P / (h A)) (textbook, from
    # memory).
    np.testing.assert_allclose(res.heat_flow, math.sqrt(40.0 * perimeter * 50.0 * area) * 130.0,
                               rtol=1e-13, atol=0)
    np.testing.assert_allclose(res.effectiveness, math.sqrt(50.0 * perimeter / (40.0 * area)),
                               rtol=1e-13, atol=0)
    assert res.efficiency is None
    np.testing.assert_allclose(res.tip_temperature, 20.0, rtol=0, atol=0)


def bvp_uniform(p: dict, tip: str, tip_temperature: float = 0.0) -> tuple[np.ndarray, float]:
    """theta'' = m^2 theta on [0, L] with scipy.integrate.solve_bvp (independent)."""
    m, area = straight_m(p)
    k, h, length = p["conductivity"], p["film_coefficient"], p["length"]
    tb = p["base_temperature"] - p["ambient"]

    def f(x, y):
        return np.vstack([y[1], m * m * y[0]])

    def bc(ya, yb):
        if tip == "convective":
            return np.array([ya[0] - tb, k * yb[1] + h * yb[0]])
        return np.array([ya[0] - tb, yb[0] - (tip_temperature - p["ambient"])])

    x = np.linspace(0, length, 21)
    tl = tip_temperature - p["ambient"] if tip == "temperature" else 0.0
    guess = np.vstack([tb + (tl - tb) * x / length, (tl - tb) / length + 0 * x])
    sol = solve_bvp(f, bc, x, guess, tol=1e-8, max_nodes=100000)
    assert sol.success
    return sol, -k * area * float(sol.sol(0.0)[1])


def test_convective_tip_against_solve_bvp():
    res = solve_fin(fin(**STRAIGHT, tip="convective"))
    sol, q = bvp_uniform(STRAIGHT, "convective")
    # Independent: scipy.integrate.solve_bvp of theta'' = m^2 theta, -k theta'(L) = h theta(L).
    np.testing.assert_allclose(res.heat_flow, q, rtol=1e-7, atol=0)
    np.testing.assert_allclose(res.profile.temperatures,
                               25.0 + sol.sol(res.profile.positions)[0], rtol=0, atol=1e-7)


def test_fixed_tip_against_solve_bvp_and_interior_minimum():
    res = solve_fin(fin(**PIN, tip="temperature", tip_temperature=120.0,
                        limits=Limits(min_temperature=30.0)))
    sol, q = bvp_uniform(PIN, "temperature", 120.0)
    # Independent: scipy.integrate.solve_bvp.
    np.testing.assert_allclose(res.heat_flow, q, rtol=1e-7, atol=0)
    np.testing.assert_allclose(res.tip_temperature, 120.0, rtol=0, atol=1e-12)
    # Interior minimum where theta' = 0 (brentq on the solve_bvp derivative, independent).
    x_min = brentq(lambda x: float(sol.sol(x)[1]), 1e-6, PIN["length"] - 1e-6, xtol=1e-14)
    check = res.safety.checks[0]
    assert check.limit == "min_temperature"
    assert check.where.description == "fin interior"
    np.testing.assert_allclose(check.where.position[0], x_min, rtol=1e-5, atol=0)
    np.testing.assert_allclose(check.extreme, 20.0 + float(sol.sol(x_min)[0]), rtol=0, atol=1e-7)


def test_tip_coefficient_zero_equals_insulated():
    a = solve_fin(fin(**STRAIGHT, tip="convective", tip_film_coefficient=0.0))
    b = solve_fin(fin(**STRAIGHT, tip="insulated"))
    # Limiting case (common practice, no source).
    np.testing.assert_allclose(a.heat_flow, b.heat_flow, rtol=1e-14, atol=0)


def test_long_fins_do_not_overflow():
    # mL about 2000: hyperbolic functions would overflow; every tip tends to the infinite fin.
    long_fin = dict(STRAIGHT, conductivity=0.5, film_coefficient=500.0, length=2.0)
    inf = solve_fin(fin(**long_fin, tip="infinite"))
    for tip, extra in (("insulated", {}), ("convective", {}),
                       ("temperature", {"tip_temperature": 25.0})):
        res = solve_fin(fin(**long_fin, tip=tip, **extra))
        assert res.fin_parameter * 2.0 > 1000
        assert np.all(np.isfinite(res.profile.temperatures))
        # Limit mL -> infinity (common practice, no source).
        np.testing.assert_allclose(res.heat_flow, inf.heat_flow, rtol=1e-12, atol=0)


def test_short_fin_limit():
    # mL -> 0: q -> h (P L + A_c) theta_b for a convective tip, efficiency -> 1 (limit of the
    # closed form, common practice).
    tiny = dict(STRAIGHT, length=1e-7)
    res = solve_fin(fin(**tiny, tip="convective"))
    # The departure from 1 is of order h L / k = 1.25e-8 here.
    np.testing.assert_allclose(res.efficiency, 1.0, rtol=5e-8, atol=0)
    fixed = solve_fin(fin(**tiny, tip="temperature", tip_temperature=100.0))
    assert math.isfinite(fixed.heat_flow)


def annular_efficiency_mpmath(m: float, r1: float, r2: float) -> float:
    """eta = (2 r1 / m)/(r2^2 - r1^2) [K1(m r1) I1(m r2) - I1(m r1) K1(m r2)] /
    [I0(m r1) K1(m r2) + K0(m r1) I1(m r2)] (Incropera Table 3.5, from memory), in mpmath at
    50 digits."""
    mpmath.mp.dps = 50
    m, r1, r2 = mpmath.mpf(m), mpmath.mpf(r1), mpmath.mpf(r2)
    i0, i1, k0, k1 = (lambda z: mpmath.besseli(0, z), lambda z: mpmath.besseli(1, z),
                      lambda z: mpmath.besselk(0, z), lambda z: mpmath.besselk(1, z))
    num = k1(m * r1) * i1(m * r2) - i1(m * r1) * k1(m * r2)
    den = i0(m * r1) * k1(m * r2) + k0(m * r1) * i1(m * r2)
    return float(2 * r1 / m / (r2**2 - r1**2) * num / den)


@pytest.mark.parametrize("r2,k", [(0.035, 180.0), (0.06, 15.0), (0.3, 1.0)])
def test_annular_insulated_efficiency_against_mpmath(r2, k):
    res = solve_fin(fin(**dict(ANNULAR, outer_radius=r2, conductivity=k), tip="insulated"))
    m = math.sqrt(2 * 60.0 / (k * 0.001))
    # Table formula evaluated independently with mpmath.
    np.testing.assert_allclose(res.efficiency, annular_efficiency_mpmath(m, 0.0125, r2),
                               rtol=1e-12, atol=0)


def test_annular_convective_against_solve_bvp():
    res = solve_fin(fin(**ANNULAR, tip="convective"))
    k, h, t = 180.0, 60.0, 0.001
    m2 = 2 * h / (k * t)
    r1, r2 = 0.0125, 0.035

    def f(r, y):
        return np.vstack([y[1], m2 * y[0] - y[1] / r])

    def bc(ya, yb):
        return np.array([ya[0] - 90.0, k * yb[1] + h * yb[0]])
    r = np.linspace(r1, r2, 21)
    sol = solve_bvp(f, bc, r, np.vstack([90.0 + 0 * r, 0 * r]), tol=1e-10, max_nodes=100000)
    assert sol.success
    q = -k * 2 * math.pi * r1 * t * float(sol.sol(r1)[1])
    # Independent: scipy.integrate.solve_bvp of (1/r)(r theta')' = m^2 theta.
    np.testing.assert_allclose(res.heat_flow, q, rtol=1e-7, atol=0)
    np.testing.assert_allclose(res.profile.temperatures, 30.0 + sol.sol(res.profile.positions)[0],
                               rtol=0, atol=1e-7)


def test_annular_large_arguments_scaled_bessel():
    # m r2 about 3e4: I0 and K0 themselves overflow/underflow; the scaled forms do not. Far
    # from the base the fin behaves as an infinite annular fin (limit, common practice).
    big = dict(ANNULAR, conductivity=0.2, film_coefficient=2000.0, outer_radius=0.1,
               inner_radius=0.05)
    inf = solve_fin(fin(**big, tip="infinite"))
    for tip in ("insulated", "convective"):
        res = solve_fin(fin(**big, tip=tip))
        assert np.all(np.isfinite(res.profile.temperatures))
        np.testing.assert_allclose(res.heat_flow, inf.heat_flow, rtol=1e-12, atol=0)
    # Infinite annular fin: q = 2 pi r1 t k m theta_b K1(m r1)/K0(m r1) (mpmath, independent).
    m = math.sqrt(2 * 2000.0 / (0.2 * 0.001))
    mpmath.mp.dps = 30
    ratio = float(mpmath.besselk(1, m * 0.05) / mpmath.besselk(0, m * 0.05))
    np.testing.assert_allclose(inf.heat_flow, 2 * math.pi * 0.05 * 0.001 * 0.2 * m * 90.0 * ratio,
                               rtol=1e-12, atol=0)


def test_annular_tends_to_straight_fin_at_large_radius():
    # r1 -> infinity: an annular fin becomes a straight fin of length r2 - r1 with P = 2w:
    # eta -> tanh(mL)/(mL), m = sqrt(2h/(kt)) (limit, common practice).
    res = solve_fin(fin(**dict(ANNULAR, inner_radius=1e4, outer_radius=1e4 + 0.02),
                        tip="insulated"))
    m = math.sqrt(2 * 60.0 / (180.0 * 0.001))
    np.testing.assert_allclose(res.efficiency, math.tanh(m * 0.02) / (m * 0.02), rtol=1e-5,
                               atol=0)


def test_array_overall_efficiency():
    res = solve_fin(fin(**ANNULAR, tip="convective", count=12, base_area=0.01))
    arr = res.array
    theta_b = 90.0
    # q_t = N q_f + h A_b theta_b and eta_o = 1 - (N A_f / A_t)(1 - eta_f) = q_t/(h A_t theta_b)
    # (Incropera Eqs. 3.102-3.103, from memory).
    np.testing.assert_allclose(arr.heat_flow, 12 * res.heat_flow + 60.0 * 0.01 * theta_b,
                               rtol=1e-14, atol=0)
    np.testing.assert_allclose(arr.overall_efficiency,
                               arr.heat_flow / (60.0 * arr.total_area * theta_b), rtol=1e-12,
                               atol=0)
    np.testing.assert_allclose(arr.total_area, 12 * res.fin_area + 0.01, rtol=1e-14, atol=0)
    assert res.efficiency < arr.overall_efficiency < 1.0


def test_zero_excess_base():
    res = solve_fin(fin(**dict(STRAIGHT, base_temperature=25.0), tip="convective"))
    ref = solve_fin(fin(**STRAIGHT, tip="convective"))
    np.testing.assert_allclose(res.heat_flow, 0.0, rtol=0, atol=0)
    # Efficiency does not depend on the base excess (linear problem, common practice).
    np.testing.assert_allclose(res.efficiency, ref.efficiency, rtol=1e-14, atol=0)


def test_thick_fin_warns():
    res = solve_fin(fin(**dict(STRAIGHT, conductivity=0.2, thickness=0.01), tip="insulated"))
    assert any("Biot" in w for w in res.warnings)
    assert any("effectiveness" in n for n in res.notes)


def test_safety_base_is_hottest():
    res = solve_fin(fin(**STRAIGHT, tip="convective", limits=Limits(max_surface_temperature=60.0,
                                                                   max_temperature=90.0)))
    assert res.safety.status == "exceeded"
    for check in res.safety.checks:
        assert check.where.description == "fin base"
        np.testing.assert_allclose(check.extreme, 100.0, rtol=0, atol=0)


@pytest.mark.parametrize("kwargs,field", [
    (dict(PIN, diameter=None), "diameter"),
    (dict(PIN, length=None), "length"),
    (dict(ANNULAR, outer_radius=0.01), "outer_radius"),
    (dict(STRAIGHT, thickness=-1.0), "thickness"),
    (dict(STRAIGHT, shape="spine"), "shape"),
    (dict(STRAIGHT, conductivity=0.0), "conductivity"),
    (dict(STRAIGHT, count=0), "count"),
    (dict(STRAIGHT, base_area=-1.0), "base_area"),
    (dict(STRAIGHT, tip="temperature"), "tip.temperature"),
    (dict(STRAIGHT, tip="pointed"), "tip"),
])
def test_input_rules(kwargs, field):
    with pytest.raises(IllPosedError) as err:
        solve_fin(fin(**kwargs))
    assert err.value.field == field
