"""Tests of the 2D finite-volume solver (service/solvers/grid*.py).

Sources are named beside each check; reference cases live in reference_grid.py.
"""

from __future__ import annotations

import math
from dataclasses import replace

import numpy as np
import pytest
from scipy.integrate import solve_ivp
from scipy.special import j0

from service.solvers.errors import IllPosedError, TooLargeError
from service.solvers.grid import (
    Cells,
    Edges,
    GridProblem,
    Limits,
    Segment,
    Transient,
    Zone,
    solve_grid,
)
from service.solvers.grid_assembly import (
    apply_matrix,
    build_materials,
    build_matrix,
    interior_conductances,
)
from service.solvers.grid_mesh import build_mesh, distribute
from service.solvers.grid_post import interpolate_points
from tests.solvers.reference_grid import CASES, SIGMA, slab_convection, slab_fixed_surface


def _profile(f, length: float, n: int = 4001) -> tuple[tuple[float, float], ...]:
    s = np.linspace(0.0, length, n)
    return tuple((float(a), float(b)) for a, b in zip(s, f(s), strict=True))


def _slope(h: list[float], err: list[float]) -> float:
    return float(np.polyfit(np.log(h), np.log(err), 1)[0])


# --------------------------------------------------------------------------------------------
# reference cases (closed forms, independent library solutions, a published benchmark)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_reference_case(case):
    result = solve_grid(case.problem)
    assert result.convergence.converged, result.convergence.message
    # source: see case.source (reference_grid.py names it beside each case)
    np.testing.assert_allclose(case.actual(result), case.expected, rtol=case.rtol, atol=case.atol)


# --------------------------------------------------------------------------------------------
# manufactured solutions and the observed order of accuracy

_W, _H, _K, _Q = 1.0, 0.8, 2.0, 50.0
_A = math.pi / _W


def _planar_exact(x, y):
    # harmonic part plus the particular solution of k lap T = -q: a manufactured solution,
    # common practice, no source
    return (
        10.0 * np.sin(_A * x) * np.sinh(_A * y) / math.sinh(_A * _H)
        + _Q * (_W * x - x * x) / (2.0 * _K)
        + 5.0
    )


def _planar_dtdx(x, y):
    return 10.0 * _A * np.cos(_A * x) * np.sinh(_A * y) / math.sinh(_A * _H) + _Q * (
        _W - 2.0 * x
    ) / (2.0 * _K)


def _planar_problem(n: int, zones=()) -> GridProblem:
    return GridProblem(
        width=_W,
        height=_H,
        cells=Cells(n, n),
        conductivity=_K,
        generation=_Q,
        zones=zones,
        edges=Edges(
            bottom=(Segment("temperature", profile=_profile(lambda s: _planar_exact(s, 0.0), _W)),),
            top=(Segment("temperature", profile=_profile(lambda s: _planar_exact(s, _H), _W)),),
            left=(Segment("temperature", profile=_profile(lambda s: _planar_exact(0.0, s), _H)),),
            # flux into the body through x = W is +k dT/dx there
            right=(Segment("flux", profile=_profile(lambda s: _K * _planar_dtdx(_W, s), _H)),),
        ),
        points=((0.5, 0.4), (0.9, 0.7), (1.0, 0.3), (0.25, 0.0)),
        output_grid=True,
    )


def test_manufactured_planar_second_order():
    h, field_err, point_err = [], [], []
    for n in (16, 32, 64, 128):
        r = solve_grid(_planar_problem(n))
        xx, yy = np.meshgrid(r.x, r.y)
        field_err.append(float(np.max(np.abs(r.field - _planar_exact(xx, yy)))))
        point_err.append(
            float(
                np.max(np.abs(r.point_temperatures - _planar_exact(r.points[:, 0], r.points[:, 1])))
            )
        )
        h.append(1.0 / n)
    # manufactured solution, common practice, no source: observed order ~2
    np.testing.assert_allclose(_slope(h, field_err), 2.0, rtol=0.0, atol=0.15)
    np.testing.assert_allclose(_slope(h, point_err), 2.0, rtol=0.0, atol=0.15)


def test_manufactured_planar_non_uniform_grid():
    # a zone of the same conductivity only forces grid lines, making the grid non-uniform
    zones = (Zone("marker", (0.13, 0.27, 0.41, 0.61)),)
    h, err = [], []
    for n in (16, 32, 64, 128):
        r = solve_grid(_planar_problem(n, zones))
        xx, yy = np.meshgrid(r.x, r.y)
        err.append(float(np.max(np.abs(r.field - _planar_exact(xx, yy)))))
        h.append(1.0 / n)
    assert not np.allclose(np.diff(r.x), np.diff(r.x)[0], rtol=1e-3, atol=0.0)
    # manufactured solution, common practice, no source
    np.testing.assert_allclose(_slope(h, err), 2.0, rtol=0.0, atol=0.15)


_R, _HZ, _AR, _QA, _KA = 0.5, 0.6, 4.0, 1.0e3, 3.0


def _axi_exact(r, z):
    # J0(a r) sinh(a z) is harmonic in cylindrical coordinates; q (R^2 - r^2)/(4k) solves
    # k (1/r) d/dr(r dT/dr) = -q: a manufactured solution, common practice, no source;
    # J0 from scipy.special
    return 20.0 * j0(_AR * r) * np.sinh(_AR * z) / math.sinh(_AR * _HZ) + _QA * (_R**2 - r**2) / (
        4.0 * _KA
    )


def test_manufactured_axisymmetric_second_order():
    h, err = [], []
    for n in (16, 32, 64, 128):
        p = GridProblem(
            width=_R,
            height=_HZ,
            geometry="axisymmetric",
            cells=Cells(n, n),
            conductivity=_KA,
            generation=_QA,
            edges=Edges(
                bottom=(
                    Segment("temperature", profile=_profile(lambda s: _axi_exact(s, 0.0), _R)),
                ),
                top=(Segment("temperature", profile=_profile(lambda s: _axi_exact(s, _HZ), _R)),),
                right=(Segment("temperature", profile=_profile(lambda s: _axi_exact(_R, s), _HZ)),),
            ),
            points=((0.0, 0.3), (0.2, 0.45), (0.37, 0.1)),
            output_grid=True,
        )
        r = solve_grid(p)
        rr, zz = np.meshgrid(r.x, r.y)
        err.append(
            max(
                float(np.max(np.abs(r.field - _axi_exact(rr, zz)))),
                float(
                    np.max(
                        np.abs(r.point_temperatures - _axi_exact(r.points[:, 0], r.points[:, 1]))
                    )
                ),
            )
        )
        h.append(1.0 / n)
    # manufactured solution, common practice, no source
    np.testing.assert_allclose(_slope(h, err), 2.0, rtol=0.0, atol=0.15)


def test_sleeve_log_drop_converges_at_second_order():
    # the pin-in-sleeve reference: ln(r2/r1) closed form (common practice), observed order ~2
    from tests.solvers.reference_grid import _PIN_TS, PIN, _pin_drop

    h, err = [], []
    for n in (22, 44, 88):
        r = solve_grid(replace(PIN, cells=Cells(n, 2)))
        err.append(abs(float(r.point_temperatures[0]) - (_PIN_TS + _pin_drop)))
        h.append(1.0 / n)
    np.testing.assert_allclose(_slope(h, err), 2.0, rtol=0.0, atol=0.15)


def test_solid_cylinder_with_generation():
    # a resistance-heated rod: T(0) - T(R) = q R^2 / (4 k), common practice, no source
    q, k, radius = 5.0e6, 16.0, 0.01
    p = GridProblem(
        width=radius,
        height=0.1,
        geometry="axisymmetric",
        cells=Cells(40, 2),
        conductivity=k,
        generation=q,
        edges=Edges(right=(Segment("temperature", value=200.0),)),
        points=((0.0, 0.05), (0.005, 0.05)),
    )
    r = solve_grid(p)
    np.testing.assert_allclose(
        r.point_temperatures,
        [200.0 + q * radius**2 / (4 * k), 200.0 + q * (radius**2 - 0.005**2) / (4 * k)],
        rtol=0.0,
        atol=2e-3,
    )


def test_series_cross_check_hot_top_edge():
    # rectangle, top edge at 1, other edges at 0: T = sum 4/(n pi) sin(n pi x/W)
    # sinh(n pi y/W)/sinh(n pi H/W), n odd; common practice, no source, summed here with numpy
    # in an overflow-free form (exp of non-positive arguments)
    width, height = 1.0, 0.5
    pts = np.array([[0.5, 0.25], [0.2, 0.4], [0.8, 0.1]])
    n = np.arange(1, 400, 2)[:, None]
    a = n * np.pi / width
    ratio = (np.exp(a * (pts[:, 1] - height)) - np.exp(-a * (pts[:, 1] + height))) / (
        1.0 - np.exp(-2.0 * a * height)
    )
    exact = (4.0 / (n * np.pi) * np.sin(a * pts[:, 0]) * ratio).sum(axis=0)
    p = GridProblem(
        width=width,
        height=height,
        cells=Cells(160, 80),
        conductivity=1.0,
        edges=Edges(
            bottom=(Segment("temperature", value=0.0),),
            right=(Segment("temperature", value=0.0),),
            top=(Segment("temperature", value=1.0),),
            left=(Segment("temperature", value=0.0),),
        ),
        points=tuple(map(tuple, pts)),
    )
    r = solve_grid(p)
    np.testing.assert_allclose(r.point_temperatures, exact, rtol=0.0, atol=2e-4)


# --------------------------------------------------------------------------------------------
# mesh


def test_grid_lines_follow_zones_and_segments():
    p = GridProblem(
        width=1.0,
        height=0.5,
        cells=Cells(10, 5),
        conductivity=1.0,
        zones=(Zone("skin", (0.0, 0.0, 0.0013, 0.5), conductivity=40.0),),
        edges=Edges(
            bottom=(
                Segment("temperature", value=1.0, start=0.0, end=0.37),
                Segment("convection", start=0.37, end=1.0, film_coefficient=5.0, ambient=0.0),
            ),
            left=(Segment("flux", value=10.0, end=0.21),),
        ),
    )
    mesh = build_mesh(p)
    for line in (0.0013, 0.37):
        assert np.min(np.abs(mesh.x_faces - line)) < 1e-15
    assert np.min(np.abs(mesh.y_faces - 0.21)) < 1e-15
    assert mesh.nx == 10 and mesh.ny == 5


def test_distribute_keeps_total_and_one_cell_per_interval():
    counts = distribute((0.0, 0.001, 0.5, 1.0), 20)
    assert sum(counts) == 20 and min(counts) >= 1
    assert distribute((0.0, 0.1, 0.2, 0.3), 2) == (1, 1, 1)
    # a short interval pinned at one cell while a long one gives cells back
    assert distribute((0.0, 0.001, 0.002, 1.0), 4) == (1, 1, 2)


def test_matrix_is_symmetric_and_conserves_energy():
    # stage 3 alone: interior conductances cancel in the column sums, so 1^T A = boundary
    # coefficients (discrete conservation, common practice)
    p = _busy_problem()
    mesh = build_mesh(p)
    k = build_materials(p, mesh).constant_k
    gx, gy = interior_conductances(mesh, k)
    extra = np.linspace(0.0, 1.0, mesh.cells).reshape(mesh.ny, mesh.nx)
    a = build_matrix(mesh, gx, gy, extra)
    np.testing.assert_allclose((a - a.T).toarray(), 0.0, rtol=0.0, atol=1e-12)
    np.testing.assert_allclose(
        np.asarray(a.sum(axis=0)).ravel(), extra.ravel(), rtol=0.0, atol=1e-9
    )
    field = np.cos(np.arange(mesh.cells)).reshape(mesh.ny, mesh.nx)
    np.testing.assert_allclose(
        apply_matrix(gx, gy, extra, field).ravel(), a @ field.ravel(), rtol=1e-12, atol=1e-12
    )


def test_point_interpolation_exact_for_a_linear_field():
    # stage 5 alone: with face and vertex values of a linear field, bilinear interpolation
    # within each cell quadrant reproduces it (common practice)
    p = GridProblem(
        width=0.3,
        height=0.2,
        cells=Cells(7, 5),
        conductivity=1.0,
        zones=(Zone("z", (0.1, 0.05, 0.2, 0.15)),),
        edges=Edges(top=(Segment("temperature", value=0.0),)),
    )
    mesh = build_mesh(p)
    ids = build_materials(p, mesh).ids

    def f(x, y):
        return 3.0 + 20.0 * x - 7.0 * y

    temp = f(*np.meshgrid(mesh.x, mesh.y))
    tx = f(*np.meshgrid(mesh.x_faces, mesh.y))
    ty = f(*np.meshgrid(mesh.x, mesh.y_faces))
    # edges, corners, the zone's corners (vertices where interfaces cross) and inside cells
    pts = np.array([[0.0, 0.0], [0.3, 0.2], [0.1, 0.05], [0.123, 0.077], [0.3, 0.11], [0.05, 0.2],
                    [0.2, 0.15], [0.1, 0.15], [0.2, 0.05]])
    # without conductivities, and with them (the heat balance at junction vertices)
    for k in (None, np.full((mesh.ny, mesh.nx), 2.5)):
        np.testing.assert_allclose(
            interpolate_points(mesh, ids, temp, tx, ty, pts, k),
            f(pts[:, 0], pts[:, 1]),
            rtol=0.0,
            atol=1e-12,
        )


# --------------------------------------------------------------------------------------------
# energy balance, solvers, nonlinear iteration


def _busy_problem(**kw) -> GridProblem:
    """A burner-block mock-up with every boundary kind, zones and generation."""
    return GridProblem(
        width=0.3,
        height=0.2,
        cells=Cells(30, 20),
        conductivity=1.6,
        zones=(
            Zone("heater", (0.1, 0.05, 0.15, 0.08), conductivity=20.0, generation=4.0e5),
            Zone("insulation", (0.0, 0.15, 0.3, 0.2), conductivity=0.1, max_temperature=150.0),
        ),
        edges=Edges(
            bottom=(
                Segment("temperature", value=40.0, end=0.1),
                Segment("flux", value=-300.0, start=0.1, end=0.2),
            ),
            right=(Segment("convection", film_coefficient=15.0, ambient=20.0, emissivity=0.8),),
            top=(Segment("radiation", emissivity=0.9, surroundings=25.0),),
            left=(Segment("insulated"),),
        ),
        points=((0.125, 0.065), (0.3, 0.1)),
        **kw,
    )


def test_energy_balance_closes_steady():
    r = solve_grid(_busy_problem())
    assert r.convergence.converged
    flows = sum(e.heat_flow for e in r.edges)
    # energy conservation, common practice: boundary inflow + generation = 0
    np.testing.assert_allclose(
        flows + r.energy_balance.generation, 0.0, rtol=0.0, atol=1e-8 * r.energy_balance.generation
    )
    np.testing.assert_allclose(
        r.energy_balance.generation, 4.0e5 * 0.05 * 0.03, rtol=1e-12, atol=0.0
    )
    assert r.energy_balance.relative_error < 1e-9
    segs = [s.heat_flow for e in r.edges for s in e.segments]
    np.testing.assert_allclose(sum(segs), flows, rtol=1e-12, atol=1e-12)
    bottom = next(e for e in r.edges if e.edge == "bottom")
    # the flux segment passes exactly its prescribed flux times its length (common practice)
    np.testing.assert_allclose(bottom.segments[1].heat_flow, -300.0 * 0.1, rtol=1e-12, atol=0.0)


def test_multigrid_agrees_with_direct():
    direct = solve_grid(_busy_problem(linear_solver="direct"))
    amg = solve_grid(_busy_problem(linear_solver="multigrid"))
    assert amg.linear_solver == "multigrid" and amg.linear_iterations > 0
    # independent solver path (pyamg) against SuperLU
    np.testing.assert_allclose(
        amg.point_temperatures, direct.point_temperatures, rtol=1e-8, atol=1e-8
    )


def test_without_pyamg_falls_back_to_direct_with_warning(monkeypatch):
    from service.solvers import grid, grid_solve

    monkeypatch.setattr(grid_solve, "multigrid_available", lambda: False)
    monkeypatch.setattr(grid, "multigrid_available", lambda: False)
    r = solve_grid(_busy_problem(linear_solver="multigrid"))
    assert r.linear_solver == "direct"
    assert any("pyamg is not installed" in w for w in r.warnings)


def test_forced_non_convergence_is_reported():
    table = ((0.0, 1.0), (500.0, 3.0))
    r = solve_grid(replace(_busy_problem(), conductivity=table, max_iterations=1))
    assert r.convergence.status == "max_iterations"
    assert r.convergence.iterations == 1
    assert "iterations" in r.convergence.message


def test_temperature_dependent_conductivity_converges_and_reports_iterations():
    table = ((0.0, 1.0), (500.0, 3.0))
    r = solve_grid(replace(_busy_problem(), conductivity=table))
    assert r.convergence.converged
    assert r.convergence.iterations > 1
    assert r.convergence.residual < 1e-6


# --------------------------------------------------------------------------------------------
# point interpolation and verify_mesh


def test_verify_mesh_estimate_tracks_true_error():
    r = solve_grid(replace(_planar_problem(16), verify_mesh=True))
    true = np.abs(r.point_temperatures - _planar_exact(r.points[:, 0], r.points[:, 1]))
    est = r.point_error_estimates
    assert est is not None
    big = true > 1e-3
    # Richardson estimate of order 2 within a factor 2 of the true error (manufactured case)
    assert np.all(est[big] > 0.5 * true[big]) and np.all(est[big] < 2.0 * true[big])
    assert r.convergence.error_estimate >= float(est.max())


# --------------------------------------------------------------------------------------------
# transients


_SLAB_L, _SLAB_K, _SLAB_RHO, _SLAB_C = 0.04, 15.0, 7900.0, 500.0
_ALPHA = _SLAB_K / (_SLAB_RHO * _SLAB_C)


def _slab(scheme: str, dt: float, times=(30.0, 120.0), nx: int = 200, **kw) -> GridProblem:
    return GridProblem(
        width=_SLAB_L,
        height=0.01,
        cells=Cells(nx, 1),
        conductivity=_SLAB_K,
        density=_SLAB_RHO,
        specific_heat=_SLAB_C,
        edges=Edges(
            left=(Segment("temperature", value=20.0),), right=(Segment("temperature", value=20.0),)
        ),
        transient=Transient(initial_temperature=220.0, times=times, time_step=dt, scheme=scheme),
        points=((0.01, 0.005), (0.02, 0.005)),
        **kw,
    )


@pytest.mark.parametrize(
    "scheme, dt, tol", [("backward_euler", 0.1, 0.1), ("crank_nicolson", 0.25, 0.01)]
)
def test_slab_quench_against_series(scheme, dt, tol):
    # tolerances: backward Euler is first order in time, about 0.8 K per second of step here
    r = solve_grid(_slab(scheme, dt))
    assert r.transient is not None and r.convergence.converged
    for n, t in enumerate(r.transient.times):
        exact = slab_fixed_surface(np.array([0.01, 0.02]), t, _SLAB_L, _ALPHA, 220.0, 20.0)
        # exact Fourier series of the quenched slab (numpy), common practice, no source
        np.testing.assert_allclose(r.transient.point_temperatures[n], exact, rtol=0.0, atol=tol)


def test_time_order_of_accuracy():
    # error against the series at t = 120 s, space fine enough to leave the time error
    errors = {"backward_euler": [], "crank_nicolson": []}
    exact = slab_fixed_surface(np.array([0.01]), 120.0, _SLAB_L, _ALPHA, 220.0, 20.0)
    steps = (8.0, 4.0, 2.0)
    for scheme in errors:
        for dt in steps:
            r = solve_grid(_slab(scheme, dt, times=(120.0,), nx=400))
            errors[scheme].append(abs(float(r.transient.point_temperatures[0, 0] - exact[0])))
    # exact series (numpy); expected orders 1 and 2, common practice
    np.testing.assert_allclose(
        _slope(list(steps), errors["backward_euler"]), 1.0, rtol=0.0, atol=0.15
    )
    np.testing.assert_allclose(
        _slope(list(steps), errors["crank_nicolson"]), 2.0, rtol=0.0, atol=0.3
    )


def test_convective_cooling_against_series():
    # half slab: mid-plane insulated at x = 0, convecting face at x = L
    half, k, h = 0.03, 45.0, 800.0
    p = GridProblem(
        width=half,
        height=0.01,
        cells=Cells(120, 1),
        conductivity=k,
        density=7800.0,
        specific_heat=460.0,
        edges=Edges(right=(Segment("convection", film_coefficient=h, ambient=30.0),)),
        transient=Transient(
            initial_temperature=600.0, times=(60.0, 300.0), time_step=1.0, scheme="crank_nicolson"
        ),
        points=((0.0, 0.005), (half, 0.005)),
    )
    r = solve_grid(p)
    alpha = k / (7800.0 * 460.0)
    for n, t in enumerate(r.transient.times):
        exact = slab_convection(np.array([0.0, half]), t, half, alpha, k, h, 600.0, 30.0)
        # series with eigenvalues from scipy.optimize.brentq, common practice, no source
        np.testing.assert_allclose(r.transient.point_temperatures[n], exact, rtol=0.0, atol=0.02)


def test_transient_energy_balance_and_factorisation_reuse():
    ramp = ((0.0, 20.0), (100.0, 300.0))  # surroundings heating up (time table)
    p = GridProblem(
        width=0.1,
        height=0.05,
        cells=Cells(20, 10),
        conductivity=2.0,
        density=2000.0,
        specific_heat=900.0,
        zones=(
            Zone(
                "core",
                (0.04, 0.02, 0.06, 0.03),
                conductivity=30.0,
                generation=((0.0, 0.0), (50.0, 2.0e5)),
            ),
        ),
        edges=Edges(
            bottom=(Segment("convection", film_coefficient=25.0, ambient=ramp),),
            top=(Segment("flux", value=((0.0, 0.0), (200.0, 500.0))),),
        ),
        transient=Transient(
            initial_temperature=20.0,
            times=(50.0, 100.0, 200.0),
            time_step=5.0,
            scheme="crank_nicolson",
        ),
        points=((0.05, 0.025),),
        output_grid=True,
    )
    r = solve_grid(p)
    tr = r.transient
    assert tr is not None and tr.fields is not None and tr.fields.shape == (3, 10, 20)
    # discrete energy conservation, common practice: stored = integral of inflow
    np.testing.assert_allclose(tr.stored_energy, tr.net_inflow, rtol=1e-9, atol=0.0)
    assert float(tr.balance_error.max()) < 1e-9
    # the matrix never changes: two factorisations (backward-Euler start, Crank-Nicolson)
    assert r.factorizations == 2


def test_insulated_block_with_generation_ramp():
    # dT/dt = q(t)/(rho c) with q = 0 until t0, then rising linearly:
    # T = T0 + q1 (t - t0)^2 / (2 (t1 - t0) rho c), which the trapezoidal rule of
    # Crank-Nicolson integrates exactly (the backward-Euler start-up steps see q = 0);
    # common practice, no source
    rho, c, q1, t0, t1 = 1000.0, 1000.0, 1.0e4, 10.0, 110.0
    p = GridProblem(
        width=0.1,
        height=0.1,
        cells=Cells(4, 4),
        conductivity=1.0,
        density=rho,
        specific_heat=c,
        generation=((0.0, 0.0), (t0, 0.0), (t1, q1)),
        transient=Transient(
            initial_temperature=10.0, times=(60.0, 110.0), time_step=10.0, scheme="crank_nicolson"
        ),
        points=((0.03, 0.07),),
    )
    r = solve_grid(p)
    times = r.transient.times
    np.testing.assert_allclose(
        r.transient.point_temperatures[:, 0],
        10.0 + q1 * (times - t0) ** 2 / (2 * (t1 - t0) * rho * c),
        rtol=1e-12,
        atol=0.0,
    )


def test_radiating_copper_tab_against_lumped_ode():
    # a small copper tab cooling by radiation alone (Biot number about 3e-3, so nearly
    # uniform): rho c A dT/dt = -eps sigma P (T^4 - Tsur^4), integrated independently with
    # scipy.integrate.solve_ivp (LSODA, rtol 1e-12); the lumped model itself is good to about
    # Bi/3 of the temperature drop, hence the 0.5 K tolerance
    eps, rho, c, side, t0, t_sur = 0.8, 8900.0, 385.0, 0.01, 800.0, 20.0
    rad = (Segment("radiation", emissivity=eps, surroundings=t_sur),)
    p = GridProblem(
        width=side,
        height=side,
        cells=Cells(6, 6),
        conductivity=400.0,
        density=rho,
        specific_heat=c,
        edges=Edges(bottom=rad, top=rad, left=rad, right=rad),
        transient=Transient(
            initial_temperature=t0, times=(60.0, 300.0), time_step=4.0, scheme="crank_nicolson"
        ),
        points=((0.005, 0.005),),
    )
    r = solve_grid(p)
    assert r.convergence.converged and r.convergence.iterations > 1

    def rate(t, temp):
        return (
            -eps
            * SIGMA
            * 4
            * side
            * ((temp + 273.15) ** 4 - (t_sur + 273.15) ** 4)
            / (rho * c * side * side)
        )

    sol = solve_ivp(
        rate, (0.0, 300.0), [t0], t_eval=[60.0, 300.0], rtol=1e-12, atol=1e-12, method="LSODA"
    )
    np.testing.assert_allclose(r.transient.point_temperatures[:, 0], sol.y[0], rtol=0.0, atol=0.5)
    assert float(r.transient.balance_error.max()) < 1e-9


# --------------------------------------------------------------------------------------------
# safety


def test_safety_zone_and_surface_limits():
    p = replace(
        _busy_problem(), limits=Limits(max_temperature=1000.0, max_surface_temperature=60.0)
    )
    r = solve_grid(p)
    names = [c.limit for c in r.safety.checks]
    assert names == ["max_temperature", "max_surface_temperature", "zones.1.max_temperature"]
    checks = {c.limit: c for c in r.safety.checks}
    np.testing.assert_allclose(
        checks["max_temperature"].extreme, r.hottest.temperature, rtol=0.0, atol=0.0
    )
    assert r.hottest.temperature >= float(r.point_temperatures.max())
    surf = checks["max_surface_temperature"]
    # the hottest exposed surface lies on the convecting right edge or the radiating top edge
    x, y = surf.where.position
    assert abs(x - 0.3) < 1e-12 or abs(y - 0.2) < 1e-12


def test_transient_safety_reports_first_crossing():
    # a quenched bar: the convecting surface falls below the limit some time after t = 0
    p = GridProblem(
        width=0.02,
        height=0.02,
        cells=Cells(10, 10),
        conductivity=20.0,
        density=7800.0,
        specific_heat=500.0,
        edges=Edges(right=(Segment("convection", film_coefficient=2000.0, ambient=20.0),)),
        transient=Transient(initial_temperature=500.0, times=(5.0, 10.0, 60.0), time_step=0.5),
        limits=Limits(min_temperature=300.0),
    )
    r = solve_grid(p)
    check = r.safety.checks[0]
    assert check.status == "exceeded" and check.first_crossed_time is not None
    assert 0.0 < check.first_crossed_time < 60.0
    np.testing.assert_allclose(check.where.position[0], 0.02, rtol=0.0, atol=1e-12)


# --------------------------------------------------------------------------------------------
# rules


@pytest.mark.parametrize(
    "change, field",
    [
        (dict(width=-1.0), "width"),
        (dict(conductivity=-2.0), "conductivity"),
        (dict(zones=(Zone("z", (0.2, 0.0, 0.5, 0.1)),)), "zones.0.region"),
        (
            dict(
                edges=Edges(
                    bottom=(
                        Segment("temperature", value=1.0, end=0.3),
                        Segment("insulated", start=0.2),
                    )
                )
            ),
            "edges.bottom.1.from",
        ),
        (dict(edges=Edges(bottom=(Segment("flux", value=5.0),))), "edges"),
        (
            dict(geometry="axisymmetric", edges=Edges(left=(Segment("temperature", value=1.0),))),
            "edges.left.0.type",
        ),
        (dict(points=((0.5, 0.3),)), "points.0"),
        (
            dict(edges=Edges(top=(Segment("convection", film_coefficient=5.0),))),
            "edges.top.0.film_coefficient",
        ),
        (
            dict(edges=Edges(top=(Segment("radiation", emissivity=1.5, surroundings=0.0),))),
            "edges.top.0.emissivity",
        ),
        (dict(generation=((0.0, 1.0), (1.0, 2.0))), "generation"),
    ],
)
def test_ill_posed_inputs_name_their_field(change, field):
    base = GridProblem(
        width=0.4,
        height=0.2,
        cells=Cells(4, 2),
        conductivity=1.0,
        edges=Edges(top=(Segment("temperature", value=0.0),)),
    )
    with pytest.raises(IllPosedError) as info:
        solve_grid(replace(base, **change))
    assert info.value.field == field


def test_transient_needs_heat_capacity():
    p = replace(_slab("backward_euler", 1.0), density=None)
    with pytest.raises(IllPosedError, match="density is required"):
        solve_grid(p)


def test_too_many_cells_rejected_before_allocation():
    p = GridProblem(
        width=1.0,
        height=1.0,
        cells=Cells(3000, 3000),
        conductivity=1.0,
        edges=Edges(top=(Segment("temperature", value=0.0),)),
        max_cells=1_000_000,
    )
    with pytest.raises(TooLargeError) as info:
        solve_grid(p)
    assert info.value.field == "cells"


def test_too_much_transient_work_rejected():
    p = replace(_slab("backward_euler", 0.01, times=(1000.0,)), max_cell_steps=1_000_000)
    with pytest.raises(TooLargeError) as info:
        solve_grid(p)
    assert info.value.field == "transient.time_step"


def test_gap_between_segments_is_insulated_with_warning():
    p = GridProblem(
        width=0.4,
        height=0.2,
        cells=Cells(8, 4),
        conductivity=1.0,
        edges=Edges(top=(Segment("temperature", value=0.0, end=0.1),)),
    )
    r = solve_grid(p)
    assert any("treated as insulated" in w for w in r.warnings)
