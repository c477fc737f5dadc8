"""Layers solver: published examples, an independent solve_bvp solution, limiting cases,
solve_for round trips, critical radius, safety, convergence and input rules."""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.integrate import solve_bvp

from service.solvers.air import KELVIN, STEFAN_BOLTZMANN, air_coefficient
from service.solvers.errors import IllPosedError
from service.solvers.layers import (
    DesignTarget,
    Layer,
    LayersProblem,
    SolveFor,
    SurfaceCondition,
    build_stack,
    march,
    shape_integrals,
    solve_layers,
    temperature_change,
)
from service.solvers.safety import Limits
from tests.solvers.reference_layers import CRITICAL_RADIUS_CASE, LAYER_CASES


def make_problem(inputs: dict, **overrides) -> LayersProblem:
    """Build the frozen input from a request-shaped dict (as the schema's post_load will)."""
    data = dict(inputs)
    data.update(overrides)
    data["layers"] = tuple(Layer(**lay) if isinstance(lay, dict) else lay
                           for lay in data["layers"])
    for side in ("inside", "outside"):
        if isinstance(data[side], dict):
            data[side] = SurfaceCondition(**data[side])
    data["contact_resistances"] = tuple(data.get("contact_resistances", ()))
    return LayersProblem(**data)


PIPE = dict(
    geometry="cylinder", inner_radius=0.0545,
    layers=[dict(thickness=0.004, conductivity=45.0, name="pipe"),
            dict(thickness=0.05, conductivity=0.04, name="insulation", max_temperature=650.0)],
    inside=dict(type="convection", film_coefficient=1000.0, ambient=250.0),
    outside=dict(type="convection_radiation", film_coefficient=8.0, ambient=20.0,
                 emissivity=0.9, surroundings=20.0),
)


# ------------------------------------------------------------------------------------------------
# Published worked examples
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("case", LAYER_CASES, ids=lambda c: c.id)
def test_published_examples(case):
    res = solve_layers(make_problem(case.inputs))
    assert res.convergence.converged
    got = {"heat_flow": res.heat_flow, "inside_surface": res.surfaces[0].temperature,
           "outside_surface": res.surfaces[1].temperature}
    if res.interfaces:
        got["interface"] = res.interfaces[0].temperature_inner_side
    if case.id == "steam-main-glass-wool":
        got["pipe_drop"] = res.layers[0].inner_temperature - res.layers[0].outer_temperature
        got["insulation_drop"] = (res.layers[1].inner_temperature
                                  - res.layers[1].outer_temperature)
    if case.id == "sensor-chip-epoxy-joint":
        got["chip_temperature"] = res.layers[0].hottest_temperature
    for key, expected in case.expected.items():
        # Source: case.source (see tests/solvers/reference_layers.py).
        np.testing.assert_allclose(got[key], expected, **case.tolerances(key))


def test_critical_radius_k_over_h():
    # r_c = k/h for a cylinder: common practice / textbook (CRITICAL_RADIUS_CASE.source).
    k = CRITICAL_RADIUS_CASE.inputs["conductivity"]
    h = CRITICAL_RADIUS_CASE.inputs["film_coefficient"]
    problem = make_problem(dict(
        geometry="cylinder", inner_radius=0.005,
        layers=[dict(thickness=0.002, conductivity=k, name="foam")],
        inside=dict(type="temperature", value=-10.0),
        outside=dict(type="convection", film_coefficient=h, ambient=20.0)))
    res = solve_layers(problem)
    np.testing.assert_allclose(res.critical_radius.radius,
                               CRITICAL_RADIUS_CASE.expected["critical_radius"],
                               **CRITICAL_RADIUS_CASE.tolerances("critical_radius"))
    assert res.critical_radius.insulation_increases_heat_flow
    assert any("critical radius" in note for note in res.notes)
    # And the heat flow really is largest at r_c: neighbours on both sides lose less
    # (common practice, no source: the definition of the critical radius).
    flows = []
    for r_out in (0.9 * 0.011, 0.011, 1.1 * 0.011):
        p = replace(problem, layers=(Layer(r_out - 0.005, k, "foam"),))
        flows.append(abs(solve_layers(p).heat_flow))
    assert flows[1] > flows[0] and flows[1] > flows[2]


def test_sphere_critical_radius_two_k_over_h():
    # r_c = 2k/h for a sphere (textbook, from memory).
    problem = make_problem(dict(
        geometry="sphere", inner_radius=0.002,
        layers=[dict(thickness=0.003, conductivity=0.1, name="coating")],
        inside=dict(type="temperature", value=80.0),
        outside=dict(type="convection", film_coefficient=10.0, ambient=20.0)))
    res = solve_layers(problem)
    np.testing.assert_allclose(res.critical_radius.radius, 2 * 0.1 / 10.0, rtol=1e-12, atol=0)


# ------------------------------------------------------------------------------------------------
# Closed forms (textbook formulas, from memory)
# ------------------------------------------------------------------------------------------------

def test_sphere_two_temperatures():
    # Q = 4 pi k (T1 - T2) / (1/r1 - 1/r2) (Incropera Table 3.3, from memory).
    problem = make_problem(dict(
        geometry="sphere", inner_radius=0.5,
        layers=[dict(thickness=0.1, conductivity=0.2)],
        inside=dict(type="temperature", value=-196.0),
        outside=dict(type="temperature", value=25.0)))
    res = solve_layers(problem)
    expected = 4 * math.pi * 0.2 * (-196.0 - 25.0) / (1 / 0.5 - 1 / 0.6)
    np.testing.assert_allclose(res.heat_flow, expected, rtol=1e-12, atol=0)
    # Profile: T(r) = T1 - (T1 - T2)(1/r1 - 1/r)/(1/r1 - 1/r2) (same source).
    r = res.profile.positions
    t_exact = -196.0 - (-196.0 - 25.0) * (1 / 0.5 - 1 / r) / (1 / 0.5 - 1 / 0.6)
    np.testing.assert_allclose(res.profile.temperatures, t_exact, rtol=0, atol=1e-10)


@pytest.mark.parametrize("geometry,divisor", [("cylinder", 4.0), ("sphere", 6.0)])
def test_solid_core_with_generation(geometry, divisor):
    # Solid rod / sphere with uniform generation: T(0) - T_s = g R^2 / (4k) or g R^2 / (6k),
    # and T(r) parabolic (Incropera section 3.5, from memory).
    g, k, radius = 2e6, 20.0, 0.01
    problem = make_problem(dict(
        geometry=geometry, inner_radius=0.0,
        layers=[dict(thickness=radius, conductivity=k, generation=g, name="core")],
        inside=dict(type="flux", value=0.0),
        outside=dict(type="temperature", value=50.0)))
    res = solve_layers(problem)
    np.testing.assert_allclose(res.surfaces[0].temperature - 50.0, g * radius**2 / (divisor * k),
                               rtol=1e-12, atol=0)
    r = res.profile.positions
    np.testing.assert_allclose(res.profile.temperatures,
                               50.0 + g * (radius**2 - r**2) / (divisor * k), rtol=0, atol=1e-9)
    volume = math.pi * radius**2 if geometry == "cylinder" else 4 / 3 * math.pi * radius**3
    np.testing.assert_allclose(res.heat_flow, g * volume, rtol=1e-12, atol=0)


def test_cylinder_wall_generation_interior_maximum():
    # Cylindrical shell with generation, both faces at 0 degC: T(r) = g/(4k)(r1^2 - r^2)
    # + C ln(r/r1) with C from T(r2) = 0 (Incropera Eq. 3.53 family, from memory). The
    # interior maximum is where the heat flow is zero.
    g, k, r1, r2 = 1e6, 15.0, 0.02, 0.05
    problem = make_problem(dict(
        geometry="cylinder", inner_radius=r1,
        layers=[dict(thickness=r2 - r1, conductivity=k, generation=g, name="heater")],
        inside=dict(type="temperature", value=0.0), outside=dict(type="temperature", value=0.0),
        limits=Limits(max_temperature=20.0)))
    res = solve_layers(problem)
    c = -g / (4 * k) * (r1**2 - r2**2) / math.log(r2 / r1)

    def t_exact(r):
        return g / (4 * k) * (r1**2 - r**2) + c * np.log(r / r1)
    np.testing.assert_allclose(res.profile.temperatures, t_exact(res.profile.positions),
                               rtol=0, atol=1e-10)
    r_star = math.sqrt(2 * k * c / g)           # dT/dr = 0
    np.testing.assert_allclose(res.layers[0].hottest_position, r_star, rtol=1e-12, atol=0)
    np.testing.assert_allclose(res.layers[0].hottest_temperature, t_exact(r_star), rtol=1e-12,
                               atol=0)
    check = res.safety.checks[0]
    assert check.limit == "max_temperature"
    np.testing.assert_allclose(check.extreme, t_exact(r_star), rtol=1e-12, atol=0)
    assert check.where.description == "layer 'heater' interior"


def test_linear_conductivity_plane_wall_kirchhoff():
    # k = k0 (1 + b T): q = k(T_mean) (T1 - T2) / L and
    # T(x) = -1/b + sqrt((1/b + T1)^2 - 2 b q x/(k0 b^2)) (Cengel, variable conductivity,
    # from memory).
    k0, b, length, t1, t2 = 0.5, 2e-3, 0.2, 600.0, 50.0
    problem = make_problem(dict(
        geometry="plane",
        layers=[dict(thickness=length, conductivity=k0, conductivity_slope=k0 * b,
                     name="firebrick")],
        inside=dict(type="temperature", value=t1), outside=dict(type="temperature", value=t2)))
    res = solve_layers(problem)
    q = k0 * (1 + b * 0.5 * (t1 + t2)) * (t1 - t2) / length
    np.testing.assert_allclose(res.heat_flow, q, rtol=1e-12, atol=0)
    x = res.profile.positions
    t_exact = -1 / b + np.sqrt((1 / b + t1) ** 2 - 2 * q * x / (k0 * b))
    np.testing.assert_allclose(res.profile.temperatures, t_exact, rtol=0, atol=1e-9)
    np.testing.assert_allclose(res.layers[0].mean_conductivity,
                               k0 * (1 + b * 0.5 * (t1 + t2)), rtol=1e-12, atol=0)


@pytest.mark.parametrize("geometry,r_a,r_b", [("plane", 0.0, 0.3), ("cylinder", 0.05, 0.12),
                                               ("cylinder", 1.0, 1.0 + 1e-4),
                                               ("sphere", 0.2, 0.9)])
def test_shape_integrals_against_quadrature(geometry, r_a, r_b):
    # s = int dr/A, w = int (V(r) - V(r_a))/A dr against scipy.integrate.quad (independent).
    from scipy.integrate import quad
    area, length = 2.0, 3.0

    def a(r):
        return {"plane": area, "cylinder": 2 * math.pi * length * r,
                "sphere": 4 * math.pi * r * r}[geometry]

    def v(r):
        return {"plane": area * r, "cylinder": math.pi * length * r * r,
                "sphere": 4 / 3 * math.pi * r**3}[geometry]
    s, w, vol = shape_integrals(geometry, r_a, r_b, area, length)
    np.testing.assert_allclose(s, quad(lambda r: 1 / a(r), r_a, r_b, epsabs=0,
                                       epsrel=1e-13)[0], rtol=1e-11, atol=0)
    np.testing.assert_allclose(w, quad(lambda r: (v(r) - v(r_a)) / a(r), r_a, r_b,
                                       epsabs=0, epsrel=1e-13)[0], rtol=1e-9, atol=0)
    np.testing.assert_allclose(vol, v(r_b) - v(r_a), rtol=1e-9, atol=0)


def test_temperature_change_inverts_kirchhoff():
    # phi(T) = k_a dT + slope dT^2/2 must give back dphi (common practice, no source).
    for k_a, slope, dphi in ((0.04, 1e-4, -5.0), (45.0, -0.02, 900.0), (1.0, 0.0, 3.0)):
        dt = temperature_change(k_a, slope, dphi)
        np.testing.assert_allclose(k_a * dt + 0.5 * slope * dt * dt, dphi, rtol=1e-13, atol=0)
    assert temperature_change(1.0, 1.0, -1.0) is None   # k would reach zero


# ------------------------------------------------------------------------------------------------
# Independent numerical solution: scipy.integrate.solve_bvp on the stacked layer equations
# ------------------------------------------------------------------------------------------------

def bvp_layers(problem: LayersProblem) -> tuple[float, float, float]:
    """Inside and outside surface temperatures and outward heat flow (W, whole body) from
    solve_bvp: each layer mapped to s in [0, 1], unknowns T_i(s), Q_i(s) with
    dT/ds = -Q t/(k(T) A(r)), dQ/ds = g A(r) t; interface and surface conditions as residuals.
    Written independently of the solver (no shared code besides the input dataclasses)."""
    geom, n = problem.geometry, len(problem.layers)
    start = 0.0 if geom == "plane" else problem.inner_radius
    edges = np.concatenate([[start], start + np.cumsum([lay.thickness
                                                        for lay in problem.layers])])

    def area(r):
        if geom == "plane":
            return problem.area + 0 * r
        if geom == "cylinder":
            return 2 * np.pi * problem.length * r
        return 4 * np.pi * r * r

    def k(i, t):
        lay = problem.layers[i]
        return lay.conductivity + lay.conductivity_slope * (t - lay.conductivity_temperature)

    def rhs(s, y):
        out = np.empty_like(y)
        for i, lay in enumerate(problem.layers):
            r = edges[i] + s * lay.thickness
            out[2 * i] = -y[2 * i + 1] * lay.thickness / (k(i, y[2 * i]) * area(r))
            out[2 * i + 1] = lay.generation * area(r) * lay.thickness
        return out

    def loss(cond, t):
        sur = cond.ambient if cond.surroundings is None else cond.surroundings
        rad = (cond.emissivity or 0.0) * STEFAN_BOLTZMANN * ((t + KELVIN) ** 4
                                                             - (sur + KELVIN) ** 4)
        return cond.film_coefficient * (t - cond.ambient) + rad

    def bc(ya, yb):
        res = []
        a_in, a_out = area(edges[0]), area(edges[-1])
        cin, cout = problem.inside, problem.outside
        t0, q0 = ya[0], ya[1]
        if cin.type == "temperature":
            res.append(t0 - cin.value)
        elif cin.type == "flux":
            res.append(q0 - cin.value * a_in)
        else:
            res.append(q0 + loss(cin, t0) * a_in)
        rc = problem.contact_resistances or (0.0,) * (n - 1)
        for i in range(n - 1):
            res.append(yb[2 * i + 1] - ya[2 * i + 3])
            res.append(yb[2 * i] - ya[2 * i + 2] - yb[2 * i + 1] * rc[i] / area(edges[i + 1]))
        t1, q1 = yb[2 * n - 2], yb[2 * n - 1]
        if cout.type == "temperature":
            res.append(t1 - cout.value)
        elif cout.type == "flux":
            res.append(q1 + cout.value * a_out)
        else:
            res.append(q1 - loss(cout, t1) * a_out)
        return np.array(res)

    s = np.linspace(0, 1, 11)
    y0 = np.zeros((2 * n, s.size))
    for i in range(n):
        y0[2 * i] = 100.0
        y0[2 * i + 1] = 1.0
    sol = solve_bvp(rhs, bc, s, y0, tol=1e-8, bc_tol=1e-10, max_nodes=100000)
    assert sol.success, sol.message
    return float(sol.y[0, 0]), float(sol.y[2 * n - 2, -1]), float(sol.y[2 * n - 1, -1])


BVP_CASES = {
    "pipe-radiation": PIPE,
    "furnace-wall-radiation-both-sides": dict(
        geometry="plane", area=2.0,
        layers=[dict(thickness=0.115, conductivity=1.1, conductivity_slope=4e-4,
                     name="firebrick", max_temperature=1400.0),
                dict(thickness=0.1, conductivity=0.12, conductivity_slope=1.5e-4,
                     name="insulating brick"),
                dict(thickness=0.006, conductivity=45.0, name="casing")],
        contact_resistances=[2e-3, 5e-4],
        inside=dict(type="convection_radiation", film_coefficient=30.0, ambient=1100.0,
                    emissivity=0.8, surroundings=1150.0),
        outside=dict(type="convection_radiation", film_coefficient=6.0, ambient=25.0,
                     emissivity=0.85, surroundings=15.0)),
    "vessel-generation-slope": dict(
        geometry="sphere", inner_radius=0.3,
        layers=[dict(thickness=0.02, conductivity=16.0, conductivity_slope=0.015,
                     generation=5e4, name="shell"),
                dict(thickness=0.08, conductivity=0.045, conductivity_slope=1.2e-4,
                     name="mineral wool")],
        contact_resistances=[1e-3],
        inside=dict(type="flux", value=500.0),
        outside=dict(type="convection_radiation", film_coefficient=5.0, ambient=10.0,
                     emissivity=0.3)),
}


@pytest.mark.parametrize("name", list(BVP_CASES))
def test_against_solve_bvp(name):
    problem = make_problem(BVP_CASES[name])
    res = solve_layers(problem)
    t_in, t_out, q_out = bvp_layers(problem)
    # Independent implementation: scipy.integrate.solve_bvp (tol 1e-8, bc_tol 1e-10).
    np.testing.assert_allclose(res.surfaces[0].temperature, t_in, rtol=0, atol=1e-6)
    np.testing.assert_allclose(res.surfaces[1].temperature, t_out, rtol=0, atol=1e-6)
    np.testing.assert_allclose(res.heat_flow_total, q_out, rtol=1e-6, atol=0)


@pytest.mark.parametrize("name", list(BVP_CASES) + ["deep-soil"])
def test_reported_residual_within_atol(name):
    inputs = BVP_CASES.get(name) or dict(PIPE, layers=[dict(thickness=100.0, conductivity=1.2,
                                                            name="soil")])
    res = solve_layers(make_problem(inputs))
    # The residual (surface imbalance as a temperature, K) honours the tolerance asked.
    assert res.convergence.converged
    assert res.convergence.residual <= res.convergence.atol


# ------------------------------------------------------------------------------------------------
# Limiting cases and balances (common practice, no source)
# ------------------------------------------------------------------------------------------------

def test_zero_contact_resistance_equals_none():
    three = BVP_CASES["furnace-wall-radiation-both-sides"]
    a = solve_layers(make_problem(three, contact_resistances=[0.0, 0.0]))
    b = solve_layers(make_problem(three, contact_resistances=[]))
    np.testing.assert_allclose(a.heat_flow, b.heat_flow, rtol=1e-12, atol=0)
    np.testing.assert_allclose(a.profile.temperatures, b.profile.temperatures, rtol=0,
                               atol=1e-9)


def test_contact_resistance_drop():
    # Temperature jump at the interface = heat flux * R''_c (definition).
    res = solve_layers(make_problem(BVP_CASES["furnace-wall-radiation-both-sides"]))
    for itf in res.interfaces:
        np.testing.assert_allclose(itf.temperature_inner_side - itf.temperature_outer_side,
                                   itf.heat_flux * itf.contact_resistance, rtol=1e-12, atol=1e-12)


def test_emissivity_zero_equals_convection():
    rad = solve_layers(make_problem(PIPE, outside=dict(
        type="convection_radiation", film_coefficient=8.0, ambient=20.0, emissivity=0.0)))
    conv = solve_layers(make_problem(PIPE, outside=dict(
        type="convection", film_coefficient=8.0, ambient=20.0)))
    np.testing.assert_allclose(rad.heat_flow, conv.heat_flow, rtol=1e-12, atol=0)
    assert conv.convergence.iterations == 0          # linear: solved exactly


def test_slope_to_zero_limit():
    base = solve_layers(make_problem(PIPE))
    tiny = dict(PIPE, layers=[dict(PIPE["layers"][0], conductivity_slope=1e-12),
                              dict(PIPE["layers"][1], conductivity_slope=1e-14)])
    np.testing.assert_allclose(solve_layers(make_problem(tiny)).heat_flow, base.heat_flow,
                               rtol=1e-8, atol=0)


def test_generation_to_zero_limit():
    case = BVP_CASES["vessel-generation-slope"]
    shell = case["layers"][0]
    none = solve_layers(make_problem(case, layers=[dict(shell, generation=0.0),
                                                   case["layers"][1]]))
    tiny = solve_layers(make_problem(case, layers=[dict(shell, generation=1e-6),
                                                   case["layers"][1]]))
    np.testing.assert_allclose(tiny.heat_flow, none.heat_flow, rtol=1e-9, atol=0)
    np.testing.assert_allclose(tiny.surfaces[0].temperature, none.surfaces[0].temperature,
                               rtol=0, atol=1e-6)


def test_energy_balance_and_surfaces():
    case = BVP_CASES["vessel-generation-slope"]
    res = solve_layers(make_problem(case))
    shell = case["layers"][0]
    r0, r1 = 0.3, 0.32
    generated = shell["generation"] * 4 / 3 * math.pi * (r1**3 - r0**3)
    supplied = 500.0 * 4 * math.pi * r0**2
    # Out = in + generated (energy conservation).
    np.testing.assert_allclose(res.heat_flow, supplied + generated, rtol=1e-12, atol=0)
    np.testing.assert_allclose(res.surfaces[0].heat_flow, supplied, rtol=1e-12, atol=0)
    np.testing.assert_allclose(res.surfaces[1].heat_flow, -res.heat_flow, rtol=1e-12, atol=0)
    # Outside flux reproduces the surface law at the reported temperature.
    t = res.surfaces[1].temperature
    loss = 5.0 * (t - 10.0) + 0.3 * STEFAN_BOLTZMANN * ((t + KELVIN) ** 4 - (10.0 + KELVIN) ** 4)
    np.testing.assert_allclose(-res.surfaces[1].heat_flux, loss, rtol=1e-9, atol=0)


def test_resistances_sum_and_overall_coefficient():
    case = next(c for c in LAYER_CASES if c.id == "steam-main-glass-wool")
    res = solve_layers(make_problem(case.inputs))
    np.testing.assert_allclose(sum(e.share for e in res.resistances), 1.0, rtol=1e-12, atol=0)
    # Q' = dT / R'_total and U_o = Q' / (2 pi r_o dT) (series network, common practice).
    np.testing.assert_allclose(res.heat_flow, (320.0 - 5.0) / res.total_resistance, rtol=1e-12,
                               atol=0)
    np.testing.assert_allclose(res.overall_coefficient,
                               res.heat_flow / (2 * math.pi * 0.0575 * 315.0), rtol=1e-12, atol=0)
    assert [e.kind for e in res.resistances] == ["film", "layer", "layer", "film"]


def test_air_surface_uses_correlation_at_solution():
    res = solve_layers(make_problem(PIPE, outside=dict(
        type="air", ambient=20.0, emissivity=0.9, wind_speed=3.0, orientation="horizontal"),
        atol=1e-9))
    out = res.surfaces[1]
    c = air_coefficient(out.temperature, 20.0, shape="cylinder", diameter=2 * out.position,
                        wind_speed=3.0, emissivity=0.9)
    # The reported loss equals the correlation's flux at the solved surface temperature.
    np.testing.assert_allclose(-out.heat_flux, c.heat_flux, rtol=1e-8, atol=0)
    np.testing.assert_allclose(out.convective_coefficient, c.convective_coefficient, rtol=1e-12,
                               atol=0)
    assert "Churchill-Bernstein" in out.correlation


def test_march_flags_conductivity_reaching_zero():
    problem = make_problem(dict(
        geometry="plane", layers=[dict(thickness=0.1, conductivity=0.05,
                                       conductivity_slope=1e-3, conductivity_temperature=0.0)],
        inside=dict(type="temperature", value=100.0),
        outside=dict(type="temperature", value=0.0)))
    st = build_stack(problem)
    # k reaches zero at -50 degC: a large outward heat flow drives the far face below it.
    assert march(st, 100.0, 1e4)[2] == -1
    assert march(st, 100.0, 10.0)[2] == 0


# ------------------------------------------------------------------------------------------------
# solve_for
# ------------------------------------------------------------------------------------------------

@pytest.mark.parametrize("outside", [
    PIPE["outside"],
    dict(type="air", ambient=20.0, emissivity=0.2, wind_speed=0.0),
    dict(type="air", ambient=20.0, emissivity=0.9, wind_speed=5.0),
])
def test_solve_for_surface_temperature_round_trip(outside):
    problem = make_problem(PIPE, outside=outside, solve_for=SolveFor(
        1, DesignTarget(surface_temperature=50.0)))
    res = solve_layers(problem)
    assert res.convergence.converged
    np.testing.assert_allclose(res.surfaces[1].temperature, 50.0, rtol=0, atol=1e-6)
    again = solve_layers(replace(problem, solve_for=None, layers=(
        problem.layers[0], replace(problem.layers[1], thickness=res.solved.thickness))))
    # Round trip: the thickness found reproduces the target (common practice).
    np.testing.assert_allclose(again.surfaces[1].temperature, 50.0, rtol=0, atol=1e-6)


@pytest.mark.parametrize("quantity,target,geometry", [
    ("heat_flow_per_length", 60.0, "cylinder"),
    ("heat_flux", 150.0, "cylinder"),
    ("heat_flux", 40.0, "plane"),
    ("heat_flow", 100.0, "sphere"),
])
def test_solve_for_heat_loss_round_trip(quantity, target, geometry):
    inputs = dict(PIPE, geometry=geometry)
    if geometry == "plane":
        inputs.pop("inner_radius")
    problem = make_problem(inputs, solve_for=SolveFor(1, DesignTarget(**{quantity: target})))
    res = solve_layers(problem)
    np.testing.assert_allclose(res.outside_heat_flux, -res.surfaces[1].heat_flux, rtol=1e-14,
                               atol=0)
    got = {"heat_flow_per_length": res.heat_flow,
           "heat_flux": res.outside_heat_flux,
           "heat_flow": res.heat_flow_total}[quantity]
    np.testing.assert_allclose(got, target, rtol=1e-7, atol=0)
    np.testing.assert_allclose(res.solved.achieved, target, rtol=1e-7, atol=0)
    np.testing.assert_allclose(res.layers[1].thickness, res.solved.thickness, rtol=1e-12, atol=0)


def test_solve_for_cold_line_heat_gain():
    # A chilled-brine line gains heat: heat-flow targets are magnitudes.
    inputs = dict(PIPE, inside=dict(type="convection", film_coefficient=800.0, ambient=-30.0),
                  outside=dict(type="air", ambient=30.0, emissivity=0.9))
    res = solve_layers(make_problem(inputs, solve_for=SolveFor(
        1, DesignTarget(heat_flow_per_length=15.0))))
    np.testing.assert_allclose(res.heat_flow, -15.0, rtol=1e-7, atol=0)
    assert res.solved.achieved > 0 and res.surfaces[1].temperature < 30.0


def test_solve_for_unreachable_surface_temperature():
    problem = make_problem(PIPE, solve_for=SolveFor(1, DesignTarget(surface_temperature=15.0)))
    with pytest.raises(IllPosedError) as err:
        solve_layers(problem)
    assert err.value.reason == "target-unreachable"
    assert err.value.field == "solve_for.target.surface_temperature"
    assert "cannot reach 15" in err.value.message


def test_solve_for_sphere_heat_flow_has_finite_limit():
    # Around a sphere Q >= 4 pi k r_in dT / (1 + ...) however thick: a small enough target is
    # unreachable (textbook property of spherical resistance, from memory).
    problem = make_problem(dict(
        geometry="sphere", inner_radius=0.5,
        layers=[dict(thickness=0.05, conductivity=0.04, name="insulation")],
        inside=dict(type="temperature", value=200.0),
        outside=dict(type="convection", film_coefficient=10.0, ambient=20.0)),
        solve_for=SolveFor(0, DesignTarget(heat_flow=30.0)))
    limit = 4 * math.pi * 0.04 * 0.5 * 180.0          # = 45.2 W > 30 W
    assert limit > 30.0
    with pytest.raises(IllPosedError) as err:
        solve_layers(problem)
    assert err.value.reason == "target-unreachable"
    assert "finite limit" in err.value.message


def test_solve_for_below_critical_radius():
    # Thin wire: the heat flow first rises with insulation, then falls (critical radius k/h).
    base = dict(geometry="cylinder", inner_radius=0.001,
                layers=[dict(thickness=0.001, conductivity=0.2, name="sheath")],
                inside=dict(type="temperature", value=80.0),
                outside=dict(type="convection", film_coefficient=10.0, ambient=20.0))
    bare = 2 * math.pi * 0.001 * 10.0 * 60.0          # no sheath
    peak_radius = 0.2 / 10.0

    def flow(r):
        return 60.0 / (math.log(r / 0.001) / (2 * math.pi * 0.2) + 1 / (2 * math.pi * r * 10.0))
    peak = flow(peak_radius)
    target = 0.5 * (bare + peak)                       # reached twice
    res = solve_layers(make_problem(base, solve_for=SolveFor(
        0, DesignTarget(heat_flow_per_length=target))))
    np.testing.assert_allclose(res.heat_flow, target, rtol=1e-7, atol=0)
    assert res.solved.outer_position > peak_radius
    assert res.solved.alternative_thickness is not None
    # The alternative thinner layer gives the same heat flow (closed form Q' above).
    np.testing.assert_allclose(flow(0.001 + res.solved.alternative_thickness), target, rtol=1e-7,
                               atol=0)
    assert "critical radius" in res.solved.note
    with pytest.raises(IllPosedError) as err:
        solve_layers(make_problem(base, solve_for=SolveFor(
            0, DesignTarget(heat_flow_per_length=1.1 * peak))))
    assert err.value.reason == "target-unreachable"
    assert "never exceeds" in err.value.message


def test_critical_radius_detection_with_air_surfaces():
    # Same physics with the nonlinear 'air' surface: a thin wire rises then falls, a large
    # pipe only falls (no spurious critical-radius note). Round trips are common practice.
    wire = dict(geometry="cylinder", inner_radius=0.001,
                layers=[dict(thickness=0.001, conductivity=0.2, name="sheath")],
                inside=dict(type="temperature", value=80.0),
                outside=dict(type="air", ambient=20.0, emissivity=0.9))
    res = solve_layers(make_problem(wire, solve_for=SolveFor(
        0, DesignTarget(heat_flow_per_length=15.0))))
    np.testing.assert_allclose(res.heat_flow, 15.0, rtol=1e-7, atol=0)
    assert res.solved.alternative_thickness < res.solved.thickness
    thin = solve_layers(make_problem(wire, layers=[dict(
        thickness=res.solved.alternative_thickness, conductivity=0.2, name="sheath")]))
    np.testing.assert_allclose(thin.heat_flow, 15.0, rtol=1e-6, atol=0)
    pipe = solve_layers(make_problem(PIPE, outside=wire["outside"], solve_for=SolveFor(
        1, DesignTarget(heat_flow_per_length=80.0))))
    assert pipe.solved.note is None and pipe.solved.alternative_thickness is None


# ------------------------------------------------------------------------------------------------
# Safety, convergence, input rules
# ------------------------------------------------------------------------------------------------

def test_safety_entries():
    problem = make_problem(PIPE, limits=Limits(max_surface_temperature=40.0,
                                               min_temperature=30.0))
    problem = replace(problem, layers=(problem.layers[0],
                                       replace(problem.layers[1], max_temperature=240.0)))
    res = solve_layers(problem)
    checks = {c.limit: c for c in res.safety.checks}
    assert res.safety.status == "exceeded"
    hot = checks["layers.1.max_temperature"]
    assert hot.status == "exceeded"
    assert hot.where.description == "layer 'insulation' hot face (inner)"
    np.testing.assert_allclose(hot.where.position[0], 0.0585, rtol=1e-12, atol=0)
    np.testing.assert_allclose(hot.extreme, res.layers[1].inner_temperature, rtol=0, atol=0)
    touch = checks["max_surface_temperature"]
    assert touch.where.description == "outside surface"
    np.testing.assert_allclose(touch.extreme, res.surfaces[1].temperature, rtol=0, atol=0)
    cold = checks["min_temperature"]
    np.testing.assert_allclose(cold.extreme, res.surfaces[1].temperature, rtol=0, atol=0)


def test_forced_non_convergence_is_reported():
    res = solve_layers(make_problem(PIPE, max_iterations=1))
    assert res.convergence.status == "max_iterations"
    assert res.convergence.iterations is not None


@pytest.mark.parametrize("overrides,field,words", [
    (dict(contact_resistances=[0.1, 0.2]), "contact_resistances", "one value per interface"),
    (dict(contact_resistances=[-1.0]), "contact_resistances.0", ">= 0"),
    (dict(layers=[dict(thickness=0.0, conductivity=1.0)]), "layers.0.thickness", "> 0"),
    (dict(layers=[dict(thickness=0.1, conductivity=-1.0)]), "layers.0.conductivity", "> 0"),
    (dict(layers=[]), "layers", "at least one"),
    (dict(geometry="cone"), "geometry", "one of"),
    (dict(inner_radius=None), "inner_radius", "required"),
    (dict(inner_radius=0.0), "inside.type", "solid core"),
    (dict(inside=dict(type="air", ambient=20.0, emissivity=0.9)), "inside.type", "plane"),
    (dict(inside=dict(type="flux", value=10.0), outside=dict(type="flux", value=-5.0)),
     "outside.type", "both heat-flux"),
    (dict(outside=dict(type="convection", ambient=20.0)), "outside.film_coefficient", "> 0"),
    (dict(outside=dict(type="convection_radiation", film_coefficient=5.0, ambient=20.0,
                       emissivity=1.5)), "outside.emissivity", "between 0 and 1"),
    (dict(outside=dict(type="air", ambient=20.0, emissivity=0.5, orientation="facing_up")),
     "outside.orientation", "one of"),
    (dict(solve_for=SolveFor(5, DesignTarget(heat_flux=1.0))), "solve_for.layer", "index"),
    (dict(solve_for=SolveFor(1, DesignTarget())), "solve_for.target", "exactly one"),
    (dict(geometry="sphere", solve_for=SolveFor(1, DesignTarget(heat_flow_per_length=1.0))),
     "solve_for.target.heat_flow_per_length", "cylinders"),
    (dict(outside=dict(type="temperature", value=30.0),
          solve_for=SolveFor(1, DesignTarget(surface_temperature=40.0))),
     "solve_for.target.surface_temperature", "fixed"),
    (dict(profile_points=1), "profile_points", ">= 2"),
    (dict(solve_for=SolveFor(1, DesignTarget(heat_flux=-5.0))), "solve_for.target.heat_flux",
     "magnitude"),
])
def test_input_rules(overrides, field, words):
    with pytest.raises(IllPosedError) as err:
        solve_layers(make_problem(PIPE, **overrides))
    assert err.value.field == field
    assert words in err.value.message


def test_no_steady_state_when_conductivity_law_fails():
    # k = 0.05 + 1e-3 T vanishes at -50 degC; 1 MW/m^2 cannot be conducted to 0 degC.
    problem = make_problem(dict(
        geometry="plane", layers=[dict(thickness=0.1, conductivity=0.05,
                                       conductivity_slope=1e-3)],
        inside=dict(type="flux", value=-1e6),
        outside=dict(type="temperature", value=0.0)))
    with pytest.raises(IllPosedError) as err:
        solve_layers(problem)
    assert err.value.field == "layers"
    assert "no steady state" in err.value.message


def test_outputs_are_finite_and_frozen():
    res = solve_layers(make_problem(BVP_CASES["furnace-wall-radiation-both-sides"]))
    assert np.all(np.isfinite(res.profile.temperatures))
    assert not res.profile.temperatures.flags.writeable
    with pytest.raises(AttributeError):
        res.heat_flow = 0.0  # type: ignore[misc]
