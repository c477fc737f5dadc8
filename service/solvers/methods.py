"""Entry points that name the numerical method answering a request.

* `solve_grid_method`: `grid.solve_grid` with a result that says ``method = "grid"``.
* `solve_plate_by_method`: the plate by the series (``auto``, ``series``), by the finite-volume
  grid (``grid``), or by both with a cross-check (``both``): the series answer, the grid's
  answer and the largest difference between them over the requested points, the output grid
  and a fixed sample of interior points.

Units: SI, temperatures in degC, heat flows in W per metre of depth (plate).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields

import numpy as np

from .convergence import Convergence
from .errors import IllPosedError
from .grid import GridProblem, GridResult
from .grid_model import DEFAULT_MAX_CELLS
from .plate import EdgeHeatFlow, PlateProblem, PlateResult, solve_plate, temperature_at
from .plate_grid import (
    DEFAULT_CELLS,
    output_grid_points,
    run_plate_grid,
    singular_corners,
    solve_grid_checked,
)
from .safety import SafetyReport

_Array = np.ndarray

PLATE_METHODS = ("auto", "series", "grid", "both")
#: Interior sample of the cross-check: SAMPLES x SAMPLES cell-centred points.
SAMPLES = 10
#: Safety factor on the grid's two-grid (Richardson) error estimate when judging agreement:
#: Roache's grid convergence index uses 3 for a two-grid study (Roache 1998; from memory).
GRID_SAFETY_FACTOR = 3.0
#: Differences this much beyond the two error estimates (relative to the largest temperature
#: difference the answers span, at least 1 K) still count as agreement: rounding, not error.
AGREEMENT_RTOL = 1e-9


# --------------------------------------------------------------------------------------------
# grid


@dataclass(frozen=True)
class GridMethodResult(GridResult):
    """`grid.GridResult` naming its method (``"grid"``) for the response envelope."""

    method: str = "grid"


def solve_grid_method(problem: GridProblem) -> GridMethodResult:
    """`grid.solve_grid` (see there for parameters, returns, raises, equations and sources),
    with ``method = "grid"`` on the result; a numerically singular system raises
    `IllPosedError` (see `plate_grid.solve_grid_checked`)."""
    result = solve_grid_checked(problem)
    return GridMethodResult(**{f.name: getattr(result, f.name) for f in fields(result)})


# --------------------------------------------------------------------------------------------
# plate


@dataclass(frozen=True)
class PlateMethodProblem:
    """A plate problem and the method asked for it.

    Attributes
    ----------
    plate : PlateProblem
    method : str
        ``auto`` (the series, which covers every plate the request can describe), ``series``,
        ``grid`` or ``both``.
    max_cells : int
        Cap on the cells of every grid solve.
    grid_cells : int
        Cells of the first grid (``grid`` and ``both``); see `plate_grid.run_plate_grid`.
    """

    plate: PlateProblem
    method: str = "auto"
    max_cells: int = DEFAULT_MAX_CELLS
    grid_cells: int = DEFAULT_CELLS


@dataclass(frozen=True)
class CrossCheck:
    """The grid's answer beside the series answer.

    Attributes
    ----------
    method : str
        ``"grid"``, the method checked against.
    max_difference : float
        Largest |series - grid| temperature, K, over the requested points, the output grid and
        a SAMPLES x SAMPLES interior sample (corner points where two different fixed
        temperatures meet are left out: both answers are the mean there by convention only).
    at : (x, y)
        Where it occurs, m.
    grid_cells : int
    grid_error_estimate : float or None
        The grid's largest mesh error estimate over the compared points, K (None when the
        estimate failed).
    series_error_estimate : float or None
        The series' tail bound, K.
    agrees : bool
        ``max_difference`` <= GRID_SAFETY_FACTOR x the grid's estimate + the series' estimate
        (plus rounding): the grid estimate comes from two grids only, for which Roache's grid
        convergence index asks a safety factor of 3.
    point_temperatures : (n,) array
        The grid's temperatures at the requested points, degC.
    edge_heat_flow : EdgeHeatFlow
        The grid's edge heat flows, W/m (None where unbounded).
    grid_result : PlateResult
        The whole grid answer.
    """

    method: str
    max_difference: float
    at: tuple[float, float]
    grid_cells: int
    grid_error_estimate: float | None
    series_error_estimate: float | None
    agrees: bool
    point_temperatures: _Array
    edge_heat_flow: EdgeHeatFlow
    grid_result: PlateResult


@dataclass(frozen=True)
class PlateMethodResult:
    """The answer to a `PlateMethodProblem`.

    `plate` is the answer of the method named in `method` (the series for ``both``);
    `cross_check` is set for ``both`` only. `convergence` and `safety` are the answer's;
    `warnings` add the cross-check's.
    """

    method: str
    plate: PlateResult
    cross_check: CrossCheck | None
    convergence: Convergence
    safety: SafetyReport
    warnings: tuple[str, ...]


def _sample(problem: PlateProblem) -> _Array:
    s = (np.arange(SAMPLES) + 0.5) / SAMPLES
    xx, yy = np.meshgrid(s * problem.width, s * problem.height)
    return np.column_stack([xx.ravel(), yy.ravel()])


def _excluded(problem: PlateProblem, pts: _Array) -> _Array:
    """Mask of points lying on a singular corner."""
    mask = np.zeros(pts.shape[0], dtype=bool)
    for horizontal, vertical in singular_corners(problem):
        cx = problem.width if vertical == "right" else 0.0
        cy = problem.height if horizontal == "top" else 0.0
        mask |= (np.abs(pts[:, 0] - cx) <= 1e-12 * problem.width) & (
            np.abs(pts[:, 1] - cy) <= 1e-12 * problem.height
        )
    return mask


def cross_check(
    problem: PlateProblem, series: PlateResult, max_cells: int, grid_cells: int = DEFAULT_CELLS
) -> CrossCheck:
    """Solve by the grid and compare with the series answer (see `CrossCheck`)."""
    sample = _sample(problem)
    run = run_plate_grid(problem, max_cells=max_cells, extra_points=sample,
                         initial_cells=grid_cells)
    grid = run.result
    # the compared points, in the order the grid result holds them: the requested points, the
    # output grid (row by row), the interior sample
    pts = np.vstack([np.asarray(series.point_coordinates, dtype=float).reshape(-1, 2),
                     output_grid_points(problem), sample])
    a = np.concatenate([
        series.point_temperatures,
        np.zeros(0) if series.grid_temperature is None else series.grid_temperature.ravel(),
        temperature_at(problem, sample[:, 0], sample[:, 1]),
    ])
    b = np.concatenate([
        grid.point_temperatures,
        np.zeros(0) if grid.grid_temperature is None else grid.grid_temperature.ravel(),
        run.extra_temperatures,
    ])
    with np.errstate(invalid="ignore"):
        diff = np.abs(a - b)
    keep = np.isfinite(diff) & ~_excluded(problem, pts)
    if keep.any():
        i = int(np.argmax(np.where(keep, diff, -1.0)))
        biggest, at = float(diff[i]), (float(pts[i, 0]), float(pts[i, 1]))
    else:
        biggest, at = math.nan, (math.nan, math.nan)
    errs = run.point_error_estimates
    grid_err = (
        float(np.max(np.where(keep, errs, 0.0), initial=0.0))
        if errs is not None and errs.size == keep.size
        else None
    )
    series_err = series.convergence.error_estimate
    finite = np.concatenate([a[np.isfinite(a)], b[np.isfinite(b)]])
    span = float(finite.max() - finite.min()) if finite.size else 0.0
    allowed = (GRID_SAFETY_FACTOR * (grid_err or 0.0) + (series_err or 0.0)
               + AGREEMENT_RTOL * max(1.0, span))
    return CrossCheck(
        method="grid",
        max_difference=biggest,
        at=at,
        grid_cells=grid.convergence.cells or 0,
        grid_error_estimate=grid_err,
        series_error_estimate=series_err,
        agrees=bool(math.isfinite(biggest) and grid_err is not None and biggest <= allowed),
        point_temperatures=grid.point_temperatures,
        edge_heat_flow=grid.edge_heat_flow,
        grid_result=grid,
    )


def solve_plate_by_method(problem: PlateMethodProblem) -> PlateMethodResult:
    """Steady 2D conduction in a rectangle by the method asked.

    Parameters
    ----------
    problem : PlateMethodProblem

    Returns
    -------
    PlateMethodResult
        ``auto`` and ``series``: `plate.solve_plate`; ``grid``: `plate_grid.solve_plate_grid`;
        ``both``: the series answer with a `CrossCheck` against the grid (a warning when they
        differ by more than their error estimates allow, or when the grid did not converge).

    Raises
    ------
    IllPosedError, TooLargeError
        As the solvers used.

    Notes
    -----
    The series (`plate.solve_plate`) and the grid (`plate_grid.solve_plate_grid`) solve the
    same equation, k (T_xx + T_yy) + g = 0 with the same edge conditions, by independent
    means: their agreement within the two error estimates is a check on both.

    References
    ----------
    Roache, P. J., *Verification and Validation in Computational Science and Engineering*,
    Hermosa, 1998: the grid convergence index and its safety factor 3 for two-grid studies
    (from memory).
    """
    method = problem.method
    if method not in PLATE_METHODS:
        raise IllPosedError(f"method must be one of {PLATE_METHODS}, got {method!r}",
                            field="method", reason="validation-failed")
    if method == "grid":
        answer = run_plate_grid(problem.plate, max_cells=problem.max_cells,
                                initial_cells=problem.grid_cells).result
        check = None
        extra: list[str] = []
    else:
        answer = solve_plate(problem.plate)
        check = (cross_check(problem.plate, answer, problem.max_cells, problem.grid_cells)
                 if method == "both" else None)
        extra = []
        if check is not None:
            gconv = check.grid_result.convergence
            if not gconv.converged:
                extra.append(f"cross_check: the grid solve ended {gconv.status}: {gconv.message}")
            elif not check.agrees:
                extra.append(
                    f"cross_check: series and grid differ by {check.max_difference:.3g} K at "
                    f"({check.at[0]:g}, {check.at[1]:g}) m, more than their error estimates "
                    f"allow (series {check.series_error_estimate or 0.0:.3g} K, grid "
                    f"{check.grid_error_estimate or 0.0:.3g} K with a safety factor of "
                    f"{GRID_SAFETY_FACTOR:g})"
                )
            extra.extend(f"cross_check (grid): {w}" for w in check.grid_result.warnings)
    return PlateMethodResult(
        method=answer.method,
        plate=answer,
        cross_check=check,
        convergence=answer.convergence,
        safety=answer.safety,
        warnings=(*answer.warnings, *extra),
    )
