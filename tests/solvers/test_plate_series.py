"""Plate series solver: reference values, error bounds, 1D limits, balance, symmetry, rules.

Outside values come from `tests/solvers/reference_plate.py` (each case names its source: mpmath
series, or exact by symmetry) or from exact 1D solutions written in the test (common practice,
no source).
"""

from __future__ import annotations

import dataclasses

import mpmath
import numpy as np
import pytest
from scipy import integrate

from service.solvers import plate
from service.solvers.errors import IllPosedError
from service.solvers.plate import Edge, PlateProblem, PlateSeries, solve_plate, temperature_at
from service.solvers.safety import Limits
from tests.solvers import reference_plate as ref


def fixed(v: float) -> Edge:
    return Edge("temperature", value=v)


def conv(h: float, ta: float) -> Edge:
    return Edge("convection", film_coefficient=h, ambient=ta)


INSULATED = Edge("insulated")

# a mixed problem with every edge type and generation (an electrically heated bus-bar clamp)
MIXED = PlateProblem(
    width=0.12, height=0.08, conductivity=40.0, generation=5.0e5,
    bottom=Edge("temperature", profile=((0.0, 60.0), (0.05, 90.0), (0.12, 70.0))),
    right=conv(120.0, 25.0), top=Edge("flux", value=-1500.0), left=INSULATED)

# the documented request example
EXAMPLE = PlateProblem(
    width=0.6, height=1.0, conductivity=52.0,
    bottom=fixed(100.0), left=INSULATED, right=conv(750.0, 0.0), top=Edge("flux", value=-200.0),
    points=((0.6, 0.2), (0.3, 0.5)))


def evaluate(problem: PlateProblem, points) -> tuple[np.ndarray, np.ndarray]:
    pts = np.asarray(points, float).reshape(-1, 2)
    temp, err, _ = PlateSeries(problem).temperature(pts[:, 0], pts[:, 1])
    return temp, err


# --------------------------------------------------------------------------- reference values


@pytest.mark.parametrize("case", ref.REFERENCE_CASES, ids=lambda c: c.id)
def test_reference_values(case: ref.ReferenceCase) -> None:
    tight = dataclasses.replace(case.problem, atol=1e-9 * ref.temperature_scale(case))
    temp, _ = evaluate(tight, case.points)
    # source: case.source (mpmath series, or exact by symmetry), tolerances from the case
    np.testing.assert_allclose(temp, case.expected, rtol=case.rtol, atol=case.atol)


@pytest.mark.parametrize("rel", [1e-3, 1e-6])
@pytest.mark.parametrize("case", ref.REFERENCE_CASES, ids=lambda c: c.id)
def test_error_estimate_bounds_true_error(case: ref.ReferenceCase, rel: float) -> None:
    atol = rel * ref.temperature_scale(case)
    temp, err = evaluate(dataclasses.replace(case.problem, atol=atol), case.points)
    true_error = np.abs(temp - np.array(case.expected))  # expected: case.source (mpmath)
    assert np.all(true_error <= err + 1e-12 * atol), (true_error - err).max()
    assert np.all(err <= atol)


def test_error_estimate_bounds_true_error_near_the_hot_edge() -> None:
    # a sweep towards the singular hot edge, where the terms per point grow like 1 / y
    ys = np.geomspace(0.3 * 0.997, 0.3 * 0.01, 8)
    pts = [(x, y) for y in ys for x in (0.02, 0.2)]
    expected = [ref.one_hot_series(x, y, 0.5, 0.3, 250.0, 20.0) for x, y in pts]  # mpmath
    for atol in (1e-2, 1e-5):
        temp, err = evaluate(dataclasses.replace(ref.BRACKET, atol=atol), pts)
        assert np.all(np.abs(temp - expected) <= err), (np.abs(temp - expected) - err).max()
        assert err.max() <= atol


def test_centre_of_square_exact_by_symmetry_with_default_tolerance() -> None:
    result = solve_plate(dataclasses.replace(ref.KILN, points=((0.2, 0.2),)))
    atol = 1e-6 * (400.0 - 30.0)
    assert result.convergence.status == "converged"
    # the contract's default tolerance: 1e-6 of the largest temperature difference (API.md)
    np.testing.assert_allclose(result.convergence.atol, atol, rtol=1e-12, atol=0.0)
    # exact by symmetry and superposition: (T1 + 3 T0) / 4 (common practice, no source)
    np.testing.assert_allclose(result.point_temperatures, [(400.0 + 3 * 30.0) / 4], rtol=0.0,
                               atol=atol)


def test_one_hot_top_flow_against_mpmath_and_singular_corners_reported() -> None:
    result = solve_plate(ref.BRACKET)
    flows = result.edge_heat_flow
    # independent implementation: mpmath term-wise flow of the classic series
    np.testing.assert_allclose(flows.top, ref.BRACKET_TOP_FLOW, rtol=1e-9, atol=0.0)
    assert flows.bottom is None and flows.left is None and flows.right is None
    assert result.energy_balance.net is None
    text = " ".join(result.warnings)
    assert "corner bottom-left" in text and "corner bottom-right" in text
    assert "230 K apart" in text
    # the singular edges together take minus the top flow (balance, no generation)
    assert f"{-flows.top:.6g} W/m" in text


def test_finite_flow_next_to_a_singular_corner_that_cannot_be_summed_is_null_with_warning() -> None:
    # a jump at the bottom-left corner whichever edge carries it spoils a finite flow series
    p = PlateProblem(0.3, 0.2, 15.0, bottom=fixed(100.0), right=fixed(100.0), left=fixed(0.0),
                     top=Edge("temperature", profile=((0.0, 0.0), (0.3, 100.0))))
    r = solve_plate(p)
    assert r.edge_heat_flow.right is None and r.edge_heat_flow.top is not None
    assert any(w.startswith("right edge: the heat flow is finite") for w in r.warnings)


# --------------------------------------------------------------------------- 1D limits


def test_linear_between_two_fixed_edges() -> None:
    p = PlateProblem(0.3, 0.2, 12.0, bottom=fixed(15.0), top=fixed(95.0), left=INSULATED,
                     right=INSULATED, points=((0.1, 0.05), (0.3, 0.13), (0.0, 0.2)))
    r = solve_plate(p)
    y = np.array([0.05, 0.13, 0.2])
    # exact 1D solution, common practice: T = T0 + (T1 - T0) y / H
    np.testing.assert_allclose(r.point_temperatures, 15.0 + 80.0 * y / 0.2, rtol=1e-12,
                               atol=1e-10)
    q = 12.0 * 80.0 / 0.2 * 0.3
    np.testing.assert_allclose([r.edge_heat_flow.bottom, r.edge_heat_flow.top], [-q, q],
                               rtol=1e-12, atol=1e-9)  # Fourier's law, common practice


def test_parabola_with_generation() -> None:
    g, k, h = 3.0e5, 20.0, 0.05
    p = PlateProblem(0.2, h, k, generation=g, bottom=fixed(40.0), top=fixed(10.0),
                     left=INSULATED, right=INSULATED, points=((0.07, 0.01), (0.19, 0.03)))
    r = solve_plate(p)
    y = np.array([0.01, 0.03])
    # exact 1D solution, common practice: linear part plus g y (H - y) / (2 k)
    exact = 40.0 - 30.0 * y / h + g * y * (h - y) / (2 * k)
    np.testing.assert_allclose(r.point_temperatures, exact, rtol=1e-12, atol=1e-9)
    # conservation of energy, common practice: flows + generation = 0
    np.testing.assert_allclose(r.energy_balance.net, 0.0, rtol=0.0, atol=1e-9 * g * 0.2 * h)


def test_convection_edge_as_resistance_network() -> None:
    k, hf, height, width = 1.4, 35.0, 0.25, 0.5
    p = PlateProblem(width, height, k, bottom=fixed(350.0), top=conv(hf, 30.0), left=INSULATED,
                     right=INSULATED, points=((0.25, 0.1), (0.25, height)))
    r = solve_plate(p)
    # exact 1D solution, common practice: q = (Tb - Ta) / (H / k + 1 / h)
    q = (350.0 - 30.0) / (height / k + 1.0 / hf)
    np.testing.assert_allclose(r.point_temperatures, 350.0 - q * np.array([0.1, height]) / k,
                               rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose([r.edge_heat_flow.bottom, r.edge_heat_flow.top],
                               [q * width, -q * width], rtol=1e-10, atol=0.0)


def test_flux_into_one_side_convection_out_of_the_other() -> None:
    k, hf, q0, width = 200.0, 25.0, 4000.0, 0.1
    p = PlateProblem(width, 0.3, k, left=Edge("flux", value=q0), right=conv(hf, 20.0),
                     bottom=INSULATED, top=INSULATED, points=((0.0, 0.1), (0.06, 0.2)))
    r = solve_plate(p)
    x = np.array([0.0, 0.06])
    # exact 1D solution, common practice: T = Ta + q0 / h + q0 (W - x) / k
    np.testing.assert_allclose(r.point_temperatures, 20.0 + q0 / hf + q0 * (width - x) / k,
                               rtol=1e-12, atol=1e-9)


def test_generation_between_two_convective_sides() -> None:
    k, g, width = 15.0, 1.0e6, 0.04
    h1, ta1, h2, ta2 = 500.0, 30.0, 80.0, 60.0
    p = PlateProblem(width, 0.5, k, generation=g, left=conv(h1, ta1), right=conv(h2, ta2),
                     bottom=INSULATED, top=INSULATED, points=((0.0, 0.2), (0.013, 0.4),
                                                              (0.04, 0.1)))
    r = solve_plate(p)
    # exact 1D solution, common practice: T = -g x^2/(2k) + a x + b with both Robin conditions
    m = np.array([[-k, h1], [k + h2 * width, h2]])
    rhs = np.array([h1 * ta1, h2 * ta2 + g * width + h2 * g * width**2 / (2 * k)])
    a, b = np.linalg.solve(m, rhs)
    x = np.array([0.0, 0.013, 0.04])
    np.testing.assert_allclose(r.point_temperatures, -g * x**2 / (2 * k) + a * x + b,
                               rtol=1e-11, atol=1e-8)


# --------------------------------------------------------------------------- balance and BCs


@pytest.mark.parametrize("problem", [EXAMPLE, MIXED, ref.FIN_ROOT, ref.QUENCH,
                                     dataclasses.replace(EXAMPLE, generation=2.0e5)],
                         ids=["example", "mixed", "fin-root", "quench", "example-generation"])
def test_energy_balance_closes(problem: PlateProblem) -> None:
    r = solve_plate(problem)
    flows = dataclasses.asdict(r.edge_heat_flow)
    assert all(v is not None for v in flows.values())
    # conservation of energy, common practice: edge flows + generation = 0
    np.testing.assert_allclose(r.energy_balance.relative_error, 0.0, rtol=0.0, atol=1e-8)
    np.testing.assert_allclose(sum(flows.values()) + r.generation_heat, r.energy_balance.net,
                               rtol=1e-12, atol=1e-9)


def test_mixed_problem_satisfies_equation_and_edge_conditions() -> None:
    """Finite differences of the series: k lap T + g = 0 inside, and each edge condition
    (common practice, no source: the residuals shrink like the step squared)."""
    p = dataclasses.replace(MIXED, atol=1e-10 * 80.0)
    model = PlateSeries(p)
    k, g, w, h = p.conductivity, p.generation, p.width, p.height
    d = 1e-4
    xs, ys = np.meshgrid([0.02, 0.06, 0.1], [0.02, 0.04, 0.06])
    xs, ys = xs.ravel(), ys.ravel()

    def T(x, y):
        return model.temperature(np.asarray(x, float), np.asarray(y, float))[0]

    lap = (T(xs + d, ys) + T(xs - d, ys) + T(xs, ys + d) + T(xs, ys - d) - 4 * T(xs, ys)) / d**2
    np.testing.assert_allclose(k * lap, -g * np.ones_like(lap), rtol=2e-4, atol=0.0)
    s = np.array([0.01, 0.04, 0.07])
    # one-sided second-order differences of the inward derivative dT/dt at t = 0
    def inward(fx, fy):
        return (-3 * T(*fx(0.0)) + 4 * T(*fx(d)) - T(*fx(2 * d))) / (2 * d)
    # right edge: -k dT/dt = h (T_amb - T)
    right = inward(lambda t: (w - t + 0 * s, s), None)
    np.testing.assert_allclose(-k * right, 120.0 * (25.0 - T(w + 0 * s, s)), rtol=1e-4,
                               atol=1e-3)
    # top edge: -k dT/dt = q
    top = inward(lambda t: (s, h - t + 0 * s), None)
    np.testing.assert_allclose(-k * top, -1500.0 * np.ones(3), rtol=1e-4, atol=1e-3)
    # left edge insulated
    left = inward(lambda t: (t + 0 * s, s), None)
    np.testing.assert_allclose(left, np.zeros(3), rtol=0.0, atol=1e-3)
    # bottom: the profile itself
    np.testing.assert_allclose(T(s, 0 * s), np.interp(s, [0.0, 0.05, 0.12], [60.0, 90.0, 70.0]),
                               rtol=0.0, atol=0.0)


# --------------------------------------------------------------------------- ill-posed


def test_all_flux_edges_that_do_not_balance_are_rejected() -> None:
    p = PlateProblem(0.5, 0.2, 10.0, bottom=Edge("flux", value=100.0), top=INSULATED,
                     left=INSULATED, right=Edge("flux", value=-50.0), generation=10.0)
    with pytest.raises(IllPosedError, match=r"net heat input is 41 W/m") as info:
        solve_plate(p)
    assert info.value.reason == "physics-rejected"
    assert info.value.field == "edges"


def test_all_flux_edges_that_balance_are_not_unique() -> None:
    p = PlateProblem(0.5, 0.2, 10.0, bottom=Edge("flux", value=100.0), top=INSULATED,
                     left=INSULATED, right=Edge("flux", value=-250.0))
    with pytest.raises(IllPosedError, match="give one edge a temperature or convection") as info:
        solve_plate(p)
    assert info.value.reason == "not-unique"
    assert info.value.field == "edges"


@pytest.mark.parametrize(("change", "field", "message"), [
    ({"conductivity": -1.0}, "conductivity", "must be a finite number > 0"),
    ({"width": 0.0}, "width", "must be a finite number > 0"),
    ({"bottom": Edge("temperature", profile=((0.2, 1.0), (0.1, 2.0)))}, "edges.bottom.profile",
     "strictly increasing"),
    ({"top": Edge("temperature", profile=((0.0, 1.0), (0.9, 2.0)))}, "edges.top.profile",
     "within the edge"),
    ({"left": Edge("convection", ambient=20.0)}, "edges.left.film_coefficient",
     "film coefficient > 0"),
    ({"right": Edge("flux")}, "edges.right.value", "finite heat flux"),
    ({"right": Edge("radiation")}, "edges.right.type", "must be one of"),
    ({"points": ((0.6, 0.1),)}, "points.0", "outside"),
    ({"atol": 0.0}, "tolerance", "> 0 K"),
])
def test_input_rules(change, field, message) -> None:
    base = PlateProblem(0.5, 0.2, 10.0, bottom=fixed(1.0), top=fixed(0.0), left=INSULATED,
                        right=INSULATED)
    with pytest.raises(IllPosedError, match=message) as info:
        solve_plate(dataclasses.replace(base, **change))
    assert info.value.field == field


# --------------------------------------------------------------------------- profiles


def test_linear_profiles_reproduce_the_harmonic_xy() -> None:
    c, w, h = 500.0, 0.4, 0.25
    s_top = tuple((x, c * h * x) for x in np.linspace(0.0, w, 5))
    s_right = tuple((y, c * w * y) for y in np.linspace(0.0, h, 7))
    p = PlateProblem(w, h, 3.0, bottom=fixed(0.0), left=fixed(0.0),
                     top=Edge("temperature", profile=s_top),
                     right=Edge("temperature", profile=s_right), atol=1e-11)
    xs, ys = np.meshgrid(np.linspace(0, w, 9), np.linspace(0, h, 7))
    # exact harmonic solution T = c x y (common practice, no source)
    np.testing.assert_allclose(temperature_at(p, xs, ys), c * xs * ys, rtol=0.0, atol=1e-9)


def test_fine_profiles_reproduce_the_harmonic_x2_minus_y2() -> None:
    """T = x^2 - y^2 with insulated bottom and left: top and right get 201-point profiles;
    their interpolation error ds^2/4 bounds the error by the maximum principle (common
    practice, no source)."""
    w, h = 0.5, 0.4
    sx, sy = np.linspace(0.0, w, 201), np.linspace(0.0, h, 201)
    p = PlateProblem(w, h, 1.0, bottom=INSULATED, left=INSULATED,
                     top=Edge("temperature", profile=tuple(zip(sx, sx**2 - h**2, strict=True))),
                     right=Edge("temperature", profile=tuple(zip(sy, w**2 - sy**2, strict=True))),
                     atol=1e-8)
    xs, ys = np.meshgrid(np.linspace(0, w, 6), np.linspace(0, h, 5))
    bound = (w / 200) ** 2 / 4
    np.testing.assert_allclose(temperature_at(p, xs, ys), xs**2 - ys**2, rtol=0.0,
                               atol=bound + 1e-8)


def test_profile_held_constant_beyond_its_ends_equals_uniform_value() -> None:
    flat = Edge("temperature", profile=((0.1, 50.0), (0.2, 50.0)))
    a = dataclasses.replace(ref.BRACKET, bottom=flat, atol=1e-8)
    b = dataclasses.replace(ref.BRACKET, bottom=fixed(50.0), atol=1e-8)
    pts = np.array(ref.BRACKET_POINTS)
    # the same problem written two ways (common practice, no source)
    np.testing.assert_allclose(temperature_at(a, pts[:, 0], pts[:, 1]),
                               temperature_at(b, pts[:, 0], pts[:, 1]), rtol=0.0, atol=2e-8)


def test_points_on_fixed_edges_return_the_boundary_data_exactly() -> None:
    p = dataclasses.replace(ref.PROFILED, points=((0.0, 0.0), (0.03, 0.0), (0.3, 0.0),
                                                  (0.6, 0.2), (0.25, 0.5)))
    r = solve_plate(p)
    # the boundary data themselves (the profile, clamped; the mean of 50 and 0 at the singular
    # corner (0, 0)), common practice, no source
    np.testing.assert_allclose(r.point_temperatures,
                               [25.0, 50.0, np.interp(0.3, [0.06, 0.24, 0.42], [50, 120, 80]),
                                0.0, 0.0], rtol=0.0, atol=0.0)


# --------------------------------------------------------------------------- convergence


def test_forced_non_convergence_reports_max_terms() -> None:
    p = dataclasses.replace(ref.BRACKET, max_terms=3, points=((0.25, 0.003), (0.25, 0.15)))
    r = solve_plate(p)
    c = r.convergence
    assert c.status == "max_terms" and not c.converged
    assert c.terms == 3
    assert c.error_estimate > c.atol
    assert np.all(np.isfinite(r.point_temperatures))
    assert any("max_terms = 3" in w for w in r.warnings)
    # the bound still holds: independent implementation mpmath (classic series)
    expected = [ref.one_hot_series(x, y, 0.5, 0.3, 250.0, 20.0) for x, y in p.points]
    assert np.all(np.abs(r.point_temperatures - expected) <= c.error_estimate)


def test_terms_grow_towards_the_data_edge() -> None:
    model = PlateSeries(ref.BRACKET)
    terms = [model.temperature(np.array([0.25]), np.array([y]))[2] for y in (0.15, 0.03, 0.003)]
    assert terms[0] < terms[1] < terms[2]


def test_grid_equals_points() -> None:
    p = dataclasses.replace(MIXED, grid=(7, 5))
    r = solve_plate(p)
    xs, ys = np.meshgrid(r.grid_x, r.grid_y)
    points = tuple(zip(xs.ravel(), ys.ravel(), strict=True))
    pts = solve_plate(dataclasses.replace(MIXED, points=points))
    atol = r.convergence.atol
    # the same series summed two ways (common practice, no source)
    np.testing.assert_allclose(r.grid_temperature.ravel(), pts.point_temperatures, rtol=0.0,
                               atol=2 * atol)


# --------------------------------------------------------------------------- Biot sweep


def test_biot_sweep_on_the_data_edge_is_finite_monotone_with_right_limits() -> None:
    films = np.logspace(-3, 6, 19)
    point = (0.1, 0.05)
    temps = []
    for hf in films:
        r = solve_plate(dataclasses.replace(ref.QUENCH, bottom=conv(hf, 300.0), points=(point,),
                                            grid=(5, 5)))
        assert r.convergence.status == "converged"
        assert np.all(np.isfinite(r.grid_temperature))
        temps.append(r.point_temperatures[0])
    temps = np.array(temps)
    assert np.all(np.diff(temps) > 0.0)
    # limits: h -> 0 is an insulated bottom with the rest at 20 degC (common practice), and
    # h -> inf is the one-hot plate (independent implementation: mpmath series)
    np.testing.assert_allclose(temps[0], 20.0, rtol=0.0, atol=1e-2)
    hot = ref.one_hot_series(*point, 0.25, 0.15, 300.0, 20.0)
    np.testing.assert_allclose(temps[-1], hot, rtol=1e-3, atol=0.0)


def test_biot_sweep_on_the_side_edges_is_finite_monotone_with_right_limits() -> None:
    films = np.logspace(-3, 6, 19)
    temps = []
    for hf in films:
        p = dataclasses.replace(ref.FIN_ROOT, left=conv(hf, 20.0), right=conv(hf, 20.0),
                                points=((0.15, 0.1), (0.0, 0.1)))
        r = solve_plate(p)
        assert r.convergence.status == "converged"
        temps.append(r.point_temperatures)
    temps = np.array(temps)
    assert np.all(np.isfinite(temps))
    assert np.all(np.diff(temps[:, 0]) < 0.0)
    # h -> 0: insulated sides, linear 180 -> 60 (exact 1D solution, common practice)
    np.testing.assert_allclose(temps[0], [120.0, 120.0], rtol=0.0, atol=2e-2)
    # h -> inf: sides at 20 degC, i.e. a hot-bottom plus a hot-top one-hot plate minus 20 degC
    # (superposition); at mid-height the hot-top series equals the hot-bottom one (independent
    # implementation: mpmath series)
    cold_sides = (ref.one_hot_series(0.15, 0.1, 0.3, 0.2, 180.0, 20.0)
                  + ref.one_hot_series(0.15, 0.1, 0.3, 0.2, 60.0, 20.0) - 20.0)
    np.testing.assert_allclose(temps[-1, 0], cold_sides, rtol=1e-3, atol=0.0)


# --------------------------------------------------------------------------- symmetry


def test_mirror_symmetry() -> None:
    r = solve_plate(dataclasses.replace(ref.FIN_ROOT, grid=(13, 9)))
    # symmetric data give a symmetric field (common practice, no source)
    np.testing.assert_allclose(r.grid_temperature, r.grid_temperature[:, ::-1], rtol=0.0,
                               atol=2 * r.convergence.atol)


def test_rotation_by_a_quarter_turn() -> None:
    """Rotating the plate 90 degrees counter-clockwise maps (x, y) -> (H - y, x), and the
    edges bottom -> right -> top -> left -> bottom (common practice, no source)."""
    p = MIXED
    rot = PlateProblem(p.height, p.width, p.conductivity, generation=p.generation,
                       right=p.bottom, top=p.right, left=p.top, bottom=p.left)
    xs, ys = np.meshgrid(np.linspace(0, p.width, 5), np.linspace(0, p.height, 4))
    a = temperature_at(p, xs, ys)
    b = temperature_at(rot, p.height - ys, xs)
    np.testing.assert_allclose(a, b, rtol=0.0, atol=4 * plate.default_atol(p))
    fa, fb = solve_plate(p).edge_heat_flow, solve_plate(rot).edge_heat_flow
    np.testing.assert_allclose([fa.bottom, fa.right, fa.top, fa.left],
                               [fb.right, fb.top, fb.left, fb.bottom], rtol=1e-8, atol=1e-8)


# --------------------------------------------------------------------------- extremes, safety


def test_interior_hottest_point_with_generation() -> None:
    p = dataclasses.replace(ref.HEATER, limits=Limits(max_temperature=200.0))
    r = solve_plate(p)
    centre = ref.generation_series(0.04, 0.025, 0.08, 0.05, 16.0, 2.0e6)  # mpmath
    assert r.hottest.description == "interior"
    # the centre, by symmetry (common practice, no source)
    np.testing.assert_allclose(r.hottest.position, (0.04, 0.025), rtol=0.0, atol=1e-5)
    np.testing.assert_allclose(r.hottest.temperature, centre, rtol=0.0, atol=r.convergence.atol)
    # the edges' own fixed temperature (boundary data)
    np.testing.assert_allclose(r.coldest.temperature, 0.0, rtol=0.0, atol=0.0)
    assert r.safety.status == "ok"
    assert r.safety.checks[0].limit == "max_temperature"


def test_hottest_on_a_convective_edge_and_surface_limit() -> None:
    p = dataclasses.replace(ref.QUENCH, limits=Limits(max_surface_temperature=150.0,
                                                      max_temperature=400.0))
    r = solve_plate(p)
    assert r.hottest.description == "bottom edge"
    # mid-face, by symmetry of the problem about x = W/2 (common practice, no source)
    np.testing.assert_allclose(r.hottest.position[0], 0.125, rtol=0.0, atol=1e-6)
    # consistency, not an outside value: the reported extreme is the solver's value there
    on_face = temperature_at(p, np.array([0.125]), np.array([0.0]))[0]
    np.testing.assert_allclose(r.hottest.temperature, on_face, rtol=0.0, atol=1e-6)
    assert r.safety.status == "exceeded"
    surface = next(c for c in r.safety.checks if c.limit == "max_surface_temperature")
    assert surface.where.description == "bottom edge"
    assert surface.status == "exceeded"


def test_describe_locations() -> None:
    assert plate.describe(0.0, 0.0, 1.0, 2.0) == "corner bottom-left"
    assert plate.describe(1.0, 2.0, 1.0, 2.0) == "corner top-right"
    assert plate.describe(0.5, 2.0, 1.0, 2.0) == "top edge"
    assert plate.describe(0.0, 1.0, 1.0, 2.0) == "left edge"
    assert plate.describe(0.5, 1.0, 1.0, 2.0) == "interior"


# --------------------------------------------------------------------------- stages


def test_perpendicular_ratio_is_overflow_free_and_matches_sinh() -> None:
    sub = PlateSeries(ref.BRACKET).series[0].sub  # fixed-temperature data, fixed opposite
    thin = dataclasses.replace(sub, depth=50.0 * sub.length)
    mu = np.array([1.0, 10.0, 1e3, 1e5])
    t = np.array([0.0, 1e-3, 0.5 * thin.depth, thin.depth])
    r = plate.perpendicular_ratio(thin, mu, t)
    assert np.all(np.isfinite(r)) and np.all((r >= 0.0) & (r <= 1.0))
    mu = np.array([0.5, 2.0, 7.0])
    t = np.array([0.0, 0.07, 0.2, 0.3])
    lam = mu / sub.length
    direct = np.sinh(lam * (sub.depth - t[:, None])) / np.sinh(lam * sub.depth)
    # direct sinh ratio where it cannot overflow (common practice)
    np.testing.assert_allclose(plate.perpendicular_ratio(sub, mu, t), direct, rtol=1e-13,
                               atol=1e-15)


WAVY = tuple((float(s), 100.0 + 50.0 * np.sin(40.0 * s)) for s in np.linspace(0.0, 0.3, 120))


@pytest.mark.parametrize("problem", [
    MIXED,
    PlateProblem(0.3, 0.2, 15.0, bottom=Edge("temperature", profile=WAVY), top=fixed(20.0),
                 left=conv(10.0, 20.0), right=INSULATED),
], ids=["mixed", "wavy-profile"])
def test_edge_coefficients_against_scipy_quad(problem: PlateProblem) -> None:
    model = PlateSeries(dataclasses.replace(problem, atol=1e-6))
    for ser in model.series:
        sub = ser.sub
        mu, ph, norm = plate.edge_eigenvalues(sub, 256)
        coef = plate.edge_coefficients(sub, mu, ph, norm)
        breaks = [] if sub.data.breaks is None else list(sub.data.breaks)
        scale = float(np.abs(sub.data(np.linspace(0.0, 1.0, 201))).max())
        for n in (0, 1, 5, 40, 200):
            def f(s, data=sub.data, m=mu[n], p=ph[n]):
                return data(np.array(s)) * np.sin(m * s + p)
            num = integrate.quad(f, 0.0, 1.0, points=breaks[1:-1] or None, limit=400,
                                 epsabs=1e-12 * scale, epsrel=1e-11)[0]
            den = integrate.quad(lambda s, m=mu[n], p=ph[n]: np.sin(m * s + p) ** 2, 0.0, 1.0,
                                 limit=400, epsabs=1e-13, epsrel=1e-11)[0]
            # independent implementation: scipy.integrate.quad of <f, X_n> / <X_n, X_n>
            np.testing.assert_allclose(coef[n], num / den, rtol=1e-9,
                                       atol=1e-10 * scale)


def test_tail_bound_bounds_the_actual_tail() -> None:
    model = PlateSeries(ref.FIN_ROOT)
    for ser in model.series:
        sub = ser.sub
        modes = ser.modes(4096)
        t = np.array([0.01, 0.05, 0.1]) * sub.depth
        sigma = np.array([0.13, 0.5, 0.77])
        full = plate.sum_series(sub, modes, sigma, t, np.full(3, 4096))
        for n in (4, 16, 64):
            head = plate.sum_series(sub, modes, sigma, t, np.full(3, n))
            bound = plate.tail_bound(sub, ser.consts, np.array([n]), t)[:, 0]
            assert np.all(np.abs(full - head) <= bound)


@pytest.mark.parametrize("problem", [
    PlateProblem(1.0, 1e-3, 50.0, bottom=fixed(100.0), top=fixed(0.0), left=conv(10.0, 20.0),
                 right=conv(10.0, 20.0), grid=(21, 5)),
    PlateProblem(1e-3, 1.0, 50.0, bottom=fixed(100.0), top=conv(5.0, 20.0), left=INSULATED,
                 right=conv(30.0, 20.0), grid=(5, 21)),
    PlateProblem(1e-6, 2e-6, 1.0, bottom=fixed(100.0), top=fixed(0.0),
                 left=Edge("flux", value=1e6), right=conv(1e4, 20.0), grid=(11, 11)),
    PlateProblem(1e3, 5e2, 1.0, bottom=fixed(100.0), top=fixed(0.0), left=Edge("flux", value=1.0),
                 right=conv(1e-2, 20.0), generation=1e-6, grid=(11, 11)),
    PlateProblem(0.3, 0.2, 15.0, bottom=conv(1000.0, 300.0), top=conv(10.0, 20.0),
                 left=conv(50.0, 20.0), right=conv(5.0, 100.0), generation=1e4, grid=(11, 11)),
], ids=["thin-strip", "tall-strip", "micro", "large", "all-convective"])
def test_extreme_geometries_converge_and_balance(problem: PlateProblem) -> None:
    r = solve_plate(problem)
    assert r.convergence.status == "converged"
    assert np.all(np.isfinite(r.grid_temperature))
    # conservation of energy, common practice
    np.testing.assert_allclose(r.energy_balance.relative_error, 0.0, rtol=0.0, atol=1e-8)


def test_flows_do_not_depend_on_the_point_request() -> None:
    a = solve_plate(EXAMPLE).edge_heat_flow
    b = solve_plate(dataclasses.replace(EXAMPLE, points=(), grid=(3, 3))).edge_heat_flow
    assert a == b


# --------------------------------------------------------------------------- fast paths


ALL_SIDES_INSULATED = PlateProblem(  # zero root: both ends of the bottom eigenfunctions insulated
    0.3, 0.2, 12.0, bottom=Edge("temperature", profile=((0.0, 10.0), (0.1, 30.0), (0.3, 5.0))),
    top=conv(10.0, 20.0), left=INSULATED, right=INSULATED)


@pytest.mark.parametrize("problem", [
    MIXED, EXAMPLE, ref.FIN_ROOT, ref.PROFILED, ALL_SIDES_INSULATED,
    PlateProblem(0.3, 0.2, 15.0, bottom=Edge("temperature", profile=WAVY), top=fixed(20.0),
                 left=conv(10.0, 20.0), right=INSULATED),
], ids=["mixed", "example", "fin-root", "profiled", "zero-root", "wavy-profile"])
def test_stacked_modes_match_the_one_series_stages(problem: PlateProblem) -> None:
    """All series at once (`stack_modes`) against one series at a time (`edge_eigenvalues`,
    `edge_coefficients`, `series_weights`, `flow_terms`): consistency of two implementations
    in this module, not an outside value."""
    model = PlateSeries(problem)
    subs = [s.sub for s in model.series]
    stack = plate.stack_modes(subs, 512)
    for i, sub in enumerate(subs):
        mu, ph, norm = plate.edge_eigenvalues(sub, 512)
        coef = plate.edge_coefficients(sub, mu, ph, norm)
        modes = plate.Modes(mu, ph, norm, coef)
        w = plate.series_weights(sub, modes)
        scale = float(np.abs(coef).max())
        np.testing.assert_allclose(stack.mu[i], mu, rtol=0.0, atol=0.0)
        np.testing.assert_allclose(stack.phase[i], ph, rtol=1e-15, atol=1e-15)
        np.testing.assert_allclose(stack.coef[i], coef, rtol=0.0, atol=1e-13 * scale)
        # the summation weights through the sums they give on a small grid
        sigma, t = np.linspace(0.0, 1.0, 11), np.linspace(0.0, sub.depth, 5)
        full = np.full(t.size, 512)
        one_u = plate._sum_rows(w, sigma, t, full)
        stack_u = plate._sum_rows(plate._stack_row(stack, i), sigma, t, full)
        np.testing.assert_allclose(stack_u, one_u, rtol=0.0,
                                   atol=1e-12 * float(np.abs(one_u).max() + scale))
        targets = [(n, model.cond[n].kind) for n in plate.EDGE_NAMES
                   if model.cond[n].kind != "N"]
        one = plate.flow_terms(sub, modes, targets)
        both = plate._stack_flow_terms(stack, subs, [(i, n, k) for n, k in targets])
        np.testing.assert_allclose(both, one, rtol=0.0,
                                   atol=1e-11 * float(np.abs(one).max(initial=1e-300)))


def test_coarse_to_fine_truncation_equals_the_full_ladder() -> None:
    # the bound falls with the count, so bracketing on every 4th count then searching the
    # three below finds the same count (and bound) as scanning the whole ladder (consistency)
    rng = np.random.default_rng(7)
    for problem in (MIXED, ref.BRACKET, dataclasses.replace(MIXED, max_terms=100)):
        model = PlateSeries(problem)
        t = rng.random((len(model.series), 500)) ** 4 * model._depth
        t[:, :3] = 0.0
        terms, bound = plate._pick_coarse_fine(model._tail, model._ladder, t, model.budget)
        full = plate._pick(plate._tail_core(model._tail, model._ladder, t), model._ladder,
                           model.budget)
        np.testing.assert_allclose(terms, full[0], rtol=0.0, atol=0.0)
        np.testing.assert_allclose(bound, full[1], rtol=0.0, atol=0.0)


def test_sine_table_by_doubling_matches_numpy_sine() -> None:
    mu = np.arange(1, 301) * np.pi - 0.3 / np.arange(1, 301)
    phase = np.arctan2(mu, 4.0)
    sigma = np.linspace(0.0, 1.0, 101)
    # angle addition against the direct sine (common practice, no source)
    np.testing.assert_allclose(plate._sine_table(mu, phase, sigma),
                               np.sin(sigma[:, None] * mu + phase), rtol=0.0, atol=1e-12)


def test_settled_flow_series_extrapolates_algebraic_tails() -> None:
    n = np.arange(1, 2049, dtype=float)
    rows = np.array([1.0 / n**3,                                   # tail ~ N^-2
                     (1.0 + (-1.0) ** n / n) / n**3,               # period-2 part, tail ~ N^-2
                     np.exp(-0.1 * n)])                            # geometric: settles
    exact = [float(mpmath.zeta(3)),
             float(mpmath.zeta(3) - mpmath.altzeta(4)),
             float(1.0 / mpmath.expm1(0.1))]
    tol = np.full(3, 1e-11)
    for count in (256, 1024, 2048):
        values, accepted, growth = plate.settle_flow_series(rows[:, :count], tol, last=False)
        if accepted.all():
            break
    assert accepted.all()
    assert count <= 1024
    # independent implementation: mpmath zeta, alternating zeta (Dirichlet eta) and expm1
    np.testing.assert_allclose(values, exact, rtol=0.0, atol=1e-10)
    # a block that has not settled is not accepted, unless it is the last one
    _, accepted, _ = plate.settle_flow_series(rows[:1, :64], tol[:1], last=False)
    assert not accepted[0]
    values, accepted, _ = plate.settle_flow_series(rows[:1, :64], tol[:1], last=True)
    assert accepted[0]
    # the partial sum itself (common practice, no source)
    np.testing.assert_allclose(values, [np.sum(1.0 / n[:64] ** 3)], rtol=1e-15, atol=0.0)


SKEWED_OIL_FILM = PlateProblem(  # a quench tank wall with unequal side temperatures
    width=0.25, height=0.15, conductivity=25.0, bottom=conv(400.0, 300.0),
    left=fixed(20.0), right=fixed(120.0), top=fixed(20.0))


def test_reported_extremes_are_extreme_and_within_the_error_estimate() -> None:
    """The hottest point of a convective edge lies between samples (unequal sides): the
    reported value is at least the largest of a dense sampling of that edge, and no more than
    the error estimate above the true value there."""
    r = solve_plate(dataclasses.replace(SKEWED_OIL_FILM,
                                        limits=Limits(max_surface_temperature=500.0)))
    assert r.hottest.description == "bottom edge"
    xs = np.linspace(0.0, 0.25, 1001)
    dense = temperature_at(dataclasses.replace(SKEWED_OIL_FILM, atol=1e-9), xs, 0.0 * xs)
    est = r.convergence.error_estimate
    # the solver's own dense sampling at a much tighter tolerance (consistency, no source)
    assert r.hottest.temperature >= dense.max() - est - 1e-9
    at = temperature_at(dataclasses.replace(SKEWED_OIL_FILM, atol=1e-9),
                        np.array([r.hottest.position[0]]), np.array([0.0]))[0]
    np.testing.assert_allclose(r.hottest.temperature, at, rtol=0.0, atol=est + 1e-9)
    surface = r.safety.checks[0]
    assert surface.limit == "max_surface_temperature"
    np.testing.assert_allclose(surface.extreme, r.hottest.temperature, rtol=0.0, atol=est)


def test_extremes_with_generation_against_mpmath() -> None:
    # an interior maximum found by sampling and refinement, checked against the independent
    # high-precision series at the reported position (mpmath, `generation_series`)
    r = solve_plate(ref.HEATER)
    x, y = r.hottest.position
    expected = ref.generation_series(x, y, 0.08, 0.05, 16.0, 2.0e6)
    np.testing.assert_allclose(r.hottest.temperature, expected, rtol=0.0,
                               atol=r.convergence.error_estimate)
    # the heater's peak is its centre by symmetry (common practice, no source)
    np.testing.assert_allclose(r.hottest.position, (0.04, 0.025), rtol=0.0, atol=1e-6)


COLD_CAP_FIN = PlateProblem(  # a tall cooling-fin web: insulated sides, a cold cap, a fan face
    width=0.23, height=2.6, conductivity=41.0, bottom=INSULATED, left=INSULATED,
    right=conv(257.0, 70.35), top=Edge("flux", value=-36.0))
GAS_TILE = PlateProblem(  # a thin refractory tile over a hot gas stream, held at both ends
    width=0.26, height=0.0117, conductivity=1.67, bottom=conv(6684.0, 299.7),
    right=Edge("flux", value=-206.0), top=fixed(236.7), left=fixed(292.8))


@pytest.mark.parametrize("problem", [SKEWED_OIL_FILM, COLD_CAP_FIN, GAS_TILE],
                         ids=["skewed-oil-film", "cold-cap-fin", "gas-tile"])
def test_reported_extremes_bound_a_dense_boundary_sampling(problem: PlateProblem) -> None:
    """Without generation the extremes lie on the boundary: the reported hottest (coldest) is at
    least as hot (cold) as every point of a dense sampling of the four edges, up to the error
    estimates. The fin's coldest point is a corner of another sample line than its hottest; the
    tile's hottest is a peak narrower than the sample spacing, next to a fixed corner."""
    r = solve_plate(problem)
    w, h = problem.width, problem.height
    s = np.linspace(0.0, 1.0, 801)
    xs = np.concatenate((s * w, np.full(s.size, w), s * w, np.zeros(s.size)))
    ys = np.concatenate((np.zeros(s.size), s * h, np.full(s.size, h), s * h))
    tight = dataclasses.replace(problem, atol=1e-3 * r.convergence.atol)
    dense = temperature_at(tight, xs, ys)
    slack = r.convergence.error_estimate + tight.atol
    # the solver's own dense sampling at a tighter tolerance (consistency, no source)
    np.testing.assert_allclose(max(r.hottest.temperature, dense.max()), r.hottest.temperature,
                               rtol=0.0, atol=slack)
    np.testing.assert_allclose(min(r.coldest.temperature, dense.min()), r.coldest.temperature,
                               rtol=0.0, atol=slack)


# ---------------------------------------------------------------- the per-definition cache


def _fingerprint(result: plate.PlateResult) -> tuple:
    grid = None if result.grid_temperature is None else result.grid_temperature.tolist()
    return (result.point_temperatures.tolist(), grid, result.edge_heat_flow, result.hottest,
            result.coldest, result.convergence, result.safety, result.warnings,
            result.energy_balance)


def _with(problem: PlateProblem, **changes) -> PlateProblem:
    return dataclasses.replace(problem, **changes)


def test_cached_definitions_answer_as_a_fresh_solve_whatever_was_asked_before() -> None:
    # the reference is the same solver with an empty cache: only the history differs
    # with generation (extremes sampled on a square grid) and without (along the edges)
    light = _with(MIXED, points=((0.03, 0.04), (0.1, 0.01)),
                  limits=Limits(max_surface_temperature=60.0))
    near_edges = _with(MIXED, points=tuple((x, 0.999 * MIXED.height) for x in (0.01, 0.05, 0.1)))
    coarse = _with(MIXED, grid=(5, 7))
    fine = _with(MIXED, grid=(41, 37))
    example = _with(EXAMPLE, limits=Limits(max_surface_temperature=60.0))
    example_near = _with(EXAMPLE, points=((0.3, 0.9999), (0.59, 0.5)))
    example_grid = _with(EXAMPLE, grid=(9, 5))
    problems = (light, near_edges, coarse, fine, example, example_near, example_grid)
    fresh = {}
    for problem in problems:
        plate.CORES.clear()
        fresh[problem] = _fingerprint(solve_plate(problem))
    plate.CORES.clear()
    for problem in (near_edges, fine, light, coarse, light, fine, near_edges, example_near,
                    example_grid, example, example_near, example_grid, example):
        result = _fingerprint(solve_plate(problem))
        # points, flows, extremes, safety: identical; grids: equal up to rounding (a longer
        # mode table from an earlier request changes the blocking of the matrix products)
        assert result[0] == fresh[problem][0]
        assert result[2:] == fresh[problem][2:]
        if result[1] is not None:
            np.testing.assert_allclose(result[1], fresh[problem][1], rtol=1e-13, atol=1e-12)
    assert plate.CORES.hits >= 11


def test_the_cache_keys_on_the_definition_only_and_is_bounded() -> None:
    plate.CORES.clear()
    solve_plate(_with(MIXED, points=((0.1, 0.01),)))
    solve_plate(_with(MIXED, points=((0.02, 0.05),), grid=(3, 3),
                      limits=Limits(max_temperature=500.0)))
    assert (plate.CORES.hits, plate.CORES.misses) == (1, 1)
    for k in range(plate.CORE_CACHE_SIZE + 5):  # a new conductivity is a new definition
        solve_plate(_with(MIXED, conductivity=10.0 + k, points=((0.1, 0.01),)))
    assert len(plate.CORES) == plate.CORE_CACHE_SIZE
    assert 0 < plate.CORES.nbytes() <= plate.CORE_CACHE_BYTES


def test_the_cache_drops_the_oldest_cores_to_stay_within_its_byte_bound() -> None:
    cache = plate.CoreCache(entries=8, max_bytes=600_000)
    light = plate.definition_of(MIXED)
    near = plate.definition_of(EXAMPLE)
    cache.get(light)
    cache.settle(light)
    kept = cache.nbytes()
    assert 0 < kept < 600_000 and len(cache) == 1
    core = cache.get(near)
    # a point 10 um from the heated edge needs far longer mode tables (about 2 MB)
    plate._solve_with(dataclasses.replace(EXAMPLE, points=((0.3, 1e-5),)), core)
    cache.settle(near)
    assert len(cache) == 0 and cache.nbytes() == 0  # over the bound alone: nothing kept
    cache.get(light)
    cache.settle(light)
    assert cache.nbytes() == kept


def test_ill_posed_definitions_are_not_kept() -> None:
    plate.CORES.clear()
    balanced = PlateProblem(1.0, 1.0, 10.0, INSULATED, INSULATED, INSULATED, INSULATED)
    for _ in range(2):
        with pytest.raises(IllPosedError):
            solve_plate(balanced)
    assert len(plate.CORES) == 0


def test_a_solve_interrupted_midway_leaves_the_kept_plate_whole(monkeypatch) -> None:
    # the time budget raises anywhere in a request; here the second edge-sample set fails
    plate.CORES.clear()
    problem = _with(EXAMPLE, top=Edge("convection", film_coefficient=30.0, ambient=20.0))
    fresh = _fingerprint(solve_plate(problem))
    plate.CORES.clear()
    made = []
    real = plate._Samples

    def failing(*args):
        made.append(args)
        if len(made) == 2:
            raise KeyboardInterrupt("interrupted")
        return real(*args)

    monkeypatch.setattr(plate, "_Samples", failing)
    with pytest.raises(KeyboardInterrupt):
        solve_plate(problem)
    monkeypatch.setattr(plate, "_Samples", real)
    assert len(plate.CORES) == 1  # kept, without the half-made samples
    assert _fingerprint(solve_plate(problem)) == fresh
