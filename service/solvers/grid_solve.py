"""Stage 4 of the grid solver: linear solvers, the discrete operator at a state, the Picard
iteration, steady solves and implicit time stepping.

See `grid.solve_grid` for the equations; `grid_assembly` for the discrete terms.
"""

from __future__ import annotations

import importlib.util
from collections import OrderedDict
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
import scipy.sparse.linalg as spla

from .grid_assembly import (
    BoundaryFaces,
    Materials,
    apply_matrix,
    boundary_terms,
    build_matrix,
    cell_conductivity,
    cell_generation,
    interior_conductances,
    solve_surfaces,
)
from .grid_mesh import Mesh
from .grid_model import GridProblem, is_table, step_plan, table_at

_Array = np.ndarray

#: "auto" uses the sparse direct solver (splu) up to this many cells for a steady solve and
#: Ruge-Stuben multigrid above. Measured with bench/grid.py (whole solve, median of 3):
#: 22.5k cells 0.11 s direct vs 0.07 s multigrid, 90k 0.44 s vs 0.16 s; below about 20k the
#: two are alike and the direct solve needs no iteration.
DIRECT_MAX_CELLS = 20_000
#: Transients reuse one factorisation for every step, so the direct solver pays off longer
#: (measured: 20 steps on 302k cells, 4.2 s direct vs 7.5 s multigrid).
DIRECT_MAX_CELLS_TRANSIENT = 300_000
#: Relative residual (||b - A x|| / ||b||) asked of each multigrid solve.
MULTIGRID_RTOL = 1e-10
#: Multigrid cycles allowed per linear solve.
MULTIGRID_MAX_CYCLES = 200
#: Factorisations kept per run (keyed by step length and scheme weight).
_CACHE_ENTRIES = 4


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
        x = self._ml.solve(
            rhs,
            x0=guess,
            tol=MULTIGRID_RTOL,
            maxiter=MULTIGRID_MAX_CYCLES,
            accel="cg",
            residuals=residuals,
        )
        norm_b = float(np.linalg.norm(rhs))
        ok = (not residuals) or residuals[-1] <= MULTIGRID_RTOL * max(norm_b, 1e-300) * 1.0001
        return np.asarray(x), max(len(residuals) - 1, 0), bool(ok)


def multigrid_available() -> bool:
    """True when pyamg can be imported (checked without importing it)."""
    return importlib.util.find_spec("pyamg") is not None


def linear_solver_for(problem: GridProblem, cells: int) -> str:
    """Choose ``direct`` or ``multigrid`` for `cells` unknowns (see DIRECT_MAX_CELLS).

    Without pyamg installed every solve is direct (slower and hungrier above about 1e5
    cells; `solve_grid` then warns).
    """
    if problem.linear_solver == "auto":
        limit = DIRECT_MAX_CELLS if problem.transient is None else DIRECT_MAX_CELLS_TRANSIENT
        choice = "direct" if cells <= limit else "multigrid"
    else:
        choice = problem.linear_solver
    if choice == "multigrid" and not multigrid_available():
        return "direct"
    return choice


class SolverCache:
    """Factorisations (or multigrid hierarchies) reused while the matrix does not change.

    Keyed by (step length, scheme weight); an entry is reused only when the conductances and
    boundary coefficients it was built from are equal to the current ones. At most
    `_CACHE_ENTRIES` entries, the oldest dropped first; one cache per run, never shared.
    """

    def __init__(self, kind: str) -> None:
        self.kind = kind
        self.entries: OrderedDict[tuple[float, float], tuple[tuple[_Array, ...], object]] = (
            OrderedDict()
        )
        self.factorizations = 0
        self.iterations = 0
        self.failed = False

    def solve(
        self,
        key: tuple[float, float],
        signature: tuple[_Array, ...],
        matrix: Callable[[], sp.csr_matrix],
        rhs: _Array,
        guess: _Array,
    ) -> _Array:
        entry = self.entries.get(key)
        if entry is not None and all(
            np.array_equal(a, b) for a, b in zip(entry[0], signature, strict=True)
        ):
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
class Linearised:
    """Coefficients of the discrete equations at one temperature estimate and time."""

    k: _Array  # (ny, nx) conductivity
    gx: _Array  # (ny, nx-1)
    gy: _Array  # (ny-1, nx)
    G: _Array  # (F,) boundary face coefficients
    Q: _Array  # (F,) boundary face sources
    diag: _Array  # (ny, nx) boundary coefficients gathered per cell
    source: _Array  # (ny, nx) boundary sources + generation
    generation: _Array  # (ny, nx) generation, W


@dataclass(frozen=True)
class Setup:
    problem: GridProblem
    mesh: Mesh
    materials: Materials
    boundary: BoundaryFaces
    nonlinear: bool
    atol: float


def linearise(setup: Setup, temperature: _Array, surface: _Array, time: float) -> Linearised:
    """Stages 2-3: conductances and boundary terms at a temperature estimate and time."""
    mesh, bf = setup.mesh, setup.boundary
    k = cell_conductivity(setup.materials, temperature)
    gx, gy = interior_conductances(mesh, k)
    G, Q = boundary_terms(bf, k, surface, time)
    n = mesh.cells
    diag = np.bincount(bf.cell, weights=G, minlength=n).reshape(mesh.ny, mesh.nx)
    gen = cell_generation(setup.materials, mesh, time)
    source = np.bincount(bf.cell, weights=Q, minlength=n).reshape(mesh.ny, mesh.nx) + gen
    return Linearised(k=k, gx=gx, gy=gy, G=G, Q=Q, diag=diag, source=source, generation=gen)


def boundary_inflow(setup: Setup, lin: Linearised, temperature: _Array) -> _Array:
    """Heat inflow through each boundary face, W (per m depth planar)."""
    return lin.Q - lin.G * temperature.ravel()[setup.boundary.cell]


def steady_residual(setup: Setup, temperature: _Array, time: float) -> float:
    """Largest cell imbalance of the steady equations, relative to the largest cell source."""
    surface = surfaces_at(setup, temperature, time)
    lin = linearise(setup, temperature, surface, time)
    r = lin.source - apply_matrix(lin.gx, lin.gy, lin.diag, temperature)
    scale = float(np.max(np.abs(lin.source)))
    flows = float(np.max(lin.diag * np.abs(temperature))) if lin.diag.size else 0.0
    scale = max(scale, flows)
    return float(np.max(np.abs(r))) / scale if scale > 0.0 else float(np.max(np.abs(r)))


def surfaces_at(setup: Setup, temperature: _Array, time: float) -> _Array:
    """Boundary-face temperatures consistent with `temperature` (radiation solved exactly)."""
    k = cell_conductivity(setup.materials, temperature)
    return solve_surfaces(setup.boundary, k, temperature, time)


def starting_temperature(problem: GridProblem) -> float:
    """A starting temperature: the mean of the temperatures the problem names."""
    if problem.transient is not None:
        return float(problem.transient.initial_temperature)
    vals: list[float] = []
    for _, segs in problem.edges.named():
        for seg in segs:
            for v in (
                seg.value if seg.type == "temperature" else None,
                seg.ambient,
                seg.surroundings,
            ):
                if v is not None:
                    vals.append(table_at(v, 0.0))
            if seg.profile is not None and seg.type == "temperature":
                vals.extend(float(p[1]) for p in seg.profile)
    return float(np.mean(vals)) if vals else 0.0


def temperature_scale(problem: GridProblem) -> float:
    """The largest temperature difference named in the problem, K (0 if none)."""
    vals: list[float] = []
    if problem.transient is not None:
        vals.append(problem.transient.initial_temperature)
    for _, segs in problem.edges.named():
        for seg in segs:
            for v in (
                seg.value if seg.type == "temperature" else None,
                seg.ambient,
                seg.surroundings,
            ):
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
class Outcome:
    """Mutable record of one run (internal)."""

    status: str = "converged"
    message: str = ""
    iterations: int = 0
    residual: float = 0.0


def _picard(
    setup: Setup,
    cache: SolverCache,
    temperature: _Array,
    time: float,
    outcome: Outcome,
    assemble: Callable[[Linearised], tuple[_Array, _Array]],
    key: tuple[float, float],
    scale_diag: Callable[[Linearised], tuple[_Array, ...]],
) -> tuple[_Array, Linearised]:
    """Picard (successive substitution) on the conductivity and radiation coefficients.

    `assemble(lin)` returns (matrix-diagonal addition, right-hand side) for the state `lin`;
    the matrix is theta * A(lin) + extra diagonal. Stops when the largest temperature change
    is below atol; halves the relaxation when the change grows; reports ``stagnated`` when
    five iterations brought no improvement and ``max_iterations`` when out of iterations.
    """
    p = setup.problem
    mesh = setup.mesh
    surface = (
        surfaces_at(setup, temperature, time)
        if setup.nonlinear
        else np.zeros(setup.boundary.cell.size)
    )
    relax = 1.0
    theta = key[1]
    changes: list[float] = []
    lin = linearise(setup, temperature, surface, time)
    for it in range(1, p.max_iterations + 1):
        extra, rhs = assemble(lin)

        def matrix(lin: Linearised = lin, extra: _Array = extra) -> sp.csr_matrix:
            return build_matrix(mesh, theta * lin.gx, theta * lin.gy, theta * lin.diag + extra)

        t_new = cache.solve(key, scale_diag(lin), matrix, rhs.ravel(), temperature.ravel()).reshape(
            mesh.ny, mesh.nx
        )
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
                outcome.message = (
                    f"the conductivity/radiation iteration stopped improving at "
                    f"a temperature change of {change:.3g} K (atol "
                    f"{setup.atol:.3g} K)"
                )
            return temperature, lin
        surface = surfaces_at(setup, temperature, time)
        lin = linearise(setup, temperature, surface, time)
    outcome.iterations = max(outcome.iterations, p.max_iterations)
    if outcome.status == "converged":
        outcome.status = "max_iterations"
        outcome.message = (
            f"the conductivity/radiation iteration used all {p.max_iterations} "
            f"iterations; last temperature change {changes[-1]:.3g} K (atol "
            f"{setup.atol:.3g} K)"
        )
    return temperature, lin


@dataclass(frozen=True)
class State:
    """A solved state: time, field and the coefficients used to reach it."""

    time: float
    temperature: _Array
    lin: Linearised


def solve_steady_state(setup: Setup, cache: SolverCache, outcome: Outcome) -> State:
    """Stage 4 (steady): A(T) T = b(T), one linear solve or a Picard iteration."""
    t0 = np.full((setup.mesh.ny, setup.mesh.nx), starting_temperature(setup.problem))
    temperature, lin = _picard(
        setup,
        cache,
        t0,
        0.0,
        outcome,
        assemble=lambda lin: (np.zeros_like(lin.diag), lin.source),
        key=(0.0, 1.0),
        scale_diag=lambda lin: (lin.gx, lin.gy, lin.diag),
    )
    if setup.nonlinear:
        # coefficients consistent with the final field, for fluxes and face temperatures
        lin = linearise(setup, temperature, surfaces_at(setup, temperature, 0.0), 0.0)
    return State(0.0, temperature, lin)


@dataclass
class TransientRun:
    states: list[State]
    stored: list[float]
    inflow: list[float]
    gross: list[float]
    boundary_integral: float
    generation_integral: float


def solve_time_steps(
    setup: Setup,
    cache: SolverCache,
    outcome: Outcome,
    on_step: Callable[[float, _Array, Linearised], None],
) -> TransientRun:
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
    surface = (
        surfaces_at(setup, temperature, 0.0)
        if setup.nonlinear
        else np.zeros(setup.boundary.cell.size)
    )
    lin0 = linearise(setup, temperature, surface, 0.0)
    on_step(0.0, temperature, lin0)
    cn = tr.scheme == "crank_nicolson"
    stored = inflow = gross = 0.0
    b_int = g_int = 0.0
    run = TransientRun([], [], [], [], 0.0, 0.0)
    first = True

    def flows(lin: Linearised, temp: _Array) -> tuple[float, float, float]:
        face = boundary_inflow(setup, lin, temp)
        gen = float(lin.generation.sum())
        return (
            float(face.sum()),
            gen,
            0.5 * (float(np.abs(face).sum()) + float(np.abs(lin.generation).sum())),
        )

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
                        lin_prev.source
                        - apply_matrix(lin_prev.gx, lin_prev.gy, lin_prev.diag, t_prev)
                    )

                def assemble(
                    lin: Linearised, old: _Array = old, c_h: _Array = c_h, theta: float = theta
                ) -> tuple[_Array, _Array]:
                    return c_h, old + theta * lin.source

                temperature, lin1 = _picard(
                    setup,
                    cache,
                    t_prev,
                    t1,
                    outcome,
                    assemble=assemble,
                    key=(h, theta),
                    scale_diag=lambda lin: (lin.gx, lin.gy, lin.diag),
                )
                if outcome.status == "non_finite":
                    raise NonFiniteError
                b0, g0, a0 = flows(lin_prev, t_prev)
                b1, g1, a1 = flows(lin1, temperature)
                stored += float((cap * (temperature - t_prev)).sum())
                b_int += h * (theta * b1 + (1.0 - theta) * b0)
                g_int += h * (theta * g1 + (1.0 - theta) * g0)
                inflow = b_int + g_int
                gross += h * (theta * a1 + (1.0 - theta) * a0)
                if setup.nonlinear:
                    # the next step starts from coefficients consistent with the new field
                    lin0 = linearise(setup, temperature, surfaces_at(setup, temperature, t1), t1)
                else:
                    lin0 = lin1
                # residual of this step's equations with coefficients at the new field:
                # old + theta b1 - (C/h + theta A1) T1, relative to the largest term
                rhs = old + theta * lin0.source
                r = (
                    rhs
                    - c_h * temperature
                    - theta * apply_matrix(lin0.gx, lin0.gy, lin0.diag, temperature)
                )
                scale = float(np.max(np.abs(rhs)))
                outcome.residual = max(
                    outcome.residual,
                    float(np.max(np.abs(r))) / scale if scale > 0.0 else float(np.max(np.abs(r))),
                )
                on_step(t1, temperature, lin0)
        run.states.append(State(start + n * dt, temperature, lin0))
        run.stored.append(stored)
        run.inflow.append(inflow)
        run.gross.append(gross)
    run.boundary_integral = b_int
    run.generation_integral = g_int
    return run


class NonFiniteError(Exception):
    """Internal: a transient step produced NaN or infinity."""
