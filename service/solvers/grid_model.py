"""Inputs of the 2D finite-volume conduction solver, and the rules they must obey.

The dataclasses map one to one onto the ``POST /v1/grid`` request (see `GridProblem`); the JSON
keys ``from``/``to`` of an edge segment become `Segment.start`/`Segment.end` because ``from`` is
a Python keyword. All quantities are SI, temperatures in degC.

Tables
------
Three kinds of table appear, all as tuples of pairs, interpolated piecewise linearly and held
constant beyond their ends:

* time tables ``((t, v), ...)``, t in s: any boundary value and any generation;
* temperature tables ``((T, k), ...)``, T in degC: conductivity;
* position profiles ``((s, v), ...)``, s in m along the edge's own coordinate (x for bottom and
  top, y for left and right): the value of a temperature or flux segment along the edge.

`validate` checks every rule the solver relies on and raises `IllPosedError` with the dotted
JSON path of the offending field.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass, field

from .errors import IllPosedError, TooLargeError
from .safety import Limits

#: A table of (abscissa, value) pairs: time tables, temperature tables or position profiles.
Table = tuple[tuple[float, float], ...]
#: A value that is either constant or a time table.
TimedValue = float | Table

GEOMETRIES = ("planar", "axisymmetric")
SEGMENT_TYPES = ("temperature", "flux", "convection", "radiation", "insulated")
SCHEMES = ("backward_euler", "crank_nicolson")
LINEAR_SOLVERS = ("auto", "direct", "multigrid")
EDGE_NAMES = ("bottom", "right", "top", "left")

#: Default cap on the number of cells. Measured with bench/grid.py on the 2-core, 24 GiB
#: machine: a steady linear solve of 4.0 million cells (Ruge-Stuben multigrid) peaks at 2.2 GB
#: resident and takes about 10 s; 1 million cells 0.6 GB and 2.7 s. Two sync workers solving
#: at the cap stay far inside the memory; the time, not the memory, is what the cap bounds.
DEFAULT_MAX_CELLS = 4_000_000
#: Default cap on the number of implicit time steps of a transient run.
DEFAULT_MAX_TIME_STEPS = 100_000
#: Default cap on cells x time steps of a transient run (about 20-100 s of work here: a
#: back-substitution costs roughly 0.2 us per cell, a multigrid solve about 1 us per cell).
DEFAULT_MAX_CELL_STEPS = 100_000_000


@dataclass(frozen=True)
class Cells:
    """Requested number of cells along x (``nx``) and y (``ny``).

    The solver may add a few cells so that every zone and segment boundary is a grid line and
    every interval between such lines holds at least one cell (a warning then says so).
    """

    nx: int
    ny: int


@dataclass(frozen=True)
class Segment:
    """A boundary condition on part of one edge.

    Attributes
    ----------
    type : str
        ``temperature`` (value: surface temperature, degC), ``flux`` (value: heat flux into the
        body, W/m^2), ``convection`` (film_coefficient W/(m^2 K), ambient degC, and optionally
        emissivity and surroundings for combined convection and radiation), ``radiation``
        (emissivity, surroundings degC, optional film_coefficient and ambient) or ``insulated``.
    start, end : float or None
        Extent along the edge's own coordinate (m); None means the edge's start or end.
    value : float, time table or None
        Temperature or flux, as the type says.
    film_coefficient, ambient, surroundings : float, time table or None
        Convection coefficient (W/(m^2 K)), fluid temperature (degC), radiating surroundings
        (degC; defaults to ambient).
    emissivity : float or None
        Surface emissivity, 0 < emissivity <= 1.
    profile : position table or None
        Temperature or flux along the edge, replacing `value` (not combined with time tables).
    """

    type: str
    start: float | None = None
    end: float | None = None
    value: TimedValue | None = None
    film_coefficient: TimedValue | None = None
    ambient: TimedValue | None = None
    emissivity: float | None = None
    surroundings: TimedValue | None = None
    profile: Table | None = None


@dataclass(frozen=True)
class Edges:
    """Segments on each edge; an empty tuple (or a gap between segments) is insulated."""

    bottom: tuple[Segment, ...] = ()
    right: tuple[Segment, ...] = ()
    top: tuple[Segment, ...] = ()
    left: tuple[Segment, ...] = ()

    def named(self) -> tuple[tuple[str, tuple[Segment, ...]], ...]:
        return (
            ("bottom", self.bottom),
            ("right", self.right),
            ("top", self.top),
            ("left", self.left),
        )


@dataclass(frozen=True)
class Zone:
    """A rectangular region of another material; properties left None are the body's.

    Where zones overlap, the later zone in the list wins.

    Attributes
    ----------
    name : str
    region : (x0, y0, x1, y1)
        Corners in m from the bottom-left origin.
    conductivity : float or temperature table, W/(m K)
    generation : float or time table, W/m^3
    density : float, kg/m^3
    specific_heat : float, J/(kg K)
    max_temperature : float or None
        Service limit of the material, degC (checked as ``zones.<i>.max_temperature``).
    """

    name: str
    region: tuple[float, float, float, float]
    conductivity: float | Table | None = None
    generation: TimedValue | None = None
    density: float | None = None
    specific_heat: float | None = None
    max_temperature: float | None = None


@dataclass(frozen=True)
class Transient:
    """Implicit time stepping from a uniform initial temperature.

    Attributes
    ----------
    initial_temperature : float, degC
    times : tuple of float
        Output times, s, strictly increasing and > 0.
    time_step : float
        Largest step, s; each interval between output times is split into equal steps no
        longer than this.
    scheme : str
        ``backward_euler`` (first order in time, never oscillates) or ``crank_nicolson``
        (second order; started with two backward-Euler half steps to damp the start-up jump).
    """

    initial_temperature: float
    times: tuple[float, ...]
    time_step: float
    scheme: str = "backward_euler"


@dataclass(frozen=True)
class GridProblem:
    """A 2D conduction problem on a rectangle, for `solve_grid`.

    Attributes
    ----------
    width, height : float
        Domain size along x and y, m. Axisymmetric: x is the radius (axis at x = 0), y axial.
    cells : Cells
        Requested cells along x and y.
    conductivity : float or temperature table
        The body's conductivity, W/(m K).
    geometry : str
        ``planar`` (per metre of depth) or ``axisymmetric`` (full revolution).
    density, specific_heat : float or None
        kg/m^3 and J/(kg K); needed for transients (by the body or by every zone).
    generation : float or time table
        Volumetric heat generation, W/m^3.
    zones : tuple of Zone
    edges : Edges
    transient : Transient or None
        None for a steady solve.
    points : tuple of (x, y)
        Where temperatures are reported, m.
    output_grid : bool
        Return the cell-centre field (and, for transients, one field per output time).
    verify_mesh : bool
        Solve again on a refined (or, near `max_cells`, coarsened) grid and report a
        Richardson-style error estimate.
    atol : float or None
        Temperature tolerance of the nonlinear (Picard) iteration, K; None: 1e-6 of the
        largest temperature difference the problem names (boundary values, ambients,
        surroundings, initial temperature), or 1e-6 K when it names none.
    max_iterations : int
        Nonlinear (Picard) iterations per steady solve or per time step.
    limits : Limits
    max_cells : int
        Cap on cells (including a verify_mesh refinement's), `TooLargeError` beyond.
    linear_solver : str
        ``auto`` (sparse direct for small and medium grids, multigrid for large ones),
        ``direct`` or ``multigrid``.
    max_time_steps : int
        Cap on the number of time steps, `TooLargeError` beyond.
    max_cell_steps : int
        Cap on cells times time steps of a transient run, `TooLargeError` beyond.
    """

    width: float
    height: float
    cells: Cells
    conductivity: float | Table
    geometry: str = "planar"
    density: float | None = None
    specific_heat: float | None = None
    generation: TimedValue = 0.0
    zones: tuple[Zone, ...] = ()
    edges: Edges = field(default_factory=Edges)
    transient: Transient | None = None
    points: tuple[tuple[float, float], ...] = ()
    output_grid: bool = False
    verify_mesh: bool = False
    atol: float | None = None
    max_iterations: int = 200
    limits: Limits = field(default_factory=Limits)
    max_cells: int = DEFAULT_MAX_CELLS
    linear_solver: str = "auto"
    max_time_steps: int = DEFAULT_MAX_TIME_STEPS
    max_cell_steps: int = DEFAULT_MAX_CELL_STEPS


# --------------------------------------------------------------------------------------------
# tables


def is_table(value: object) -> bool:
    """True for a tuple/list of pairs, False for a plain number."""
    return isinstance(value, (tuple, list))


def table_at(value: TimedValue, x: float) -> float:
    """Value of a constant or of a piecewise-linear table at abscissa `x` (held beyond ends)."""
    if not isinstance(value, (tuple, list)):
        return float(value)
    pts = value
    if x <= pts[0][0]:
        return float(pts[0][1])
    for (x0, v0), (x1, v1) in zip(pts[:-1], pts[1:], strict=True):
        if x <= x1:
            return float(v0 + (v1 - v0) * (x - x0) / (x1 - x0)) if x1 > x0 else float(v1)
    return float(pts[-1][1])


def _finite(v: object) -> bool:
    return isinstance(v, (int, float)) and not isinstance(v, bool) and math.isfinite(v)


def _check_number(
    v: object, path: str, *, positive: bool = False, nonnegative: bool = False
) -> None:
    if not _finite(v):
        raise IllPosedError(f"{path} must be a finite number, got {v!r}", field=path)
    if positive and not v > 0.0:  # type: ignore[operator]
        raise IllPosedError(f"{path} must be > 0, got {v}", field=path)
    if nonnegative and not v >= 0.0:  # type: ignore[operator]
        raise IllPosedError(f"{path} must be >= 0, got {v}", field=path)


def _check_table(
    tab: object,
    path: str,
    what: str,
    *,
    positive: bool = False,
    nonnegative: bool = False,
    strictly: bool = True,
) -> None:
    if not isinstance(tab, (tuple, list)) or len(tab) < 1:
        raise IllPosedError(f"{path} must be a number or a non-empty {what} table", field=path)
    prev = -math.inf
    for n, pair in enumerate(tab):
        if not is_table(pair) or len(pair) != 2:
            raise IllPosedError(f"{path}.{n} must be a pair [{what}, value]", field=f"{path}.{n}")
        _check_number(pair[0], f"{path}.{n}.0")
        _check_number(pair[1], f"{path}.{n}.1", positive=positive, nonnegative=nonnegative)
        if strictly and not pair[0] > prev:
            raise IllPosedError(
                f"{path}: the {what} column must increase strictly", field=f"{path}.{n}.0"
            )
        prev = pair[0]


def _check_value(
    v: object, path: str, *, timed: bool, positive: bool = False, nonnegative: bool = False
) -> None:
    if is_table(v):
        if not timed:
            raise IllPosedError(f"{path}: a time table needs a transient run", field=path)
        _check_table(v, path, "time", positive=positive, nonnegative=nonnegative)
    else:
        _check_number(v, path, positive=positive, nonnegative=nonnegative)


# --------------------------------------------------------------------------------------------
# validation


def segment_extent(seg: Segment, length: float) -> tuple[float, float]:
    """(start, end) of a segment along an edge of `length`, None filled in."""
    return (
        0.0 if seg.start is None else float(seg.start),
        length if seg.end is None else float(seg.end),
    )


def _validate_segment(seg: Segment, path: str, length: float, timed: bool) -> None:
    if seg.type not in SEGMENT_TYPES:
        raise IllPosedError(
            f"{path}.type must be one of {SEGMENT_TYPES}, got {seg.type!r}", field=f"{path}.type"
        )
    for name in ("start", "end"):
        v = getattr(seg, name)
        if v is not None:
            _check_number(v, f"{path}.{'from' if name == 'start' else 'to'}")
    s0, s1 = segment_extent(seg, length)
    tol = 1e-12 * length
    if not (-tol <= s0 < s1 <= length + tol):
        raise IllPosedError(
            f"{path}: need 0 <= from < to <= edge length {length:g} m, got from={s0:g}, to={s1:g}",
            field=f"{path}.to",
        )
    if seg.profile is not None:
        if seg.type not in ("temperature", "flux"):
            raise IllPosedError(
                f"{path}.profile is allowed on temperature and flux segments",
                field=f"{path}.profile",
            )
        if seg.value is not None:
            raise IllPosedError(f"{path}: give value or profile, not both", field=f"{path}.profile")
        _check_table(seg.profile, f"{path}.profile", "position")
    if seg.type in ("temperature", "flux"):
        if seg.profile is None:
            if seg.value is None:
                raise IllPosedError(
                    f"{path}.value is required for a {seg.type} segment", field=f"{path}.value"
                )
            _check_value(seg.value, f"{path}.value", timed=timed)
    if seg.type == "convection":
        if seg.film_coefficient is None or seg.ambient is None:
            raise IllPosedError(
                f"{path}: a convection segment needs film_coefficient and ambient",
                field=f"{path}.film_coefficient",
            )
    if seg.type == "radiation":
        if seg.emissivity is None:
            raise IllPosedError(
                f"{path}.emissivity is required for a radiation segment", field=f"{path}.emissivity"
            )
        if seg.surroundings is None and seg.ambient is None:
            raise IllPosedError(
                f"{path}.surroundings is required for a radiation segment",
                field=f"{path}.surroundings",
            )
        if seg.film_coefficient is not None and seg.ambient is None:
            raise IllPosedError(
                f"{path}.ambient is required with film_coefficient", field=f"{path}.ambient"
            )
    if seg.film_coefficient is not None:
        _check_value(
            seg.film_coefficient, f"{path}.film_coefficient", timed=timed, nonnegative=True
        )
    for name in ("ambient", "surroundings"):
        v = getattr(seg, name)
        if v is not None:
            _check_value(v, f"{path}.{name}", timed=timed)
    if seg.emissivity is not None:
        _check_number(seg.emissivity, f"{path}.emissivity")
        if not 0.0 < seg.emissivity <= 1.0:
            raise IllPosedError(
                f"{path}.emissivity must be in (0, 1], got {seg.emissivity}",
                field=f"{path}.emissivity",
            )
        if seg.type not in ("convection", "radiation"):
            raise IllPosedError(
                f"{path}.emissivity applies to convection and radiation segments only",
                field=f"{path}.emissivity",
            )


def _validate_conductivity(k: object, path: str) -> None:
    if is_table(k):
        _check_table(k, path, "temperature", positive=True)
    else:
        _check_number(k, path, positive=True)


def _has_sink(problem: GridProblem) -> bool:
    """True when some boundary ties the temperature level (needed for a steady solution)."""
    for _, segs in problem.edges.named():
        for seg in segs:
            if seg.type in ("temperature", "radiation"):
                return True
            if seg.type == "convection":
                h = seg.film_coefficient
                if is_table(h) or (h is not None and float(h) > 0.0):  # type: ignore[arg-type]
                    return True
    return False


def validate(problem: GridProblem) -> tuple[str, ...]:
    """Check the rules `solve_grid` relies on.

    Returns
    -------
    tuple of str
        Warnings (gaps between segments treated as insulated).

    Raises
    ------
    IllPosedError
        A field breaks a rule; ``field`` names its dotted JSON path.
    TooLargeError
        More cells than ``max_cells`` are asked for.
    """
    p = problem
    warnings: list[str] = []
    _check_number(p.width, "width", positive=True)
    _check_number(p.height, "height", positive=True)
    if p.geometry not in GEOMETRIES:
        raise IllPosedError(
            f"geometry must be one of {GEOMETRIES}, got {p.geometry!r}", field="geometry"
        )
    for name in ("nx", "ny"):
        n = getattr(p.cells, name)
        if not isinstance(n, int) or isinstance(n, bool) or n < 1:
            raise IllPosedError(
                f"cells.{name} must be an integer >= 1, got {n!r}", field=f"cells.{name}"
            )
    if p.cells.nx * p.cells.ny > p.max_cells:
        raise TooLargeError(
            f"cells: {p.cells.nx} x {p.cells.ny} = {p.cells.nx * p.cells.ny} cells exceeds "
            f"the cap of {p.max_cells}",
            field="cells",
        )
    if p.linear_solver not in LINEAR_SOLVERS:
        raise IllPosedError(f"linear_solver must be one of {LINEAR_SOLVERS}", field="linear_solver")
    if not isinstance(p.max_iterations, int) or p.max_iterations < 1:
        raise IllPosedError("max_iterations must be an integer >= 1", field="max_iterations")
    if p.atol is not None:
        _check_number(p.atol, "atol", positive=True)
    timed = p.transient is not None
    _validate_conductivity(p.conductivity, "conductivity")
    _check_value(p.generation, "generation", timed=timed)
    for name in ("density", "specific_heat"):
        v = getattr(p, name)
        if v is not None:
            _check_number(v, name, positive=True)

    for i, z in enumerate(p.zones):
        path = f"zones.{i}"
        if len(z.region) != 4:
            raise IllPosedError(f"{path}.region must be [x0, y0, x1, y1]", field=f"{path}.region")
        for n, v in enumerate(z.region):
            _check_number(v, f"{path}.region.{n}")
        x0, y0, x1, y1 = z.region
        tol_x, tol_y = 1e-12 * p.width, 1e-12 * p.height
        if not (-tol_x <= x0 < x1 <= p.width + tol_x and -tol_y <= y0 < y1 <= p.height + tol_y):
            raise IllPosedError(
                f"{path}.region must satisfy 0 <= x0 < x1 <= width and 0 <= y0 < y1 <= height, "
                f"got {tuple(z.region)}",
                field=f"{path}.region",
            )
        if z.conductivity is not None:
            _validate_conductivity(z.conductivity, f"{path}.conductivity")
        if z.generation is not None:
            _check_value(z.generation, f"{path}.generation", timed=timed)
        for name in ("density", "specific_heat"):
            v = getattr(z, name)
            if v is not None:
                _check_number(v, f"{path}.{name}", positive=True)
        if z.max_temperature is not None:
            _check_number(z.max_temperature, f"{path}.max_temperature")

    for edge, segs in p.edges.named():
        length = p.width if edge in ("bottom", "top") else p.height
        spans = []
        for n, seg in enumerate(segs):
            _validate_segment(seg, f"edges.{edge}.{n}", length, timed)
            spans.append((*segment_extent(seg, length), n))
        spans.sort()
        covered = 0.0
        tol = 1e-9 * length
        for s0, s1, n in spans:
            if s0 < covered - tol:
                raise IllPosedError(
                    f"edges.{edge}.{n} overlaps another segment of that edge near {s0:g} m",
                    field=f"edges.{edge}.{n}.from",
                )
            if s0 > covered + tol and segs:
                warnings.append(
                    f"edges.{edge}: {covered:g} m to {s0:g} m is not covered by a "
                    "segment and is treated as insulated"
                )
            covered = max(covered, s1)
        if segs and covered < length - tol:
            warnings.append(
                f"edges.{edge}: {covered:g} m to {length:g} m is not covered by a "
                "segment and is treated as insulated"
            )
    if p.geometry == "axisymmetric":
        for n, seg in enumerate(p.edges.left):
            if seg.type != "insulated":
                raise IllPosedError(
                    "edges.left is the axis of an axisymmetric body (x = 0) and must be "
                    f"insulated, got {seg.type!r}",
                    field=f"edges.left.{n}.type",
                )

    for n, pt in enumerate(p.points):
        if len(pt) != 2:
            raise IllPosedError(f"points.{n} must be [x, y]", field=f"points.{n}")
        _check_number(pt[0], f"points.{n}.0")
        _check_number(pt[1], f"points.{n}.1")
        tol_x, tol_y = 1e-12 * p.width, 1e-12 * p.height
        if not (-tol_x <= pt[0] <= p.width + tol_x and -tol_y <= pt[1] <= p.height + tol_y):
            raise IllPosedError(
                f"points.{n} = {tuple(pt)} lies outside the domain "
                f"[0, {p.width:g}] x [0, {p.height:g}]",
                field=f"points.{n}",
            )

    if p.transient is None:
        if not _has_sink(p):
            raise IllPosedError(
                "edges: no edge fixes a temperature, convects or radiates, so a steady state "
                "exists only if the heat inputs balance exactly and is then not unique; add "
                "a temperature, convection or radiation segment",
                field="edges",
                reason="not-unique",
            )
    else:
        tr = p.transient
        _check_number(tr.initial_temperature, "transient.initial_temperature")
        _check_number(tr.time_step, "transient.time_step", positive=True)
        if tr.scheme not in SCHEMES:
            raise IllPosedError(
                f"transient.scheme must be one of {SCHEMES}", field="transient.scheme"
            )
        if len(tr.times) == 0:
            raise IllPosedError("transient.times needs at least one time", field="transient.times")
        prev = 0.0
        for n, t in enumerate(tr.times):
            _check_number(t, f"transient.times.{n}")
            if not t > prev:
                raise IllPosedError(
                    "transient.times must be > 0 and strictly increasing",
                    field=f"transient.times.{n}",
                )
            prev = t
        steps = _count_steps(tr.times, tr.time_step)
        if steps > p.max_time_steps:
            raise TooLargeError(
                f"transient: {steps} time steps exceed the cap of {p.max_time_steps}",
                field="transient.time_step",
            )
        cell_steps = steps * p.cells.nx * p.cells.ny
        if cell_steps > p.max_cell_steps:
            raise TooLargeError(
                f"transient: {steps} time steps on {p.cells.nx * p.cells.ny} cells "
                f"({cell_steps:.3g} cell-steps) exceed the cap of {p.max_cell_steps:.3g}",
                field="transient.time_step",
            )
        for name in ("density", "specific_heat"):
            # the body's value is used wherever no zone gives one, so it is always needed
            if getattr(p, name) is None:
                raise IllPosedError(f"{name} is required for a transient run", field=name)
    return tuple(warnings)


def _count_steps(times: Sequence[float], dt: float) -> int:
    prev, steps = 0.0, 0
    for t in times:
        steps += max(1, math.ceil((t - prev) / dt - 1e-9))
        prev = t
    return steps


def step_plan(times: Sequence[float], dt: float) -> list[tuple[float, int, float]]:
    """Split each output interval into equal steps no longer than `dt`.

    Returns
    -------
    list of (interval start s, number of steps, step length s), one per output time.
    """
    plan = []
    prev = 0.0
    for t in times:
        n = max(1, math.ceil((t - prev) / dt - 1e-9))
        plan.append((prev, n, (t - prev) / n))
        prev = t
    return plan
