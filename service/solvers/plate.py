"""Steady 2D conduction in a rectangle by eigenfunction series.

The rectangle 0 <= x <= W, 0 <= y <= H (origin bottom-left) has conductivity k, optional uniform
generation g, and on each edge a fixed temperature (uniform or a piecewise-linear profile), a
heat flux, convection to an ambient, or insulation.

Stages (each a named function, testable alone):

1. `particular_solution` -- a 1D parabola carrying the generation;
2. `corner_polynomial` -- a harmonic polynomial that makes the remaining edge data vanish at
   every corner where an eigenfunction end is fixed (so series coefficients decay fast);
3. `edge_data` -- the data left for the harmonic remainder on each edge;
4. `edge_eigenvalues` -> `edge_coefficients` -> `perpendicular_ratio` -> `tail_bound` ->
   `sum_series` -- one series per edge carrying data, with the number of terms chosen per point
   (per row on a grid) from the tail bound;
5. `edge_heat_flows`, extremes and safety.

Speed. A solve does each piece of work once and for all series together: `stack_modes` builds
the eigenvalues, coefficients and summation weights of every series in one pass (the same
stages as above, on stacked arrays), cached per solve by length and shared by the flows and the
evaluations; the truncation rule is evaluated for every series and point at once; sums are
single products over (series, point, mode) with each point's own term count; sines on even grids
come from angle addition. Without generation the extremes are looked for only where the maximum
principle allows them (flux and convection edges), in the same pass as the requested points.
Module caches: `_ladder` and `_coarse_ladder` (read-only integer arrays, LRU, 16 entries each)
and the eigenvalue tables of `service.solvers.eigen`.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from functools import lru_cache
from types import MappingProxyType
from typing import NamedTuple

import numpy as np

from service.solvers.convergence import Convergence
from service.solvers.eigen import MAX_COUNT, pair_phase, pair_roots
from service.solvers.errors import IllPosedError
from service.solvers.safety import Limits, Location, SafetyReport, Scope, check_limits

EDGE_NAMES = ("bottom", "right", "top", "left")
EDGE_TYPES = ("temperature", "flux", "convection", "insulated")
#: Default relative tolerance: atol = DEFAULT_RTOL * the largest temperature difference.
DEFAULT_RTOL = 1e-6
#: Samples per edge (or per direction, with generation) used to locate the extremes when no output
#: grid at least this fine is asked.
EXTREMES_SAMPLES = 33
#: Largest (points x terms) block evaluated at once, to bound memory (about 16 MB of floats).
_BLOCK = 2_000_000

_Array = np.ndarray


# =========================================================================== input and result


@dataclass(frozen=True)
class Edge:
    """One edge condition.

    Attributes
    ----------
    type : {"temperature", "flux", "convection", "insulated"}
    value : float or None
        degC for ``temperature`` (uniform), W/m^2 for ``flux`` (positive INTO the body).
    profile : tuple of (s, T) or None
        ``temperature`` only: piecewise-linear temperature, s in m along the edge (x for
        bottom/top, y for left/right), strictly increasing within [0, edge length]; held constant
        beyond its ends.
    film_coefficient : float or None
        W/(m^2 K), ``convection``.
    ambient : float or None
        degC, ``convection``.
    """

    type: str
    value: float | None = None
    profile: tuple[tuple[float, float], ...] | None = None
    film_coefficient: float | None = None
    ambient: float | None = None


@dataclass(frozen=True)
class PlateProblem:
    """A rectangle with four edge conditions.

    Attributes
    ----------
    width, height : float
        W and H, m. Origin at the bottom-left corner, x along the width.
    conductivity : float
        k, W/(m K).
    bottom, right, top, left : Edge
    generation : float
        Uniform volumetric generation g, W/m^3.
    points : tuple of (x, y)
        Evaluation points, m.
    grid : (nx, ny) or None
        Output grid including the edges, x = linspace(0, W, nx), y = linspace(0, H, ny).
    atol : float or None
        Absolute temperature tolerance, K. None: 1e-6 times the largest temperature difference
        in the problem (fixed temperatures and ambients, and the scales q L / k and g L^2 / k).
    max_terms : int
        Most series terms per sub-problem and point.
    limits : Limits
        Temperature limits for the safety report.
    """

    width: float
    height: float
    conductivity: float
    bottom: Edge
    right: Edge
    top: Edge
    left: Edge
    generation: float = 0.0
    points: tuple[tuple[float, float], ...] = ()
    grid: tuple[int, int] | None = None
    atol: float | None = None
    max_terms: int = 20000
    limits: Limits = field(default_factory=Limits)

    def edge(self, name: str) -> Edge:
        return {"bottom": self.bottom, "right": self.right, "top": self.top,
                "left": self.left}[name]


@dataclass(frozen=True)
class EdgeHeatFlow:
    """Heat flow into the body through each edge, W per metre of depth (None: unbounded)."""

    bottom: float | None
    right: float | None
    top: float | None
    left: float | None


@dataclass(frozen=True)
class EnergyBalance:
    """`net` = sum of edge flows + generation, W/m; `relative_error` = |net| / largest flow."""

    net: float | None
    relative_error: float | None


@dataclass(frozen=True)
class PlateResult:
    """Result of `solve_plate`.

    Attributes
    ----------
    method : str
        ``"series"``.
    point_coordinates : numpy.ndarray
        (n, 2) the requested points, m.
    point_temperatures : numpy.ndarray
        (n,) temperatures at the points, degC.
    grid_x, grid_y : numpy.ndarray or None
        Output grid coordinates, m.
    grid_temperature : numpy.ndarray or None
        (ny, nx) temperatures, degC; row j is y = grid_y[j].
    edge_heat_flow : EdgeHeatFlow
        W/m into the body per edge, computed from the series independently of each other.
    generation_heat : float
        g W H, W/m.
    energy_balance : EnergyBalance
        Sum of edge flows and generation (None when a singular corner makes a flow unbounded).
    hottest, coldest : Location
        Extremes over the body, degC and m.
    convergence : Convergence
        ``converged`` or ``max_terms`` (or ``non_finite``); `terms` is the largest count used
        by any sub-problem for a reported temperature, `error_estimate` the largest tail bound
        over the reported temperatures (K): points, grid, hottest and coldest (and the exposed
        edges' extremes when a surface limit is checked).
    safety : SafetyReport
    warnings : tuple of str
    """

    method: str
    point_coordinates: _Array
    point_temperatures: _Array
    grid_x: _Array | None
    grid_y: _Array | None
    grid_temperature: _Array | None
    edge_heat_flow: EdgeHeatFlow
    generation_heat: float
    energy_balance: EnergyBalance
    hottest: Location
    coldest: Location
    convergence: Convergence
    safety: SafetyReport
    warnings: tuple[str, ...]


# =========================================================================== edge geometry


@dataclass(frozen=True)
class _Frame:
    """Local frame of an edge: s along the edge, t the distance into the body."""

    along_x: bool      # s = x (bottom, top) or s = y (left, right)
    far: bool          # t = H - y (top) or W - x (right)
    start: str         # neighbour at s = 0
    end: str           # neighbour at s = edge length
    opposite: str
    normal: tuple[float, float]  # outward unit normal


_FRAMES: Mapping[str, _Frame] = MappingProxyType({
    "bottom": _Frame(True, False, "left", "right", "top", (0.0, -1.0)),
    "top": _Frame(True, True, "left", "right", "bottom", (0.0, 1.0)),
    "left": _Frame(False, False, "bottom", "top", "right", (-1.0, 0.0)),
    "right": _Frame(False, True, "bottom", "top", "left", (1.0, 0.0)),
})
# corners as (horizontal edge, vertical edge): name, and which end of each edge it is (0 or 1)
_CORNERS: Mapping[tuple[str, str], str] = MappingProxyType({
    ("bottom", "left"): "bottom-left",
    ("bottom", "right"): "bottom-right",
    ("top", "right"): "top-right",
    ("top", "left"): "top-left",
})


def _lengths(name: str, width: float, height: float) -> tuple[float, float]:
    """(edge length L_s, depth L_t) of an edge's local frame, m."""
    return (width, height) if _FRAMES[name].along_x else (height, width)


def _to_local(name: str, x: _Array, y: _Array, width: float,
              height: float) -> tuple[_Array, _Array]:
    """(s, t) in m of points (x, y) in the frame of edge `name`."""
    f = _FRAMES[name]
    if f.along_x:
        return x, (height - y if f.far else y)
    return y, (width - x if f.far else x)


def _edge_point(name: str, s: _Array, width: float, height: float) -> tuple[_Array, _Array]:
    """(x, y) of the point at distance s along edge `name`."""
    s = np.asarray(s, dtype=float)
    f = _FRAMES[name]
    if f.along_x:
        return s, np.full_like(s, height if f.far else 0.0)
    return np.full_like(s, width if f.far else 0.0), s


def _corner_end(edge: str, other: str) -> int:
    """0 if the corner with `other` is at s = 0 of `edge`, 1 if at s = L."""
    return 0 if _FRAMES[edge].start == other else 1


def _affine_frame(name: str, width: float, height: float) -> tuple[tuple[float, ...], ...]:
    """Rows (a, b, c) with sigma = s / L and t = a x + b y + c in the frame of edge `name`."""
    f = _FRAMES[name]
    length = _lengths(name, width, height)[0]
    if f.along_x:
        return ((1.0 / length, 0.0, 0.0), (0.0, -1.0, height) if f.far else (0.0, 1.0, 0.0))
    return ((0.0, 1.0 / length, 0.0), (-1.0, 0.0, width) if f.far else (1.0, 0.0, 0.0))


# =========================================================================== edge kinds


@dataclass(frozen=True)
class _EdgeCondition:
    """An edge reduced to its mathematical kind.

    kind: "D" (Dirichlet, fixed temperature), "N" (Neumann: flux or insulated) or "R" (Robin:
    convection). flux in W/m^2 (N), film in W/(m^2 K) and ambient in degC (R).
    """

    kind: str
    flux: float = 0.0
    film: float = 0.0
    ambient: float = 0.0
    profile_s: _Array | None = None   # D: breakpoints, m, covering [0, L]
    profile_t: _Array | None = None   # D: temperatures at the breakpoints, degC

    def temperature(self, s: _Array) -> _Array:
        """Fixed temperature at distance s along the edge (D only), degC."""
        assert self.profile_s is not None and self.profile_t is not None
        return np.interp(s, self.profile_s, self.profile_t)


def _condition(name: str, edge: Edge, length: float) -> _EdgeCondition:
    where = f"edges.{name}"
    if edge.type not in EDGE_TYPES:
        raise IllPosedError(f"{where}.type: must be one of {EDGE_TYPES}, got {edge.type!r}",
                            field=f"{where}.type")
    if edge.type == "insulated":
        return _EdgeCondition("N")
    if edge.type == "flux":
        if edge.value is None or not math.isfinite(edge.value):
            raise IllPosedError(f"{where}.value: a flux edge needs a finite heat flux in W/m^2",
                                field=f"{where}.value")
        return _EdgeCondition("N", flux=float(edge.value))
    if edge.type == "convection":
        h, ta = edge.film_coefficient, edge.ambient
        if h is None or not (math.isfinite(h) and h > 0.0):
            raise IllPosedError(f"{where}.film_coefficient: a convection edge needs a finite "
                                "film coefficient > 0 W/(m^2 K)", field=f"{where}.film_coefficient")
        if ta is None or not math.isfinite(ta):
            raise IllPosedError(f"{where}.ambient: a convection edge needs a finite ambient "
                                "temperature", field=f"{where}.ambient")
        return _EdgeCondition("R", film=float(h), ambient=float(ta))
    # temperature
    if (edge.value is None) == (edge.profile is None):
        raise IllPosedError(f"{where}: a temperature edge needs exactly one of value or profile",
                            field=f"{where}.value")
    if edge.profile is None:
        assert edge.value is not None
        if not math.isfinite(edge.value):
            raise IllPosedError(f"{where}.value: must be finite", field=f"{where}.value")
        v = float(edge.value)
        return _EdgeCondition("D", profile_s=np.array([0.0, length]), profile_t=np.array([v, v]))
    prof = np.asarray(edge.profile, dtype=float).reshape(-1, 2)
    s, t = prof[:, 0], prof[:, 1]
    if len(s) < 1 or not np.all(np.isfinite(prof)):
        raise IllPosedError(f"{where}.profile: needs at least one finite (s, T) pair",
                            field=f"{where}.profile")
    if np.any(np.diff(s) <= 0.0):
        raise IllPosedError(f"{where}.profile: positions s must be strictly increasing",
                            field=f"{where}.profile")
    slack = 1e-9 * length
    if s[0] < -slack or s[-1] > length + slack:
        raise IllPosedError(f"{where}.profile: positions must lie within the edge, 0 to "
                            f"{length:g} m", field=f"{where}.profile")
    s = np.clip(s, 0.0, length)
    keep = np.concatenate(([True], np.diff(s) > 0.0))  # clipping may merge end points
    s, t = s[keep], t[keep]
    # held constant beyond its ends: add the edge ends as breakpoints
    if s[0] > 0.0:
        s, t = np.concatenate(([0.0], s)), np.concatenate(([t[0]], t))
    if s[-1] < length:
        s, t = np.concatenate((s, [length])), np.concatenate((t, [t[-1]]))
    return _EdgeCondition("D", profile_s=s, profile_t=t)


def _conditions(problem: PlateProblem) -> dict[str, _EdgeCondition]:
    w, h = problem.width, problem.height
    return {n: _condition(n, problem.edge(n), _lengths(n, w, h)[0]) for n in EDGE_NAMES}


def _validate(problem: PlateProblem) -> None:
    for name in ("width", "height", "conductivity"):
        v = getattr(problem, name)
        if not (isinstance(v, (int, float)) and math.isfinite(v) and v > 0.0):
            raise IllPosedError(f"{name}: must be a finite number > 0, got {v!r}", field=name)
    if not math.isfinite(problem.generation):
        raise IllPosedError("generation: must be finite", field="generation")
    if problem.atol is not None and not (math.isfinite(problem.atol) and problem.atol > 0.0):
        raise IllPosedError("tolerance: must be a finite number > 0 K", field="tolerance")
    if not 1 <= problem.max_terms <= MAX_COUNT:
        raise IllPosedError(f"max_terms: must be between 1 and {MAX_COUNT}",
                            field="max_terms")
    if problem.grid is not None and (len(problem.grid) != 2 or min(problem.grid) < 2):
        raise IllPosedError("grid: nx and ny must each be at least 2", field="grid")
    w, h = problem.width, problem.height
    for i, (x, y) in enumerate(problem.points):
        if not (math.isfinite(x) and math.isfinite(y)
                and -1e-9 * w <= x <= w * (1 + 1e-9) and -1e-9 * h <= y <= h * (1 + 1e-9)):
            raise IllPosedError(f"points.{i}: ({x:g}, {y:g}) m lies outside the {w:g} m by "
                                f"{h:g} m rectangle", field=f"points.{i}")


def _check_unique(problem: PlateProblem, cond: dict[str, _EdgeCondition]) -> None:
    """All-flux problems: no steady state unless the heat input balances, then not unique."""
    if any(c.kind != "N" for c in cond.values()):
        return
    w, h = problem.width, problem.height
    flows = {n: cond[n].flux * _lengths(n, w, h)[0] for n in EDGE_NAMES}
    gen = problem.generation * w * h
    net = sum(flows.values()) + gen
    scale = max([abs(v) for v in flows.values()] + [abs(gen)])
    detail = ", ".join(f"{n} {flows[n]:.6g} W/m" for n in EDGE_NAMES)
    if abs(net) > 1e-9 * scale:
        raise IllPosedError(
            f"edges: every edge is a heat flux or insulated and the net heat input is "
            f"{net:.6g} W/m per metre of depth ({detail}, generation {gen:.6g} W/m), so no "
            "steady state exists; make the inputs balance or give one edge a temperature or "
            "convection", field="edges", reason="physics-rejected")
    raise IllPosedError(
        "edges: every edge is a heat flux or insulated and the heat input balances, so the "
        "temperature is fixed only up to a constant; give one edge a temperature or convection",
        field="edges", reason="not-unique")


def default_atol(problem: PlateProblem) -> float:
    """1e-6 of the largest temperature difference in the problem, K.

    The difference is the largest of: the spread of fixed temperatures and ambients, |q| L / k
    for each flux edge and |g| L^2 / k, with L the longer side.
    """
    k, big = problem.conductivity, max(problem.width, problem.height)
    temps: list[float] = []
    scales: list[float] = [abs(problem.generation) * big * big / k]
    for name in EDGE_NAMES:
        e = problem.edge(name)
        if e.type == "temperature":
            if e.profile:
                temps.extend(t for _, t in e.profile)
            elif e.value is not None:
                temps.append(e.value)
        elif e.type == "convection" and e.ambient is not None:
            temps.append(e.ambient)
        elif e.type == "flux" and e.value is not None:
            scales.append(abs(e.value) * big / k)
    spread = max(temps) - min(temps) if temps else 0.0
    diff = max([spread] + scales)
    if diff > 0.0:
        return DEFAULT_RTOL * diff
    return DEFAULT_RTOL * max([1.0] + [abs(t) for t in temps])


# =========================================================================== stage 1: generation


@dataclass(frozen=True)
class Particular:
    """T_p(xi) = -g xi^2 / (2 k) + a xi + b along one axis (0: x, 1: y); axis -1: T_p = 0.

    T_p satisfies the homogeneous versions of the two edge conditions at the ends of its axis,
    so those edges keep their data unchanged (and a 1D problem is solved exactly).
    """

    axis: int
    curvature: float  # g / k, K/m^2
    a: float
    b: float

    def value(self, x: _Array, y: _Array) -> _Array:
        if self.axis < 0:
            return np.zeros(np.broadcast(x, y).shape)
        xi = np.broadcast_to(x if self.axis == 0 else y, np.broadcast(x, y).shape)
        return -0.5 * self.curvature * xi * xi + self.a * xi + self.b

    def gradient(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        shape = np.broadcast(x, y).shape
        zero = np.zeros(shape)
        if self.axis < 0:
            return zero, zero
        xi = np.broadcast_to(x if self.axis == 0 else y, shape)
        d = -self.curvature * xi + self.a
        return (d, zero) if self.axis == 0 else (zero, d)


def particular_solution(problem: PlateProblem, cond: dict[str, _EdgeCondition]) -> Particular:
    """Choose the generation parabola (Poisson equation particular solution).

    For each axis whose two end edges are not both flux/insulated, solve -k T'' = g with the
    homogeneous end conditions; keep the one with the smaller peak |T_p| (the shorter, stiffer
    direction), so the harmonic remainder is small.
    """
    g, k = problem.generation, problem.conductivity
    if g == 0.0:
        return Particular(-1, 0.0, 0.0, 0.0)
    c = g / k
    best: Particular | None = None
    best_peak = math.inf
    for axis, (lo, hi, length) in enumerate((("left", "right", problem.width),
                                             ("bottom", "top", problem.height))):
        a_lo, a_hi = cond[lo], cond[hi]
        if a_lo.kind == "N" and a_hi.kind == "N":
            continue
        # rows act on (a, b); T = -c xi^2/2 + a xi + b, outward normal -xi at 0, +xi at L
        m = np.zeros((2, 2))
        rhs = np.zeros(2)
        if a_lo.kind == "D":
            m[0] = (0.0, 1.0)
        elif a_lo.kind == "N":
            m[0] = (1.0, 0.0)
        else:  # -k T'(0) + h T(0) = 0
            m[0] = (-k, a_lo.film)
        if a_hi.kind == "D":
            m[1], rhs[1] = (length, 1.0), 0.5 * c * length**2
        elif a_hi.kind == "N":
            m[1], rhs[1] = (1.0, 0.0), c * length
        else:  # k T'(L) + h T(L) = 0
            h = a_hi.film
            m[1], rhs[1] = (k + h * length, h), k * c * length + 0.5 * h * c * length**2
        a, b = np.linalg.solve(m, rhs)
        cand = Particular(axis, c, float(a), float(b))
        xs = [0.0, length] + ([a / c] if 0.0 < a / c < length else [])
        peak = max(abs(float(cand.value(np.array(v), np.array(v)))) for v in xs)
        if peak < best_peak:
            best, best_peak = cand, peak
    assert best is not None  # an all-flux problem was rejected before
    return best


# =========================================================================== stage 2: corners


# =========================================================================== stage 2: corners


def _harmonic_table() -> _Array:
    """H[k, i, j]: coefficient of u^i v^j in the k-th harmonic polynomial (degree <= 4)."""
    h = np.zeros((9, 5, 5))
    h[0, 0, 0] = 1.0                                       # 1
    h[1, 1, 0] = 1.0                                       # u
    h[2, 0, 1] = 1.0                                       # v
    h[3, 2, 0], h[3, 0, 2] = 1.0, -1.0                     # u^2 - v^2
    h[4, 1, 1] = 1.0                                       # u v
    h[5, 3, 0], h[5, 1, 2] = 1.0, -3.0                     # u^3 - 3 u v^2
    h[6, 2, 1], h[6, 0, 3] = 3.0, -1.0                     # 3 u^2 v - v^3
    h[7, 4, 0], h[7, 2, 2], h[7, 0, 4] = 1.0, -6.0, 1.0    # u^4 - 6 u^2 v^2 + v^4
    h[8, 3, 1], h[8, 1, 3] = 1.0, -1.0                     # u^3 v - u v^3
    return h


_POWERS = np.arange(5)
_POWERS.setflags(write=False)


def _d_du(c: _Array) -> _Array:
    """Coefficients of d/du of polynomials given as c[..., i, j] (of u^i v^j)."""
    out = np.zeros_like(c)
    out[..., :-1, :] = c[..., 1:, :] * _POWERS[1:, None]
    return out


def _d_dv(c: _Array) -> _Array:
    """Coefficients of d/dv of polynomials given as c[..., i, j] (of u^i v^j)."""
    out = np.zeros_like(c)
    out[..., :, :-1] = c[..., :, 1:] * _POWERS[None, 1:]
    return out


# harmonic polynomials in scaled coordinates (u, v) = (x, y) / scale, with their derivatives
# (read-only constants)
_HARMONIC = _harmonic_table()
_HARMONIC_DU = _d_du(_HARMONIC)
_HARMONIC_DV = _d_dv(_HARMONIC)
for _table in (_HARMONIC, _HARMONIC_DU, _HARMONIC_DV):
    _table.setflags(write=False)
_BASIS_DEGREE = np.array([0, 1, 1, 2, 2, 3, 3, 4, 4])
_BASIS_DEGREE.setflags(write=False)


def _monomials(z: _Array) -> _Array:
    """z^0 .. z^4 along a new last axis."""
    return np.asarray(z, float)[..., None] ** _POWERS


def _poly2(c: _Array, u: _Array, v: _Array) -> _Array:
    """sum_ij c[i, j] u^i v^j at points (u, v) (shapes broadcast)."""
    return np.einsum("...i,ij,...j->...", _monomials(u), c, _monomials(v))


def _harmonic_basis(u: _Array, v: _Array) -> tuple[_Array, _Array, _Array]:
    """All basis values and derivatives d/du, d/dv, stacked along axis 0."""
    u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
    mu, mv = _monomials(u), _monomials(v)
    return tuple(np.einsum("...i,kij,...j->k...", mu, t, mv)  # type: ignore[return-value]
                 for t in (_HARMONIC, _HARMONIC_DU, _HARMONIC_DV))


@dataclass(frozen=True)
class CornerPolynomial:
    """A harmonic polynomial (degree <= 4) in (x, y) / scale."""

    coefficients: _Array
    scale: float

    @property
    def array(self) -> _Array:
        """Coefficients c[i, j] of u^i v^j, (u, v) = (x, y) / scale."""
        return (self.coefficients @ _HARMONIC.reshape(9, 25)).reshape(5, 5)

    def value(self, x: _Array, y: _Array) -> _Array:
        s = self.scale
        return _poly2(self.array, np.asarray(x, float) / s, np.asarray(y, float) / s)

    def gradient(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        s, c = self.scale, self.array
        u, v = np.asarray(x, float) / s, np.asarray(y, float) / s
        return _poly2(_d_du(c), u, v) / s, _poly2(_d_dv(c), u, v) / s


def _particular_array(particular: Particular, scale: float) -> _Array:
    """T_p as coefficients c[i, j] of u^i v^j, (u, v) = (x, y) / scale."""
    c = np.zeros((5, 5))
    if particular.axis < 0:
        return c
    line = (particular.b, particular.a * scale, -0.5 * particular.curvature * scale * scale)
    for j, v in enumerate(line):
        if particular.axis == 0:
            c[j, 0] = v
        else:
            c[0, j] = v
    return c


@dataclass(frozen=True)
class _Base:
    """T_p + Pi: the part of the solution known in closed form, as one polynomial c[i, j] of
    u^i v^j with (u, v) = (x, y) / scale, and its derivatives."""

    particular: Particular
    corner: CornerPolynomial
    scale: float
    coef: _Array
    coef_u: _Array
    coef_v: _Array

    @classmethod
    def build(cls, particular: Particular, corner: CornerPolynomial) -> _Base:
        c = _particular_array(particular, corner.scale) + corner.array
        return cls(particular, corner, corner.scale, c, _d_du(c), _d_dv(c))

    def value(self, x: _Array, y: _Array) -> _Array:
        s = self.scale
        return _poly2(self.coef, np.asarray(x, float) / s, np.asarray(y, float) / s)

    def gradient(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        s = self.scale
        u, v = np.asarray(x, float) / s, np.asarray(y, float) / s
        return _poly2(self.coef_u, u, v) / s, _poly2(self.coef_v, u, v) / s

    def grid(self, gx: _Array, gy: _Array) -> _Array:
        """Values on the tensor grid, (len(gy), len(gx))."""
        s = self.scale
        return _monomials(np.asarray(gy, float) / s) @ self.coef.T @ _monomials(
            np.asarray(gx, float) / s).T


@dataclass(frozen=True)
class CornerPlan:
    """Which corners are singular and which edge carries each jump.

    singular: corner name -> (edge carrying the jump, temperature difference K).
    unbounded: edges whose heat flow is unbounded (they touch a singular corner).
    slow: edges whose flow series would converge only conditionally (reported as None).
    """

    singular: dict[str, tuple[str, float]]
    unbounded: frozenset[str]
    slow: frozenset[str]


def _corner_temperature(cond: _EdgeCondition, end: int) -> float:
    assert cond.profile_t is not None
    return float(cond.profile_t[0] if end == 0 else cond.profile_t[-1])


def plan_corners(cond: dict[str, _EdgeCondition], tol: float) -> CornerPlan:
    """Find corners where two different fixed temperatures meet and place their jumps.

    A jump left in an edge's data makes its coefficients decay like 1/n, which spoils the flow
    series of a fixed-temperature edge at that edge's far end; so the jump goes to the edge whose
    far neighbour's flow is unbounded anyway or needs no derivative series.
    """
    raw: dict[str, tuple[str, str, float]] = {}
    for (hor, ver), cname in _CORNERS.items():
        if cond[hor].kind == "D" and cond[ver].kind == "D":
            th = _corner_temperature(cond[hor], _corner_end(hor, ver))
            tv = _corner_temperature(cond[ver], _corner_end(ver, hor))
            if abs(th - tv) > tol:
                raw[cname] = (hor, ver, tv - th)
    unbounded = frozenset(e for hor, ver, _ in raw.values() for e in (hor, ver))
    singular: dict[str, tuple[str, float]] = {}
    slow: set[str] = set()
    for cname, (hor, ver, jump) in raw.items():
        choice = None
        for carrier, other in ((hor, ver), (ver, hor)):
            f = _FRAMES[carrier]
            far = f.end if f.start == other else f.start
            if cond[far].kind != "D" or far in unbounded:
                choice = carrier
                break
        if choice is None:
            choice = hor
            f = _FRAMES[hor]
            slow.add(f.end if f.start == ver else f.start)
        singular[cname] = (choice, jump)
    return CornerPlan(singular, unbounded, frozenset(slow - unbounded))


def corner_polynomial(problem: PlateProblem, cond: dict[str, _EdgeCondition],
                      particular: Particular, plan: CornerPlan) -> CornerPolynomial:
    """Harmonic polynomial Pi that zeroes the remainder's edge data at corners.

    At each corner and for each of its two edges E (other edge F): if F is a fixed temperature,
    E's eigenfunctions vanish at that end, so E's remaining data must vanish there for its
    coefficients to decay like 1/n^2. These conditions are met by a minimum-norm solve favouring
    low degrees. Nothing is asked at convective neighbours: zeroing the data there too would
    need gradients of order h (T - T_amb) / k, which blow the polynomial up for large Biot
    numbers. Only the convergence rate depends on Pi: the tail bounds use the data actually left,
    so correctness does not.
    """
    w, h, k = problem.width, problem.height, problem.conductivity
    scale = max(w, h)
    jump_carriers = {(cn, e) for cn, (e, _) in plan.singular.items()}
    wanted = []  # (edge, end) whose remaining data must vanish
    for (hor, ver), cname in _CORNERS.items():
        for e, f in ((hor, ver), (ver, hor)):
            if cond[f].kind == "D" and (cname, e) not in jump_carriers:
                wanted.append((e, _corner_end(e, f)))
    coef = np.zeros(len(_BASIS_DEGREE))
    if wanted:
        xy = [_edge_point(e, np.array([0.0 if end == 0 else _lengths(e, w, h)[0]]), w, h)
              for e, end in wanted]
        x = np.array([float(v[0][0]) for v in xy])
        y = np.array([float(v[1][0]) for v in xy])
        val, du, dv = _harmonic_basis(x / scale, y / scale)   # (9, rows)
        tp = particular.value(x, y)
        gx, gy = particular.gradient(x, y)
        rows, rhs = [], []
        for r, (e, end) in enumerate(wanted):
            ce = cond[e]
            nx, ny = _FRAMES[e].normal
            dn = (du[:, r] * nx + dv[:, r] * ny) / scale
            tpn = float(gx[r] * nx + gy[r] * ny)
            norm = k / scale + ce.film
            if ce.kind == "D":
                rows.append(val[:, r])
                rhs.append(_corner_temperature(ce, end) - float(tp[r]))
            elif ce.kind == "N":
                rows.append(k * dn / norm)
                rhs.append((ce.flux - k * tpn) / norm)
            else:
                rows.append((k * dn + ce.film * val[:, r]) / norm)
                rhs.append((ce.film * ce.ambient - k * tpn - ce.film * float(tp[r])) / norm)
        weight = 0.25 ** _BASIS_DEGREE.astype(float)
        z, *_ = np.linalg.lstsq(np.array(rows) * weight, np.array(rhs), rcond=None)
        coef = weight * z
        # drop rounding-level coefficients (they only cost evaluation time)
        coef[np.abs(coef) <= 1e-14 * np.abs(coef).max(initial=0.0)] = 0.0
    return CornerPolynomial(coef, scale)



# =========================================================================== stage 3: edge data


@dataclass(frozen=True)
class EdgeData:
    """Data of one edge's sub-problem on sigma = s / L in [0, 1].

    f(sigma) = profile(sigma) (piecewise linear through (breaks, values), may be None)
    + polynomial(sigma) (coefficients in increasing powers, degree <= 4). Units: K for a fixed
    temperature edge, W/m^2 for flux and convection edges (the Robin data h T_amb - ...).
    """

    breaks: _Array | None
    values: _Array | None
    poly: _Array

    def _profile(self) -> tuple[_Array, _Array] | None:
        if self.breaks is None or self.values is None:
            return None
        return self.breaks, self.values

    def __call__(self, sigma: _Array) -> _Array:
        out = np.polynomial.polynomial.polyval(sigma, self.poly)
        prof = self._profile()
        if prof is not None:
            out = out + np.interp(sigma, prof[0], prof[1])
        return out

    def end_values(self) -> tuple[float, float]:
        """(f(0), f(1))."""
        c = [float(v) for v in self.poly]
        f0, f1 = c[0], math.fsum(c)
        prof = self._profile()
        if prof is not None:
            f0 += float(prof[1][0])
            f1 += float(prof[1][-1])
        return f0, f1

    def derivative(self, sigma: float, side: int) -> float:
        """df/dsigma at sigma from the right (side 0) or left (side 1)."""
        c = [float(v) for v in self.poly]
        d = _horner([j * c[j] for j in range(1, len(c))], sigma)
        prof = self._profile()
        if prof is not None:
            slopes = np.diff(prof[1]) / np.diff(prof[0])
            d += float(slopes[0] if side == 0 else slopes[-1])
        return d

    def variations(self) -> tuple[float, float]:
        """Upper bounds of (TV(f), TV(f')) over [0, 1] (triangle inequality over the two
        parts; `_poly_variation` for the polynomial)."""
        tv0 = _poly_variation(self.poly)
        tv1 = _poly_variation(np.polynomial.polynomial.polyder(self.poly))
        prof = self._profile()
        if prof is not None:
            tv0 += float(np.sum(np.abs(np.diff(prof[1]))))
            slopes = np.diff(prof[1]) / np.diff(prof[0])
            tv1 += float(np.sum(np.abs(np.diff(slopes))))
        return tv0, tv1


def _horner(c: list[float], x: float) -> float:
    out = 0.0
    for a in reversed(c):
        out = out * x + a
    return out


def _bernstein_matrix(degree: int) -> _Array:
    """B[k, i] = C(k, i) / C(degree, i): sigma^i = sum_k B[k, i] b_{k,degree}(sigma), the
    power basis (i <= 4) in the Bernstein basis of the given degree (degree elevation)."""
    out = np.array([[math.comb(k, i) / math.comb(degree, i) if k >= i else 0.0
                     for i in range(5)] for k in range(degree + 1)])
    out.setflags(write=False)
    return out


#: Power basis (degree <= 4) to the Bernstein basis of degree 32 (read-only constant).
_TO_BERNSTEIN = _bernstein_matrix(32)


def _poly_variation(c: _Array) -> float:
    """Upper bound of the total variation of a polynomial (degree <= 4) on [0, 1].

    With Bernstein coefficients b_k (degree m), p' = m sum_k (b_{k+1} - b_k) b_{k,m-1} and each
    basis function integrates to 1/m, so TV(p) = int |p'| <= sum_k |b_{k+1} - b_k|; at degree 32
    this is within a few per cent of the exact value (the control polygon converges like 1/m).
    """
    coef = np.zeros(5)
    c = np.asarray(c, float)
    coef[:c.size] = c
    return float(np.abs(np.diff(_TO_BERNSTEIN @ coef)).sum())


def _along_edge(c: _Array, name: str, width: float, height: float, scale: float) -> _Array:
    """Coefficients in powers of sigma = s / L of the polynomial c[i, j] (of u^i v^j,
    (u, v) = (x, y) / scale) restricted to edge `name`."""
    f = _FRAMES[name]
    length = _lengths(name, width, height)[0]
    stretch = (length / scale) ** _POWERS
    if f.along_x:
        return (c @ ((height / scale if f.far else 0.0) ** _POWERS)) * stretch
    return (((width / scale if f.far else 0.0) ** _POWERS) @ c) * stretch


def edge_data(problem: PlateProblem, cond: dict[str, _EdgeCondition], base: _Base,
              name: str) -> EdgeData:
    """Data left for the harmonic remainder U = T - T_p - Pi on edge `name`.

    D: U = T_edge - base; N: -k dU/dt = q - k d(base)/dn; R: -k dU/dt + h U = h T_amb -
    (k d(base)/dn + h base); t is the inward distance and n the outward normal. The base is a
    polynomial of degree <= 4, restricted to the edge exactly.
    """
    w, h, k = problem.width, problem.height, problem.conductivity
    c = cond[name]
    s = base.scale
    nx, ny = _FRAMES[name].normal
    bval = _along_edge(base.coef, name, w, h, s)
    bn = (nx * _along_edge(base.coef_u, name, w, h, s)
          + ny * _along_edge(base.coef_v, name, w, h, s)) / s
    if c.kind == "D":
        poly = -bval
    elif c.kind == "N":
        poly = -k * bn
        poly[0] += c.flux
    else:
        poly = -(k * bn + c.film * bval)
        poly[0] += c.film * c.ambient
    if c.kind == "D":
        assert c.profile_s is not None and c.profile_t is not None
        length = _lengths(name, w, h)[0]
        if len(c.profile_s) == 2 and c.profile_t[0] == c.profile_t[1]:
            poly[0] += c.profile_t[0]
            return EdgeData(None, None, poly)
        return EdgeData(c.profile_s / length, c.profile_t.copy(), poly)
    return EdgeData(None, None, poly)


# =========================================================================== stage 4: series


@dataclass(frozen=True)
class SubProblem:
    """Harmonic U with data on one edge and homogeneous conditions on the other three.

    In the edge's frame (s along it, t inward): U = sum_n c_n X_n(s / L) R_n(t) with
    X_n(sigma) = sin(mu_n sigma + phi_n) and R_n the perpendicular function, normalised so that
    the data operator (U, -k dU/dt, or -k dU/dt + h U at t = 0) gives 1.

    start, end: eigenfunction end conditions at sigma = 0, 1 ("fixed", "insulated",
    "convective") with Biot numbers h_neighbour L / k; opposite: condition at t = depth with
    beta = h / k (1/m).
    """

    edge: str
    kind: str
    length: float
    depth: float
    conductivity: float
    film: float
    start: tuple[str, float]
    end: tuple[str, float]
    opposite: tuple[str, float]
    data: EdgeData


_END_KIND: Mapping[str, str] = MappingProxyType(
    {"D": "fixed", "N": "insulated", "R": "convective"})


def _sub_problem(problem: PlateProblem, cond: dict[str, _EdgeCondition], name: str,
                 data: EdgeData) -> SubProblem:
    w, h, k = problem.width, problem.height, problem.conductivity
    length, depth = _lengths(name, w, h)
    f = _FRAMES[name]

    def end(other: str) -> tuple[str, float]:
        c = cond[other]
        return _END_KIND[c.kind], (c.film * length / k if c.kind == "R" else 0.0)

    opp = cond[f.opposite]
    return SubProblem(name, cond[name].kind, length, depth, k, cond[name].film,
                      end(f.start), end(f.end),
                      (_END_KIND[opp.kind], opp.film / k if opp.kind == "R" else 0.0), data)


@dataclass(frozen=True)
class Modes:
    """Eigenvalues, phases, norms and coefficients of a sub-problem's first `count` terms."""

    mu: _Array
    phase: _Array
    norm: _Array
    coef: _Array

    @property
    def count(self) -> int:
        return int(self.mu.size)


def _nonzero(mu: _Array) -> _Array:
    """mu with a zero root (only ever the first, for two insulated ends) replaced by 1, for
    divisions whose zero-root value is set apart."""
    return np.where(mu == 0.0, 1.0, mu) if mu.size and mu[0] == 0.0 else mu


def edge_eigenvalues(sub: SubProblem, count: int) -> tuple[_Array, _Array, _Array]:
    """Roots mu_n, phases phi_n and norms int_0^1 X_n^2 of the first `count` modes.

    The norm uses mu + phi_l + phi_r = n pi: 1/2 + (sin 2 phi_l + sin 2 phi_r) / (4 mu), a sum of
    non-negative terms (no cancellation for small mu), and 1 for the zero root.
    """
    (lk, lb), (rk, rb) = sub.start, sub.end
    mu = np.asarray(pair_roots(lk, rk, lb, rb, count))
    phase = pair_phase(lk, lb, mu)

    sin2 = [2.0 * mu * bi / (mu * mu + bi * bi) for kind, bi in (sub.start, sub.end)
            if kind == "convective"]
    norm = 0.5 + sum(sin2) / (4.0 * _nonzero(mu)) if sin2 else np.full(mu.shape, 0.5)
    if mu.size and mu[0] == 0.0:
        norm[0] = 1.0
    return mu, phase, norm


_GL_X, _GL_W = np.polynomial.legendre.leggauss(12)  # read-only constants
_GL_X.setflags(write=False)
_GL_W.setflags(write=False)
_GL6_X, _GL6_W = np.polynomial.legendre.leggauss(6)
_GL6_X.setflags(write=False)
_GL6_W.setflags(write=False)


def _moments(a: _Array, b: _Array, mu: _Array, phase: _Array, degree: int) -> _Array:
    """M[j, seg, n] = int_a^b sigma^j sin(mu_n sigma + phi_n) dsigma, j = 0..degree.

    Closed form by the recursion K_j = [sigma^j e^{i theta}/(i mu)] - j/(i mu) K_{j-1} (theta =
    mu sigma + phi) where mu (b - a) >= 2; 12-point Gauss-Legendre (exact to rounding there)
    below, where the closed form would cancel.
    """
    a = a[:, None]
    b = b[:, None]
    d = b - a
    small = mu[None, :] * d < 2.0
    out = np.zeros((degree + 1, a.shape[0], mu.size))
    # closed form
    safe = np.where(small, 1.0, mu[None, :])
    ea = np.exp(1j * (safe * a + phase[None, :]))
    eb = np.exp(1j * (safe * b + phase[None, :]))
    inv = 1.0 / (1j * safe)
    k_prev = (eb - ea) * inv
    out[0] = k_prev.imag
    for j in range(1, degree + 1):
        k_prev = (b**j * eb - a**j * ea) * inv - j * inv * k_prev
        out[j] = k_prev.imag
    if np.any(small):
        seg, n = np.nonzero(small)
        s = 0.5 * (a[seg, 0] + b[seg, 0])[:, None] + 0.5 * d[seg, 0][:, None] * _GL_X[None, :]
        vals = np.sin(mu[n][:, None] * s + phase[n][:, None]) * (0.5 * d[seg, 0][:, None]
                                                                 * _GL_W[None, :])
        for j in range(degree + 1):
            out[j, seg, n] = np.sum(vals * s**j, axis=1)
    return out


def _profile_projection(breaks: _Array, values: _Array, mu: _Array, phase: _Array) -> _Array:
    """int_0^1 f(sigma) sin(mu sigma + phi) dsigma for piecewise-linear continuous f, exactly.

    Integrating by parts twice (f'' is a sum of kinks): with theta = mu sigma + phi, slopes s_k
    and kinks ds_k at interior breakpoints sigma_k,
    <f, X> = (f(0) cos theta_0 - f(1) cos theta_1) / mu
             + (s_last sin theta_1 - s_0 sin theta_0 - sum_k ds_k sin theta_k) / mu^2,
    one sine per kink and mode; its rounding error is about eps TV(f') / mu^2. Modes with
    mu < 1, where the terms would cancel, use the segment moments of `_moments` instead.
    """
    slopes = np.diff(values) / np.diff(breaks)
    out = np.zeros(mu.size)
    small = mu < 1.0
    if np.any(small):
        p0 = values[:-1] - slopes * breaks[:-1]
        idx = np.nonzero(small)[0]
        step = max(1, _BLOCK // idx.size)
        for i in range(0, p0.size, step):
            m = _moments(breaks[:-1][i:i + step], breaks[1:][i:i + step], mu[idx], phase[idx], 1)
            out[idx] += p0[i:i + step] @ m[0] + slopes[i:i + step] @ m[1]
    big = np.nonzero(~small)[0]
    if big.size:
        m, ph = mu[big], phase[big]
        th0, th1 = ph, m + ph
        acc = (values[0] * np.cos(th0) - values[-1] * np.cos(th1)) / m
        kinks = np.diff(slopes)
        inner = np.zeros(big.size)
        step = max(1, _BLOCK // big.size)
        for i in range(0, kinks.size, step):
            sk = breaks[1:-1][i:i + step]
            inner += kinks[i:i + step] @ np.sin(sk[:, None] * m[None, :] + ph[None, :])
        acc += (slopes[-1] * np.sin(th1) - slopes[0] * np.sin(th0) - inner) / (m * m)
        out[big] = acc
    return out


#: k! and j!/(j-k)!: derivatives of sum_j c_j sigma^j at 0 and 1 (read-only constants).
_DERIVATIVES_AT_0 = np.array([math.factorial(k) for k in range(5)], dtype=float)
_DERIVATIVES_AT_1 = np.array([[float(math.perm(j, k)) for j in range(5)] for k in range(5)])
_DERIVATIVES_AT_0.setflags(write=False)
_DERIVATIVES_AT_1.setflags(write=False)


def _polynomial_projection(poly: _Array, mu: _Array, phase: _Array) -> _Array:
    """int_0^1 f(sigma) sin(mu sigma + phi) dsigma for a polynomial f of degree <= 4, exactly.

    Integrating by parts until the fifth derivative vanishes, with theta = mu sigma + phi and
    f_k the k-th derivative: A(sigma) = -f cos(theta) / mu + f_1 sin(theta) / mu^2
    + f_2 cos(theta) / mu^3 - f_3 sin(theta) / mu^4 - f_4 cos(theta) / mu^5, and the integral is
    A(1) - A(0). Modes with mu < 2, where these terms would cancel, use 12-point Gauss-Legendre
    instead (exact to rounding for so slowly turning integrands).
    """
    c = np.zeros(5)
    c[:poly.size] = poly
    # derivatives at sigma = 0 and 1: f_k(0) = k! c_k, f_k(1) = sum_j j!/(j-k)! c_j
    d0 = (_DERIVATIVES_AT_0 * c).tolist()
    d1 = (_DERIVATIVES_AT_1 @ c).tolist()
    big = mu >= 2.0
    inv = 1.0 / _nonzero(mu)
    th1 = mu + phase
    i2 = inv * inv
    # cosine and sine factors of A at each end (Horner in 1/mu^2)
    ca1 = inv * (-d1[0] + i2 * (d1[2] - i2 * d1[4]))
    ca0 = inv * (-d0[0] + i2 * (d0[2] - i2 * d0[4]))
    sa1 = i2 * (d1[1] - i2 * d1[3])
    sa0 = i2 * (d0[1] - i2 * d0[3])
    out = ca1 * np.cos(th1) + sa1 * np.sin(th1) - ca0 * np.cos(phase) - sa0 * np.sin(phase)
    if not big.all():
        small = np.flatnonzero(~big)
        s_nodes = 0.5 * (1.0 + _GL_X)
        f_nodes = _monomials(s_nodes) @ c
        vals = np.sin(mu[small, None] * s_nodes + phase[small, None])
        out[small] = vals @ (0.5 * _GL_W * f_nodes)
    return out


def edge_coefficients(sub: SubProblem, mu: _Array, phase: _Array, norm: _Array) -> _Array:
    """c_n = <f, X_n> / <X_n, X_n> with exact integrals of the polynomial and profile parts."""
    data = sub.data
    proj = _polynomial_projection(data.poly, mu, phase)
    prof = data._profile()
    if prof is not None:
        proj = proj + _profile_projection(prof[0], prof[1], mu, phase)
    return proj / norm


def _kind_ab(kind: str, beta: float, lam: _Array) -> tuple[_Array, _Array]:
    """Weights (a, b) of Y = a cosh(lam u) + b sinh(lam u), u = depth - t, that meet the
    homogeneous condition at the opposite edge (u = 0)."""
    if kind == "fixed":
        return np.zeros_like(lam), np.ones_like(lam)
    if kind == "insulated":
        return np.ones_like(lam), np.zeros_like(lam)
    # k Y'(t) + h Y = 0 at t = depth: Y ~ lam cosh + beta sinh, scaled to a + b = 1
    return lam / (lam + beta), beta / (lam + beta)


@dataclass(frozen=True)
class Perpendicular:
    """Values of the normalised perpendicular functions R_n needed for flows (per mode)."""

    at_edge: _Array        # R_n(0)
    flux_at_edge: _Array   # -k R_n'(0), W/m^2 per unit data
    at_opposite: _Array    # R_n(depth)
    flux_at_opposite: _Array  # k R_n'(depth) (heat into the body there)
    integral: _Array       # int_0^depth R_n dt, m


def _data_operator(sub: SubProblem, lam: _Array, a: _Array, b: _Array, c0: _Array,
                   s0: _Array) -> _Array:
    """B[Y] at t = 0 in the scaled form (cosh -> C0 = 1 + E, sinh -> S0 = 1 - E)."""
    k = sub.conductivity
    val = a * c0 + b * s0
    if sub.kind == "D":
        return val
    flux = k * lam * (a * s0 + b * c0)
    return flux if sub.kind == "N" else flux + sub.film * val


def perpendicular_ratio(sub: SubProblem, mu: _Array, t: _Array) -> _Array:
    """R[p, n] = Y_n(t_p) / B[Y_n], overflow-free.

    Y = a cosh(lam u) + b sinh(lam u) with u = depth - t is scaled by 2 exp(-lam depth), so only
    exponentials of non-positive arguments appear: cosh -> e^{-lam t} + e^{-lam (2 depth - t)},
    sinh -> -e^{-lam t} expm1(-2 lam u). The zero root (lam = 0) uses the linear solution.
    """
    lam = mu / sub.length
    t = np.asarray(t, float)[:, None]
    u = sub.depth - t
    okind, beta = sub.opposite
    a, b = _kind_ab(okind, beta, lam)
    e_t = np.exp(-lam * t)
    ch = e_t + np.exp(-lam * (sub.depth + u))
    sh = -e_t * np.expm1(-2.0 * lam * u)
    big_e = np.exp(-2.0 * lam * sub.depth)
    c0, s0 = 1.0 + big_e, -np.expm1(-2.0 * lam * sub.depth)
    with np.errstate(divide="ignore", invalid="ignore"):
        r = (a * ch + b * sh) / _data_operator(sub, lam, a, b, c0, s0)
    if mu.size and mu[0] == 0.0:
        y0, bop = _linear_mode(sub)
        r[:, 0] = y0(u[:, 0]) / bop
    return r


def _linear_mode(sub: SubProblem) -> tuple[Callable[[_Array], _Array], float]:
    """Zero root: Y(u) = a0 + b0 u meeting the opposite condition; and B[Y] at t = 0."""
    okind, beta = sub.opposite
    a0, b0 = {"fixed": (0.0, 1.0), "insulated": (1.0, 0.0)}.get(okind, (1.0, beta))
    d, k = sub.depth, sub.conductivity
    if sub.kind == "D":
        bop = a0 + b0 * d
    elif sub.kind == "N":
        bop = k * b0
    else:
        bop = k * b0 + sub.film * (a0 + b0 * d)
    if bop == 0.0:
        raise IllPosedError("edges: the problem has no unique solution (every edge is a flux or "
                            "insulated)", field="edges", reason="not-unique")
    return (lambda u: a0 + b0 * np.asarray(u, float)), bop


def perpendicular_values(sub: SubProblem, mu: _Array) -> Perpendicular:
    """R_n and its flux at both ends of t, and its integral over t (term-wise flows)."""
    lam = mu / sub.length
    d, k = sub.depth, sub.conductivity
    a, b = _kind_ab(*sub.opposite, lam)
    big_e = np.exp(-2.0 * lam * d)
    c0, s0 = 1.0 + big_e, -np.expm1(-2.0 * lam * d)
    half = np.exp(-lam * d)
    bop = _data_operator(sub, lam, a, b, c0, s0)
    zero = bool(mu.size and mu[0] == 0.0)
    if zero:  # the zero root is the linear mode below
        bop = np.where(mu == 0.0, 1.0, bop)
    at_edge = (a * c0 + b * s0) / bop
    flux_edge = k * lam * (a * s0 + b * c0) / bop
    at_opp = 2.0 * a * half / bop
    flux_opp = -2.0 * k * lam * b * half / bop
    integral = (a * s0 + b * np.expm1(-lam * d) ** 2) / (_nonzero(lam) * bop)
    if zero:
        y0, b0p = _linear_mode(sub)
        slope = float(y0(np.array(1.0)) - y0(np.array(0.0)))  # dY/du
        at_edge[0] = float(y0(np.array(d))) / b0p
        flux_edge[0] = k * slope / b0p
        at_opp[0] = float(y0(np.array(0.0))) / b0p
        flux_opp[0] = -k * slope / b0p
        integral[0] = (float(y0(np.array(0.0))) * d + 0.5 * slope * d * d) / b0p
    return Perpendicular(at_edge, flux_edge, at_opp, flux_opp, integral)


@dataclass(frozen=True)
class TailConstants:
    """Constants of the coefficient bound |c_n| <= 2 min(V1/mu, E(mu)/mu + V2/mu^2).

    From integrating <f, X_n> by parts once (V1 = |f(0)| + |f(1)| + TV f) or twice (boundary
    terms |f(e)| |cos phi_e| with |cos phi| = 1 fixed, 0 insulated, Bi/sqrt(mu^2 + Bi^2)
    convective; V2 = |f'(0)| + |f'(1)| + TV f'); the norm is >= 1/2.
    """

    v1: float
    f_start: float
    f_end: float
    v2: float


def tail_constants(sub: SubProblem) -> TailConstants:
    """V1 = |f(0)| + |f(1)| + TV f and V2 = |f'(0)| + |f'(1)| + TV f' of the edge data, with
    the total variations bounded as in `EdgeData.variations`."""
    d = sub.data
    c = np.zeros(5)
    c[:d.poly.size] = d.poly
    dc = np.zeros(5)
    dc[:4] = c[1:] * _POWERS[1:]
    # control polygons of f and f' (Bernstein, degree 32): TV <= sum of |steps|
    b = _TO_BERNSTEIN @ np.array((c, dc)).T
    tv0, tv1 = np.abs(b[1:] - b[:-1]).sum(axis=0)
    f0, f1 = float(c[0]), float(c.sum())
    g0, g1 = float(dc[0]), float(dc.sum())
    prof = d._profile()
    if prof is not None:
        slopes = np.diff(prof[1]) / np.diff(prof[0])
        f0, f1 = f0 + float(prof[1][0]), f1 + float(prof[1][-1])
        g0, g1 = g0 + float(slopes[0]), g1 + float(slopes[-1])
        tv0 += float(np.abs(np.diff(prof[1])).sum())
        tv1 += float(np.abs(np.diff(slopes)).sum())
    f0, f1 = abs(f0), abs(f1)
    return TailConstants(f0 + f1 + float(tv0), f0, f1, abs(g0) + abs(g1) + float(tv1))


class _TailParams(NamedTuple):
    """Constants of `tail_bound` for one or several sub-problems, shaped (S, 1, 1) to broadcast
    against (S, points, ladder). `biot_*` parametrise |cos phi| <= min(1, Bi / (n pi)) at the
    ends: inf for a fixed end (factor 1), 0 for an insulated end (factor 0)."""

    length: _Array
    depth: _Array
    conductivity: _Array
    film: _Array
    v1: _Array
    v2: _Array
    f_start: _Array
    f_end: _Array
    biot_start: _Array
    biot_end: _Array
    is_d: _Array
    is_n: _Array


def _tail_params(subs: list[SubProblem], consts: list[TailConstants]) -> _TailParams:
    def biot(end: tuple[str, float]) -> float:
        kind, bi = end
        return math.inf if kind == "fixed" else 0.0 if kind == "insulated" else bi

    table = np.array([(s.length, s.depth, s.conductivity, s.film, c.v1, c.v2, c.f_start,
                       c.f_end, biot(s.start), biot(s.end), s.kind == "D", s.kind == "N")
                      for s, c in zip(subs, consts, strict=True)], dtype=float).reshape(-1, 12)
    cols = [table[:, i].reshape(-1, 1, 1) for i in range(12)]
    return _TailParams(length=cols[0], depth=cols[1], conductivity=cols[2], film=cols[3],
                       v1=cols[4], v2=cols[5], f_start=cols[6], f_end=cols[7],
                       biot_start=cols[8], biot_end=cols[9], is_d=cols[10] > 0.0,
                       is_n=cols[11] > 0.0)


def _tail_core(p: _TailParams, terms: _Array, t: _Array) -> _Array:
    """`tail_bound` for stacked sub-problems: t (S, Q) in m and terms either (M,) for every
    point or (S, Q, M) per point -> (S, Q, M) in K."""
    pi = math.pi
    n = np.asarray(terms, float)
    t = np.asarray(t, float)[..., None]
    L, d = p.length, p.depth
    inv_n = 1.0 / n
    inv_n2 = inv_n * inv_n
    tau = t / L
    with np.errstate(over="ignore"):
        # 1 / (1 - e^{-pi tau}); a huge finite stand-in at tau = 0, where only the integral-test
        # routes are finite (no 0 * inf)
        inv_q = 1.0 / np.maximum(-np.expm1(-pi * tau), 1e-300)
        e = np.exp(-pi * tau * n)
        # sum_{m >= N} e^{-m pi tau} / m^p <= e^{-N pi tau} min(1 / (N^p (1 - e^{-pi tau})),
        # 1 / N^p + 1 / ((p - 1) N^(p-1))) (geometric series; integral test for p >= 2)
        g1 = inv_q * inv_n
        g2 = np.minimum(inv_q * inv_n2, inv_n2 + inv_n)
        e_n = (p.f_start * np.minimum(1.0, p.biot_start * inv_n / pi)
               + p.f_end * np.minimum(1.0, p.biot_end * inv_n / pi)) / pi
        body = np.minimum(p.v1 / pi * g1, e_n * g1 + p.v2 / pi**2 * g2)
        if not p.is_d.all():
            g3 = np.minimum(inv_q * (inv_n2 * inv_n), inv_n2 * inv_n + 0.5 * inv_n2)
            flux_route = L / (p.conductivity * pi) * np.minimum(p.v1 / pi * g2,
                                                                e_n * g2 + p.v2 / pi**2 * g3)
            conv_route = body / (p.conductivity * pi * n / L + p.film)
            body = np.where(p.is_d, body, np.where(p.is_n, flux_route,
                                                   np.minimum(flux_route, conv_route)))
        # F = 2 (1 + e^{-2 N pi (depth - t) / L}) / (1 - e^{-2 N pi depth / L}), the first
        # exponential as e^{-2 N pi depth / L} / e^2 (no second exponential per entry); where
        # e^2 underflows, 1 stands in for it (an upper bound: t <= depth)
        e2 = e * e
        far = np.exp(-2.0 * pi * n * d / L)
        ratio = np.where(e2 > 1e-300, far / np.maximum(e2, 1e-300), 1.0)
        fac = 2.0 * (1.0 + np.minimum(ratio, 1.0)) / -np.expm1(-2.0 * pi * n * d / L)
        return fac * e * body


def tail_bound(sub: SubProblem, consts: TailConstants, terms: _Array, t: _Array) -> _Array:
    """Bound on |sum_{n > N} c_n X_n R_n(t)|, K, for each N in `terms` and each t.

    Tail modes have mu_n >= (n - 1) pi >= N pi. With |X_n| <= 1, |c_n| from `TailConstants` and
    |R_n(t)| <= F e^{-mu t / L} D(mu), F = (1 + e^{-2 N pi (depth - t)/L}) / (1 - e^{-2 N pi
    depth / L}), D = 1 (fixed-temperature data), L / (k mu) (flux data), 1 / (k mu / L + h)
    (convection data), the tail is a sum of e^{-m pi tau} / m^p, tau = t / L, bounded by a
    geometric series or the integral test. Returns an array (len(t), len(terms)). The bound does
    not increase with t (0 <= t <= depth): each factor F e^{-N pi tau} and 1 / (1 - e^{-pi tau})
    does not.
    """
    return _tail_core(_tail_params([sub], [consts]), terms, np.asarray(t, float)[None, :])[0]


@lru_cache(maxsize=16)
def _ladder(max_terms: int) -> _Array:
    """Candidate term counts: 1..8 then about 25 % steps, ending at max_terms (read-only;
    cached per max_terms, at most 16 entries)."""
    vals = list(range(1, 9))
    while vals[-1] < max_terms:
        vals.append(int(math.ceil(vals[-1] * 1.25)))
    out = np.array(sorted({min(v, max_terms) for v in vals}), dtype=int)
    out.setflags(write=False)
    return out


def _pick(bounds: _Array, ladder: _Array, budget: float) -> tuple[_Array, _Array]:
    """Smallest ladder count whose bound is <= budget along the last axis (else the last)."""
    ok = bounds <= budget
    idx = np.where(ok.any(axis=-1), ok.argmax(axis=-1), ladder.size - 1)
    flat = bounds.reshape(-1, ladder.size)[np.arange(idx.size), idx.ravel()]
    return ladder[idx], flat.reshape(idx.shape)


@lru_cache(maxsize=16)
def _coarse_ladder(size: int) -> _Array:
    """Every 4th ladder index (3, 7, ...) and the last (read-only; cached per size)."""
    out = np.unique(np.append(np.arange(3, size, 4), size - 1))
    out.setflags(write=False)
    return out


def _pick_coarse_fine(p: _TailParams, ladder: _Array, t: _Array,
                      budget: float) -> tuple[_Array, _Array]:
    """`_pick` over the whole ladder in two passes: the bound falls with the count, so the
    first coarse entry meeting the budget brackets the first entry that does, which is then
    found among the (at most 3) entries below it."""
    coarse = _coarse_ladder(ladder.size)
    cb = _tail_core(p, ladder[coarse], t)
    ok = cb <= budget
    k = np.where(ok.any(axis=-1), ok.argmax(axis=-1), coarse.size - 1)
    hi = coarse[k]
    fine = np.maximum(hi[..., None] - np.arange(3, 0, -1), 0)
    fb = _tail_core(p, ladder[fine], t)
    okf = fb <= budget
    j = okf.argmax(axis=-1)
    take = okf.any(axis=-1)
    idx = np.where(take, fine.reshape(-1, 3)[np.arange(j.size), j.ravel()].reshape(j.shape), hi)
    cflat = cb.reshape(-1, coarse.size)[np.arange(k.size), k.ravel()].reshape(k.shape)
    fflat = fb.reshape(-1, 3)[np.arange(j.size), j.ravel()].reshape(j.shape)
    return ladder[idx], np.where(take, fflat, cflat)


def choose_terms(sub: SubProblem, consts: TailConstants, t: _Array, budget: float,
                 max_terms: int) -> tuple[_Array, _Array]:
    """Truncation rule: the smallest ladder count whose tail bound is <= budget, per t.

    Returns (terms, bound); where even max_terms misses the budget, terms = max_terms and the
    bound is the (larger) error estimate achieved.
    """
    ladder = _ladder(max_terms)
    return _pick(tail_bound(sub, consts, ladder, t), ladder, budget)


def _buckets(terms: _Array) -> list[tuple[int, _Array]]:
    """Group the indices with terms > 0 by count: up to 64, then up to 256, 1024, ... (one group
    when the counts are within a factor 4): (largest count, indices) per group. The sums mask
    each point's modes beyond its own count, so grouping only saves work."""
    pos = np.flatnonzero(terms > 0)
    if pos.size == 0:
        return []
    sel = terms[pos]
    hi, lo = int(sel.max()), int(sel.min())
    if hi <= 64 or 4 * lo > hi:
        return [(hi, pos)]
    key = np.maximum(np.ceil(np.log2(sel) / 2.0), 3.0)  # 64 = 4^3, then powers of 4
    return [(int(terms[pos[key == kv]].max()), pos[key == kv]) for kv in np.unique(key)]


class SeriesWeights(NamedTuple):
    """Per-mode summation constants of a sub-problem (all arrays per mode).

    U(sigma, t) = sum_n sin(mu_n sigma + phi_n) (p_n e^{-lam_n t} + q_n e^{-lam_n (2 depth - t)})
    + alpha + beta (depth - t), the last two from the zero root's linear mode (0 without one).
    """

    mu: _Array
    phase: _Array
    lam: _Array
    p: _Array
    q: _Array
    alpha: float
    beta: float
    depth: float


def series_weights(sub: SubProblem, modes: Modes) -> SeriesWeights:
    """c_n R_n(t) = c_n (a cosh(lam u) + b sinh(lam u)) / B[Y_n], u = depth - t, with cosh and
    sinh scaled by 2 e^{-lam depth}: cosh -> e^{-lam t} + e^{-lam (2 depth - t)}, sinh ->
    e^{-lam t} - e^{-lam (2 depth - t)}, so only exponentials of non-positive arguments appear
    (the same scaling as `perpendicular_ratio`)."""
    mu, c = modes.mu, modes.coef
    lam = mu / sub.length
    a, b = _kind_ab(*sub.opposite, lam)
    d = sub.depth
    c0, s0 = 1.0 + np.exp(-2.0 * lam * d), -np.expm1(-2.0 * lam * d)
    bop = _data_operator(sub, lam, a, b, c0, s0)
    if mu.size and mu[0] == 0.0:
        bop = np.where(mu == 0.0, 1.0, bop)  # the zero root is the linear mode below
    scale = c / bop
    p, q = scale * (a + b), scale * (a - b)
    alpha = beta = 0.0
    if mu.size and mu[0] == 0.0:
        y0, b0p = _linear_mode(sub)
        a0 = float(y0(np.array(0.0)))
        alpha, beta = c[0] * a0 / b0p, c[0] * (float(y0(np.array(1.0))) - a0) / b0p
        p[0] = q[0] = 0.0
    return SeriesWeights(mu, modes.phase, lam, p, q, float(alpha), float(beta), d)


def _perpendicular_block(w: SeriesWeights, nt: int, t: _Array, terms: _Array) -> _Array:
    """W[p, n] = c_n R_n(t_p) for n < nt, zero beyond each point's own count."""
    tt = t[:, None]
    r = w.p[:nt] * np.exp(-w.lam[:nt] * tt) + w.q[:nt] * np.exp(-w.lam[:nt] * (2.0 * w.depth - tt))
    if int(terms.min()) < nt:
        r *= np.arange(nt) < terms[:, None]
    return r


def _add_linear(w: SeriesWeights, out: _Array, t: _Array, terms: _Array) -> _Array:
    if w.alpha == 0.0 and w.beta == 0.0:
        return out
    lin = np.where(terms > 0, w.alpha + w.beta * (w.depth - t), 0.0)
    return out + (lin if out.ndim == 1 else lin[:, None])


def _sum_points(w: SeriesWeights, sigma: _Array, t: _Array, terms: _Array) -> _Array:
    """sum_{n < terms_p} at scattered points (sigma_p, t_p): one product per group of points."""
    out = np.zeros(sigma.shape)
    for nt, sel in _buckets(terms):
        mu, ph = w.mu[:nt], w.phase[:nt]
        step = max(1, _BLOCK // nt)
        for i in range(0, sel.size, step):
            idx = sel[i:i + step]
            r = _perpendicular_block(w, nt, t[idx], terms[idx])
            out[idx] = np.einsum("ij,ij->i", np.sin(sigma[idx, None] * mu + ph), r)
    return _add_linear(w, out, t, terms)


def _sine_table(mu: _Array, phase: _Array, sigma: _Array) -> _Array:
    """S[j, n] = sin(mu_n sigma_j + phi_n).

    On evenly spaced sigma the columns are built by angle addition (sin(a + b) = sin a cos b +
    cos a sin b), doubling the filled columns each step: one sine and one cosine per mode and
    step instead of one sine per entry (a sine costs 15-25 ns here, a product about 1 ns); the
    rounding error grows by about one ulp per step.
    """
    m = sigma.size
    if m < 16 or mu.size < 128:  # the doubling's dozens of calls cost more than the sines
        return np.sin(sigma[:, None] * mu + phase)
    step = (sigma[-1] - sigma[0]) / (m - 1)
    if not step > 0.0 or float(np.abs(np.diff(sigma) - step).max()) > 1e-13:
        return np.sin(sigma[:, None] * mu + phase)
    s = np.empty((m, mu.size))
    c = np.empty((m, mu.size))
    tmp = np.empty((m // 2 + 1, mu.size))
    th = mu * sigma[0] + phase
    s[0], c[0] = np.sin(th), np.cos(th)
    done = 1
    while done < m:
        k = min(done, m - done)
        ang = mu * (done * step)
        sa, ca = np.sin(ang), np.cos(ang)
        bs, bc, tp = s[done:done + k], c[done:done + k], tmp[:k]
        np.multiply(s[:k], ca, out=bs)
        np.multiply(c[:k], sa, out=tp)
        bs += tp
        np.multiply(c[:k], ca, out=bc)
        np.multiply(s[:k], sa, out=tp)
        bc -= tp
        done += k
    return s


def _sum_rows(w: SeriesWeights, sigma: _Array, t: _Array, terms: _Array) -> _Array:
    """U on the tensor grid (t rows, sigma columns) with terms chosen per row: the sines once
    per column block, then one matrix product per group of rows."""
    out = np.zeros((t.size, sigma.size))
    nmax = int(terms.max(initial=0))
    if nmax <= 0:
        return out
    groups = _buckets(terms)
    cstep = max(1, _BLOCK // nmax)
    for j in range(0, sigma.size, cstep):
        cols = slice(j, j + cstep)
        xs = _sine_table(w.mu[:nmax], w.phase[:nmax], sigma[cols])
        for nt, rows in groups:
            rstep = max(1, _BLOCK // nt)
            for i in range(0, rows.size, rstep):
                r = rows[i:i + rstep]
                out[r, cols] = _perpendicular_block(w, nt, t[r], terms[r]) @ xs[:, :nt].T
    return _add_linear(w, out, t, terms)


def sum_series(sub: SubProblem, modes: Modes, sigma: _Array, t: _Array, terms: _Array) -> _Array:
    """U(sigma_p, t_p) = sum_{n <= N_p} c_n X_n(sigma_p) R_n(t_p) at scattered points."""
    return _sum_points(series_weights(sub, modes), np.asarray(sigma, float),
                       np.asarray(t, float), np.asarray(terms))


def sum_series_grid(sub: SubProblem, modes: Modes, sigma: _Array, t: _Array,
                    terms: _Array) -> _Array:
    """U on the tensor grid (t rows, sigma columns), terms chosen per row."""
    return _sum_rows(series_weights(sub, modes), np.asarray(sigma, float), np.asarray(t, float),
                     np.asarray(terms))


class ModeStack(NamedTuple):
    """The first `size` modes of several sub-problems, stacked (S, size).

    Eigenvalues mu, phases phi (X_n = sin(mu_n sigma + phi_n)), norms, coefficients c_n; the
    perpendicular weights of `SeriesWeights` (p, q, and far = e^{-2 lam depth}); and for the flows
    the opposite-edge weights (a, b), the data operator B[Y_n] and the end values of X_n.
    Columns (S, 1): linear-mode constants alpha, beta and the depth.
    """

    size: int
    mu: _Array
    phase: _Array
    norm: _Array
    coef: _Array
    lam: _Array
    p: _Array
    q: _Array
    far: _Array
    s0: _Array
    a: _Array
    b: _Array
    bop: _Array
    cos0: _Array
    sin0: _Array
    cos1: _Array
    sin1: _Array
    alpha: _Array
    beta: _Array
    depth: _Array
    linear: bool


def _end_biot(end: tuple[str, float]) -> float:
    """Bi of a convective end, 0 otherwise (sin 2 phi = 0 at fixed and insulated ends)."""
    return end[1] if end[0] == "convective" else 0.0


def stack_modes(subs: list[SubProblem], count: int) -> ModeStack:
    """Eigenvalues -> coefficients -> summation weights for all sub-problems at once.

    The same stages as `edge_eigenvalues`, `edge_coefficients` and `series_weights`, done on
    (S, count) arrays so that their cost does not grow with the number of series.
    """
    nser = len(subs)
    col = np.array([(s.length, s.depth, s.conductivity, s.film, _end_biot(s.start),
                     _end_biot(s.end), s.opposite[1], s.kind == "D", s.kind == "N",
                     s.opposite[0] == "fixed", s.opposite[0] == "insulated",
                     s.start[0] == "convective", s.end[0] == "convective",
                     0.5 * math.pi * (s.start[0] == "insulated"), s.start[0] == "fixed",
                     s.end[0] == "fixed")
                    for s in subs], dtype=float).reshape(nser, 16, 1)
    length, depth, k, film, bi0, bi1, beta_o = (col[:, i] for i in range(7))
    is_d, is_n, opp_fixed, opp_ins, conv0, conv1 = (col[:, i] > 0.0 for i in range(7, 13))
    const0, fixed0, fixed1 = col[:, 13], col[:, 14] > 0.0, col[:, 15] > 0.0
    mu = np.array([pair_roots(s.start[0], s.end[0], s.start[1], s.end[1], count)
                   for s in subs]).reshape(nser, count)
    zero = [i for i in range(nser) if mu[i, 0] == 0.0]
    mu_nz = np.where(mu == 0.0, 1.0, mu) if zero else mu
    # phases (`pair_phase`): 0 fixed, pi/2 insulated, arctan(mu / Bi) convective
    phase = np.where(conv0, np.arctan2(mu, bi0), const0) if conv0.any() else \
        np.broadcast_to(const0, mu.shape).copy()
    # norms (`edge_eigenvalues`): 1/2 + (sin 2 phi_l + sin 2 phi_r) / (4 mu)
    mu2 = mu_nz * mu_nz
    norm = 0.5 + (bi0 / (mu2 + bi0 * bi0) + bi1 / (mu2 + bi1 * bi1)) * (0.5 * mu / mu_nz) \
        if (bi0.any() or bi1.any()) else np.full(mu.shape, 0.5)
    for i in zero:
        norm[i, 0] = 1.0
    # end values of X_n: at sigma = 0 from the phase (cos phi = Bi / r, sin phi = mu / r,
    # r = (mu^2 + Bi^2)^(1/2), for a convective end); at sigma = 1 from the eigenvalue equation
    # mu + phi_l + phi_r = n pi: cos(mu + phi_l) = (-1)^n cos phi_r, sin = -(-1)^n sin phi_r
    def end_cos_sin(conv: _Array, fixed: _Array, bi: _Array) -> tuple[_Array, _Array]:
        if conv.any():
            r = np.sqrt(mu * mu + bi * bi)
            r = np.where(r > 0.0, r, 1.0)
            return (np.where(conv, bi / r, np.where(fixed, 1.0, 0.0)),
                    np.where(conv, mu / r, np.where(fixed, 0.0, 1.0)))
        return (np.broadcast_to(np.where(fixed, 1.0, 0.0), mu.shape),
                np.broadcast_to(np.where(fixed, 0.0, 1.0), mu.shape))

    cos0, sin0 = end_cos_sin(conv0, fixed0, bi0)
    cr, sr = end_cos_sin(conv1, fixed1, bi1)
    sign = np.where(np.arange(1, count + 1) % 2 == 0, 1.0, -1.0)  # (-1)^n
    cos1, sin1 = sign * cr, -sign * sr
    # coefficients (`_polynomial_projection`, `_profile_projection`): the closed form with the
    # profiles' end values and end slopes added to the polynomial's, and one sine per kink
    poly = np.zeros((nser, 5))
    for i, s in enumerate(subs):
        poly[i, :s.data.poly.size] = s.data.poly
    d0 = poly * _DERIVATIVES_AT_0
    d1 = poly @ _DERIVATIVES_AT_1.T
    profiles: list[tuple[int, tuple[_Array, _Array]]] = []
    for i, s in enumerate(subs):
        prof = s.data._profile()
        if prof is not None:
            profiles.append((i, prof))
    for i, (brk, vals) in profiles:
        slopes = np.diff(vals) / np.diff(brk)
        d0[i, :2] += (vals[0], slopes[0])
        d1[i, :2] += (vals[-1], slopes[-1])
    inv = 1.0 / mu_nz
    i2 = inv * inv
    ca1 = inv * (-d1[:, :1] + i2 * (d1[:, 2:3] - i2 * d1[:, 4:]))
    ca0 = inv * (-d0[:, :1] + i2 * (d0[:, 2:3] - i2 * d0[:, 4:]))
    proj = ca1 * cos1 + i2 * (d1[:, 1:2] - i2 * d1[:, 3:4]) * sin1 - ca0 * cos0 \
        - i2 * (d0[:, 1:2] - i2 * d0[:, 3:4]) * sin0
    for i, (brk, vals) in profiles:
        kinks = np.diff(np.diff(vals) / np.diff(brk))
        if kinks.size:
            step = max(1, _BLOCK // count)
            for j in range(0, kinks.size, step):
                proj[i] -= kinks[j:j + step] @ np.sin(brk[1:-1][j:j + step, None] * mu[i]
                                                      + phase[i]) * i2[i]
    small = np.nonzero(mu < 2.0)
    if small[0].size:
        s_nodes = 0.5 * (1.0 + _GL_X)
        f_nodes = (_monomials(s_nodes) @ poly.T).T  # (S, 12)
        vals = np.sin(mu[small][:, None] * s_nodes + phase[small][:, None])
        proj[small] = np.einsum("ij,ij->i", vals, f_nodes[small[0]] * (0.5 * _GL_W))
        for i, (brk, pv) in profiles:
            sel = small[1][small[0] == i]
            if sel.size:
                proj[i, sel] += _profile_projection(brk, pv, mu[i, sel], phase[i, sel])
    coef = proj / norm
    # summation weights (`series_weights`)
    lam = mu / length
    if (~(opp_fixed | opp_ins)).any():
        a_conv = lam / (lam + np.where(beta_o > 0.0, beta_o, 1.0))
        a = np.where(opp_fixed, 0.0, np.where(opp_ins, 1.0, a_conv))
        b = np.where(opp_fixed, 1.0, np.where(opp_ins, 0.0, 1.0 - a_conv))
    else:
        a = np.where(opp_fixed, 0.0, 1.0) + 0.0 * lam
        b = 1.0 - a
    far = np.exp(-2.0 * lam * depth)
    s0 = -np.expm1(-2.0 * lam * depth)
    val = a * (1.0 + far) + b * s0
    flux = k * lam * (a * s0 + b * (1.0 + far))
    bop = np.where(is_d, val, np.where(is_n, flux, flux + film * val))
    for i in zero:
        bop[i, 0] = 1.0  # the zero root is the linear mode below
    scale = coef / bop
    p, q = scale * (a + b), scale * (a - b)
    alpha, beta = np.zeros((nser, 1)), np.zeros((nser, 1))
    for i in zero:
        y0, b0p = _linear_mode(subs[i])
        a0 = float(y0(np.array(0.0)))
        alpha[i, 0] = coef[i, 0] * a0 / b0p
        beta[i, 0] = coef[i, 0] * (float(y0(np.array(1.0))) - a0) / b0p
        p[i, 0] = q[i, 0] = 0.0
    return ModeStack(count, mu, phase, norm, coef, lam, p, q, far, s0, a, b, bop, cos0, sin0, cos1,
                     sin1, alpha, beta, depth, bool(zero))


def _stack_flow_terms(stack: ModeStack, subs: list[SubProblem],
                      rows: list[tuple[int, str, str]]) -> _Array:
    """`flow_terms` for rows (series index, edge, kind) of a stack: (R, count)."""
    mu, lam, a, b, bop = stack.mu, stack.lam, stack.a, stack.b, stack.bop
    zero = bool(stack.linear) or bool((mu[:, 0] == 0.0).any())
    mu_nz = np.where(mu == 0.0, 1.0, mu) if zero else mu
    half = np.sqrt(stack.far)  # e^{-lam depth}
    # int_0^1 X_n = (cos phi - cos(mu + phi)) / mu
    along = (stack.cos0 - stack.cos1) / mu_nz
    out = np.empty((len(rows), stack.size))
    for r, (i, name, kind) in enumerate(rows):
        sub = subs[i]
        f = _FRAMES[sub.edge]
        k, length, d = sub.conductivity, sub.length, sub.depth
        if name == sub.edge:
            if kind == "D":
                terms = along[i] * k * lam[i] * (a[i] * stack.s0[i]
                                                 + b[i] * (1.0 + stack.far[i])) / bop[i]
            else:
                terms = along[i] * (a[i] * (1.0 + stack.far[i]) + b[i] * stack.s0[i]) / bop[i]
            terms = terms * length
        elif name == f.opposite:
            terms = along[i] * (2.0 * length / bop[i]) * half[i] * (
                -k * lam[i] * b[i] if kind == "D" else a[i])
        else:
            lam_nz = np.where(lam[i] == 0.0, 1.0, lam[i]) if zero else lam[i]
            integral = (a[i] * stack.s0[i] + b[i] * np.expm1(-lam[i] * d) ** 2) \
                / (lam_nz * bop[i])
            at_start = name == f.start
            if kind == "D":
                cos_end = stack.cos0[i] if at_start else stack.cos1[i]
                terms = (-1.0 if at_start else 1.0) * k / length * mu[i] * cos_end * integral
            else:
                terms = (stack.sin0[i] if at_start else stack.sin1[i]) * integral
        if mu[i, 0] == 0.0:
            terms = terms.copy()
            terms[0] = _linear_flow_term(sub, name, kind, stack.phase[i, 0])
        out[r] = stack.coef[i] * terms
    return out


def _linear_flow_term(sub: SubProblem, name: str, kind: str, phase: float) -> float:
    """The zero root's flow term (`flow_terms`, mu = 0), before the coefficient."""
    modes = Modes(np.zeros(1), np.array([phase]), np.ones(1), np.ones(1))
    return float(flow_terms(sub, modes, [(name, kind)])[0, 0])


def _sum_stacked(stack: ModeStack, sigma: _Array, t: _Array, terms: _Array) -> _Array:
    """sum over series s and modes n < terms[s, p] at scattered points: sigma, t, terms (S, P)
    -> (P,). Each (series, point) pair is one entry; entries are grouped by their own count
    (`_buckets`). e^{-lam (2 depth - t)} = e^{-2 lam depth} / e^{-lam t} costs no second
    exponential and cannot overflow: with t <= depth the quotient is <= e^{-lam t}, and the
    numerator underflows to 0 whenever the denominator does."""
    npts = sigma.shape[1]
    out = np.zeros(npts)
    s_idx, p_idx = np.nonzero(terms > 0)
    if not s_idx.size:
        return out
    own = terms[s_idx, p_idx]
    sig, tt = sigma[s_idx, p_idx], t[s_idx, p_idx]
    for nt, sel in _buckets(own):
        step = max(1, _BLOCK // nt)
        for i in range(0, sel.size, step):
            e = sel[i:i + step]
            rows = s_idx[e]
            cols = slice(0, nt)
            e1 = np.exp(np.maximum(-stack.lam[rows, cols] * tt[e, None], -700.0))
            r = stack.p[rows, cols] * e1 + stack.q[rows, cols] * (stack.far[rows, cols] / e1)
            if int(own[e].min()) < nt:
                r *= np.arange(nt) < own[e, None]
            x = np.sin(sig[e, None] * stack.mu[rows, cols] + stack.phase[rows, cols])
            out += np.bincount(p_idx[e], weights=np.einsum("ij,ij->i", x, r), minlength=npts)
    if stack.linear:
        out += np.where(terms > 0, stack.alpha + stack.beta * (stack.depth - t), 0.0).sum(axis=0)
    return out


def _stack_row(stack: ModeStack, i: int) -> SeriesWeights:
    return SeriesWeights(stack.mu[i], stack.phase[i], stack.lam[i], stack.p[i], stack.q[i],
                         float(stack.alpha[i, 0]), float(stack.beta[i, 0]),
                         float(stack.depth[i, 0]))


# =========================================================================== the assembled model


def _root_count(n: int, max_terms: int) -> int:
    return int(min(max_terms, max(256, 1 << max(0, int(n - 1).bit_length()))))


class _Series:
    """One sub-problem with its mode tables computed on demand (instance cache, per solve).

    Tables are keyed by their length (256, 512, ... or max_terms): a sum over the first n modes
    takes the smallest table already built that holds n modes, else builds one of the next
    power of two; the flow series ask for exact lengths, so they do not depend on which
    evaluations ran first.
    """

    def __init__(self, sub: SubProblem, consts: TailConstants, max_terms: int) -> None:
        self.sub = sub
        self.consts = consts
        self.max_terms = max_terms
        self._tables: dict[int, tuple[Modes, SeriesWeights]] = {}

    def table(self, count: int) -> tuple[Modes, SeriesWeights]:
        """Modes and summation weights of exactly `count` modes."""
        hit = self._tables.get(count)
        if hit is None:
            mu, ph, norm = edge_eigenvalues(self.sub, count)
            modes = Modes(mu, ph, norm, edge_coefficients(self.sub, mu, ph, norm))
            hit = (modes, series_weights(self.sub, modes))
            self._tables[count] = hit
        return hit

    def _count_for(self, n: int) -> int:
        have = [c for c in self._tables if c >= n]
        return min(have) if have else _root_count(n, self.max_terms)

    def modes(self, n: int) -> Modes:
        return self.table(self._count_for(n))[0]

    def weights(self, n: int) -> SeriesWeights:
        return self.table(self._count_for(n))[1]


class _GridValues(NamedTuple):
    """Temperatures on a tensor grid with their error bounds as row and column parts:
    bound(j, i) = rows[j] + cols[i] + skipped off the fixed-temperature edges, 0 on them."""

    temp: _Array
    rows: _Array
    cols: _Array
    free_rows: _Array
    free_cols: _Array
    most: int
    skipped: float

    @property
    def error(self) -> float:
        """The largest bound over the grid, K."""
        if not (self.free_rows.any() and self.free_cols.any()):
            return 0.0
        return float(self.rows[self.free_rows].max() + self.cols[self.free_cols].max()
                     + self.skipped)

    def bounds(self) -> _Array:
        err = self.rows[:, None] + self.cols[None, :] + self.skipped
        return np.where(self.free_rows[:, None] & self.free_cols[None, :], err, 0.0)


class PlateSeries:
    """A solved plate: base (T_p + Pi) plus one series per edge with data.

    `temperature(x, y)` evaluates anywhere with terms chosen per point; `grid(x, y)` evaluates on
    a tensor grid with terms chosen per row (`_choose_rows`). Both return (temperature, error
    bound, terms). Mode tables are built on demand for all series at once (`stack_modes`) and
    kept for the solve.
    """

    def __init__(self, problem: PlateProblem) -> None:
        _validate(problem)
        self.problem = problem
        cond = _conditions(problem)
        _check_unique(problem, cond)
        self.cond = cond
        self.atol = problem.atol if problem.atol is not None else default_atol(problem)
        temps = [t for c in cond.values() if c.kind == "D" for t in c.profile_t]  # type: ignore
        # corner temperatures equal to rounding are compatible; any real difference is a jump
        self.plan = plan_corners(cond, 1e-9 * max([1.0] + [abs(v) for v in temps]))
        self.particular = particular_solution(problem, cond)
        self.corner = corner_polynomial(problem, cond, self.particular, self.plan)
        self.base = _Base.build(self.particular, self.corner)
        self.series: list[_Series] = []
        #: bound on the series left out as negligible (K), added to every error bound
        self.skipped = 0.0
        scale = self.atol * 1e-6
        for name in EDGE_NAMES:
            data = edge_data(problem, cond, self.base, name)
            sub = _sub_problem(problem, cond, name, data)
            consts = tail_constants(sub)
            # skip series whose whole contribution is negligible: V1 >= max |data| bounds it
            # for fixed-temperature data (maximum principle); flux and convection data are
            # scaled by a conduction length (an estimate there, at 1e-6 atol)
            mag = consts.v1
            if sub.kind == "N":
                mag *= max(problem.width, problem.height) / problem.conductivity
            elif sub.kind == "R":
                mag /= problem.conductivity / max(problem.width, problem.height) + sub.film
            if mag > scale:
                self.series.append(_Series(sub, consts, problem.max_terms))
            else:
                self.skipped += mag
        self.budget = self.atol / max(1, len(self.series))
        self._tail = _tail_params([s.sub for s in self.series], [s.consts for s in self.series])
        self._ladder = _ladder(problem.max_terms)
        # (sigma, t) of each series' frame as affine maps of (x, y, 1)
        self._affine = np.array([_affine_frame(s.sub.edge, problem.width, problem.height)
                                 for s in self.series]).reshape(-1, 2, 3)
        self._depth = np.array([[s.sub.depth] for s in self.series])
        self._stacks: dict[tuple[int, tuple[int, ...]], ModeStack] = {}
        # (s, t) in m of the fixed-temperature edges' frames, for points on them
        self._fixed_names = [n for n in EDGE_NAMES if cond[n].kind == "D"]
        self._fixed_frames = np.array([_affine_frame(n, problem.width, problem.height)
                                       for n in self._fixed_names]).reshape(-1, 2, 3)
        for i, n in enumerate(self._fixed_names):  # s exactly x or y
            self._fixed_frames[i, 0] = (1.0, 0.0, 0.0) if _FRAMES[n].along_x else (0.0, 1.0, 0.0)

    # ------------------------------------------------------------------ truncation
    def choose(self, t: _Array) -> tuple[_Array, _Array]:
        """Truncation rule for every series at once: t (S, Q) distances from each series' data
        edge, m -> (terms, tail bound K), both (S, Q)."""
        if t.size * self._ladder.size <= 8192:  # few points: one pass costs less
            return _pick(_tail_core(self._tail, self._ladder, t), self._ladder, self.budget)
        return _pick_coarse_fine(self._tail, self._ladder, t, self.budget)

    def _choose_rows(self, rows: list[_Array]) -> tuple[_Array, _Array]:
        """The truncation rule for many rows of one distance each (per series), evaluated at
        a few distances only: 0 and about 25 % steps from the smallest positive one. Each row
        takes the count and bound of the largest of those not above its own distance; the
        bound does not increase with the distance, so they hold for the row (with at most
        about 25 % more terms than it needs). Returns (terms, bound), (S, max rows)."""
        size = max(r.size for r in rows)
        picks, where = [], []
        for r in rows:
            pos = r[r > 0.0]
            lo = float(pos.min()) if pos.size else 1.0
            steps = int(math.ceil(math.log(max(float(r.max()), lo) / lo) / math.log(1.25)))
            levels = lo * 1.25 ** np.arange(steps + 1)
            levels = np.concatenate(([0.0], levels[levels <= r.max()]))
            picks.append(levels)
            where.append(np.searchsorted(levels, r, side="right") - 1)
        width = max(v.size for v in picks)
        t = np.array([np.concatenate((v, np.full(width - v.size, v[-1]))) for v in picks])
        terms, bound = self.choose(t)
        out_terms = np.zeros((len(rows), size), dtype=terms.dtype)
        out_bound = np.zeros((len(rows), size))
        for i, idx in enumerate(where):
            out_terms[i, :idx.size] = terms[i, idx]
            out_bound[i, :idx.size] = bound[i, idx]
        return out_terms, out_bound

    def _local(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        """(sigma, t) of points in each series' frame, (S, P) each, clipped to the plate."""
        st = self._affine @ np.array((x, y, np.ones(x.shape)))
        return (np.minimum(np.maximum(st[:, 0], 0.0), 1.0),
                np.minimum(np.maximum(st[:, 1], 0.0), self._depth))

    def _stack(self, count: int, subset: tuple[int, ...] | None = None) -> ModeStack:
        """Stacked modes of exactly `count` terms for the series in `subset` (all: None);
        cached per solve."""
        subset = tuple(range(len(self.series))) if subset is None else subset
        stack = self._stacks.get((count, subset))
        if stack is None:
            stack = stack_modes([self.series[i].sub for i in subset], count)
            self._stacks[(count, subset)] = stack
        return stack

    def _stack_for(self, n: int) -> ModeStack:
        """Stacked modes of all series holding at least n terms (the smallest such stack
        already built, else one of `_root_count(n)` terms)."""
        full = tuple(range(len(self.series)))
        have = [c for c, sub in self._stacks if sub == full and c >= n]
        return self._stack(min(have) if have else _root_count(n, self.problem.max_terms))

    def _weights_for(self, i: int, n: int) -> SeriesWeights:
        """Summation weights of series i holding at least n terms: a row of a stack built
        already (not more than 4 times longer than needed), else of the all-series stack of
        `_root_count(n)` terms when that is the shortest (the flows start there), else of a
        stack of this series alone."""
        want = _root_count(n, self.problem.max_terms)
        have = [(c, sub) for c, sub in self._stacks if i in sub and n <= c <= 4 * want]
        if have:
            c, sub = min(have)
            return _stack_row(self._stack(c, sub), sub.index(i))
        if want == _root_count(1, self.problem.max_terms):
            return _stack_row(self._stack(want), i)
        return _stack_row(self._stack(want, (i,)), 0)

    # ------------------------------------------------------------------ evaluation
    def _fixed_edges(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        """Mask of points on fixed-temperature edges and their exact boundary values (at a
        corner where two meet, the mean of the two)."""
        w, h = self.problem.width, self.problem.height
        exact = np.zeros(x.shape)
        if not self._fixed_frames.size:
            return np.zeros(x.shape, bool), exact
        st = self._fixed_frames @ np.array((x, y, np.ones(x.shape)))  # (F, 2, P): s, t in m
        hit = np.abs(st[:, 1]) <= 1e-12 * max(w, h)
        on = hit.any(axis=0)
        if on.any():
            count = hit.sum(axis=0)
            for i, name in enumerate(self._fixed_names):
                if hit[i].any():
                    exact[hit[i]] += self.cond[name].temperature(st[i, 0, hit[i]])
            exact = np.where(on, exact / np.maximum(count, 1), 0.0)
        return on, exact

    def _evaluate(self, x: _Array, y: _Array, terms: _Array | None,
                  bound: _Array | None = None) -> tuple[_Array, _Array, _Array]:
        """Temperatures at points with the given terms (S, P) (None: chosen per point by the
        truncation rule), their bounds (the given per-series bounds, or the rule's) and the
        terms used (S, P; 0 on fixed-temperature edges, which return their data)."""
        on, exact = self._fixed_edges(x, y)
        temp = self.base.value(x, y)
        err = np.zeros(x.shape)
        if not self.series:
            terms = np.zeros((0, x.size), int)
        else:
            sig, t = self._local(x, y)
            if terms is None:
                terms, bound = self.choose(t)
            terms = np.where(on, 0, terms)
            if bound is not None:
                err = np.where(on, 0.0, bound.sum(axis=0))
            if terms.size and terms.max() > 0:
                temp = temp + _sum_stacked(self._stack_for(int(terms.max())), sig, t, terms)
        temp = np.where(on, exact, temp)
        return temp, np.where(on, 0.0, err + self.skipped), terms

    def temperature(self, x: _Array, y: _Array,
                    fixed_terms: list[int] | None = None) -> tuple[_Array, _Array, int]:
        """Temperatures (degC), error bounds (K) and the most terms used, at points (x, y).

        Terms are chosen per point by the truncation rule (`choose_terms`, all series at once);
        `fixed_terms` (one count per series) skips that choice (the error bounds are then not
        computed and returned as NaN).
        """
        x = np.asarray(x, float).ravel()
        y = np.asarray(y, float).ravel()
        if fixed_terms is None:
            temp, err, terms = self._evaluate(x, y, None)
            return temp, err, int(terms.max(initial=0))
        fixed = np.repeat(np.asarray(fixed_terms, dtype=int).reshape(-1, 1), x.size, axis=1)
        temp, _, terms = self._evaluate(x, y, fixed)
        return temp, np.full(x.shape, np.nan), int(terms.max(initial=0))

    def _grid(self, gx: _Array, gy: _Array) -> _GridValues:
        """Temperatures on the tensor grid with terms chosen per row (per series)."""
        w, h = self.problem.width, self.problem.height
        gx = np.asarray(gx, float)
        gy = np.asarray(gy, float)
        tol = 1e-12 * max(w, h)
        temp = self.base.grid(gx, gy)
        rows, cols = np.zeros(gy.size), np.zeros(gx.size)
        # grid lines lying on fixed-temperature edges take the data and carry no error
        on_row = {"bottom": np.abs(gy) <= tol, "top": np.abs(gy - h) <= tol}
        on_col = {"left": np.abs(gx) <= tol, "right": np.abs(gx - w) <= tol}
        free_rows = ~np.logical_or.reduce([m for n, m in on_row.items()
                                           if self.cond[n].kind == "D"] + [np.zeros(gy.size, bool)])
        free_cols = ~np.logical_or.reduce([m for n, m in on_col.items()
                                           if self.cond[n].kind == "D"] + [np.zeros(gx.size, bool)])
        most = 0
        if self.series:
            across = []
            for ser in self.series:
                f = _FRAMES[ser.sub.edge]
                a = gy if f.along_x else gx
                across.append(np.clip(ser.sub.depth - a if f.far else a, 0.0, ser.sub.depth))
            terms_all, bound_all = self._choose_rows(across)
            for i, ser in enumerate(self.series):
                f = _FRAMES[ser.sub.edge]
                t = across[i]
                free = free_rows if f.along_x else free_cols
                terms = np.where(free, terms_all[i, :t.size], 0)
                bound = np.where(free, bound_all[i, :t.size], 0.0)
                top = int(terms.max(initial=0))
                if top > 0:
                    along = gx if f.along_x else gy
                    sigma = np.clip(along / ser.sub.length, 0.0, 1.0)
                    u = _sum_rows(self._weights_for(i, top), sigma, t, terms)
                    temp += u if f.along_x else u.T
                    most = max(most, top)
                if f.along_x:
                    rows = rows + bound
                else:
                    cols = cols + bound
        self._fix_grid_edges(temp, gx, gy, on_row, on_col)
        return _GridValues(temp, rows, cols, free_rows, free_cols, most, self.skipped)

    def _fix_grid_edges(self, temp: _Array, gx: _Array, gy: _Array,
                        on_row: dict[str, _Array], on_col: dict[str, _Array]) -> None:
        """Fixed-temperature edges take their data; a corner where two meet, the mean."""
        lines: dict[str, tuple[_Array, _Array]] = {}
        for name, mask in (*on_row.items(), *on_col.items()):
            c = self.cond[name]
            if c.kind != "D" or not mask.any():
                continue
            along = gx if _FRAMES[name].along_x else gy
            lines[name] = (mask, c.temperature(along))
        for name, (mask, vals) in lines.items():
            if _FRAMES[name].along_x:
                temp[mask, :] = vals
            else:
                temp[:, mask] = vals[:, None]
        for (hor, ver) in _CORNERS:
            if hor in lines and ver in lines:
                (rmask, hvals), (cmask, vvals) = lines[hor], lines[ver]
                ri, ci = np.flatnonzero(rmask), np.flatnonzero(cmask)
                temp[np.ix_(ri, ci)] = 0.5 * (hvals[ci][None, :] + vvals[ri][:, None])

    def grid(self, gx: _Array, gy: _Array) -> tuple[_Array, _Array, int]:
        """Temperatures (ny, nx), per-point error bounds and most terms on a tensor grid."""
        g = self._grid(gx, gy)
        return g.temp, g.bounds(), g.most

    # ------------------------------------------------------------------ flows
    def flow_scale(self) -> float:
        """A heat flow typical of the problem, W/m: k times its temperature scale, generation
        and fluxes."""
        p = self.problem
        w, h = p.width, p.height
        q = [abs(c.flux) * _lengths(n, w, h)[0] for n, c in self.cond.items()]
        return max([p.conductivity * self.atol / DEFAULT_RTOL * max(w / h, h / w),
                    abs(p.generation) * w * h] + q)

    def edge_heat_flows(self, rtol: float = 1e-8) -> dict[str, float | None]:
        """Heat flow into the body through each edge, W/m, term by term from every series.

        Flux edges carry their data exactly; fixed-temperature edges integrate -k dT/dt of the
        base and of each series; convection edges integrate h (T_amb - T). Each series is summed
        by `settle_flow_series` (partial sums settling to rtol times `flow_scale`, or a checked
        Richardson extrapolation). Edges touching a singular corner are None (unbounded), as are
        the rare edges whose flow series would only converge conditionally next to one.
        """
        p = self.problem
        w, h, k = p.width, p.height, p.conductivity
        tol = rtol * self.flow_scale() / max(1, len(self.series))
        out: dict[str, float | None] = {}
        base_part: dict[str, float] = {}
        gl_x, gl_w = _GL6_X, _GL6_W  # exact for the base's polynomials (degree <= 4)
        for name in EDGE_NAMES:
            c = self.cond[name]
            length = _lengths(name, w, h)[0]
            if c.kind == "N":
                out[name] = c.flux * length
                continue
            if name in self.plan.unbounded or name in self.plan.slow:
                out[name] = None
                continue
            s = 0.5 * length * (1.0 + gl_x)
            x, y = _edge_point(name, s, w, h)
            nx, ny = _FRAMES[name].normal
            if c.kind == "D":
                gx, gy = self.base.gradient(x, y)
                base_part[name] = float(np.sum(0.5 * length * gl_w * k * (gx * nx + gy * ny)))
            else:
                base_part[name] = float(np.sum(0.5 * length * gl_w * self.base.value(x, y)))
            out[name] = None
        sums = self._flow_series_sums(list(base_part), tol)
        for name, total in base_part.items():
            c = self.cond[name]
            for i in range(len(self.series)):
                total += sums[(i, name)]
            length = _lengths(name, w, h)[0]
            out[name] = total if c.kind == "D" else c.film * (c.ambient * length - total)
        return out

    def _flow_series_sums(self, names: list[str], tol: float) -> dict[tuple[int, str], float]:
        """Every series' flow sum through every edge in `names`, settled together from 256
        terms, growing 2 or 4 times (`settle_flow_series`) up to max_terms, until each one is
        accepted."""
        max_terms = self.problem.max_terms
        pending = [(i, n) for i in range(len(self.series)) for n in names]
        # extrapolate only once mu at N/16 is at least 4 times the largest Biot number of the
        # series: its convective ends, a convective opposite edge (h L / k) and its own film
        asymptotic = []
        for ser in self.series:
            sub = ser.sub
            biots = [sub.start[1], sub.end[1], sub.opposite[1] * sub.length,
                     sub.film * sub.length / sub.conductivity]
            asymptotic.append(16.0 * 4.0 * max(biots) / math.pi)
        out: dict[tuple[int, str], float] = {}
        count = min(256, max_terms)
        while pending:
            subset = tuple(sorted({i for i, _ in pending}))
            stack = self._stack(count, subset)
            local = {i: j for j, i in enumerate(subset)}
            rows = [(local[i], n, self.cond[n].kind) for i, n in pending]
            tols = [tol / (1.0 if kind == "D" else self.cond[n].film) for _, n, kind in rows]
            values, done, growth = settle_flow_series(
                _stack_flow_terms(stack, [self.series[i].sub for i in subset], rows),
                np.array(tols), last=count >= max_terms,
                asymptotic=np.array([asymptotic[subset[j]] for j, _, _ in rows]))
            for key, v, ok in zip(pending, values, done, strict=True):
                if ok:
                    out[key] = float(v)
            pending = [key for key, ok in zip(pending, done, strict=True) if not ok]
            count = min(int(growth[~done].max(initial=2)) * count, max_terms)
        return out


def flow_terms(sub: SubProblem, modes: Modes, targets: list[tuple[str, str]]) -> _Array:
    """Terms of a sub-problem's flow series through each (edge, kind) of `targets`, one row
    each: the integral over the edge of q_in (kind D, W/m) or of U (kind R, K m)."""
    mu, ph, c = modes.mu, modes.phase, modes.coef
    perp = perpendicular_values(sub, mu)
    f = _FRAMES[sub.edge]
    k, length = sub.conductivity, sub.length
    # int_0^1 X_n = (cos phi - cos(mu + phi)) / mu = 2 sin(mu/2 + phi) sin(mu/2) / mu
    along = 2.0 * np.sin(0.5 * mu + ph) * np.sin(0.5 * mu) / _nonzero(mu)
    if mu.size and mu[0] == 0.0:
        along[0] = np.sin(ph[0])
    out = np.empty((len(targets), mu.size))
    for row, (name, kind) in enumerate(targets):
        if name == sub.edge:
            terms = along * (perp.flux_at_edge if kind == "D" else perp.at_edge) * length
        elif name == f.opposite:
            terms = along * (perp.flux_at_opposite if kind == "D" else perp.at_opposite) * length
        else:
            at = 0.0 if name == f.start else 1.0
            if kind == "D":
                sign = -1.0 if at == 0.0 else 1.0
                terms = sign * k / length * mu * np.cos(mu * at + ph) * perp.integral
            else:
                terms = np.sin(mu * at + ph) * perp.integral
        out[row] = c * terms
    return out


def _richardson(s: _Array, p: _Array) -> _Array:
    """Extrapolate partial sums at N, 2N, 4N, 8N (columns) whose tails go like
    a N^-p + b N^-(p+1) + c N^-(p+2): eliminate one power per sweep (Richardson)."""
    for j in range(3):
        f = 2.0 ** (p + j)[:, None]
        s = (f * s[:, 1:] - s[:, :-1]) / (f - 1.0)
    return s[:, 0]


def settle_flow_series(terms: _Array, tol: _Array, last: bool,
                       asymptotic: _Array | None = None) -> tuple[_Array, _Array, _Array]:
    """Sum each row of `terms` (R, N) if it has settled: (values, accepted, growth).

    A row is accepted when its partial sums over the last half of the block vary by <= tol
    (the sum is returned), or when the differences of the partial sums at N/32, N/16, ..., N
    shrink by steady factors 2^p (p an integer >= 1: an algebraic tail a N^-p + ..., the usual
    case next to a corner) and two Richardson extrapolations, from the levels up to N and up to
    N/2, agree to tol (the one up to N is returned). With `last` every row is accepted with its
    partial sum. `growth` suggests the next block: 2N where the tail is steady and the two
    extrapolations differ by at most 2^(p+2) tol (their difference falls like N^-(p+3)), else 4N.
    `asymptotic` (per row) is the least N at which extrapolation may be trusted: terms take
    their asymptotic form only once the eigenvalues are well past every Biot number of the
    sub-problem, and before that a steady-looking tail can change its law.
    """
    n = terms.shape[1]
    parts = np.cumsum(terms, axis=1)
    final = parts[:, -1]
    ok = np.abs(parts[:, n // 2:] - final[:, None]).max(axis=1) <= tol
    values = final.copy()
    growth = np.full(final.shape, 4)
    if n >= 64 and not ok.all():
        s = parts[:, (n // 32) * (1 << np.arange(6)) - 1]
        d = s[:, 1:] - s[:, :-1]
        with np.errstate(all="ignore"):
            r = d[:, :-1] / d[:, 1:]
            rate = np.log2(r)
            p = np.rint(rate[:, -1])
            steady = (np.all(r[:, 1:] > 1.5, axis=1) & (p >= 1.0)
                      & (np.abs(rate[:, -1] - p) < 0.1) & (np.abs(rate[:, -2] - p) < 0.2))
            both = _richardson(np.concatenate((s[:, 2:], s[:, 1:5])), np.concatenate((p, p)))
            upper, lower = both[:p.size], both[p.size:]
            if asymptotic is not None:
                steady &= n >= asymptotic
            rich = ~ok & steady & (np.abs(upper - lower) <= tol)
            growth = np.where(steady & (np.abs(upper - lower) <= tol * 2.0 ** (p + 2)), 2, 4)
        values = np.where(rich, upper, values)
        ok = ok | rich
    return values, ok | last, growth


# =========================================================================== extremes and safety


def describe(x: float, y: float, width: float, height: float) -> str:
    """'interior', 'bottom edge', 'corner top-left', ..."""
    tol = 1e-9 * max(width, height)
    vert = "bottom" if abs(y) <= tol else "top" if abs(y - height) <= tol else ""
    hor = "left" if abs(x) <= tol else "right" if abs(x - width) <= tol else ""
    if vert and hor:
        return f"corner {vert}-{hor}"
    if vert or hor:
        return f"{vert or hor} edge"
    return "interior"


def _boundary_candidates(model: PlateSeries) -> list[tuple[float, float, float]]:
    """Exact extremes of the fixed-temperature data: (T, x, y) at profile breakpoints."""
    p = model.problem
    out: list[tuple[float, float, float]] = []
    for name in EDGE_NAMES:
        c = model.cond[name]
        if c.kind != "D":
            continue
        assert c.profile_s is not None and c.profile_t is not None
        s = c.profile_s
        if len(s) == 2 and c.profile_t[0] == c.profile_t[1]:
            s = np.array([0.5 * (s[0] + s[1])])
        temps = c.profile_t if s.size == c.profile_s.size else c.profile_t[:1]
        x, y = _edge_point(name, s, p.width, p.height)
        out += [(float(ti), float(xi), float(yi)) for ti, xi, yi in zip(temps, x, y, strict=True)]
    return out


class _Samples(NamedTuple):
    """Temperatures on a tensor grid of sample points (x columns, y rows)."""

    gx: _Array
    gy: _Array
    temp: _Array


def _sample_lines(model: PlateSeries) -> list[tuple[_Array, _Array]]:
    """(x, y) tensor grids of `EXTREMES_SAMPLES` points along the edges where the extremes of
    a harmonic T can lie.

    Without generation T is harmonic: its extremes lie on the boundary (maximum principle), on
    fixed-temperature edges at their data, and not inside an insulated (or zero-flux) edge
    (Hopf's lemma: there the outward derivative would be non-zero), nor at a corner of two such
    edges (even reflection makes it an interior point). So only flux and convection edges are
    sampled.
    """
    p = model.problem
    w, h, n = p.width, p.height, EXTREMES_SAMPLES

    def active(name: str) -> bool:
        c = model.cond[name]
        return c.kind == "R" or (c.kind == "N" and c.flux != 0.0)

    out = []
    ys = [v for name, v in (("bottom", 0.0), ("top", h)) if active(name)]
    if ys:
        out.append((np.linspace(0.0, w, n), np.array(ys)))
    xs = [v for name, v in (("left", 0.0), ("right", w)) if active(name)]
    if xs:
        out.append((np.array(xs), np.linspace(0.0, h, n)))
    return out


def _spacing(v: _Array) -> float:
    return float(v[1] - v[0]) if v.size > 1 else 0.0


def _edge_line(samples: _Samples, name: str, width: float, height: float) -> _Samples | None:
    """The samples lying on edge `name` (one row or column), if the set holds that line."""
    tol = 1e-12 * max(width, height)
    gx, gy, t = samples.gx, samples.gy, samples.temp
    f = _FRAMES[name]
    if f.along_x:
        rows = np.flatnonzero(np.abs(gy - (height if f.far else 0.0)) <= tol)
        if not rows.size or gx.size < 2:
            return None
        return _Samples(gx, gy[rows[:1]], t[rows[:1]])
    cols = np.flatnonzero(np.abs(gx - (width if f.far else 0.0)) <= tol)
    if not cols.size or gy.size < 2:
        return None
    return _Samples(gx[cols[:1]], gy, t[:, cols[:1]])


class _Seed(NamedTuple):
    """A sample to refine: maximise sign * T near (x, y) within +-(hx, hy) (0: that
    coordinate stays), with the sample values around it at +-hx, +-hy (3 x 3, rows in y; or
    3 along the moving axis; None when it does not move)."""

    x: float
    y: float
    sign: float
    hx: float
    hy: float
    stencil: _Array | None


def _seed(model: PlateSeries, s: _Samples, sign: float) -> _Seed:
    """The best sample of a set. On an edge it moves only along the edge; at a corner or on a
    fixed-temperature edge (exact data) it does not move."""
    p = model.problem
    w, h = p.width, p.height
    j, i = np.unravel_index(int(np.argmax(sign * s.temp)), s.temp.shape)
    x, y = float(s.gx[i]), float(s.gy[j])
    tol = 1e-12 * max(w, h)
    hx = 0.0 if (x <= tol or x >= w - tol) else _spacing(s.gx)
    hy = 0.0 if (y <= tol or y >= h - tol) else _spacing(s.gy)
    if model._fixed_edges(np.array([x]), np.array([y]))[0][0]:
        hx = hy = 0.0
    inside_x = 0 < i < s.gx.size - 1
    inside_y = 0 < j < s.gy.size - 1
    stencil = None
    if hx > 0.0 and hy > 0.0 and inside_x and inside_y:
        stencil = s.temp[j - 1:j + 2, i - 1:i + 2]
    elif hx > 0.0 and hy == 0.0 and inside_x:
        stencil = s.temp[j, i - 1:i + 2]
    elif hy > 0.0 and hx == 0.0 and inside_y:
        stencil = s.temp[j - 1:j + 2, i]
    if stencil is None:
        hx = hy = 0.0
    return _Seed(x, y, sign, hx, hy, stencil)


class _Found(NamedTuple):
    """A candidate extreme: temperature degC, position m, error bound K, most terms."""

    temperature: float
    x: float
    y: float
    bound: float
    terms: int


#: Most evaluated rounds of the local refinement of extremes after the first (the stencil
#: shrinks 4 times per round).
_REFINE_ROUNDS = 5


def _refine(model: PlateSeries, seeds: list[_Seed]) -> list[_Found]:
    """Local refinement of extremes near samples, all seeds in each evaluation.

    Every point is evaluated with its own term count and tail bound (truncation rule), so the
    search may go anywhere in the seed's neighbourhood (+-hx, +-hy inside the plate): points on
    fixed-temperature edges return their data. First round: the seed, the vertex of the sample
    stencil's quadratic model and a sub-grid of the neighbourhood (9 points along an edge, 5 x 5
    inside), so that a peak narrower than the sample spacing is not lost. Then rounds of a
    3-point (3 x 3) stencil around the best point so far and a Newton step on its quadratic
    model (parabolic vertex, or the 2 x 2 Hessian; only where the model is concave, limited to
    the stencil), shrinking 4 times per round, until the model promises a gain below 1e-2 atol
    (the best point met is then that close to the model's peak; one round for a smooth
    extreme, at most `_REFINE_ROUNDS`). The first such step is taken from the sub-grid itself.
    Returns the best point met with its bound (K) and terms.
    """
    p = model.problem
    w, h = p.width, p.height
    k = len(seeds)
    if not k:
        return []
    lo = np.array([[max(0.0, s.x - s.hx), max(0.0, s.y - s.hy)] for s in seeds])
    hi = np.array([[min(w, s.x + s.hx), min(h, s.y + s.hy)] for s in seeds])
    best: list[_Found | None] = [None] * k
    gain_tol = 1e-2 * model.atol

    def evaluate(points: dict[int, tuple[_Array, _Array]]) -> dict[int, _Array]:
        order = list(points)
        sizes = [points[i][0].size for i in order]
        x_all = np.concatenate([points[i][0] for i in order])
        y_all = np.concatenate([points[i][1] for i in order])
        temp, err, terms = model._evaluate(x_all, y_all, None)
        most = terms.max(axis=0, initial=0) if terms.size else np.zeros(x_all.size, int)
        out: dict[int, _Array] = {}
        start = 0
        for i, size in zip(order, sizes, strict=True):
            sl = slice(start, start + size)
            j = start + int(np.argmax(seeds[i].sign * temp[sl]))
            prev = best[i]
            if prev is None or seeds[i].sign * temp[j] > seeds[i].sign * prev.temperature:
                best[i] = _Found(float(temp[j]), float(x_all[j]), float(y_all[j]),
                                 float(err[j]), int(most[j]))
            out[i] = temp[sl]
            start += size
        return out

    # first round: seed, sample-stencil vertex, sub-grid of the neighbourhood
    points: dict[int, tuple[_Array, _Array]] = {}
    step = np.zeros((k, 2))
    grids: dict[int, tuple[int, int, int]] = {}  # sub-grid: offset in the points, nx, ny
    for i, s in enumerate(seeds):
        xs, ys = [np.array([s.x])], [np.array([s.y])]
        if s.stencil is not None:
            v = np.clip(_newton_step(s.sign * np.ravel(s.stencil), s.hx, s.hy,
                                     np.array([s.x, s.y]), (s.x, s.y))[0], lo[i], hi[i])
            xs.append(v[:1])
            ys.append(v[1:])
            size = 9 if (s.hx > 0.0) != (s.hy > 0.0) else 5
            gx = np.linspace(lo[i, 0], hi[i, 0], size) if s.hx > 0.0 else np.array([s.x])
            gy = np.linspace(lo[i, 1], hi[i, 1], size) if s.hy > 0.0 else np.array([s.y])
            xs.append(np.tile(gx, gy.size))
            ys.append(np.repeat(gy, gx.size))
            step[i] = ((hi[i, 0] - lo[i, 0]) / (size - 1), (hi[i, 1] - lo[i, 1]) / (size - 1))
            grids[i] = (2, gx.size, gy.size)
        points[i] = (np.concatenate(xs), np.concatenate(ys))
    first = evaluate(points)
    active = [i for i, s in enumerate(seeds) if s.stencil is not None]
    centre = np.array([[b.x, b.y] if b is not None else [s.x, s.y]
                       for b, s in zip(best, seeds, strict=True)])
    offsets = np.array([-1.0, 0.0, 1.0])
    last: dict[int, tuple[_Array, _Array]] = {}
    # the sub-grid is a stencil already: a Newton step from around its best point
    for i in active:
        start, nx, ny = grids[i]
        vals = seeds[i].sign * first[i][start:].reshape(ny, nx)
        jy, jx = np.unravel_index(int(np.argmax(vals)), vals.shape)
        if (nx == 1 or 0 < jx < nx - 1) and (ny == 1 or 0 < jy < ny - 1):
            block = vals[max(jy - 1, 0):jy + 2, max(jx - 1, 0):jx + 2]
            gx = points[i][0][start + jx]
            gy = points[i][1][start + jy * nx]
            centre[i] = np.clip(_newton_step(block.ravel(), step[i, 0] if nx > 1 else 0.0,
                                             step[i, 1] if ny > 1 else 0.0,
                                             np.array([gx, gy]), (gx, gy))[0], lo[i], hi[i])
            step[i] /= 4.0
    for _ in range(_REFINE_ROUNDS):
        if not active:
            break
        points, stencils = {}, {}
        for i in active:
            # symmetric inside the neighbourhood: an axis at its side does not move this round
            dx = min(step[i, 0], centre[i, 0] - lo[i, 0], hi[i, 0] - centre[i, 0])
            dy = min(step[i, 1], centre[i, 1] - lo[i, 1], hi[i, 1] - centre[i, 1])
            gx = centre[i, 0] + offsets * dx if dx > 0.0 else centre[i, :1]
            gy = centre[i, 1] + offsets * dy if dy > 0.0 else centre[i, 1:]
            stencils[i] = (dx, dy)
            points[i] = (np.tile(gx, gy.size), np.repeat(gy, gx.size))
        values = evaluate(points)
        still = []
        for i in active:
            dx, dy = stencils[i]
            met = best[i]
            fallback = (met.x, met.y) if met is not None else (centre[i, 0], centre[i, 1])
            centre[i], gain = _newton_step(seeds[i].sign * values[i], dx, dy, centre[i], fallback)
            step[i] /= 4.0
            if gain > gain_tol and max(dx, dy) > 1e-9 * max(w, h):
                still.append(i)
            # else converged: the best point met is within the promised gain (<= gain_tol) of
            # the model's vertex, which is not evaluated
        active = still
    for i in active:
        last[i] = (centre[i, :1].copy(), centre[i, 1:].copy())
    if last:
        evaluate(last)
    found = [b for b in best if b is not None]
    assert len(found) == k  # every seed was evaluated in the first round
    return found


def _newton_step(f: _Array, dx: float, dy: float, centre: _Array,
                 fallback: tuple[float, float]) -> tuple[_Array, float]:
    """Next centre from a stencil of sign * T (to be maximised; 3 x 3 with rows in y, or 3
    along the moving axis) and the gain its quadratic model promises there: the vertex of the
    model when it is concave, limited to the stencil, else `fallback` (gain inf)."""
    back = np.array(fallback, float), math.inf
    if dx > 0.0 and dy > 0.0:
        g = np.reshape(f, (3, 3))
        gx = (g[1, 2] - g[1, 0]) / (2.0 * dx)
        gy = (g[2, 1] - g[0, 1]) / (2.0 * dy)
        hxx = (g[1, 2] - 2.0 * g[1, 1] + g[1, 0]) / (dx * dx)
        hyy = (g[2, 1] - 2.0 * g[1, 1] + g[0, 1]) / (dy * dy)
        hxy = (g[2, 2] - g[2, 0] - g[0, 2] + g[0, 0]) / (4.0 * dx * dy)
        det = hxx * hyy - hxy * hxy
        if not (hxx < 0.0 and det > 0.0):
            return back
        move = np.clip(-np.array([hyy * gx - hxy * gy, hxx * gy - hxy * gx]) / det,
                       [-dx, -dy], [dx, dy])
        gain = gx * move[0] + gy * move[1] + 0.5 * (hxx * move[0] ** 2 + 2.0 * hxy * move[0]
                                                    * move[1] + hyy * move[1] ** 2)
    elif dx > 0.0 or dy > 0.0:
        d = dx if dx > 0.0 else dy
        slope, curv = (f[2] - f[0]) / (2.0 * d), (f[0] - 2.0 * f[1] + f[2]) / (d * d)
        if not curv < 0.0:
            return back
        v = float(np.clip(-slope / curv, -d, d))
        gain = slope * v + 0.5 * curv * v * v
        move = np.array([v, 0.0]) if dx > 0.0 else np.array([0.0, v])
    else:
        return back
    if not (np.all(np.isfinite(move)) and math.isfinite(gain)):
        return back
    return centre + move, float(gain)


class _Extremes(NamedTuple):
    hottest: Location
    coldest: Location
    surfaces: list[Scope]
    error: float
    most: int


class _Candidates(NamedTuple):
    """Refined extremes of a set of samples, before the reported values join them."""

    found: list[_Found]   # refined body seeds (hottest, coldest), then two per exposed edge
    nbody: int            # how many of `found` are body seeds
    signs: list[float]    # the sign of each body seed
    exposed: list[str]    # convection edges with their own scope
    data: list[_Found]    # exact fixed-temperature data


def _refined_candidates(model: PlateSeries, sets: list[_Samples],
                        surfaces: bool) -> _Candidates:
    """The best samples refined locally (`_refine`), for the body and, when `surfaces`, per
    convection edge; and the exact fixed-temperature data."""
    p = model.problem
    w, h = p.width, p.height
    seeds: list[_Seed] = []
    for sign in (1.0, -1.0):
        if sets:
            # the set holding the most extreme sample: largest max of sign * T
            best = max(sets, key=lambda s: float(np.max(sign * s.temp)))
            seeds.append(_seed(model, best, sign))
    nbody = len(seeds)
    exposed = [n for n in EDGE_NAMES if model.cond[n].kind == "R"] if surfaces else []
    for name in exposed:
        line = next((ln for s in sets if (ln := _edge_line(s, name, w, h)) is not None), None)
        if line is None:  # no sample set holds this edge: sample it alone
            n, f = EXTREMES_SAMPLES, _FRAMES[name]
            gx, gy = ((np.linspace(0.0, w, n), np.array([h if f.far else 0.0])) if f.along_x
                      else (np.array([w if f.far else 0.0]), np.linspace(0.0, h, n)))
            line = _Samples(gx, gy, model._grid(gx, gy).temp)
        seeds += [_seed(model, line, sign) for sign in (1.0, -1.0)]
    found = _refine(model, seeds)
    data = [_Found(t, x, y, 0.0, 0) for t, x, y in _boundary_candidates(model)]
    return _Candidates(found, nbody, [s.sign for s in seeds[:nbody]], exposed, data)


def _body_range(cands: _Candidates) -> tuple[float, float]:
    """(coldest, hottest) of the refined body candidates, degC (-inf, inf where the candidates
    hold none of that sign, so that any reported value takes the full choice)."""
    hot = [f.temperature for f, s in zip(cands.found, cands.signs, strict=False) if s > 0]
    cold = [f.temperature for f, s in zip(cands.found, cands.signs, strict=False) if s < 0]
    return (min(cold) if cold else math.inf), (max(hot) if hot else -math.inf)


def _pick_extremes(model: PlateSeries, cands: _Candidates,
                   reported: list[tuple[_Array, _Array, _Array]]) -> _Extremes:
    """Hottest and coldest over the plate, and per convection edge in `cands.exposed`.

    Candidates: the refined samples, every reported value (points and grid: already counted
    in the error estimate) and the exact fixed-temperature data (which win ties). `error` and
    `most` cover the refined values that are reported.
    """
    p = model.problem
    w, h = p.width, p.height
    found, nbody = cands.found, cands.nbody
    values = []
    for xs_r, ys_r, ts_r in reported:
        for sign in (1.0, -1.0):
            if ts_r.size:
                i = int(np.argmax(sign * ts_r))
                values.append(_Found(float(ts_r[i]), float(xs_r[i]), float(ys_r[i]), 0.0, 0))
    chosen: list[_Found] = []

    def pick(sign: float, options: list[_Found], exact: list[_Found]) -> Location:
        best = max(options, key=lambda c: sign * c.temperature) if options else None
        for cand in exact:
            if best is None or sign * cand.temperature >= sign * best.temperature:
                best = cand  # exact data wins ties
        assert best is not None
        chosen.append(best)
        return Location(best.temperature, describe(best.x, best.y, w, h), (best.x, best.y))

    body = list(zip(found[:nbody], cands.signs, strict=True))
    hottest = pick(1.0, [f for f, s in body if s > 0] + values, cands.data)
    coldest = pick(-1.0, [f for f, s in body if s < 0] + values, cands.data)
    scopes = [Scope(f"{name} edge", pick(1.0, [found[nbody + 2 * i]], []),
                    pick(-1.0, [found[nbody + 2 * i + 1]], []))
              for i, name in enumerate(cands.exposed)]
    return _Extremes(hottest, coldest, scopes, max([c.bound for c in chosen] + [0.0]),
                     max([c.terms for c in chosen] + [0]))


#: Plate definitions whose series model, edge flows and refined extremes are kept per process
#: (`CORES`). A light request (a few points) then costs little more than evaluating its
#: points when the same plate is asked again, as a spreadsheet does with one cell per point.
CORE_CACHE_SIZE = 32
#: ... and at most this many bytes of mode tables and samples among them (a typical entry holds
#: 0.1-0.3 MB; one with points very close to a data edge up to a few MB; one larger than this
#: alone is not kept).
CORE_CACHE_BYTES = 64 * 2**20
#: Output grid sizes per kept definition whose refined extremes are kept too.
_GRID_CANDIDATES = 4


def definition_of(problem: PlateProblem) -> PlateProblem:
    """The part of a problem that fixes its solution: without the output points, grid and
    limits (the limits' values; whether convection edges get their own scope is asked of
    `PlateCore.candidates`)."""
    # built directly: dataclasses.replace walks the fields by name, several times slower
    p = problem
    return PlateProblem(p.width, p.height, p.conductivity, p.bottom, p.right, p.top, p.left,
                        p.generation, (), None, p.atol, p.max_terms, _NO_LIMITS)


_NO_LIMITS = Limits()


def _nbytes(obj: object) -> int:
    """Bytes of the numpy arrays held in nested tuples, lists and dicts."""
    if isinstance(obj, np.ndarray):
        return int(obj.nbytes)
    if isinstance(obj, tuple | list):
        return sum(_nbytes(v) for v in obj)
    if isinstance(obj, dict):
        return sum(_nbytes(v) for v in obj.values())
    return 0


class PlateCore:
    """What a series solve computes before it looks at the output points: the model, the edge
    heat flows, and the samples and refined candidates for the extremes (with no output grid,
    and for the last few output grid sizes).

    Built once per plate definition and kept in `CORES`. The model's mode tables grow as
    requests need more terms (bounded by max_terms); results do not depend on that history,
    because each evaluation sums exactly the terms its truncation rule chooses. Every table,
    sample set and candidate list is stored in one assignment once complete, so a request
    interrupted by the time budget leaves nothing half-built. Not meant for concurrent use from
    several threads (the service's sync workers serve one request at a time).
    """

    def __init__(self, definition: PlateProblem) -> None:
        self.model = PlateSeries(definition)
        # flows first: their mode tables (256 terms of every series, more for slow ones) then
        # serve the evaluations
        self.flows = self.model.edge_heat_flows()
        self._samples: list[_Samples] | None = None
        self._candidates: dict[bool, _Candidates] = {}
        self._extremes: dict[bool, tuple[_Extremes, tuple[float, float]]] = {}
        self._grid_candidates: dict[tuple[int, int, bool], _Candidates] = {}
        self._measured: tuple[tuple[int | bool, ...], int] = ((), 0)

    def samples(self) -> list[_Samples]:
        """Where the extremes can lie when no fine output grid is asked: the flux and
        convection edges without generation (`_sample_lines`), else a square sample grid."""
        if self._samples is None:
            model = self.model
            p = model.problem
            if p.generation == 0.0:
                self.evaluate_points(np.zeros(0), np.zeros(0))
            else:
                sx = np.linspace(0.0, p.width, EXTREMES_SAMPLES)
                sy = np.linspace(0.0, p.height, EXTREMES_SAMPLES)
                self._samples = [_Samples(sx, sy, model._grid(sx, sy).temp)]
        assert self._samples is not None
        return self._samples

    def evaluate_points(self, x: _Array, y: _Array) -> tuple[_Array, _Array, _Array]:
        """Temperatures, bounds and terms at points (`PlateSeries._evaluate`). Without
        generation, the first call also evaluates the edge samples of `samples`, in the same
        pass (one pass over the series costs less than two)."""
        model = self.model
        if self._samples is not None or model.problem.generation != 0.0:
            return model._evaluate(x, y, None)
        lines = _sample_lines(model)
        xs = [x] + [np.tile(gx, gy.size) for gx, gy in lines]
        ys = [y] + [np.repeat(gy, gx.size) for gx, gy in lines]
        temp, err, terms = model._evaluate(np.concatenate(xs), np.concatenate(ys), None)
        samples, start = [], x.size
        for gx, gy in lines:
            size = gx.size * gy.size
            samples.append(_Samples(gx, gy, temp[start:start + size].reshape(gy.size, gx.size)))
            start += size
        # kept only when complete: the time budget may interrupt a request anywhere
        self._samples = samples
        return temp[:x.size], err[:x.size], terms[:, :x.size]

    def nbytes(self) -> int:
        """Bytes of the tables and samples held (the model's stacked modes and each series'
        own tables grow as requests need more terms: measured again only when one was added)."""
        model = self.model
        shape = (len(model._stacks), self._samples is None,
                 *(len(s._tables) for s in model.series))
        if shape != self._measured[0]:
            size = (_nbytes(list(model._stacks.values())) + _nbytes(self._samples or [])
                    + sum(_nbytes(list(s._tables.values())) for s in model.series))
            self._measured = (shape, size)
        return self._measured[1]

    def grid_candidates(self, gx: _Array, gy: _Array, temp: _Array,
                        surfaces: bool) -> _Candidates:
        """Refined extremes for an output grid (gx, gy) with temperatures `temp` (a fine grid
        serves as the samples; a coarse one joins `samples`), kept for the last
        `_GRID_CANDIDATES` grid sizes."""
        key = (gx.size, gy.size, surfaces)
        hit = self._grid_candidates.pop(key, None)
        if hit is None:
            here = [_Samples(gx, gy, temp)]
            if min(gx.size, gy.size) >= EXTREMES_SAMPLES:
                sets = here
            else:  # the order decides ties between equal samples
                sets = (self.samples() + here if self.model.problem.generation == 0.0
                        else here + self.samples())
            hit = _refined_candidates(self.model, sets, surfaces)
        self._grid_candidates[key] = hit  # most recent last
        while len(self._grid_candidates) > _GRID_CANDIDATES:
            del self._grid_candidates[next(iter(self._grid_candidates))]
        return hit

    def candidates(self, surfaces: bool) -> _Candidates:
        """Refined extremes of `samples` (with a scope per convection edge when `surfaces`)."""
        if surfaces not in self._candidates:
            self._candidates[surfaces] = _refined_candidates(self.model, self.samples(), surfaces)
        return self._candidates[surfaces]

    def extremes(self, surfaces: bool, x: _Array, y: _Array, temp: _Array) -> _Extremes:
        """`_pick_extremes` of `candidates` with the reported points (x, y, temp), m and degC.

        The extremes of the candidates alone are kept: points no hotter than the hottest body
        candidate and no colder than the coldest (the usual case) cannot change the choice,
        since a reported value enters after the body candidates and wins only when strictly
        more extreme (`max` keeps the first of equal values); NaN fails the test and takes
        the full choice."""
        cands = self.candidates(surfaces)
        kept = self._extremes.get(surfaces)
        if kept is None:
            kept = (_pick_extremes(self.model, cands, []), _body_range(cands))
            self._extremes[surfaces] = kept
        ext, (cold, hot) = kept
        if temp.size and not (float(temp.max()) <= hot and float(temp.min()) >= cold):
            return _pick_extremes(self.model, cands, [(x, y, temp)])
        return ext


class _Kept:
    """A kept core and the bytes it held when last measured (updated in place by
    `CoreCache.settle`, so that no second lookup of the definition is needed)."""

    __slots__ = ("core", "size")

    def __init__(self, core: PlateCore, size: int) -> None:
        self.core = core
        self.size = size


class CoreCache:
    """Least recently used `PlateCore`s by definition: at most `entries` of them holding at
    most `max_bytes` of tables. Sizes are taken again after every use, since a core's tables
    grow when a request needs more terms."""

    def __init__(self, entries: int, max_bytes: int) -> None:
        self.entries = entries
        self.max_bytes = max_bytes
        # a plain dict keeps insertion order (least recently used first) and, unlike
        # OrderedDict, iterates its values without hashing every key again (a definition's
        # hash walks all its fields)
        self._cores: dict[PlateProblem, _Kept] = {}
        self._bytes = 0
        # the definition last returned by `get` and its entry: `settle` of the same object
        # then needs no lookup
        self._last: tuple[PlateProblem, _Kept] | None = None
        self.hits = 0
        self.misses = 0

    def get(self, definition: PlateProblem) -> PlateCore:
        """The core of `definition`, built (and possibly raising) when not kept."""
        self._last = None
        kept = self._cores.pop(definition, None)
        if kept is not None:
            self._cores[definition] = kept  # now the most recently used
            self.hits += 1
        else:
            self.misses += 1
            kept = _Kept(PlateCore(definition), 0)
            self._cores[definition] = kept
        self._last = (definition, kept)
        return kept.core

    def settle(self, definition: PlateProblem) -> None:
        """Measure `definition`'s core after a use, then drop the least recently used cores
        until both bounds hold (the core itself too, when it alone is over `max_bytes`)."""
        last, self._last = self._last, None
        # the entry returned by `get` is still kept: only `settle` and `clear` drop entries,
        # and both forget it
        kept = last[1] if last is not None and last[0] is definition else \
            self._cores.get(definition)
        if kept is not None:
            kept.size = kept.core.nbytes()
        # summed afresh (at most `entries` values), so a use interrupted by the time budget
        # cannot leave the total wrong
        self._bytes = sum(k.size for k in self._cores.values())
        while self._cores and (len(self._cores) > self.entries or self._bytes > self.max_bytes):
            oldest = next(iter(self._cores))
            self._bytes -= self._cores.pop(oldest).size

    def nbytes(self) -> int:
        return self._bytes

    def __len__(self) -> int:
        return len(self._cores)

    def clear(self) -> None:
        self._cores.clear()
        self._bytes = 0
        self._last = None
        self.hits = self.misses = 0


#: The process's cores (see `CORE_CACHE_SIZE`; `CoreCache.clear` empties it).
CORES = CoreCache(CORE_CACHE_SIZE, CORE_CACHE_BYTES)


# =========================================================================== entry points


def temperature_at(problem: PlateProblem, x: _Array, y: _Array) -> _Array:
    """Temperatures (degC) at points (x, y) m, vectorised; terms chosen per point."""
    shape = np.broadcast(np.asarray(x), np.asarray(y)).shape
    xb, yb = np.broadcast_arrays(np.asarray(x, float), np.asarray(y, float))
    temp, _, _ = PlateSeries(problem).temperature(xb.ravel(), yb.ravel())
    return temp.reshape(shape)


def solve_plate(problem: PlateProblem) -> PlateResult:
    """Steady 2D conduction in a rectangle by superposed eigenfunction series.

    Parameters
    ----------
    problem : PlateProblem
        Geometry (m), conductivity (W/(m K)), generation (W/m^3), edge conditions, output points
        and grid, tolerance (K), max_terms and limits.

    Returns
    -------
    PlateResult
        Temperatures at the points and on the grid (degC), heat flow per edge (W/m, positive into
        the body, None where unbounded), generation heat (W/m), energy balance, hottest and
        coldest locations, a `Convergence` record (``converged``; ``max_terms`` when max_terms
        cannot meet atol somewhere, with the error estimate achieved; ``non_finite``), a safety
        report and warnings.

    Raises
    ------
    IllPosedError
        ``physics-rejected`` for all-flux edges whose heat input does not balance, or invalid
        inputs; ``not-unique`` for all-flux edges that balance.

    Notes
    -----
    Governing equation (Poisson): k (T_xx + T_yy) + g = 0 on 0 < x < W, 0 < y < H.
    Edge conditions with t the inward distance: fixed temperature T = T_e(s); flux
    -k dT/dt = q; convection -k dT/dt = h (T_amb - T); insulated q = 0.

    T = T_p + Pi + sum_E U_E: T_p a parabola in x or y carrying g and meeting the homogeneous
    conditions of two opposite edges; Pi a harmonic polynomial cancelling the remaining data at
    corners with a fixed-temperature neighbour; U_E the separated solution with the remaining
    data on edge E and homogeneous conditions on the other three (superposition):
    U_E = sum c_n sin(mu_n s / L + phi_n) R_n(t), the eigenvalues from the two adjacent edges'
    kinds (fixed, insulated, convective with Bi = h L / k), R_n the hyperbolic combination
    meeting the opposite edge's condition, normalised to the data operator, evaluated with
    decaying exponentials only. c_n from orthogonality with exact integrals. Terms per point from
    the tail bound of `tail_bound`, sharing atol equally among the series; points on
    fixed-temperature edges return the edge data.

    Edge heat flows are integrated term by term from every series (derivatives for fixed
    temperatures, h (T_amb - T) for convection; flux edges carry their data), each series
    summed until its partial sums settle or, for algebraic tails, extrapolated (Richardson),
    so the energy balance is an independent check. Where two different fixed temperatures meet
    at a corner the two edge flows are unbounded and reported as None.

    Extremes: samples where an extreme can lie -- without generation only the flux and
    convection edges (maximum principle and Hopf's lemma; fixed-temperature edges give their
    data exactly), with generation a 33 x 33 grid; or the output grid -- then a few rounds of
    a shrinking stencil with Newton steps around the best samples, evaluated with the term
    counts (and tail bounds) of the samples' neighbourhood, compared with the reported points
    and grid and the exact fixed-temperature data. The error estimate covers every reported
    temperature: points, grid and extremes.

    References
    ----------
    Carslaw, H. S. and Jaeger, J. C., *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959:
    steady temperatures in a rectangle by superposed one-edge Fourier series (from memory).
    Ozisik, M. N., *Heat Conduction*, 2nd ed., Wiley, 1993: separation of variables in
    rectangular coordinates and the eigenfunctions and eigenvalues for the nine combinations of
    end conditions (from memory).
    """
    _validate(problem)  # the points and grid; the rest again in the definition's model
    definition = definition_of(problem)
    core = CORES.get(definition)
    try:
        return _solve_with(problem, core)
    finally:
        CORES.settle(definition)


def _solve_with(problem: PlateProblem, core: PlateCore) -> PlateResult:
    """`solve_plate` for a problem whose definition's core is given."""
    p = problem
    model, flows = core.model, core.flows
    w, h = p.width, p.height
    warnings: list[str] = []

    # clipped into the plate (validated to within rounding of it); minimum/maximum: np.clip's
    # wrapper costs more than the points
    pts = np.minimum(np.maximum(np.asarray(p.points, dtype=float).reshape(-1, 2), 0.0), (w, h))
    npts = pts.shape[0]
    point_t, point_err = np.zeros(0), np.zeros(0)
    most = 0
    if npts:
        point_t, point_err, terms = core.evaluate_points(pts[:, 0], pts[:, 1])
        most = int(terms.max(initial=0))
    errors = [float(point_err.max(initial=0.0))]
    reported = [(pts[:, 0], pts[:, 1], point_t)]
    surfaces = p.limits.max_surface_temperature is not None
    gx = gy = grid_t = None
    if p.grid is None:
        ext = core.extremes(surfaces, pts[:, 0], pts[:, 1], point_t)
    else:
        gx = np.linspace(0.0, w, int(p.grid[0]))
        gy = np.linspace(0.0, h, int(p.grid[1]))
        grid = model._grid(gx, gy)
        grid_t = grid.temp
        errors.append(grid.error)
        most = max(most, grid.most)
        xx, yy = np.meshgrid(gx, gy)
        reported.append((xx.ravel(), yy.ravel(), grid_t.ravel()))
        ext = _pick_extremes(model, core.grid_candidates(gx, gy, grid_t, surfaces), reported)
    errors.append(ext.error)
    most = max(most, ext.most)
    error_estimate = max(errors)

    # balance
    gen = p.generation * w * h
    finite = [v for v in flows.values() if v is not None]
    if all(v is not None for v in flows.values()):
        net = float(sum(finite) + gen)
        big = max([abs(v) for v in finite] + [abs(gen)])
        balance = EnergyBalance(net, abs(net) / big if big > 0.0 else 0.0)
    else:
        balance = EnergyBalance(None, None)
        missing = [n for n in EDGE_NAMES if flows[n] is None]
        together = -(sum(finite) + gen)
        for cname, (_, jump) in model.plan.singular.items():
            warnings.append(
                f"corner {cname}: two different fixed temperatures meet ({abs(jump):.6g} K "
                "apart), so the heat flow through both edges there is unbounded; it is reported "
                "as null and the temperature at the corner point itself is the mean of the two")
        warnings.append(
            f"edges {', '.join(missing)} together take {together:.6g} W/m into the body (from "
            "the energy balance with the finite flows and generation, so the balance is not an "
            "independent check here)")
        for name in sorted(model.plan.slow):
            warnings.append(f"{name} edge: the heat flow is finite but its series converges too "
                            "slowly next to the singular corner to report; given as null")

    # safety
    safety = check_limits(p.limits, Scope("body", ext.hottest, ext.coldest), ext.surfaces)

    # convergence
    values = [point_t] + ([grid_t] if grid_t is not None else [])
    finite_all = all(np.all(np.isfinite(v)) for v in values) and math.isfinite(error_estimate)
    if not finite_all:
        conv = Convergence("non_finite", "a temperature or error bound is not finite",
                           terms=most, error_estimate=None, atol=model.atol)
    elif error_estimate > model.atol:
        conv = Convergence("max_terms", f"max_terms = {p.max_terms} leaves a tail bound of "
                           f"{error_estimate:.3g} K, above atol {model.atol:.3g} K",
                           terms=most, error_estimate=error_estimate, atol=model.atol)
        warnings.append(conv.message)
    else:
        conv = Convergence("converged", f"tail bound {error_estimate:.3g} K <= atol "
                           f"{model.atol:.3g} K with terms chosen per point",
                           terms=most, error_estimate=error_estimate, atol=model.atol)

    return PlateResult(
        method="series",
        point_coordinates=pts,
        point_temperatures=point_t,
        grid_x=gx,
        grid_y=gy,
        grid_temperature=grid_t,
        edge_heat_flow=EdgeHeatFlow(**flows),
        generation_heat=gen,
        energy_balance=balance,
        hottest=ext.hottest,
        coldest=ext.coldest,
        convergence=conv,
        safety=safety,
        warnings=tuple(warnings),
    )
