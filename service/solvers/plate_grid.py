"""The plate problem solved by the finite-volume grid: `PlateProblem` -> `GridProblem` ->
`PlateResult`.

Stages (each a named function, testable alone):

1. `cells_for` -- a grid of nearly square cells with about a given number of cells;
2. `plate_to_grid` -- the plate's edges become one segment per edge (temperature profiles
   become position profiles), its points and output-grid points become grid points;
3. `solve_grid_checked` (`grid.solve_grid` with ``verify_mesh``; a numerically singular system
   becomes an `IllPosedError`) -- the field and a Richardson-style mesh error estimate; when the
   caller gave a tolerance and the estimate is above it, the cell count is raised once from the
   second-order behaviour (`refined_cells`), within ``max_cells``;
4. `grid_to_plate` -- temperatures at the points and on the output grid, edge heat flows (null
   where two different fixed temperatures meet at a corner, as the series reports them), the
   energy balance, extremes, safety and a `Convergence` record whose ``error_estimate`` is the
   mesh estimate.

Units: SI, temperatures in degC, heat flows in W per metre of depth (positive into the body).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .convergence import Convergence
from .errors import IllPosedError
from .grid import Cells, Edges, GridProblem, GridResult, Segment, solve_grid
from .grid_model import DEFAULT_MAX_CELLS
from .plate import EDGE_NAMES, Edge, EdgeHeatFlow, EnergyBalance, PlateProblem, PlateResult

_Array = np.ndarray

#: Cells of the default grid (about 200 x 200 on a square), shared among x and y in proportion
#: to the sides so that cells are nearly square. Measured (bench/grid.py figures): a steady
#: solve of 40,000 cells with its 160,000-cell verification takes about 1.3 s here.
DEFAULT_CELLS = 40_000
#: The cell count is raised at most this much beyond what the order-2 estimate asks, so the
#: second solve lands below the tolerance even when the estimate is slightly optimistic.
REFINE_MARGIN = 1.5
#: Grids at most this many cells across in one direction are solved by the sparse direct
#: solver whatever their size: banded elimination costs little there (fill grows with the
#: width), whereas algebraic multigrid was measured to stall or build slow hierarchies on such
#: nearly one-dimensional grids (bench figures in the grid-api report: 40,000 x 1 cells took
#: 8.5 s by multigrid and 0.14 s direct).
THIN_GRID = 32
#: Corner temperatures closer than this (relative to the largest magnitude, at least 1 K)
#: count as equal: no singular corner.
CORNER_RTOL = 1e-9


@dataclass(frozen=True)
class PlateGridRun:
    """A plate solved by the grid, with the grid's raw result.

    Attributes
    ----------
    result : PlateResult
        The plate answer (``method`` ``"grid"``).
    grid : GridResult
        The finite-volume result it was read from (points: the plate's points, then its
        output-grid points, then `extra_points`).
    point_temperatures : numpy.ndarray
        The grid's temperatures at all those points, exact on fixed-temperature edges, degC.
    point_error_estimates : numpy.ndarray or None
        Their mesh error estimates, K (zero where exact; None when the estimate failed).
    extra_temperatures : numpy.ndarray
        (m,) grid temperatures at the extra points, degC.
    extra_error_estimates : numpy.ndarray or None
        (m,) mesh error estimates there, K (None when the estimate failed).
    """

    result: PlateResult
    grid: GridResult
    point_temperatures: _Array
    point_error_estimates: _Array | None
    extra_temperatures: _Array
    extra_error_estimates: _Array | None


# --------------------------------------------------------------------------------------------
# stage 1: the grid size


def cells_for(width: float, height: float, total: int) -> Cells:
    """About `total` nearly square cells on a `width` x `height` rectangle (never more).

    Parameters
    ----------
    width, height : float
        Sides, m (> 0).
    total : int
        Cells wanted (at least 1).

    Returns
    -------
    Cells
        ``nx * ny <= total``, each at least 1, with nx / ny close to width / height:
        nx ~ sqrt(total * W / H), ny ~ total / nx.
    """
    total = max(1, int(total))
    # the aspect ratio through logarithms, so that no ratio of extreme sides can overflow
    half_log_ratio = min(30.0, max(-30.0, 0.5 * (math.log(width) - math.log(height))))
    root = math.sqrt(total)
    nx = min(total, max(1, round(root * math.exp(half_log_ratio))))
    ny = min(total // nx, max(1, round(root * math.exp(-half_log_ratio))))
    return Cells(nx, ny)


def refined_cells(cells: Cells, error: float, atol: float, max_cells: int) -> Cells | None:
    """Cells that should bring a second-order error estimate `error` (K) below `atol` (K).

    The error of a second-order scheme scales with h^2, i.e. with 1 / cells in 2D, so the
    count grows by ``REFINE_MARGIN * error / atol``; capped so that the grid and its
    verification refinement (4 times the cells) stay within `max_cells` where possible.
    Returns None when no larger grid fits.
    """
    if not (math.isfinite(error) and error > atol > 0.0):
        return None
    n = cells.nx * cells.ny
    want = n * REFINE_MARGIN * error / atol
    # the verification solve doubles every interval: keep it inside the cap when that still
    # gives more cells than now, otherwise accept that verification coarsens instead
    cap = max_cells // 4 if max_cells // 4 > n else max_cells
    target = min(want, cap)
    if target <= 1.2 * n:
        return None
    f = math.sqrt(target / n)
    nx = max(1, math.floor(cells.nx * f))
    ny = max(1, math.floor(cells.ny * f))
    while nx * ny > cap and (nx > 1 or ny > 1):
        if nx >= ny:
            nx -= 1
        else:
            ny -= 1
    return Cells(nx, ny) if nx * ny > n else None


def linear_solver_for_cells(cells: Cells) -> str:
    """``direct`` for thin grids (at most THIN_GRID cells across), else ``auto``."""
    return "direct" if min(cells.nx, cells.ny) <= THIN_GRID else "auto"


# --------------------------------------------------------------------------------------------
# stage 2: the grid problem


def _segment(edge: Edge) -> Segment:
    if edge.type == "temperature":
        return Segment("temperature", value=edge.value, profile=edge.profile)
    if edge.type == "flux":
        return Segment("flux", value=edge.value)
    if edge.type == "convection":
        return Segment(
            "convection", film_coefficient=edge.film_coefficient, ambient=edge.ambient
        )
    return Segment("insulated")


def output_grid_points(problem: PlateProblem) -> _Array:
    """(nx * ny, 2) points of the plate's output grid, row by row (y outer), m."""
    if problem.grid is None:
        return np.zeros((0, 2))
    gx = np.linspace(0.0, problem.width, int(problem.grid[0]))
    gy = np.linspace(0.0, problem.height, int(problem.grid[1]))
    xx, yy = np.meshgrid(gx, gy)
    return np.column_stack([xx.ravel(), yy.ravel()])


def plate_to_grid(
    problem: PlateProblem,
    cells: Cells,
    *,
    max_cells: int = DEFAULT_MAX_CELLS,
    extra_points: _Array | None = None,
) -> GridProblem:
    """Stage 2: the same plate as a planar `GridProblem` with mesh verification.

    Points: the plate's points (clipped into the rectangle, as the series does), then its
    output-grid points, then `extra_points`.
    """
    w, h = problem.width, problem.height
    pts = np.asarray(problem.points, dtype=float).reshape(-1, 2)
    pts = np.column_stack((np.clip(pts[:, 0], 0.0, w), np.clip(pts[:, 1], 0.0, h)))
    extra = np.zeros((0, 2)) if extra_points is None else np.asarray(extra_points, float)
    every = np.vstack([pts, output_grid_points(problem), extra.reshape(-1, 2)])
    return GridProblem(
        width=w,
        height=h,
        cells=cells,
        conductivity=problem.conductivity,
        geometry="planar",
        generation=problem.generation,
        edges=Edges(**{name: (_segment(problem.edge(name)),) for name in EDGE_NAMES}),
        points=tuple((float(x), float(y)) for x, y in every),
        verify_mesh=True,
        atol=problem.atol,
        limits=problem.limits,
        max_cells=max_cells,
        linear_solver=linear_solver_for_cells(cells),
    )


# --------------------------------------------------------------------------------------------
# stage 3: the solve


def solve_grid_checked(problem: GridProblem) -> GridResult:
    """`grid.solve_grid`, with a numerically singular linear system reported as ill-posed.

    The sparse LU factorisation raises when the discrete equations are singular in double
    precision: cells or properties spanning so many orders of magnitude that a row's own
    coupling to the boundary is lost in rounding beside its coupling to a neighbour (e.g. a
    body a micrometre wide and kilometres long). That is a problem that cannot be solved as
    posed here, so it becomes an `IllPosedError` naming the cause instead of a crash.
    """
    try:
        return solve_grid(problem)
    except RuntimeError as exc:  # SuperLU: "Factor is exactly singular"
        raise IllPosedError(
            "the finite-volume equations are singular in double precision: the cell sizes, "
            "conductivities and boundary coefficients of this problem span too many orders of "
            f"magnitude ({exc}); bring them closer together, e.g. a less extreme aspect ratio "
            "or fewer cells across a very thin body",
            reason="physics-rejected",
        ) from exc


# --------------------------------------------------------------------------------------------
# stage 4: back to the plate's answer


def _corner_temperature(edge: Edge, at_end: bool) -> float | None:
    if edge.type != "temperature":
        return None
    if edge.profile:
        return float(edge.profile[-1][1] if at_end else edge.profile[0][1])
    return None if edge.value is None else float(edge.value)


def singular_corners(problem: PlateProblem) -> tuple[tuple[str, str], ...]:
    """Corners where two different fixed temperatures meet, as (horizontal, vertical) edges.

    There the exact heat flows through both edges are unbounded (the gradient grows like 1/r);
    a grid gives finite numbers that grow without limit as it is refined.
    """
    found = []
    for horizontal, vertical in (("bottom", "left"), ("bottom", "right"), ("top", "right"),
                                 ("top", "left")):
        # bottom/top run along x (left end at s = 0), left/right along y (bottom end at s = 0)
        a = _corner_temperature(problem.edge(horizontal), at_end=vertical == "right")
        b = _corner_temperature(problem.edge(vertical), at_end=horizontal == "top")
        if a is None or b is None:
            continue
        if abs(a - b) > CORNER_RTOL * max(1.0, abs(a), abs(b)):
            found.append((horizontal, vertical))
    return tuple(found)


def fixed_edge_values(problem: PlateProblem, points: _Array) -> tuple[_Array, _Array]:
    """Known temperatures at points on fixed-temperature edges.

    The data there are exact, whereas the grid's interpolation at a corner mixes the two
    edges' extrapolations. A point on two fixed-temperature edges (a corner) takes the mean
    of their values, as the series does.

    Returns
    -------
    (values, mask)
        Temperatures (degC) and a mask of the points that lie on a fixed-temperature edge
        (values elsewhere are meaningless).
    """
    w, h = problem.width, problem.height
    x, y = points[:, 0], points[:, 1]
    total = np.zeros(x.size)
    count = np.zeros(x.size)
    for name in EDGE_NAMES:
        edge = problem.edge(name)
        if edge.type != "temperature":
            continue
        on = {
            "bottom": np.abs(y) <= 1e-12 * h,
            "top": np.abs(y - h) <= 1e-12 * h,
            "left": np.abs(x) <= 1e-12 * w,
            "right": np.abs(x - w) <= 1e-12 * w,
        }[name]
        s = x if name in ("bottom", "top") else y
        if edge.profile:
            prof = np.asarray(edge.profile, dtype=float)
            values = np.interp(s, prof[:, 0], prof[:, 1])  # held constant beyond its ends
        else:
            values = np.full(x.size, float(edge.value or 0.0))
        total += np.where(on, values, 0.0)
        count += on
    return total / np.maximum(count, 1.0), count > 0


def _exact_where_known(
    problem: PlateProblem, grid: GridResult
) -> tuple[_Array, _Array | None]:
    """The grid's point temperatures and error estimates, exact on fixed-temperature edges."""
    values, known = fixed_edge_values(problem, grid.points)
    temps = np.where(known, values, grid.point_temperatures)
    errs = grid.point_error_estimates
    return temps, None if errs is None else np.where(known, 0.0, errs)


def grid_to_plate(problem: PlateProblem, grid: GridResult) -> PlateResult:
    """Stage 4: the plate's answer from a grid result built by `plate_to_grid`."""
    w, h = problem.width, problem.height
    n_pts = len(problem.points)
    temps, _ = _exact_where_known(problem, grid)
    pts = grid.points[:n_pts]
    point_t = temps[:n_pts]
    gx = gy = grid_t = None
    if problem.grid is not None:
        nx, ny = int(problem.grid[0]), int(problem.grid[1])
        gx, gy = np.linspace(0.0, w, nx), np.linspace(0.0, h, ny)
        grid_t = temps[n_pts : n_pts + nx * ny].reshape(ny, nx)
    warnings = list(grid.warnings)
    singular = singular_corners(problem)
    unbounded = {e for pair in singular for e in pair}
    flows: dict[str, float | None] = {
        e.edge: (None if e.edge in unbounded else e.heat_flow) for e in grid.edges
    }
    for horizontal, vertical in singular:
        warnings.append(
            f"corner {horizontal}-{vertical}: two different fixed temperatures meet, so the heat "
            "flow through both edges there is unbounded; it is reported as null (the grid's "
            "finite values grow as the grid is refined)"
        )
    gen = problem.generation * w * h
    if all(v is not None for v in flows.values()):
        finite = [float(v) for v in flows.values() if v is not None]
        net = float(sum(finite) + gen)
        big = max([abs(v) for v in finite] + [abs(gen)])
        balance = EnergyBalance(net, abs(net) / big if big > 0.0 else 0.0)
    else:
        balance = EnergyBalance(None, None)
    conv = grid.convergence
    cells = conv.cells or grid.x.size * grid.y.size
    atol = problem.atol
    estimate = conv.error_estimate
    message = f"finite-volume grid of {grid.x.size} x {grid.y.size} cells; {conv.message}"
    if estimate is not None and atol is not None and estimate > atol:
        warnings.append(
            f"tolerance: the grid's mesh error estimate {estimate:.3g} K is above the "
            f"tolerance {atol:.3g} K asked (the grid is capped at its cell budget); the "
            "series method meets tolerances directly where it applies"
        )
    convergence = Convergence(
        status=conv.status,
        message=message,
        iterations=conv.iterations,
        error_estimate=estimate,
        residual=conv.residual,
        atol=atol if atol is not None else conv.atol,
        cells=cells,
        energy_balance_error=conv.energy_balance_error,
    )
    return PlateResult(
        method="grid",
        point_coordinates=pts,
        point_temperatures=point_t,
        grid_x=gx,
        grid_y=gy,
        grid_temperature=grid_t,
        edge_heat_flow=EdgeHeatFlow(**flows),
        generation_heat=gen,
        energy_balance=balance,
        hottest=grid.hottest,
        coldest=grid.coldest,
        convergence=convergence,
        safety=grid.safety,
        warnings=tuple(warnings),
    )


# --------------------------------------------------------------------------------------------
# entry points


def run_plate_grid(
    problem: PlateProblem,
    *,
    max_cells: int = DEFAULT_MAX_CELLS,
    cells: Cells | None = None,
    extra_points: _Array | None = None,
    initial_cells: int = DEFAULT_CELLS,
) -> PlateGridRun:
    """Solve the plate by the grid and keep the grid's result (see `solve_plate_grid`).

    Parameters
    ----------
    problem : PlateProblem
    max_cells : int
        Cap on cells of any solve (the verification solve coarsens instead of refining when
        refining would pass it).
    cells : Cells or None
        A fixed grid; None chooses `initial_cells` nearly square cells (at most a quarter of
        `max_cells`, so that the verification can refine) and, when ``problem.atol`` is given
        and the mesh error estimate exceeds it, one larger grid.
    extra_points : (m, 2) array or None
        More points at which to report grid temperatures (m), e.g. for a cross-check.
    initial_cells : int
        Cells of the first grid when `cells` is None.
    """
    extra = np.zeros((0, 2)) if extra_points is None else np.asarray(extra_points, float)
    chosen = cells
    if chosen is None:
        # leave room for the verification to refine (4 x the cells): an estimate from a
        # coarser grid is less reliable where the solution is not smooth (near corners)
        first = min(initial_cells, max(1, max_cells // 4))
        chosen = cells_for(problem.width, problem.height, first)
    grid = solve_grid_checked(
        plate_to_grid(problem, chosen, max_cells=max_cells, extra_points=extra)
    )
    estimate = grid.convergence.error_estimate
    if cells is None and problem.atol is not None and estimate is not None:
        finer = refined_cells(chosen, estimate, problem.atol, max_cells)
        if finer is not None and grid.convergence.converged:
            grid = solve_grid_checked(
                plate_to_grid(problem, finer, max_cells=max_cells, extra_points=extra)
            )
    n_known = len(problem.points) + len(output_grid_points(problem))
    temps, errs = _exact_where_known(problem, grid)
    return PlateGridRun(
        result=grid_to_plate(problem, grid),
        grid=grid,
        point_temperatures=temps,
        point_error_estimates=errs,
        extra_temperatures=temps[n_known:],
        extra_error_estimates=None if errs is None else errs[n_known:],
    )


def solve_plate_grid(
    problem: PlateProblem, *, max_cells: int = DEFAULT_MAX_CELLS, cells: Cells | None = None
) -> PlateResult:
    """Steady 2D conduction in a rectangle by cell-centred finite volumes.

    Parameters
    ----------
    problem : PlateProblem
        As for the series (`plate.solve_plate`); ``atol`` (K), when given, is the mesh error
        aimed at.
    max_cells : int
        Cap on the cells of every solve.
    cells : Cells or None
        A fixed grid, or None to choose one (see `run_plate_grid`).

    Returns
    -------
    PlateResult
        ``method`` ``"grid"``; temperatures at the points and on the output grid (degC), edge
        heat flows (W/m, positive into the body; None where two different fixed temperatures
        meet at a corner), energy balance, extremes, safety, warnings, and a `Convergence`
        record: the grid's status (``converged``, or ``non_finite``), ``error_estimate`` the
        Richardson-style mesh error estimate (K, largest over the points and the cell
        centres), ``cells``, ``residual`` and ``energy_balance_error``. A mesh estimate above
        a given tolerance is a warning, not a failure.

    Raises
    ------
    IllPosedError
        As `grid.solve_grid` (e.g. no edge fixes the temperature level).
    TooLargeError
        A fixed grid beyond `max_cells`.

    Notes
    -----
    Governing equation (Poisson) k (T_xx + T_yy) + g = 0 on 0 < x < W, 0 < y < H with, on each
    edge, a fixed temperature (uniform or a piecewise-linear profile), a heat flux into the
    body, convection h (T_amb - T) into the body, or insulation; discretised as in
    `grid.solve_grid` (second order in space).

    References
    ----------
    Patankar, S. V., *Numerical Heat Transfer and Fluid Flow*, Hemisphere, 1980, ch. 4 (from
    memory). Roache, P. J., *Verification and Validation in Computational Science and
    Engineering*, Hermosa, 1998 (Richardson error estimates; from memory).
    """
    return run_plate_grid(problem, max_cells=max_cells, cells=cells).result
