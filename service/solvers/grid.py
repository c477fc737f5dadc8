"""2D finite-volume conduction on a rectangle: planar or axisymmetric, zoned, steady or transient.

Stages (each a named function): build grid (`grid_mesh.build_mesh`) -> assemble materials and
conductances (`grid_assembly`) -> apply boundaries (`grid_assembly.boundary_terms`) -> solve
(`solve_steady_state` / `solve_time_steps`, with `linear_solver_for`) -> post-process
(`face_temperatures`, `interpolate_points`, `segment_flows`, `scope_extremes`).

Units: SI, temperatures degC. Heat flows are positive into the body, in W per metre of depth
for ``planar`` and W for the full revolution of an ``axisymmetric`` body (`GridResult`'s
``heat_flow_unit`` says which); transient energies in J per metre or J.

The public entry point is `solve_grid`; its input dataclasses live in `grid_model` and are
re-exported here.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .convergence import Convergence
from .grid_assembly import (
    BoundaryFaces,
    Materials,
    apply_matrix,
    boundary_terms,
    build_boundary,
    build_materials,
    build_matrix,
    cell_conductivity,
    cell_generation,
    has_radiation,
    solve_surfaces,
    interior_conductances,
    surface_temperatures,
    table_range_warnings,
)
from .grid_mesh import Mesh, build_mesh, plan_mesh
from .grid_model import (
    EDGE_NAMES,
    Cells,
    Edges,
    GridProblem,
    Segment,
    Transient,
    Zone,
    is_table,
    step_plan,
    table_at,
    validate,
)
from .safety import Limits, Location, SafetyReport, Scope, check_limits

__all__ = [
    "Cells", "Edges", "GridProblem", "Segment", "Transient", "Zone", "Limits",
    "GridResult", "EdgeFlow", "SegmentFlow", "EnergyBalance", "TransientHistory",
    "solve_grid", "DIRECT_MAX_CELLS", "DIRECT_MAX_CELLS_TRANSIENT",
]

_Array = np.ndarray

#: "auto" uses the sparse direct solver (splu) up to this many cells for a steady solve and
#: Ruge-Stuben multigrid above (MEASURED.md: at 262k cells splu 1.3 s vs multigrid 0.7 s).
DIRECT_MAX_CELLS = 150_000
#: Transients reuse one factorisation for every step, so the direct solver pays off longer.
DIRECT_MAX_CELLS_TRANSIENT = 300_000
#: Relative residual (||b - A x|| / ||b||) asked of each multigrid solve.
MULTIGRID_RTOL = 1e-10
#: Multigrid cycles allowed per linear solve.
MULTIGRID_MAX_CYCLES = 200
#: Factorisations kept per run (keyed by step length and scheme weight).
_CACHE_ENTRIES = 4


# --------------------------------------------------------------------------------------------
# results


@dataclass(frozen=True)
class SegmentFlow:
    """Heat flow through one boundary segment (positive into the body).

    Attributes
    ----------
    edge : str
        ``bottom``, ``right``, ``top`` or ``left``.
    index : int
        Position of the segment in that edge's list.
    start, end : float
        Extent along the edge, m.
    type : str
    heat_flow : float
        W per m depth (planar) or W (axisymmetric); at the final time for transients.
    mean_surface_temperature : float
        Area-weighted mean surface temperature, degC.
    """

    edge: str
    index: int
    start: float
    end: float
    type: str
    heat_flow: float
    mean_surface_temperature: float


@dataclass(frozen=True)
class EdgeFlow:
    """Heat flow through one edge (sum of its segments; uncovered parts are insulated)."""

    edge: str
    heat_flow: float
    segments: tuple[SegmentFlow, ...]


@dataclass(frozen=True)
class EnergyBalance:
    """Global energy balance.

    Steady: ``boundary_inflow`` (W) + ``generation`` (W) = ``imbalance`` (should be 0),
    ``stored`` = 0. Transient (from t = 0 to the final time): ``boundary_inflow`` and
    ``generation`` are time integrals (J), ``stored`` is the change of stored energy (J) and
    ``imbalance`` = boundary_inflow + generation - stored. Per metre of depth for planar
    bodies. ``relative_error`` = |imbalance| / the gross heat throughput.
    """

    boundary_inflow: float
    generation: float
    stored: float
    imbalance: float
    relative_error: float


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
        steady problem); ``residual``: largest cell energy imbalance of the final fields
        relative to the largest cell source; ``energy_balance_error``; ``error_estimate``
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
# linear solvers


class _Direct:
    """Sparse LU (SuperLU) of one matrix; each solve is a pair of triangular solves."""

    name = "direct"

    def __init__(self, matrix: sp.csr_matrix) -> None:
        # minimum-degree ordering on A^T + A suits the symmetric 5-point pattern (MEASURED.md)
        self._lu = spla.splu(matrix.tocsc(), permc_spec="MMD_AT_PLUS_A")

    def solve(self, rhs: _Array, guess: _Array) -> tuple[_Array, int, bool]:
        return self._lu.solve(rhs), 0, True


class _Multigrid:
    """Ruge-Stuben algebraic multigrid (pyamg) as a CG preconditioner; hierarchy reused."""

    name = "multigrid"

    def __init__(self, matrix: sp.csr_matrix) -> None:
        import pyamg  # imported here: only large grids need it

        self._ml = pyamg.ruge_stuben_solver(matrix)

    def solve(self, rhs: _Array, guess: _Array) -> tuple[_Array, int, bool]:
        residuals: list[float] = []
        x = self._ml.solve(rhs, x0=guess, tol=MULTIGRID_RTOL, maxiter=MULTIGRID_MAX_CYCLES,
                           accel="cg", residuals=residuals)
        norm_b = float(np.linalg.norm(rhs))
        ok = (not residuals) or residuals[-1] <= MULTIGRID_RTOL * max(norm_b, 1e-300) * 1.0001
        return np.asarray(x), max(len(residuals) - 1, 0), bool(ok)


def linear_solver_for(problem: GridProblem, cells: int) -> str:
    """Choose ``direct`` or ``multigrid`` for `cells` unknowns (see DIRECT_MAX_CELLS)."""
    if problem.linear_solver != "auto":
        return problem.linear_solver
    limit = DIRECT_MAX_CELLS if problem.transient is None else DIRECT_MAX_CELLS_TRANSIENT
    return "direct" if cells <= limit else "multigrid"


class _SolverCache:
    """Factorisations (or multigrid hierarchies) reused while the matrix does not change.

    Keyed by (step length, scheme weight); an entry is reused only when the conductances and
    boundary coefficients it was built from are equal to the current ones. At most
    `_CACHE_ENTRIES` entries, the oldest dropped first; one cache per run, never shared.
    """

    def __init__(self, kind: str) -> None:
        self.kind = kind
        self.entries: OrderedDict[tuple[float, float], tuple[tuple[_Array, ...], object]] = (
            OrderedDict())
        self.factorizations = 0
        self.iterations = 0
        self.failed = False

    def solve(self, key: tuple[float, float], signature: tuple[_Array, ...],
              matrix: Callable[[], sp.csr_matrix], rhs: _Array, guess: _Array) -> _Array:
        entry = self.entries.get(key)
        if entry is not None and all(np.array_equal(a, b)
                                     for a, b in zip(entry[0], signature, strict=True)):
            solver = entry[1]
            self.entries.move_to_end(key)
        else:
            a = matrix()
            solver = _Direct(a) if self.kind == "direct" else _Multigrid(a)
            self.factorizations += 1
            self.entries[key] = (tuple(s.copy() for s in signature), solver)
            while len(self.entries) > _CACHE_ENTRIES:
                self.entries.popitem(last=False)
        x, its, ok = solver.solve(rhs, guess)  # type: ignore[attr-defined]
        self.iterations += its
        self.failed |= not ok
        return x


# --------------------------------------------------------------------------------------------
# the discrete operator at one state


@dataclass(frozen=True)
class _Linearised:
    """Coefficients of the discrete equations at one temperature estimate and time."""

    k: _Array           # (ny, nx) conductivity
    gx: _Array          # (ny, nx-1)
    gy: _Array          # (ny-1, nx)
    G: _Array           # (F,) boundary face coefficients
    Q: _Array           # (F,) boundary face sources
    diag: _Array        # (ny, nx) boundary coefficients gathered per cell
    source: _Array      # (ny, nx) boundary sources + generation
    generation: _Array  # (ny, nx) generation, W


@dataclass(frozen=True)
class _Setup:
    problem: GridProblem
    mesh: Mesh
    materials: Materials
    boundary: BoundaryFaces
    nonlinear: bool
    atol: float


def linearise(setup: _Setup, temperature: _Array, surface: _Array, time: float) -> _Linearised:
    """Stages 2-3: conductances and boundary terms at a temperature estimate and time."""
    mesh, bf = setup.mesh, setup.boundary
    k = cell_conductivity(setup.materials, temperature)
    gx, gy = interior_conductances(mesh, k)
    G, Q = boundary_terms(bf, k, surface, time)
    n = mesh.cells
    diag = np.bincount(bf.cell, weights=G, minlength=n).reshape(mesh.ny, mesh.nx)
    gen = cell_generation(setup.materials, mesh, time)
    source = np.bincount(bf.cell, weights=Q, minlength=n).reshape(mesh.ny, mesh.nx) + gen
    return _Linearised(k=k, gx=gx, gy=gy, G=G, Q=Q, diag=diag, source=source, generation=gen)


def _boundary_inflow(setup: _Setup, lin: _Linearised, temperature: _Array) -> _Array:
    """Heat inflow through each boundary face, W (per m depth planar)."""
    return lin.Q - lin.G * temperature.ravel()[setup.boundary.cell]


def _residual(setup: _Setup, temperature: _Array, time: float) -> float:
    """Largest cell imbalance of the steady equations, relative to the largest cell source."""
    surface = _surface(setup, temperature, time)
    lin = linearise(setup, temperature, surface, time)
    r = lin.source - apply_matrix(lin.gx, lin.gy, lin.diag, temperature)
    scale = float(np.max(np.abs(lin.source)))
    flows = float(np.max(lin.diag * np.abs(temperature))) if lin.diag.size else 0.0
    scale = max(scale, flows)
    return float(np.max(np.abs(r))) / scale if scale > 0.0 else float(np.max(np.abs(r)))


def _surface(setup: _Setup, temperature: _Array, time: float) -> _Array:
    """Boundary-face temperatures consistent with `temperature` (radiation solved exactly)."""
    k = cell_conductivity(setup.materials, temperature)
    return solve_surfaces(setup.boundary, k, temperature, time)


def _guess(problem: GridProblem) -> float:
    """A starting temperature: the mean of the temperatures the problem names."""
    if problem.transient is not None:
        return float(problem.transient.initial_temperature)
    vals: list[float] = []
    for _, segs in problem.edges.named():
        for seg in segs:
            for v in (seg.value if seg.type == "temperature" else None, seg.ambient,
                      seg.surroundings):
                if v is not None:
                    vals.append(table_at(v, 0.0))
            if seg.profile is not None and seg.type == "temperature":
                vals.extend(float(p[1]) for p in seg.profile)
    return float(np.mean(vals)) if vals else 0.0


def _temperature_scale(problem: GridProblem) -> float:
    """The largest temperature difference named in the problem, K (0 if none)."""
    vals: list[float] = []
    if problem.transient is not None:
        vals.append(problem.transient.initial_temperature)
    for _, segs in problem.edges.named():
        for seg in segs:
            for v in (seg.value if seg.type == "temperature" else None, seg.ambient,
                      seg.surroundings):
                if v is None:
                    continue
                if is_table(v):
                    vals.extend(float(p[1]) for p in v)  # type: ignore[union-attr]
                else:
                    vals.append(float(v))  # type: ignore[arg-type]
            if seg.profile is not None and seg.type == "temperature":
                vals.extend(float(p[1]) for p in seg.profile)
    return (max(vals) - min(vals)) if vals else 0.0


# --------------------------------------------------------------------------------------------
# stage 4: solve


@dataclass
class _Outcome:
    """Mutable record of one run (internal)."""

    status: str = "converged"
    message: str = ""
    iterations: int = 0
    residual: float = 0.0


def _picard(setup: _Setup, cache: _SolverCache, temperature: _Array, time: float,
            outcome: _Outcome, assemble: Callable[[_Linearised], tuple[_Array, _Array]],
            key: tuple[float, float], scale_diag: Callable[[_Linearised], tuple[_Array, ...]],
            ) -> tuple[_Array, _Linearised]:
    """Picard (successive substitution) on the conductivity and radiation coefficients.

    `assemble(lin)` returns (matrix-diagonal addition, right-hand side) for the state `lin`;
    the matrix is theta * A(lin) + extra diagonal. Stops when the largest temperature change
    is below atol; halves the relaxation when the change grows; reports ``stagnated`` when
    five iterations brought no improvement and ``max_iterations`` when out of iterations.
    """
    p = setup.problem
    mesh = setup.mesh
    surface = _surface(setup, temperature, time) if setup.nonlinear else np.zeros(
        setup.boundary.cell.size)
    relax = 1.0
    changes: list[float] = []
    lin = linearise(setup, temperature, surface, time)
    for it in range(1, p.max_iterations + 1):
        extra, rhs = assemble(lin)
        theta = key[1]
        t_new = cache.solve(
            key, scale_diag(lin),
            lambda lin=lin, extra=extra, theta=theta: build_matrix(
                mesh, theta * lin.gx, theta * lin.gy, theta * lin.diag + extra),
            rhs.ravel(), temperature.ravel()).reshape(mesh.ny, mesh.nx)
        if not np.all(np.isfinite(t_new)):
            outcome.status = "non_finite"
            outcome.message = "a non-finite temperature appeared in the linear solve"
            outcome.iterations = max(outcome.iterations, it)
            return t_new, lin
        if not setup.nonlinear:
            outcome.iterations = max(outcome.iterations, 1)
            return t_new, lin
        change = float(np.max(np.abs(t_new - temperature)))
        if changes and change > changes[-1]:
            relax = max(0.25, 0.5 * relax)
        changes.append(change)
        temperature = temperature + relax * (t_new - temperature)
        if change <= setup.atol:
            outcome.iterations = max(outcome.iterations, it)
            return temperature, lin
        if len(changes) > 10 and change >= 0.95 * changes[-6]:
            outcome.iterations = max(outcome.iterations, it)
            if outcome.status == "converged":
                outcome.status = "stagnated"
                outcome.message = (f"the conductivity/radiation iteration stopped improving at "
                                   f"a temperature change of {change:.3g} K (atol "
                                   f"{setup.atol:.3g} K)")
            return temperature, lin
        surface = _surface(setup, temperature, time)
        lin = linearise(setup, temperature, surface, time)
    outcome.iterations = max(outcome.iterations, p.max_iterations)
    if outcome.status == "converged":
        outcome.status = "max_iterations"
        outcome.message = (f"the conductivity/radiation iteration used all {p.max_iterations} "
                           f"iterations; last temperature change {changes[-1]:.3g} K (atol "
                           f"{setup.atol:.3g} K)")
    return temperature, lin


@dataclass(frozen=True)
class _State:
    """A solved state: time, field and the coefficients used to reach it."""

    time: float
    temperature: _Array
    lin: _Linearised


def solve_steady_state(setup: _Setup, cache: _SolverCache, outcome: _Outcome) -> _State:
    """Stage 4 (steady): A(T) T = b(T), one linear solve or a Picard iteration."""
    t0 = np.full((setup.mesh.ny, setup.mesh.nx), _guess(setup.problem))
    temperature, lin = _picard(
        setup, cache, t0, 0.0, outcome,
        assemble=lambda lin: (np.zeros_like(lin.diag), lin.source),
        key=(0.0, 1.0), scale_diag=lambda lin: (lin.gx, lin.gy, lin.diag))
    if setup.nonlinear:
        # coefficients consistent with the final field, for fluxes and face temperatures
        lin = linearise(setup, temperature, _surface(setup, temperature, 0.0), 0.0)
    return _State(0.0, temperature, lin)


@dataclass
class _TransientRun:
    states: list[_State]
    stored: list[float]
    inflow: list[float]
    gross: list[float]
    boundary_integral: float
    generation_integral: float


def solve_time_steps(setup: _Setup, cache: _SolverCache, outcome: _Outcome,
                     on_step: Callable[[float, _Array, _Linearised], None]) -> _TransientRun:
    """Stage 4 (transient): the theta scheme from the initial field to each output time.

    C (T1 - T0) / dt = theta (b1 - A1 T1) + (1 - theta) (b0 - A0 T0), theta = 1 (backward
    Euler) or 1/2 (Crank-Nicolson, whose first step is replaced by two backward-Euler half
    steps to damp the start-up jump). Stored energy and the time integral of the inflow use the
    same weights, so the discrete energy balance closes to solver precision.
    """
    p = setup.problem
    tr = p.transient
    assert tr is not None and setup.materials.heat_capacity is not None
    cap = setup.materials.heat_capacity
    mesh = setup.mesh
    temperature = np.full((mesh.ny, mesh.nx), float(tr.initial_temperature))
    surface = _surface(setup, temperature, 0.0) if setup.nonlinear else np.zeros(
        setup.boundary.cell.size)
    lin0 = linearise(setup, temperature, surface, 0.0)
    on_step(0.0, temperature, lin0)
    cn = tr.scheme == "crank_nicolson"
    stored = inflow = gross = 0.0
    b_int = g_int = 0.0
    run = _TransientRun([], [], [], [], 0.0, 0.0)
    first = True

    def flows(lin: _Linearised, temp: _Array) -> tuple[float, float, float]:
        face = _boundary_inflow(setup, lin, temp)
        gen = float(lin.generation.sum())
        return (float(face.sum()), gen,
                0.5 * (float(np.abs(face).sum()) + float(np.abs(lin.generation).sum())))

    for start, n, dt in step_plan(tr.times, tr.time_step):
        for s in range(n):
            t_end = start + (s + 1) * dt
            if first and cn:
                substeps = [(t_end - 0.5 * dt, 0.5 * dt, 1.0), (t_end, 0.5 * dt, 1.0)]
            else:
                substeps = [(t_end, dt, 0.5 if cn else 1.0)]
            first = False
            for t1, h, theta in substeps:
                t_prev = temperature
                lin_prev = lin0
                c_h = cap / h
                old = c_h * t_prev
                if theta < 1.0:
                    old = old + (1.0 - theta) * (
                        lin_prev.source - apply_matrix(lin_prev.gx, lin_prev.gy, lin_prev.diag,
                                                       t_prev))

                def assemble(lin: _Linearised, old: _Array = old, c_h: _Array = c_h,
                             theta: float = theta) -> tuple[_Array, _Array]:
                    return c_h, old + theta * lin.source

                temperature, lin1 = _picard(
                    setup, cache, t_prev, t1, outcome, assemble=assemble, key=(h, theta),
                    scale_diag=lambda lin: (lin.gx, lin.gy, lin.diag))
                if outcome.status == "non_finite":
                    raise _NonFinite
                b0, g0, a0 = flows(lin_prev, t_prev)
                b1, g1, a1 = flows(lin1, temperature)
                stored += float((cap * (temperature - t_prev)).sum())
                b_int += h * (theta * b1 + (1.0 - theta) * b0)
                g_int += h * (theta * g1 + (1.0 - theta) * g0)
                inflow = b_int + g_int
                gross += h * (theta * a1 + (1.0 - theta) * a0)
                if setup.nonlinear:
                    # the next step starts from coefficients consistent with the new field
                    lin0 = linearise(setup, temperature, _surface(setup, temperature, t1), t1)
                else:
                    lin0 = lin1
                on_step(t1, temperature, lin0)
        run.states.append(_State(start + n * dt, temperature, lin0))
        run.stored.append(stored)
        run.inflow.append(inflow)
        run.gross.append(gross)
    run.boundary_integral = b_int
    run.generation_integral = g_int
    return run


class _NonFinite(Exception):
    """Internal: a transient step produced NaN or infinity."""


# --------------------------------------------------------------------------------------------
# stage 5: post-process


def face_temperatures(setup: _Setup, state: _State) -> tuple[_Array, _Array, _Array]:
    """Temperatures on x faces (ny, nx+1), y faces (ny+1, nx) and boundary faces (F,), degC.

    Interior faces: the flux-continuous value (a T_P + b T_E) / (a + b) with a, b the two
    half-cell conductances, exact at material interfaces of layered media.
    """
    mesh, bf, lin, temp = setup.mesh, setup.boundary, state.lin, state.temperature
    k = lin.k
    tx = np.empty((mesh.ny, mesh.nx + 1))
    ty = np.empty((mesh.ny + 1, mesh.nx))
    a = k[:, :-1] * mesh.s_east[:, :-1]
    b = k[:, 1:] * mesh.s_west[:, 1:]
    tx[:, 1:-1] = (a * temp[:, :-1] + b * temp[:, 1:]) / (a + b)
    c = k[:-1, :] * mesh.s_north[:-1, :]
    d = k[1:, :] * mesh.s_south[1:, :]
    ty[1:-1, :] = (c * temp[:-1, :] + d * temp[1:, :]) / (c + d)
    surf = surface_temperatures(bf, k, lin.G, lin.Q, temp)
    nx, ny = mesh.nx, mesh.ny
    ty[0, :] = surf[:nx]
    tx[:, -1] = surf[nx:nx + ny]
    ty[-1, :] = surf[nx + ny:2 * nx + ny]
    tx[:, 0] = surf[2 * nx + ny:]
    return tx, ty, surf


def vertex_temperatures(mesh: Mesh, ids: _Array, tx: _Array, ty: _Array, i_f: _Array,
                        j_f: _Array) -> _Array:
    """Temperatures at grid vertices (i_f, j_f), degC, from the face temperatures around them.

    Along each grid line through the vertex the two nearest face temperatures are interpolated
    (linearly in y; in x linearly, or in ln r for axisymmetric bodies). A vertex on an edge
    takes the value along that edge. Elsewhere the line lying on a material interface is used
    (its faces carry the flux-continuous values, whereas interpolating across the interface
    would miss the kink in the profile); with no interface, or both, the mean of the two lines.
    """
    nx, ny = mesh.nx, mesh.ny
    xf, yf, xc, yc = mesh.x_faces, mesh.y_faces, mesh.x, mesh.y
    ja = np.clip(j_f - 1, 0, ny - 1)
    jb = np.clip(j_f, 0, ny - 1)
    ia = np.clip(i_f - 1, 0, nx - 1)
    ib = np.clip(i_f, 0, nx - 1)
    # along the vertical line x = xf[i_f]: x faces below (ja) and above (jb)
    wy = np.where(jb > ja, (yf[j_f] - yc[ja]) / np.where(jb > ja, yc[jb] - yc[ja], 1.0), 0.0)
    along_x = tx[ja, i_f] + wy * (tx[jb, i_f] - tx[ja, i_f])
    # along the horizontal line y = yf[j_f]: y faces left (ia) and right (ib)
    split = ib > ia
    if mesh.geometry == "axisymmetric":
        num = np.log(np.where(split, xf[i_f], xc[ia]) / xc[ia])
        den = np.log(np.where(split, xc[ib], 2.0 * xc[ia]) / xc[ia])
        wx = np.where(split, num / den, 0.0)
    else:
        wx = np.where(split, (xf[i_f] - xc[ia]) / np.where(split, xc[ib] - xc[ia], 1.0), 0.0)
    along_y = ty[j_f, ia] + wx * (ty[j_f, ib] - ty[j_f, ia])
    on_x_edge = (i_f == 0) | (i_f == nx)
    on_y_edge = (j_f == 0) | (j_f == ny)
    # material interfaces through the vertex: a vertical one separates columns ia and ib,
    # a horizontal one rows ja and jb
    vertical = split & ((ids[ja, ia] != ids[ja, ib]) | (ids[jb, ia] != ids[jb, ib]))
    horizontal = (jb > ja) & ((ids[ja, ia] != ids[jb, ia]) | (ids[ja, ib] != ids[jb, ib]))
    interior = np.where(vertical & ~horizontal, along_x,
                        np.where(horizontal & ~vertical, along_y, 0.5 * (along_x + along_y)))
    return np.where(on_x_edge & ~on_y_edge, along_x,
                    np.where(on_y_edge & ~on_x_edge, along_y, interior))


def interpolate_points(mesh: Mesh, ids: _Array, temperature: _Array, tx: _Array,
                       ty: _Array, points: _Array) -> _Array:
    """Temperatures at points, degC, from the containing cell and its face temperatures.

    The point lies in one quadrant of its cell, spanned by the centre (T_P), the nearest x
    face (T_x), the nearest y face (T_y) and the cell vertex between them (T_v). Bilinear
    interpolation over that quadrant::

        T = T_P + f_x (T_x - T_P) + f_y (T_y - T_P) + f_x f_y (T_v - T_x - T_y + T_P)

    with f_x linear in x (in ln r for axisymmetric radial faces, exact for radial conduction)
    and f_y linear in y. The cell holds one material and its face values are the
    flux-continuous ones, so the interpolation stays honest across zone boundaries.
    """
    if points.size == 0:
        return np.zeros(0)
    px, py = points[:, 0], points[:, 1]
    xf, yf = mesh.x_faces, mesh.y_faces
    i = np.clip(np.searchsorted(xf, px, side="right") - 1, 0, mesh.nx - 1)
    j = np.clip(np.searchsorted(yf, py, side="right") - 1, 0, mesh.ny - 1)
    tc = temperature[j, i]
    xc, yc = mesh.x[i], mesh.y[j]
    east = px >= xc
    i_f = np.where(east, i + 1, i)
    xface = xf[i_f]
    tfx = tx[j, i_f]
    if mesh.geometry == "axisymmetric":
        with np.errstate(divide="ignore", invalid="ignore"):
            ok = (xface > 0.0) & (px > 0.0)
            fx = np.where(ok, np.log(np.where(ok, px, 1.0) / xc)
                          / np.log(np.where(ok, xface, 2.0 * xc) / xc), 1.0)
    else:
        fx = (px - xc) / (xface - xc)
    north = py >= yc
    j_f = np.where(north, j + 1, j)
    tfy = ty[j_f, i]
    fy = (py - yc) / (yf[j_f] - yc)
    tv = vertex_temperatures(mesh, ids, tx, ty, i_f, j_f)
    return tc + fx * (tfx - tc) + fy * (tfy - tc) + fx * fy * (tv - tfx - tfy + tc)


def segment_flows(setup: _Setup, state: _State, surface: _Array) -> tuple[EdgeFlow, ...]:
    """Heat flow through each segment and edge (positive into the body)."""
    bf = setup.boundary
    inflow = _boundary_inflow(setup, state.lin, state.temperature)
    per_edge: dict[str, list[SegmentFlow]] = {e: [] for e in EDGE_NAMES}
    totals = np.bincount(bf.edge, weights=inflow, minlength=4)
    for s, (edge, n, seg) in enumerate(bf.segments):
        f = bf.faces_of[s]
        length = setup.problem.width if edge in ("bottom", "top") else setup.problem.height
        s0 = 0.0 if seg.start is None else float(seg.start)
        s1 = length if seg.end is None else float(seg.end)
        area = bf.area[f]
        mean = (float((surface[f] * area).sum() / area.sum()) if area.sum() > 0.0
                else float(surface[f].mean()) if f.size else math.nan)
        per_edge[edge].append(SegmentFlow(edge=edge, index=n, start=s0, end=s1, type=seg.type,
                                          heat_flow=float(inflow[f].sum()),
                                          mean_surface_temperature=mean))
    return tuple(EdgeFlow(edge=e, heat_flow=float(totals[m]), segments=tuple(per_edge[e]))
                 for m, e in enumerate(EDGE_NAMES))


class _Scopes:
    """Masks of the regions whose extremes are tracked: body, exposed segments, limited zones.

    Extremes are kept as (temperature, x, y, time) for hottest and coldest, updated at every
    state (every time step of a transient, including t = 0).
    """

    def __init__(self, setup: _Setup) -> None:
        mesh, bf, p = setup.mesh, setup.boundary, setup.problem
        self.setup = setup
        xx, yy = np.meshgrid(mesh.x, mesh.y)
        yfx, xfx = np.meshgrid(mesh.y, mesh.x_faces, indexing="ij")   # x faces (ny, nx+1)
        yfy, xfy = np.meshgrid(mesh.y_faces, mesh.x, indexing="ij")   # y faces (ny+1, nx)
        self.cell_xy = (xx.ravel(), yy.ravel())
        self.face_xy = (bf.x, bf.y)
        self.names: list[str] = ["body"]
        self.kinds: list[str] = ["body"]
        # each scope: (cell mask, x-face mask, y-face mask, boundary-face mask) or None = all
        self.masks: list[tuple[_Array | None, _Array | None, _Array | None, _Array | None]] = [
            (None, None, None, None)]
        for s, (edge, n, seg) in enumerate(bf.segments):
            if seg.type in ("convection", "radiation") and bf.faces_of[s].size:
                fm = np.zeros(bf.cell.size, dtype=bool)
                fm[bf.faces_of[s]] = True
                self.names.append(f"edges.{edge}.{n}")
                self.kinds.append("surface")
                self.masks.append((np.zeros(mesh.cells, dtype=bool), None, None, fm))
        self.zone_limits: list[tuple[str, float, int]] = []
        ids = setup.materials.ids
        for i, z in enumerate(p.zones):
            if z.max_temperature is None:
                continue
            cm = ids == i + 1
            if not cm.any():
                continue
            xm = np.zeros((mesh.ny, mesh.nx + 1), dtype=bool)
            xm[:, :-1] |= cm
            xm[:, 1:] |= cm
            ym = np.zeros((mesh.ny + 1, mesh.nx), dtype=bool)
            ym[:-1, :] |= cm
            ym[1:, :] |= cm
            fm = cm.ravel()[bf.cell]
            self.zone_limits.append((f"zones.{i}.max_temperature", float(z.max_temperature),
                                     len(self.names)))
            self.names.append(z.name)
            self.kinds.append("zone")
            self.masks.append((cm.ravel(), xm.ravel(), ym.ravel(), fm))
        self._xface_xy = (xfx.ravel(), yfx.ravel())
        self._yface_xy = (xfy.ravel(), yfy.ravel())
        self.hot: list[tuple[float, float, float, float | None, str]] = [
            (-math.inf, 0.0, 0.0, None, "")] * len(self.names)
        self.cold: list[tuple[float, float, float, float | None, str]] = [
            (math.inf, 0.0, 0.0, None, "")] * len(self.names)
        self.history: list[list[tuple[float, float, float]]] = [[] for _ in self.names]

    def update(self, time: float | None, temperature: _Array, tx: _Array, ty: _Array,
               surf: _Array) -> None:
        t = temperature.ravel()
        for s, (cm, xm, ym, fm) in enumerate(self.masks):
            cands = []
            if cm is None:
                cands.append((t, self.cell_xy, "cell centre"))
                cands.append((surf, self.face_xy, "boundary face"))
            else:
                if cm.any():
                    cands.append((t[cm], (self.cell_xy[0][cm], self.cell_xy[1][cm]),
                                  "cell centre"))
                if xm is not None:
                    cands.append((tx.ravel()[xm], (self._xface_xy[0][xm],
                                                   self._xface_xy[1][xm]), "cell face"))
                if ym is not None:
                    cands.append((ty.ravel()[ym], (self._yface_xy[0][ym],
                                                   self._yface_xy[1][ym]), "cell face"))
                if fm is not None and fm.any():
                    cands.append((surf[fm], (self.face_xy[0][fm], self.face_xy[1][fm]),
                                  "boundary face"))
            hi = lo = None
            for vals, (xs, ys), what in cands:
                if vals.size == 0:
                    continue
                a, b = int(np.argmax(vals)), int(np.argmin(vals))
                if hi is None or vals[a] > hi[0]:
                    hi = (float(vals[a]), float(xs[a]), float(ys[a]), time, what)
                if lo is None or vals[b] < lo[0]:
                    lo = (float(vals[b]), float(xs[b]), float(ys[b]), time, what)
            if hi is None or lo is None:
                continue
            if hi[0] > self.hot[s][0] or not math.isfinite(hi[0]):
                self.hot[s] = hi
            if lo[0] < self.cold[s][0] or not math.isfinite(lo[0]):
                self.cold[s] = lo
            if time is not None:
                self.history[s].append((time, hi[0], lo[0]))

    def scope(self, s: int) -> Scope:
        def loc(rec: tuple[float, float, float, float | None, str], which: str) -> Location:
            temp, x, y, time, what = rec
            return Location(temperature=temp, description=f"{which} of {self.names[s]} "
                            f"({what})", position=(x, y), time=time)

        return Scope(name=self.names[s], hottest=loc(self.hot[s], "hottest"),
                     coldest=loc(self.cold[s], "coldest"), history=tuple(self.history[s]))

    def safety(self, limits: Limits) -> SafetyReport:
        surfaces = [self.scope(s) for s, k in enumerate(self.kinds) if k == "surface"]
        materials = [(name, value, self.scope(s)) for name, value, s in self.zone_limits]
        return check_limits(limits, self.scope(0), surfaces, materials)


def _balance(boundary: float, generation: float, stored: float, gross: float
             ) -> EnergyBalance:
    imbalance = boundary + generation - stored
    scale = max(gross, abs(stored))
    rel = abs(imbalance) / scale if scale > 0.0 else 0.0
    return EnergyBalance(boundary_inflow=boundary, generation=generation, stored=stored,
                         imbalance=imbalance, relative_error=rel)


# --------------------------------------------------------------------------------------------
# the whole pipeline


@dataclass(frozen=True)
class _Run:
    setup: _Setup
    outputs: tuple[_State, ...]
    transient: _TransientRun | None
    outcome: _Outcome
    cache: _SolverCache
    scopes: _Scopes


def _run(problem: GridProblem, scale: float, atol: float) -> _Run:
    """Build the grid, solve, and track extremes; used for the answer and for verify_mesh."""
    mesh = build_mesh(problem, scale)
    materials = build_materials(problem, mesh)
    bf = build_boundary(problem, mesh)
    nonlinear = (not materials.linear) or has_radiation(bf)
    setup = _Setup(problem, mesh, materials, bf, nonlinear, atol)
    cache = _SolverCache(linear_solver_for(problem, mesh.cells))
    outcome = _Outcome()
    scopes = _Scopes(setup)

    def track(time: float | None, temperature: _Array, lin: _Linearised) -> None:
        st = _State(0.0 if time is None else time, temperature, lin)
        tx, ty, surf = face_temperatures(setup, st)
        scopes.update(time, temperature, tx, ty, surf)

    with np.errstate(over="ignore", invalid="ignore"):
        if problem.transient is None:
            state = solve_steady_state(setup, cache, outcome)
            if np.all(np.isfinite(state.temperature)):
                track(None, state.temperature, state.lin)
            outputs: tuple[_State, ...] = (state,)
            tr_run = None
        else:
            try:
                tr_run = solve_time_steps(setup, cache, outcome, track)
                outputs = tuple(tr_run.states)
            except _NonFinite:
                tr_run = None
                outputs = ()
    if cache.failed and outcome.status == "converged":
        outcome.status = "max_iterations"
        outcome.message = (f"the multigrid solve did not reach its relative residual of "
                           f"{MULTIGRID_RTOL:g} within {MULTIGRID_MAX_CYCLES} cycles")
    return _Run(setup, outputs, tr_run, outcome, cache, scopes)


def _estimate_errors(problem: GridProblem, run: _Run, atol: float, points: _Array
                     ) -> tuple[_Array, float, str]:
    """Richardson-style estimate: solve on a grid with every interval's cells doubled (or
    halved when doubling would pass max_cells) and scale the difference for order 2."""
    bx, by, cx, cy = plan_mesh(problem, 2.0)
    refine = sum(cx) * sum(cy) <= problem.max_cells
    other = _run(problem, 2.0 if refine else 0.5, atol)
    mesh = run.setup.mesh
    xx, yy = np.meshgrid(mesh.x, mesh.y)
    probes = np.vstack([points.reshape(-1, 2), np.column_stack([xx.ravel(), yy.ravel()])])
    worst = np.zeros(probes.shape[0])
    for mine, theirs in zip(run.outputs, other.outputs, strict=False):
        tx, ty, _ = face_temperatures(run.setup, mine)
        a = interpolate_points(mesh, run.setup.materials.ids, mine.temperature, tx, ty, probes)
        tx2, ty2, _ = face_temperatures(other.setup, theirs)
        b = interpolate_points(other.setup.mesh, other.setup.materials.ids, theirs.temperature, tx2, ty2, probes)
        # error of this grid for order p = 2: refined: |a-b| * 4/3; coarsened: |a-b| / 3
        worst = np.maximum(worst, np.abs(a - b) * (4.0 / 3.0 if refine else 1.0 / 3.0))
    how = (f"{'refined' if refine else 'coarsened'} grid of {other.setup.mesh.cells} cells, "
           "order 2 assumed; spatial error only" + ("" if problem.transient is None
                                                    else " (time-step error not included)"))
    n = points.shape[0]
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
    and segment boundary; interface conductances are series (harmonic) combinations, and
    radial ones use the cylindrical-shell resistance ln(r2/r1)/(2 pi k), so layered media are
    exact; second order in space for smooth solutions. Time: theta scheme with the matrix
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
    scale_t = _temperature_scale(problem)
    atol = float(problem.atol) if problem.atol is not None else max(1e-6 * scale_t, 1e-9)
    run = _run(problem, 1.0, atol)
    setup, outcome = run.setup, run.outcome
    mesh = setup.mesh
    requested = problem.cells.nx * problem.cells.ny
    if mesh.cells != requested:
        warnings.append(f"cells: the grid has {mesh.nx} x {mesh.ny} cells (asked "
                        f"{problem.cells.nx} x {problem.cells.ny}) so that zone and segment "
                        "boundaries fall on grid lines")
    points = np.asarray(problem.points, dtype=float).reshape(-1, 2)
    unit = "W/m" if problem.geometry == "planar" else "W"

    if outcome.status == "non_finite" or not run.outputs:
        return _non_finite_result(problem, run, points, unit, atol, warnings)

    final = run.outputs[-1]
    residual = _residual(setup, final.temperature, final.time) if problem.transient is None \
        else _residual_transient(run)
    tx, ty, surf = face_temperatures(setup, final)
    point_t = interpolate_points(mesh, setup.materials.ids, final.temperature, tx, ty, points)
    edges = segment_flows(setup, final, surf)
    inflow = _boundary_inflow(setup, final.lin, final.temperature)

    history = None
    if run.transient is None:
        gen_total = float(final.lin.generation.sum())
        gross = 0.5 * (float(np.abs(inflow).sum()) + float(np.abs(final.lin.generation).sum()))
        balance = _balance(float(inflow.sum()), gen_total, 0.0, gross)
        balance_error = balance.relative_error
    else:
        tr = run.transient
        balance = _balance(tr.boundary_integral, tr.generation_integral, tr.stored[-1],
                           tr.gross[-1])
        history = _history(problem, run, points)
        balance_error = float(history.balance_error.max())
    for w in table_range_warnings(setup.materials, final.temperature):
        warnings.append(w)

    point_err = None
    error_estimate = None
    if problem.verify_mesh:
        point_err, error_estimate, how = _estimate_errors(problem, run, atol, points)
        warnings_note = f"mesh error estimate from a {how}"
    else:
        warnings_note = ""

    lin_name = run.cache.kind
    msg_parts = [outcome.message or "converged",
                 f"{mesh.cells} cells, {lin_name} linear solver"
                 + (f" ({run.cache.iterations} multigrid cycles)" if lin_name == "multigrid"
                    else "")
                 + f", {run.cache.factorizations} factorisation(s)",
                 "residual = largest cell energy imbalance relative to the largest cell source"]
    if warnings_note:
        msg_parts.append(warnings_note)
    convergence = Convergence(status=outcome.status, message="; ".join(msg_parts),
                              iterations=outcome.iterations, error_estimate=error_estimate,
                              residual=residual, atol=atol, cells=mesh.cells,
                              energy_balance_error=balance_error)
    body = run.scopes.scope(0)
    return GridResult(
        geometry=problem.geometry, heat_flow_unit=unit, x=mesh.x, y=mesh.y,
        x_faces=mesh.x_faces, y_faces=mesh.y_faces,
        field=final.temperature.copy() if problem.output_grid else None,
        points=points, point_temperatures=point_t, point_error_estimates=point_err,
        edges=edges, energy_balance=balance, transient=history, hottest=body.hottest,
        coldest=body.coldest, linear_solver=lin_name,
        factorizations=run.cache.factorizations, linear_iterations=run.cache.iterations,
        convergence=convergence, safety=run.scopes.safety(problem.limits),
        warnings=tuple(warnings))


def _residual_transient(run: _Run) -> float:
    """Largest relative imbalance of the last step's equations (theta scheme)."""
    # the per-step Picard iteration controls the temperature change; report the energy
    # closure of the last output as the residual of the time-stepping equations
    tr = run.transient
    assert tr is not None
    scale = max(tr.gross[-1], abs(tr.stored[-1]))
    return abs(tr.inflow[-1] - tr.stored[-1]) / scale if scale > 0.0 else 0.0


def _history(problem: GridProblem, run: _Run, points: _Array) -> TransientHistory:
    tr = run.transient
    assert tr is not None
    setup = run.setup
    pts, fields, eflow, sflow = [], [], [], []
    for st in run.outputs:
        tx, ty, surf = face_temperatures(setup, st)
        pts.append(interpolate_points(setup.mesh, setup.materials.ids, st.temperature, tx, ty, points))
        if problem.output_grid:
            fields.append(st.temperature.copy())
        edges = segment_flows(setup, st, surf)
        eflow.append([e.heat_flow for e in edges])
        sflow.append([s.heat_flow for e in edges for s in e.segments])
    stored = np.asarray(tr.stored)
    inflow = np.asarray(tr.inflow)
    scale = np.maximum(np.asarray(tr.gross), np.abs(stored))
    with np.errstate(divide="ignore", invalid="ignore"):
        err = np.where(scale > 0.0, np.abs(inflow - stored) / np.where(scale > 0, scale, 1.0),
                       0.0)
    return TransientHistory(
        times=np.array([st.time for st in run.outputs]),
        point_temperatures=np.array(pts).reshape(len(run.outputs), points.shape[0]),
        fields=np.array(fields) if problem.output_grid else None,
        edge_heat_flow=np.array(eflow), segment_heat_flow=np.array(sflow).reshape(
            len(run.outputs), -1),
        stored_energy=stored, net_inflow=inflow, balance_error=err)


def _non_finite_result(problem: GridProblem, run: _Run, points: _Array, unit: str,
                       atol: float, warnings: list[str]) -> GridResult:
    """A result that only carries the failure (no numbers can be trusted)."""
    mesh = run.setup.mesh
    nan_loc = Location(temperature=math.nan, description="not available (non-finite field)")
    convergence = Convergence(status="non_finite", message=run.outcome.message
                              or "a non-finite temperature appeared",
                              iterations=run.outcome.iterations, atol=atol, cells=mesh.cells)
    nan_balance = EnergyBalance(math.nan, math.nan, math.nan, math.nan, math.nan)
    edges = tuple(EdgeFlow(edge=e, heat_flow=math.nan, segments=()) for e in EDGE_NAMES)
    return GridResult(
        geometry=problem.geometry, heat_flow_unit=unit, x=mesh.x, y=mesh.y,
        x_faces=mesh.x_faces, y_faces=mesh.y_faces, field=None, points=points,
        point_temperatures=np.full(points.shape[0], math.nan), point_error_estimates=None,
        edges=edges, energy_balance=nan_balance, transient=None, hottest=nan_loc,
        coldest=nan_loc, linear_solver=run.cache.kind,
        factorizations=run.cache.factorizations, linear_iterations=run.cache.iterations,
        convergence=convergence, safety=SafetyReport(status="not_checked"),
        warnings=tuple(warnings))

