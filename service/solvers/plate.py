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
"""

from __future__ import annotations

import math
from collections.abc import Callable, Mapping
from dataclasses import dataclass, field
from types import MappingProxyType

import numpy as np
from scipy import optimize

from service.solvers.convergence import Convergence
from service.solvers.eigen import MAX_COUNT, pair_phase, pair_roots
from service.solvers.errors import IllPosedError
from service.solvers.safety import Limits, Location, SafetyReport, Scope, check_limits

EDGE_NAMES = ("bottom", "right", "top", "left")
EDGE_TYPES = ("temperature", "flux", "convection", "insulated")
#: Default relative tolerance: atol = DEFAULT_RTOL * the largest temperature difference.
DEFAULT_RTOL = 1e-6
#: Samples per direction used to locate the extremes when no output grid is asked.
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
        ``converged`` or ``max_terms`` (or ``non_finite``); `terms` is the largest count used at
        any point by any sub-problem, `error_estimate` the largest tail bound over the reported
        points (K).
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


# harmonic polynomials in scaled coordinates (u, v) = (x, y) / scale: value, d/du, d/dv
_HARMONIC: tuple[tuple[Callable[[_Array, _Array], _Array], ...], ...] = (
    (lambda u, v: np.ones_like(u), lambda u, v: np.zeros_like(u), lambda u, v: np.zeros_like(u)),
    (lambda u, v: u, lambda u, v: np.ones_like(u), lambda u, v: np.zeros_like(u)),
    (lambda u, v: v, lambda u, v: np.zeros_like(u), lambda u, v: np.ones_like(u)),
    (lambda u, v: u * u - v * v, lambda u, v: 2 * u, lambda u, v: -2 * v),
    (lambda u, v: u * v, lambda u, v: v, lambda u, v: u),
    (lambda u, v: u**3 - 3 * u * v * v, lambda u, v: 3 * u * u - 3 * v * v,
     lambda u, v: -6 * u * v),
    (lambda u, v: 3 * u * u * v - v**3, lambda u, v: 6 * u * v,
     lambda u, v: 3 * u * u - 3 * v * v),
    (lambda u, v: u**4 - 6 * u * u * v * v + v**4, lambda u, v: 4 * u**3 - 12 * u * v * v,
     lambda u, v: -12 * u * u * v + 4 * v**3),
    (lambda u, v: u**3 * v - u * v**3, lambda u, v: 3 * u * u * v - v**3,
     lambda u, v: u**3 - 3 * u * v * v),
)
_BASIS_DEGREE = np.array([0, 1, 1, 2, 2, 3, 3, 4, 4])


def _harmonic_basis(u: _Array, v: _Array) -> tuple[_Array, _Array, _Array]:
    """All basis values and derivatives, stacked along axis 0."""
    u, v = np.broadcast_arrays(np.asarray(u, float), np.asarray(v, float))
    return tuple(np.stack([f[i](u, v) for f in _HARMONIC]) for i in range(3))  # type: ignore


@dataclass(frozen=True)
class CornerPolynomial:
    """A harmonic polynomial (degree <= 4) in (x, y) / scale."""

    coefficients: _Array
    scale: float

    def _sum(self, which: int, x: _Array, y: _Array) -> _Array:
        u, v = np.broadcast_arrays(np.asarray(x, float) / self.scale,
                                   np.asarray(y, float) / self.scale)
        out = np.zeros(u.shape)
        for c, f in zip(self.coefficients, _HARMONIC, strict=True):
            if c != 0.0:
                out = out + c * f[which](u, v)
        return out

    def value(self, x: _Array, y: _Array) -> _Array:
        return self._sum(0, x, y)

    def gradient(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        return self._sum(1, x, y) / self.scale, self._sum(2, x, y) / self.scale


@dataclass(frozen=True)
class _Base:
    """T_p + Pi: the part of the solution known in closed form."""

    particular: Particular
    corner: CornerPolynomial

    def value(self, x: _Array, y: _Array) -> _Array:
        return self.particular.value(x, y) + self.corner.value(x, y)

    def gradient(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        gx1, gy1 = self.particular.gradient(x, y)
        gx2, gy2 = self.corner.gradient(x, y)
        return gx1 + gx2, gy1 + gy2


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
    rows_req: list[_Array] = []
    rhs_req: list[float] = []
    jump_carriers = {(cn, e) for cn, (e, _) in plan.singular.items()}
    for (hor, ver), cname in _CORNERS.items():
        for e, f in ((hor, ver), (ver, hor)):
            ce, cf = cond[e], cond[f]
            if cf.kind != "D":
                continue
            if (cname, e) in jump_carriers:
                continue
            end = _corner_end(e, f)
            length = _lengths(e, w, h)[0]
            x, y = _edge_point(e, np.array([0.0 if end == 0 else length]), w, h)
            val, du, dv = _harmonic_basis(x / scale, y / scale)
            nx, ny = _FRAMES[e].normal
            dn = (du * nx + dv * ny)[:, 0] / scale
            tp = float(particular.value(x, y)[0])
            gx, gy = particular.gradient(x, y)
            tpn = float(gx[0] * nx + gy[0] * ny)
            norm = k / scale + ce.film
            if ce.kind == "D":
                row, rhs = val[:, 0], _corner_temperature(ce, end) - tp
            elif ce.kind == "N":
                row, rhs = k * dn / norm, (ce.flux - k * tpn) / norm
            else:
                row = (k * dn + ce.film * val[:, 0]) / norm
                rhs = (ce.film * ce.ambient - k * tpn - ce.film * tp) / norm
            rows_req.append(row)
            rhs_req.append(rhs)
    weight = 0.25 ** _BASIS_DEGREE.astype(float)
    z = np.zeros(len(weight))
    if rows_req:
        z, *_ = np.linalg.lstsq(np.array(rows_req) * weight, np.array(rhs_req), rcond=None)
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
        """(TV(f), TV(f')) bounds over [0, 1] (triangle inequality over the two parts)."""
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


def _poly_variation(c: _Array) -> float:
    """Total variation of a polynomial on [0, 1]: |differences| between its values at 0, 1
    and the real roots of its derivative inside (0, 1)."""
    coef = [float(v) for v in c]
    while coef and coef[-1] == 0.0:
        coef.pop()
    if len(coef) <= 1:
        return 0.0
    d = [j * coef[j] for j in range(1, len(coef))]
    crit = [0.0, 1.0]
    if len(d) == 2:
        crit.append(-d[0] / d[1])
    elif len(d) > 2:
        r = np.roots(d[::-1])
        crit += [float(v.real) for v in r if abs(v.imag) < 1e-12]
    pts = sorted(v for v in crit if 0.0 <= v <= 1.0)
    vals = [_horner(coef, v) for v in pts]
    return float(sum(abs(b - a) for a, b in zip(vals, vals[1:], strict=False)))


def edge_data(problem: PlateProblem, cond: dict[str, _EdgeCondition], base: _Base,
              name: str) -> EdgeData:
    """Data left for the harmonic remainder U = T - T_p - Pi on edge `name`.

    D: U = T_edge - base; N: -k dU/dt = q - k d(base)/dn; R: -k dU/dt + h U = h T_amb -
    (k d(base)/dn + h base); t is the inward distance and n the outward normal.
    """
    w, h, k = problem.width, problem.height, problem.conductivity
    length = _lengths(name, w, h)[0]
    c = cond[name]
    # base is a polynomial of degree <= 4 along the edge: fit it exactly at 9 Chebyshev nodes
    sig = 0.5 - 0.5 * np.cos(np.pi * (np.arange(9) + 0.5) / 9)
    x, y = _edge_point(name, sig * length, w, h)
    nx, ny = _FRAMES[name].normal
    bval = base.value(x, y)
    gx, gy = base.gradient(x, y)
    bn = gx * nx + gy * ny
    if c.kind == "D":
        part, const = -bval, 0.0
    elif c.kind == "N":
        part, const = -k * bn, c.flux
    else:
        part, const = -(k * bn + c.film * bval), c.film * c.ambient
    poly = np.polynomial.polynomial.polyfit(sig, part, 4)
    poly[0] += const
    if c.kind == "D":
        assert c.profile_s is not None and c.profile_t is not None
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


def edge_eigenvalues(sub: SubProblem, count: int) -> tuple[_Array, _Array, _Array]:
    """Roots mu_n, phases phi_n and norms int_0^1 X_n^2 of the first `count` modes.

    The norm uses mu + phi_l + phi_r = n pi: 1/2 + (sin 2 phi_l + sin 2 phi_r) / (4 mu), a sum of
    non-negative terms (no cancellation for small mu), and 1 for the zero root.
    """
    (lk, lb), (rk, rb) = sub.start, sub.end
    mu = np.asarray(pair_roots(lk, rk, lb, rb, count))
    phase = pair_phase(lk, lb, mu)

    def sin2(kind: str, bi: float) -> _Array:
        if kind != "convective":
            return np.zeros_like(mu)
        return 2.0 * mu * bi / (mu * mu + bi * bi)

    with np.errstate(divide="ignore", invalid="ignore"):
        norm = 0.5 + (sin2(lk, lb) + sin2(rk, rb)) / (4.0 * mu)
    norm = np.where(mu == 0.0, 1.0, norm)
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


def edge_coefficients(sub: SubProblem, mu: _Array, phase: _Array, norm: _Array) -> _Array:
    """c_n = <f, X_n> / <X_n, X_n> with exact integrals of the polynomial and profile parts."""
    data = sub.data
    proj = np.tensordot(data.poly, _moments(np.array([0.0]), np.array([1.0]), mu, phase, 4)[:, 0],
                        axes=1)
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
    with np.errstate(divide="ignore", invalid="ignore"):
        bop = _data_operator(sub, lam, a, b, c0, s0)
        at_edge = (a * c0 + b * s0) / bop
        flux_edge = k * lam * (a * s0 + b * c0) / bop
        at_opp = 2.0 * a * half / bop
        flux_opp = -2.0 * k * lam * b * half / bop
        integral = (a * s0 + b * np.expm1(-lam * d) ** 2) / (lam * bop)
    if mu.size and mu[0] == 0.0:
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
    d = sub.data
    f0, f1 = abs(float(d(np.array(0.0)))), abs(float(d(np.array(1.0))))
    tv0, tv1 = d.variations()
    v2 = abs(d.derivative(0.0, 0)) + abs(d.derivative(1.0, 1)) + tv1
    return TailConstants(f0 + f1 + tv0, f0, f1, v2)


def _geometric_sum(p: int, n: _Array, tau: _Array) -> _Array:
    """Upper bound of sum_{m >= n} exp(-m pi tau) / m^p (inf where it diverges)."""
    e = np.exp(-n * math.pi * tau)
    with np.errstate(divide="ignore", invalid="ignore"):
        geo = e / (n**p * -np.expm1(-math.pi * tau))
    geo = np.where(tau > 0.0, geo, np.inf)
    if p >= 2:
        integral = e * (1.0 / n**p + 1.0 / ((p - 1) * n ** (p - 1)))
        return np.minimum(geo, integral)
    return geo


def tail_bound(sub: SubProblem, consts: TailConstants, terms: _Array, t: _Array) -> _Array:
    """Bound on |sum_{n > N} c_n X_n R_n(t)|, K, for each N in `terms` and each t.

    Tail modes have mu_n >= (n - 1) pi >= N pi. With |X_n| <= 1, |c_n| from `TailConstants` and
    |R_n(t)| <= F e^{-mu t / L} D(mu), F = (1 + e^{-2 N pi (depth - t)/L}) / (1 - e^{-2 N pi
    depth / L}), D = 1 (fixed-temperature data), L / (k mu) (flux data), 1 / (k mu / L + h)
    (convection data), the tail is a sum of e^{-m pi tau} / m^p, tau = t / L, bounded by
    `_geometric_sum`. Returns an array (len(t), len(terms)).
    """
    n = np.asarray(terms, float)[None, :]
    t = np.asarray(t, float)[:, None]
    tau = t / sub.length
    L, k = sub.length, sub.conductivity
    pi = math.pi
    fac = 2.0 * (1.0 + np.exp(-2.0 * n * pi * (sub.depth - t) / L)) / -np.expm1(
        -2.0 * n * pi * sub.depth / L)

    def cos_factor(end: tuple[str, float]) -> _Array:
        kind, bi = end
        if kind == "fixed":
            return np.ones_like(n)
        if kind == "insulated":
            return np.zeros_like(n)
        return np.minimum(1.0, bi / (n * pi))

    e_n = consts.f_start * cos_factor(sub.start) + consts.f_end * cos_factor(sub.end)

    def routes(extra: int) -> _Array:
        # extra = 0: D = 1; extra = 1: D = L / (k pi m)
        s = {p: _geometric_sum(p, n, tau) for p in (1 + extra, 2 + extra)}
        r1 = consts.v1 / pi * s[1 + extra]
        with np.errstate(invalid="ignore"):
            r2 = e_n / pi * s[1 + extra] + consts.v2 / pi**2 * s[2 + extra]
        r2 = np.where(np.isnan(r2), np.inf, r2)
        return np.minimum(r1, r2)

    with np.errstate(over="ignore", invalid="ignore"):
        if sub.kind == "D":
            body = routes(0)
        elif sub.kind == "N":
            body = L / (k * pi) * routes(1)
        else:
            body = np.minimum(L / (k * pi) * routes(1), routes(0) / (k * n * pi / L + sub.film))
        out = fac * body
    return np.where(np.isnan(out), np.inf, out)


def _ladder(max_terms: int) -> _Array:
    """Candidate term counts: 1..8 then about 25 % steps, ending at max_terms."""
    vals = list(range(1, 9))
    while vals[-1] < max_terms:
        vals.append(int(math.ceil(vals[-1] * 1.25)))
    return np.array(sorted({min(v, max_terms) for v in vals}), dtype=int)


def choose_terms(sub: SubProblem, consts: TailConstants, t: _Array, budget: float,
                 max_terms: int) -> tuple[_Array, _Array]:
    """Truncation rule: the smallest ladder count whose tail bound is <= budget, per t.

    Returns (terms, bound); where even max_terms misses the budget, terms = max_terms and the
    bound is the (larger) error estimate achieved.
    """
    ladder = _ladder(max_terms)
    bounds = tail_bound(sub, consts, ladder, t)
    ok = bounds <= budget
    idx = np.where(ok.any(axis=1), ok.argmax(axis=1), ladder.size - 1)
    return ladder[idx], bounds[np.arange(len(idx)), idx]


def _buckets(terms: _Array) -> list[tuple[int, _Array]]:
    """Group indices by term count rounded up to a power of two (or max), few groups.

    Each group is evaluated with its largest count: more terms than a point needs only lowers
    its tail, so the bound reported for the point still holds.
    """
    out = []
    key = np.where(terms > 0, np.ceil(np.log2(np.maximum(terms, 1))), -1)
    for kv in np.unique(key):
        if kv < 0:
            continue
        sel = np.nonzero(key == kv)[0]
        out.append((int(terms[sel].max()), sel))
    return out


def sum_series(sub: SubProblem, modes: Modes, sigma: _Array, t: _Array, terms: _Array) -> _Array:
    """U(sigma_p, t_p) = sum_{n <= N} c_n X_n(sigma_p) R_n(t_p) at scattered points.

    Points are grouped by term count (`_buckets`) and each group is one product of the sines
    and perpendicular ratios with the coefficient vector.
    """
    out = np.zeros(sigma.shape)
    for nt, sel in _buckets(terms):
        step = max(1, _BLOCK // nt)
        mu, ph, c = modes.mu[:nt], modes.phase[:nt], modes.coef[:nt]
        for i in range(0, sel.size, step):
            p = sel[i:i + step]
            x = np.sin(sigma[p, None] * mu[None, :] + ph[None, :])
            r = perpendicular_ratio(sub, mu, t[p])
            out[p] = (x * r) @ c
    return out


def sum_series_grid(sub: SubProblem, modes: Modes, sigma: _Array, t: _Array,
                    terms: _Array) -> _Array:
    """U on the tensor grid (t rows, sigma columns): per row group one matrix product
    (R[rows] * c) @ X, the sines X computed once."""
    out = np.zeros((t.size, sigma.size))
    nmax = int(terms.max(initial=0))
    if nmax <= 0:
        return out
    xs = np.sin(modes.mu[:nmax, None] * sigma[None, :] + modes.phase[:nmax, None])
    for nt, rows in _buckets(terms):
        step = max(1, _BLOCK // nt)
        for i in range(0, rows.size, step):
            r = rows[i:i + step]
            out[r] = (perpendicular_ratio(sub, modes.mu[:nt], t[r]) * modes.coef[None, :nt]) \
                @ xs[:nt]
    return out


# =========================================================================== the assembled model


def _root_count(n: int, max_terms: int) -> int:
    return int(min(max_terms, max(64, 1 << max(0, int(n - 1).bit_length()))))


class _Series:
    """One sub-problem with its modes computed on demand (instance cache, per solve)."""

    def __init__(self, sub: SubProblem, consts: TailConstants, max_terms: int) -> None:
        self.sub = sub
        self.consts = consts
        self.max_terms = max_terms
        self._modes: Modes | None = None

    def modes(self, n: int) -> Modes:
        if self._modes is None or self._modes.count < n:
            count = _root_count(n, self.max_terms)
            mu, ph, norm = edge_eigenvalues(self.sub, count)
            self._modes = Modes(mu, ph, norm, edge_coefficients(self.sub, mu, ph, norm))
        return self._modes


class PlateSeries:
    """A solved plate: base (T_p + Pi) plus one series per edge with data.

    `temperature(x, y)` evaluates anywhere with terms chosen per point; `grid(x, y)` evaluates on
    a tensor grid with terms chosen per row. Both return (temperature, error bound, terms).
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
        self.base = _Base(self.particular, self.corner)
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

    # ------------------------------------------------------------------ evaluation
    def _fixed_edges(self, x: _Array, y: _Array) -> tuple[_Array, _Array]:
        """Mask of points on fixed-temperature edges and their exact boundary values."""
        w, h = self.problem.width, self.problem.height
        tol = 1e-12 * max(w, h)
        on = np.zeros(x.shape, bool)
        total = np.zeros(x.shape)
        count = np.zeros(x.shape)
        for name in EDGE_NAMES:
            c = self.cond[name]
            if c.kind != "D":
                continue
            s, t = _to_local(name, x, y, w, h)
            hit = np.abs(t) <= tol
            if np.any(hit):
                total[hit] += c.temperature(s[hit])
                count[hit] += 1
                on |= hit
        with np.errstate(invalid="ignore", divide="ignore"):
            value = np.where(count > 0, total / np.maximum(count, 1), 0.0)
        return on, value

    def temperature(self, x: _Array, y: _Array,
                    fixed_terms: list[int] | None = None) -> tuple[_Array, _Array, int]:
        """Temperatures (degC), error bounds (K) and the most terms used, at points (x, y).

        Terms are chosen per point by `choose_terms`; `fixed_terms` (one count per series)
        skips that choice for fast repeated evaluation (the error bounds are then not computed
        and returned as NaN).
        """
        x = np.asarray(x, float).ravel()
        y = np.asarray(y, float).ravel()
        w, h = self.problem.width, self.problem.height
        on, exact = self._fixed_edges(x, y)
        temp = self.base.value(x, y)
        err = np.zeros(x.shape) if fixed_terms is None else np.full(x.shape, np.nan)
        most = 0
        for i, ser in enumerate(self.series):
            sub = ser.sub
            s, t = _to_local(sub.edge, x, y, w, h)
            t = np.maximum(t, 0.0)
            if fixed_terms is None:
                terms, bound = choose_terms(sub, ser.consts, t, self.budget,
                                            self.problem.max_terms)
                err = err + np.where(on, 0.0, bound)
            else:
                terms = np.full(x.shape, fixed_terms[i])
            terms = np.where(on, 0, terms)
            if terms.size and terms.max() > 0:
                modes = ser.modes(int(terms.max()))
                temp = temp + sum_series(sub, modes, np.clip(s / sub.length, 0.0, 1.0), t, terms)
                most = max(most, int(terms.max()))
        temp = np.where(on, exact, temp)
        return temp, np.where(on, 0.0, err + self.skipped), most

    def terms_in_box(self, x0: float, x1: float, y0: float, y1: float) -> list[int]:
        """Per series, the most terms any point of the box [x0, x1] x [y0, y1] needs."""
        w, h = self.problem.width, self.problem.height
        xs, ys = np.array([x0, x1, x0, x1]), np.array([y0, y0, y1, y1])
        out = []
        for ser in self.series:
            _, t = _to_local(ser.sub.edge, xs, ys, w, h)
            t = np.array([max(float(t.min()), 0.0)])
            out.append(int(choose_terms(ser.sub, ser.consts, t, self.budget,
                                        self.problem.max_terms)[0][0]))
        return out

    def point_function(self, terms: list[int]) -> Callable[[_Array, _Array], _Array]:
        """A fast evaluator T(x, y) (arrays) with fixed term counts (one per series).

        Same sums as `temperature` with the per-mode constants precomputed, for the repeated
        calls of a local search; fixed-temperature edges return their data.
        """
        w, h = self.problem.width, self.problem.height
        parts = []
        for ser, n in zip(self.series, terms, strict=True):
            if n <= 0:
                continue
            sub = ser.sub
            modes = ser.modes(n)
            mu, ph, c = modes.mu[:n], modes.phase[:n], modes.coef[:n]
            lam = mu / sub.length
            a, b = _kind_ab(*sub.opposite, lam)
            c0, s0 = 1.0 + np.exp(-2.0 * lam * sub.depth), -np.expm1(-2.0 * lam * sub.depth)
            with np.errstate(divide="ignore", invalid="ignore"):
                scale = c / _data_operator(sub, lam, a, b, c0, s0)
            linear: tuple[float, float] | None = None
            if mu[0] == 0.0:
                y0, bop = _linear_mode(sub)
                a0 = float(y0(np.array(0.0)))
                linear = (c[0] * a0 / bop, c[0] * (float(y0(np.array(1.0))) - a0) / bop)
                scale = scale.copy()
                scale[0] = 0.0
            parts.append((sub, mu, ph, lam, scale * a, scale * b, linear))

        def temperature(x: _Array, y: _Array) -> _Array:
            x = np.atleast_1d(np.asarray(x, float))
            y = np.atleast_1d(np.asarray(y, float))
            on, exact = self._fixed_edges(x, y)
            total = self.base.value(x, y)
            for sub, mu, ph, lam, ca, cb, linear in parts:
                sv, tv = _to_local(sub.edge, x, y, w, h)
                tv = np.maximum(tv, 0.0)[:, None]
                u = sub.depth - tv
                e_t = np.exp(-lam * tv)
                ch = e_t + np.exp(-lam * (sub.depth + u))
                sh = -e_t * np.expm1(-2.0 * lam * u)
                xs = np.sin(mu * np.clip(sv / sub.length, 0.0, 1.0)[:, None] + ph)
                total = total + np.sum(xs * (ca * ch + cb * sh), axis=1)
                if linear is not None:
                    total = total + linear[0] + linear[1] * u[:, 0]
            return np.where(on, exact, total)

        return temperature

    def grid(self, gx: _Array, gy: _Array) -> tuple[_Array, _Array, int]:
        """Temperatures (ny, nx), per-point error bounds and most terms on a tensor grid."""
        w, h = self.problem.width, self.problem.height
        xx, yy = np.meshgrid(gx, gy)
        on, exact = self._fixed_edges(xx.ravel(), yy.ravel())
        on, exact = on.reshape(xx.shape), exact.reshape(xx.shape)
        temp = self.base.value(xx, yy)
        err = np.zeros(xx.shape)
        most = 0
        for ser in self.series:
            sub = ser.sub
            f = _FRAMES[sub.edge]
            along = gx if f.along_x else gy
            across = gy if f.along_x else gx
            t = np.maximum((h if f.along_x else w) - across if f.far else across, 0.0)
            terms, bound = choose_terms(sub, ser.consts, t, self.budget, self.problem.max_terms)
            if sub.kind == "D":  # the data edge's own row is returned exactly
                terms = np.where(t <= 1e-12 * max(w, h), 0, terms)
                bound = np.where(terms == 0, 0.0, bound)
            if terms.max(initial=0) > 0:
                modes = ser.modes(int(terms.max()))
                u = sum_series_grid(sub, modes, np.clip(along / sub.length, 0.0, 1.0), t, terms)
                temp = temp + (u if f.along_x else u.T)
                most = max(most, int(terms.max()))
            err = err + (bound[:, None] if f.along_x else bound[None, :])
        temp = np.where(on, exact, temp)
        err = np.where(on, 0.0, err + self.skipped)
        return temp, err, most

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
        in blocks of 4x more terms until its partial sums over the last half of the block vary
        by less than rtol times `flow_scale` (or max_terms is reached). Edges touching a singular
        corner are None (unbounded), as are the rare edges whose flow series would only converge
        conditionally next to one.
        """
        p = self.problem
        w, h, k = p.width, p.height, p.conductivity
        tol = rtol * self.flow_scale() / max(1, len(self.series))
        out: dict[str, float | None] = {}
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
            gx, gy = self.base.gradient(x, y)
            if c.kind == "D":
                total = float(np.sum(0.5 * length * gl_w * k * (gx * nx + gy * ny)))
            else:
                total = float(np.sum(0.5 * length * gl_w * self.base.value(x, y)))
            for ser in self.series:
                scale = 1.0 if c.kind == "D" else c.film
                total += self._sum_flow_series(ser, name, c.kind, tol / scale)
            out[name] = total if c.kind == "D" else c.film * (c.ambient * length - total)
        return out

    def _sum_flow_series(self, ser: _Series, name: str, kind: str, tol: float) -> float:
        """Sum one flow series in blocks of 256, 1024, 4096, ... terms.

        Stops when the partial sums over the block's last half vary by <= tol, or when the
        differences of the partial sums S(N/64), S(N/16), S(N/4), S(N) shrink by a steady factor
        r in [3, 20] (an algebraic tail ~ N^-p, the usual case next to a corner) and the
        Richardson correction d / (r - 1) times the change of r (at least 1 %) is <= tol; then
        the corrected value is returned. Otherwise sums max_terms terms.
        """
        max_terms = self.problem.max_terms
        count = min(256, max_terms)
        while True:
            part = np.cumsum(self._series_edge_terms(ser, name, kind, count))
            spread = float(np.max(np.abs(part[count // 2:] - part[-1]), initial=0.0))
            if spread <= tol:
                return float(part[-1])
            if count >= 1024:
                # S(N/64), S(N/16), S(N/4), S(N): differences shrinking by a steady factor r
                # mean an algebraic tail ~ N^-p, r = 4^p; its sum is d / (r - 1) (Richardson)
                s = part[[count // 64 - 1, count // 16 - 1, count // 4 - 1, count - 1]]
                d = np.diff(s)
                if d[1] != 0.0 and d[2] != 0.0:
                    r0, r1 = d[0] / d[1], d[1] / d[2]
                    misfit = max(abs(r1 / r0 - 1.0), 1e-2)
                    if 3.0 <= r1 <= 20.0 and abs(d[2] / (r1 - 1.0)) * misfit <= tol:
                        return float(s[3] + d[2] / (r1 - 1.0))
            if count >= max_terms:
                return float(part[-1])
            count = min(4 * count, max_terms)

    def _series_edge_terms(self, ser: _Series, name: str, kind: str, count: int) -> _Array:
        """Terms of int over edge `name` of q_in (kind D, W/m) or of U (kind R, K m)."""
        sub = ser.sub
        modes = ser.modes(count)
        mu, ph, c = modes.mu[:count], modes.phase[:count], modes.coef[:count]
        perp = perpendicular_values(sub, mu)
        f = _FRAMES[sub.edge]
        k, length = sub.conductivity, sub.length
        with np.errstate(divide="ignore", invalid="ignore"):
            # int_0^1 X_n = (cos phi - cos(mu + phi)) / mu = 2 sin(mu/2 + phi) sin(mu/2) / mu
            along = np.where(mu == 0.0, np.sin(ph),
                             2.0 * np.sin(0.5 * mu + ph) * np.sin(0.5 * mu) / mu)
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
        return c * terms


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
        x, y = _edge_point(name, s, p.width, p.height)
        for xi, yi, si in zip(x, y, s, strict=True):
            out.append((float(c.temperature(np.array(si))), float(xi), float(yi)))
    return out


def _refine(model: PlateSeries, x0: float, y0: float, sign: float, hx: float,
            hy: float) -> tuple[float, float, float]:
    """Local search for a maximum (sign = +1) or minimum (sign = -1) near the sample (x0, y0).

    On a non-fixed edge the search runs along the edge (scipy bounded scalar minimisation);
    inside, over the neighbouring cells (scipy L-BFGS-B with bounds). The search uses the term
    counts the box needs, fixed; the point found is evaluated again with terms chosen by the
    truncation rule. Returns (T, x, y).
    """
    p = model.problem
    w, h = p.width, p.height
    tol = 1e-12 * max(w, h)
    on_x = abs(x0) <= tol or abs(x0 - w) <= tol
    on_y = abs(y0) <= tol or abs(y0 - h) <= tol
    lo_x, hi_x = max(0.0, x0 - hx), min(w, x0 + hx)
    lo_y, hi_y = max(0.0, y0 - hy), min(h, y0 + hy)
    if on_x and on_y:
        return float(model.temperature(np.array([x0]), np.array([y0]))[0][0]), x0, y0
    if on_x:
        lo_x = hi_x = x0
    if on_y:
        lo_y = hi_y = y0
    evaluate = model.point_function(model.terms_in_box(lo_x, hi_x, lo_y, hi_y))

    def temp(x: float, y: float) -> float:
        return float(evaluate(np.array([x]), np.array([y]))[0])

    if on_x or on_y:
        if on_y:
            res = optimize.minimize_scalar(lambda v: -sign * temp(v, y0),
                                           bounds=(lo_x, hi_x), method="bounded",
                                           options={"xatol": 1e-4 * hx})
            xb, yb = float(res.x), y0
        else:
            res = optimize.minimize_scalar(lambda v: -sign * temp(x0, v),
                                           bounds=(lo_y, hi_y), method="bounded",
                                           options={"xatol": 1e-4 * hy})
            xb, yb = x0, float(res.x)
    else:
        # value and forward-difference gradient from one vectorised call (three points),
        # stepping inwards at the box's upper bounds
        dx, dy = 1e-7 * max(w, h), 1e-7 * max(w, h)

        def fun_grad(v: _Array) -> tuple[float, _Array]:
            sx = dx if v[0] + dx <= hi_x else -dx
            sy = dy if v[1] + dy <= hi_y else -dy
            f = -sign * evaluate(np.array([v[0], v[0] + sx, v[0]]),
                                 np.array([v[1], v[1], v[1] + sy]))
            return float(f[0]), np.array([(f[1] - f[0]) / sx, (f[2] - f[0]) / sy])

        res = optimize.minimize(fun_grad, np.array([x0, y0]), jac=True, method="L-BFGS-B",
                                bounds=[(lo_x, hi_x), (lo_y, hi_y)], options={"maxiter": 50})
        xb, yb = float(res.x[0]), float(res.x[1])
    found = model.temperature(np.array([x0, xb]), np.array([y0, yb]))[0]
    return (float(found[1]), xb, yb) if sign * found[1] > sign * found[0] else \
        (float(found[0]), x0, y0)


def _extreme(model: PlateSeries, xs: _Array, ys: _Array, ts: _Array, sign: float,
             hx: float, hy: float, with_data: bool = True) -> Location:
    """Hottest (sign = +1) or coldest (-1) of the samples, refined locally, and compared with
    the exact fixed-temperature data (`with_data`)."""
    p = model.problem
    i = int(np.argmax(sign * ts))
    best = (float(ts[i]), float(xs[i]), float(ys[i]))
    on_fixed, _ = model._fixed_edges(np.array([best[1]]), np.array([best[2]]))
    if not on_fixed[0]:
        best = _refine(model, best[1], best[2], sign, hx, hy)
    if with_data:
        for cand in _boundary_candidates(model):
            if sign * cand[0] >= sign * best[0]:  # exact data wins ties
                best = cand
    return Location(best[0], describe(best[1], best[2], p.width, p.height), (best[1], best[2]))


def _edge_scope(model: PlateSeries, name: str, sx: _Array, sy: _Array, st: _Array) -> Scope:
    """Extremes along one edge from the sample grid's row or column, refined along the edge."""
    p = model.problem
    f = _FRAMES[name]
    if f.along_x:
        t = st[-1 if f.far else 0, :]
        x, y = sx, np.full_like(sx, p.height if f.far else 0.0)
        hx, hy = float(sx[1] - sx[0]), 0.0
    else:
        t = st[:, -1 if f.far else 0]
        x, y = np.full_like(sy, p.width if f.far else 0.0), sy
        hx, hy = 0.0, float(sy[1] - sy[0])
    hot = _extreme(model, x, y, t, 1.0, hx, hy, with_data=False)
    cold = _extreme(model, x, y, t, -1.0, hx, hy, with_data=False)
    return Scope(f"{name} edge", hot, cold)


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

    Extremes: the output grid (or a 33 x 33 sample grid) and the points, then a local bounded
    search (scipy) around the best sample, and the exact fixed-temperature data.

    References
    ----------
    Carslaw, H. S. and Jaeger, J. C., *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959:
    steady temperatures in a rectangle by superposed one-edge Fourier series (from memory).
    Ozisik, M. N., *Heat Conduction*, 2nd ed., Wiley, 1993: separation of variables in
    rectangular coordinates and the eigenfunctions and eigenvalues for the nine combinations of
    end conditions (from memory).
    """
    model = PlateSeries(problem)
    p = problem
    w, h = p.width, p.height
    warnings: list[str] = []

    pts = np.asarray(p.points, dtype=float).reshape(-1, 2)
    pts = np.column_stack((np.clip(pts[:, 0], 0.0, w), np.clip(pts[:, 1], 0.0, h)))
    point_t, point_err, most = model.temperature(pts[:, 0], pts[:, 1])
    errs = [point_err]
    gx = gy = grid_t = None
    if p.grid is not None:
        gx = np.linspace(0.0, w, int(p.grid[0]))
        gy = np.linspace(0.0, h, int(p.grid[1]))
        grid_t, grid_err, gmost = model.grid(gx, gy)
        errs.append(grid_err.ravel())
        most = max(most, gmost)
        sx, sy, st = gx, gy, grid_t
    else:
        sx = np.linspace(0.0, w, EXTREMES_SAMPLES)
        sy = np.linspace(0.0, h, EXTREMES_SAMPLES)
        st, sample_err, smost = model.grid(sx, sy)
        # the samples feed the reported extremes, so their bounds count too
        errs.append(sample_err.ravel())
        most = max(most, smost)
    err_all = np.concatenate(errs) if errs else np.zeros(0)
    error_estimate = float(err_all.max(initial=0.0))

    # extremes: samples (grid and points), then local refinement, then exact boundary data
    xx, yy = np.meshgrid(sx, sy)
    cx = np.concatenate((xx.ravel(), pts[:, 0]))
    cy = np.concatenate((yy.ravel(), pts[:, 1]))
    ct = np.concatenate((st.ravel(), point_t))
    hx, hy = float(sx[1] - sx[0]), float(sy[1] - sy[0])
    hottest = _extreme(model, cx, cy, ct, 1.0, hx, hy)
    coldest = _extreme(model, cx, cy, ct, -1.0, hx, hy)

    # flows and balance
    flows = model.edge_heat_flows()
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
    body = Scope("body", hottest, coldest)
    surfaces = [_edge_scope(model, n, sx, sy, st) for n in EDGE_NAMES
                if model.cond[n].kind == "R"]
    safety = check_limits(p.limits, body, surfaces)

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
        hottest=hottest,
        coldest=coldest,
        convergence=conv,
        safety=safety,
        warnings=tuple(warnings),
    )
