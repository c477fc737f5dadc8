"""2D finite-volume conduction on a rectangle: planar or axisymmetric, zoned, steady or transient.

Stages, each a named function in its own module:

1. build grid: `grid_mesh.build_mesh` (lines on every zone and segment boundary);
2. assemble: `grid_assembly.build_materials`, `grid_assembly.interior_conductances`;
3. apply boundaries: `grid_assembly.build_boundary`, `grid_assembly.boundary_terms`, then
   `grid_assembly.build_matrix`;
4. solve: `grid_solve.solve_steady_state` / `grid_solve.solve_time_steps`, with
   `grid_solve.linear_solver_for` choosing sparse direct or multigrid;
5. post-process: `grid_post.face_temperatures`, `grid_post.interpolate_points`,
   `grid_post.segment_flows`, `grid_post.Scopes` (extremes, safety), `grid_post.energy_balance`.

Units: SI, temperatures degC. Heat flows are positive into the body, in W per metre of depth
for ``planar`` and W for the full revolution of an ``axisymmetric`` body (`GridResult`'s
``heat_flow_unit`` says which); transient energies in J per metre or J.

The public entry point is `solve_grid`; its input dataclasses live in `grid_model` and are
re-exported here.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .convergence import Convergence
from .grid_assembly import build_boundary, build_materials, has_radiation, table_range_warnings
from .grid_mesh import build_mesh, plan_mesh
from .grid_model import (
    EDGE_NAMES,
    Cells,
    Edges,
    GridProblem,
    Segment,
    Transient,
    Zone,
    step_plan,
    validate,
)
from .grid_post import (
    EdgeFlow,
    EnergyBalance,
    Scopes,
    SegmentFlow,
    energy_balance,
    face_temperatures,
    interpolate_points,
    segment_flows,
)
from .grid_solve import (
    DIRECT_MAX_CELLS,
    DIRECT_MAX_CELLS_TRANSIENT,
    MULTIGRID_MAX_CYCLES,
    MULTIGRID_RTOL,
    Linearised,
    NonFiniteError,
    Outcome,
    Setup,
    SolverCache,
    State,
    TransientRun,
    boundary_inflow,
    linear_solver_for,
    multigrid_available,
    solve_steady_state,
    solve_time_steps,
    steady_residual,
    temperature_scale,
)
from .safety import Limits, Location, SafetyReport

__all__ = [
    "Cells",
    "Edges",
    "GridProblem",
    "Segment",
    "Transient",
    "Zone",
    "Limits",
    "GridResult",
    "EdgeFlow",
    "SegmentFlow",
    "EnergyBalance",
    "TransientHistory",
    "solve_grid",
    "DIRECT_MAX_CELLS",
    "DIRECT_MAX_CELLS_TRANSIENT",
]

_Array = np.ndarray


@dataclass(frozen=True)
class TransientHistory:
    """Results at each output time.

    Attributes
    ----------
    times : (nt,) s
    point_temperatures : (nt, n_points) degC
    fields : (nt, ny, nx) degC, or None unless ``output_grid``
    edge_heat_flow : (nt, 4) W/m or W, edges in the order bottom, right, top, left
    segment_heat_flow : (nt, n_segments), segments in the order of `GridResult.edges`
    stored_energy : (nt,) change of stored energy since t = 0, J/m or J
    net_inflow : (nt,) time integral of boundary inflow plus generation, J/m or J
    balance_error : (nt,) |stored - net inflow| relative to the gross throughput
    """

    times: _Array
    point_temperatures: _Array
    fields: _Array | None
    edge_heat_flow: _Array
    segment_heat_flow: _Array
    stored_energy: _Array
    net_inflow: _Array
    balance_error: _Array


@dataclass(frozen=True)
class GridResult:
    """Result of `solve_grid`. Steady values, or values at the final time of a transient.

    Attributes
    ----------
    geometry : str
    heat_flow_unit : str
        ``W/m`` (planar, per metre of depth) or ``W`` (axisymmetric, full revolution).
    x, y : (nx,), (ny,) cell centres, m
    x_faces, y_faces : (nx+1,), (ny+1,) grid lines, m
    field : (ny, nx) cell-centre temperatures, degC, or None unless ``output_grid``
    points : (n_points, 2) m
    point_temperatures : (n_points,) degC
    point_error_estimates : (n_points,) K, or None unless ``verify_mesh``
        Richardson-style estimate of each point's discretisation error (transients: the
        largest over the output times).
    edges : tuple of EdgeFlow, bottom, right, top, left
    energy_balance : EnergyBalance
    transient : TransientHistory or None (steady)
    hottest, coldest : Location
        Extremes over cell centres and boundary faces (and, for transients, every time step
        including t = 0).
    linear_solver : str
        ``direct`` or ``multigrid``.
    factorizations : int
        Matrices factorised (direct) or multigrid hierarchies built.
    linear_iterations : int
        Multigrid cycles in total (0 for direct).
    convergence : Convergence
        ``iterations``: Picard iterations (largest per step for transients; 1 for a linear
        steady problem); ``residual``: largest cell energy imbalance of the final field
        relative to the largest cell source (transients: of each step's equations, largest
        over all steps); ``energy_balance_error``; ``error_estimate``
        (verify_mesh); ``cells``.
    safety : SafetyReport
    warnings : tuple of str
    """

    geometry: str
    heat_flow_unit: str
    x: _Array
    y: _Array
    x_faces: _Array
    y_faces: _Array
    field: _Array | None
    points: _Array
    point_temperatures: _Array
    point_error_estimates: _Array | None
    edges: tuple[EdgeFlow, ...]
    energy_balance: EnergyBalance
    transient: TransientHistory | None
    hottest: Location
    coldest: Location
    linear_solver: str
    factorizations: int
    linear_iterations: int
    convergence: Convergence
    safety: SafetyReport
    warnings: tuple[str, ...]


# --------------------------------------------------------------------------------------------
# the whole pipeline


@dataclass(frozen=True)
class _Run:
    setup: Setup
    outputs: tuple[State, ...]
    transient: TransientRun | None
    outcome: Outcome
    cache: SolverCache
    scopes: Scopes


def _run(problem: GridProblem, scale: float, atol: float) -> _Run:
    """Build the grid, solve, and track extremes; used for the answer and for verify_mesh."""
    mesh = build_mesh(problem, scale)
    materials = build_materials(problem, mesh)
    bf = build_boundary(problem, mesh)
    nonlinear = (not materials.linear) or has_radiation(bf)
    setup = Setup(problem, mesh, materials, bf, nonlinear, atol)
    cache = SolverCache(linear_solver_for(problem, mesh.cells))
    outcome = Outcome()
    scopes = Scopes(setup)

    def track(time: float | None, temperature: _Array, lin: Linearised) -> None:
        st = State(0.0 if time is None else time, temperature, lin)
        tx, ty, surf = face_temperatures(setup, st)
        scopes.update(time, temperature, tx, ty, surf)

    with np.errstate(over="ignore", invalid="ignore"):
        if problem.transient is None:
            state = solve_steady_state(setup, cache, outcome)
            if np.all(np.isfinite(state.temperature)):
                track(None, state.temperature, state.lin)
            outputs: tuple[State, ...] = (state,)
            tr_run = None
        else:
            try:
                tr_run = solve_time_steps(setup, cache, outcome, track)
                outputs = tuple(tr_run.states)
            except NonFiniteError:
                tr_run = None
                outputs = ()
    if cache.failed and outcome.status == "converged":
        outcome.status = "max_iterations"
        outcome.message = (
            f"the multigrid solve did not reach its relative residual of "
            f"{MULTIGRID_RTOL:g} within {MULTIGRID_MAX_CYCLES} cycles"
        )
    return _Run(setup, outputs, tr_run, outcome, cache, scopes)


def _estimate_errors(
    problem: GridProblem, run: _Run, atol: float, points: _Array
) -> tuple[_Array | None, float | None, str]:
    """Richardson-style estimate: solve on a grid with every interval's cells doubled (or
    halved when doubling would pass max_cells or max_cell_steps) and scale the difference
    for order 2."""
    bx, by, cx, cy = plan_mesh(problem, 2.0)
    refined_cells = sum(cx) * sum(cy)
    refine = refined_cells <= problem.max_cells
    if problem.transient is not None:
        tr = problem.transient
        steps = sum(n for _, n, _ in step_plan(tr.times, tr.time_step))
        refine = refine and steps * refined_cells <= problem.max_cell_steps
    other = _run(problem, 2.0 if refine else 0.5, atol)
    if other.outcome.status == "non_finite" or not other.outputs:
        return (
            None,
            None,
            (
                f"no estimate: the {other.setup.mesh.cells}-cell comparison solve produced a "
                "non-finite field"
            ),
        )
    mesh = run.setup.mesh
    xx, yy = np.meshgrid(mesh.x, mesh.y)
    probes = np.vstack([points.reshape(-1, 2), np.column_stack([xx.ravel(), yy.ravel()])])
    worst = np.zeros(probes.shape[0])
    for mine, theirs in zip(run.outputs, other.outputs, strict=False):
        tx, ty, _ = face_temperatures(run.setup, mine)
        a = interpolate_points(
            mesh, run.setup.materials.ids, mine.temperature, tx, ty, probes, mine.lin.k
        )
        tx2, ty2, _ = face_temperatures(other.setup, theirs)
        b = interpolate_points(
            other.setup.mesh, other.setup.materials.ids, theirs.temperature, tx2, ty2, probes,
            theirs.lin.k,
        )
        # error of this grid for order p = 2: refined: |a-b| * 4/3; coarsened: |a-b| / 3
        worst = np.maximum(worst, np.abs(a - b) * (4.0 / 3.0 if refine else 1.0 / 3.0))
    how = (
        f"{'refined' if refine else 'coarsened'} grid of {other.setup.mesh.cells} cells, "
        "order 2 assumed; spatial error only"
        + ("" if problem.transient is None else " (time-step error not included)")
    )
    n = points.shape[0]
    if other.outcome.status != "converged":
        how += f"; the {other.setup.mesh.cells}-cell solve ended {other.outcome.status}"
    return worst[:n], float(worst.max()) if worst.size else 0.0, how


def solve_grid(problem: GridProblem) -> GridResult:
    """Solve 2D conduction on a rectangle by cell-centred finite volumes.

    Parameters
    ----------
    problem : GridProblem
        See `grid_model.GridProblem`; SI units, degC.

    Returns
    -------
    GridResult
        Temperatures at points (and the field on request), heat flow through each edge and
        segment (W/m planar, W axisymmetric), energy balance, extremes, safety and a
        `Convergence` record whose status is ``converged``, ``max_iterations`` (Picard or
        multigrid ran out of iterations), ``stagnated`` (Picard stopped improving) or
        ``non_finite``. Non-convergence is reported, not raised.

    Raises
    ------
    IllPosedError
        A rule of `grid_model.validate` is broken (with the field's JSON path).
    TooLargeError
        The grid (or the verify_mesh refinement, which then falls back to coarsening) or the
        number of time steps exceeds its cap.

    Notes
    -----
    Governing equation, planar (per unit depth) and axisymmetric (r = x, z = y)::

        rho c dT/dt = d/dx(k dT/dx) + d/dy(k dT/dy) + q                 (planar)
        rho c dT/dt = (1/r) d/dr(r k dT/dr) + d/dz(k dT/dz) + q         (axisymmetric)

    Boundary conditions on each segment, with n the outward normal: T = T_b (temperature);
    -k dT/dn = -q_in (flux into the body); -k dT/dn = h (T - T_inf) + eps sigma (T^4 -
    T_sur^4) (convection and/or radiation, absolute temperatures in the T^4 terms);
    dT/dn = 0 (insulated, and the axis). Steady problems need at least one temperature,
    convection or radiation segment.

    Discretisation: cell-centred finite volumes on a tensor grid whose lines follow every zone
    and segment boundary; interface conductances are series (harmonic) combinations of
    half-cell conductances, so planar layers (and axial layers of axisymmetric bodies) are
    exact; radial half cells use the face area over the distance (second order; see
    `grid_mesh`). Second order in space for smooth solutions (observed order in the tests
    1.9-2.0). Temperatures at points: bilinear within the cell quadrant from centre, face and
    vertex values (`grid_post.interpolate_points`). Time: theta scheme with the matrix
    factorisation reused while the matrix does not change. Temperature-dependent conductivity
    (cell values interpolated in the table) and radiation (tangent linearisation) are solved by
    Picard iteration to ``atol``. Linear systems: SuperLU for small and medium grids,
    Ruge-Stuben algebraic multigrid (pyamg) as a CG preconditioner for large ones.

    References
    ----------
    Patankar, S. V., *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, ch. 4
    (control-volume discretisation, harmonic-mean interface conductivity; from memory).
    Crank, J. and Nicolson, P., Proc. Camb. Phil. Soc. 43 (1947) 50-67 (time scheme).
    Rannacher, R., Numer. Math. 43 (1984) 309-327 (implicit start-up steps for
    Crank-Nicolson; from memory).
    Ruge, J. W. and Stuben, K., "Algebraic multigrid", in *Multigrid Methods*, SIAM, 1987.
    Roache, P. J., *Verification and Validation in Computational Science and Engineering*,
    Hermosa, 1998 (Richardson extrapolation for error estimates; from memory).
    """
    warnings = list(validate(problem))
    scale_t = temperature_scale(problem)
    # default: 1e-6 of the largest temperature difference the problem names, or 1e-6 K when
    # it names none (temperatures then driven by fluxes and generation alone)
    atol = float(problem.atol) if problem.atol is not None else 1e-6 * (scale_t or 1.0)
    run = _run(problem, 1.0, atol)
    setup, outcome = run.setup, run.outcome
    mesh = setup.mesh
    requested = problem.cells.nx * problem.cells.ny
    if mesh.cells != requested:
        warnings.append(
            f"cells: the grid has {mesh.nx} x {mesh.ny} cells (asked "
            f"{problem.cells.nx} x {problem.cells.ny}) so that zone and segment "
            "boundaries fall on grid lines"
        )
    if (
        run.cache.kind == "direct"
        and not multigrid_available()
        and (problem.linear_solver == "multigrid" or mesh.cells > DIRECT_MAX_CELLS)
    ):
        warnings.append(
            "linear_solver: pyamg is not installed, so the sparse direct solver was used "
            "(slower and more memory-hungry on large grids)"
        )
    points = np.asarray(problem.points, dtype=float).reshape(-1, 2)
    unit = "W/m" if problem.geometry == "planar" else "W"

    if outcome.status == "non_finite" or not run.outputs:
        return _non_finite_result(problem, run, points, unit, atol, warnings)

    final = run.outputs[-1]
    if problem.transient is None:
        residual = steady_residual(setup, final.temperature, final.time)
    else:
        residual = outcome.residual  # largest over all time steps
    tx, ty, surf = face_temperatures(setup, final)
    point_t = interpolate_points(
        mesh, setup.materials.ids, final.temperature, tx, ty, points, final.lin.k
    )
    edges = segment_flows(setup, final, surf)
    inflow = boundary_inflow(setup, final.lin, final.temperature)

    history = None
    if run.transient is None:
        gen_total = float(final.lin.generation.sum())
        gross = 0.5 * (float(np.abs(inflow).sum()) + float(np.abs(final.lin.generation).sum()))
        balance = energy_balance(float(inflow.sum()), gen_total, 0.0, gross)
        balance_error = balance.relative_error
    else:
        tr = run.transient
        balance = energy_balance(
            tr.boundary_integral, tr.generation_integral, tr.stored[-1], tr.gross[-1]
        )
        history = _history(problem, run, points)
        balance_error = float(history.balance_error.max())
    for w in table_range_warnings(setup.materials, final.temperature):
        warnings.append(w)

    point_err = None
    error_estimate = None
    if problem.verify_mesh:
        point_err, error_estimate, how = _estimate_errors(problem, run, atol, points)
        warnings_note = how if point_err is None else f"mesh error estimate from a {how}"
    else:
        warnings_note = ""

    lin_name = run.cache.kind
    msg_parts = [
        outcome.message or "converged",
        f"{mesh.cells} cells, {lin_name} linear solver"
        + (f" ({run.cache.iterations} multigrid cycles)" if lin_name == "multigrid" else "")
        + f", {run.cache.factorizations} factorisation(s)",
        "residual = largest cell energy imbalance relative to the largest cell source",
    ]
    if warnings_note:
        msg_parts.append(warnings_note)
    convergence = Convergence(
        status=outcome.status,
        message="; ".join(msg_parts),
        iterations=outcome.iterations,
        error_estimate=error_estimate,
        residual=residual,
        atol=atol,
        cells=mesh.cells,
        energy_balance_error=balance_error,
    )
    body = run.scopes.scope(0)
    return GridResult(
        geometry=problem.geometry,
        heat_flow_unit=unit,
        x=mesh.x,
        y=mesh.y,
        x_faces=mesh.x_faces,
        y_faces=mesh.y_faces,
        field=final.temperature.copy() if problem.output_grid else None,
        points=points,
        point_temperatures=point_t,
        point_error_estimates=point_err,
        edges=edges,
        energy_balance=balance,
        transient=history,
        hottest=body.hottest,
        coldest=body.coldest,
        linear_solver=lin_name,
        factorizations=run.cache.factorizations,
        linear_iterations=run.cache.iterations,
        convergence=convergence,
        safety=run.scopes.safety(problem.limits),
        warnings=tuple(warnings),
    )


def _history(problem: GridProblem, run: _Run, points: _Array) -> TransientHistory:
    tr = run.transient
    assert tr is not None
    setup = run.setup
    pts, fields, eflow, sflow = [], [], [], []
    for st in run.outputs:
        tx, ty, surf = face_temperatures(setup, st)
        pts.append(
            interpolate_points(
                setup.mesh, setup.materials.ids, st.temperature, tx, ty, points, st.lin.k
            )
        )
        if problem.output_grid:
            fields.append(st.temperature.copy())
        edges = segment_flows(setup, st, surf)
        eflow.append([e.heat_flow for e in edges])
        sflow.append([s.heat_flow for e in edges for s in e.segments])
    stored = np.asarray(tr.stored)
    inflow = np.asarray(tr.inflow)
    scale = np.maximum(np.asarray(tr.gross), np.abs(stored))
    with np.errstate(divide="ignore", invalid="ignore"):
        err = np.where(scale > 0.0, np.abs(inflow - stored) / np.where(scale > 0, scale, 1.0), 0.0)
    return TransientHistory(
        times=np.array([st.time for st in run.outputs]),
        point_temperatures=np.array(pts).reshape(len(run.outputs), points.shape[0]),
        fields=np.array(fields) if problem.output_grid else None,
        edge_heat_flow=np.array(eflow),
        segment_heat_flow=np.array(sflow).reshape(len(run.outputs), -1),
        stored_energy=stored,
        net_inflow=inflow,
        balance_error=err,
    )


def _non_finite_result(
    problem: GridProblem, run: _Run, points: _Array, unit: str, atol: float, warnings: list[str]
) -> GridResult:
    """A result that only carries the failure (no numbers can be trusted)."""
    mesh = run.setup.mesh
    nan_loc = Location(temperature=math.nan, description="not available (non-finite field)")
    convergence = Convergence(
        status="non_finite",
        message=run.outcome.message or "a non-finite temperature appeared",
        iterations=run.outcome.iterations,
        atol=atol,
        cells=mesh.cells,
    )
    nan_balance = EnergyBalance(math.nan, math.nan, math.nan, math.nan, math.nan)
    edges = tuple(EdgeFlow(edge=e, heat_flow=math.nan, segments=()) for e in EDGE_NAMES)
    return GridResult(
        geometry=problem.geometry,
        heat_flow_unit=unit,
        x=mesh.x,
        y=mesh.y,
        x_faces=mesh.x_faces,
        y_faces=mesh.y_faces,
        field=None,
        points=points,
        point_temperatures=np.full(points.shape[0], math.nan),
        point_error_estimates=None,
        edges=edges,
        energy_balance=nan_balance,
        transient=None,
        hottest=nan_loc,
        coldest=nan_loc,
        linear_solver=run.cache.kind,
        factorizations=run.cache.factorizations,
        linear_iterations=run.cache.iterations,
        convergence=convergence,
        safety=SafetyReport(status="not_checked"),
        warnings=tuple(warnings),
    )
