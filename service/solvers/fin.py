"""Extended surfaces: straight, pin and annular fins of uniform thickness, and fin arrays.

Exact one-dimensional solutions of the fin equation with a convective, insulated, infinite or
fixed-temperature tip. Hyperbolic functions are written with exp(-x) only, and the annular
fin's Bessel functions in scaled form (scipy.special.ive, kve), so nothing overflows however
long or thick the fin.

Stages: `validate_problem` -> `fin_geometry` (areas, perimeter, fin parameter m) ->
`straight_fin_excess`/`straight_fin_heat_flow` or `annular_coefficients`/`annular_excess`/
`annular_heat_flow` -> efficiency, effectiveness, array totals, profile, safety.

References
----------
.. [1] Incropera, DeWitt, Bergman, Lavine, *Fundamentals of Heat and Mass Transfer*, 6th ed.,
   section 3.6, Table 3.4 (uniform cross-section fins), Table 3.5 and Eq. 3.96 (annular fin
   efficiency), Eqs. 3.102-3.104 (arrays, overall surface efficiency) (from memory).
.. [2] A. D. Kraus, A. Aziz, J. Welty, *Extended Surface Heat Transfer*, Wiley (2001),
   chapters 2-3 (from memory).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy import optimize, special

from .convergence import Convergence
from .errors import IllPosedError
from .safety import Limits, Location, SafetyReport, Scope, check_limits

SHAPES = ("straight", "pin", "annular")
TIPS = ("convective", "insulated", "infinite", "temperature")

#: Profile extent for infinite fins without a length, in units of 1/m (exp(-5) = 0.7 %).
INFINITE_PROFILE_DECAYS = 5.0


@dataclass(frozen=True)
class FinProblem:
    """One fin (or an array of `count` identical fins on a base).

    Attributes
    ----------
    shape : {"straight", "pin", "annular"}
    conductivity : float
        W/(m K).
    film_coefficient : float
        W/(m^2 K), on the fin sides (and the exposed base of an array).
    base_temperature, ambient : float
        degC.
    tip : {"convective", "insulated", "infinite", "temperature"}
    tip_temperature : float or None
        degC, for ``tip = "temperature"``.
    tip_film_coefficient : float or None
        W/(m^2 K) on the tip face (default: `film_coefficient`).
    length : float or None
        m, straight and pin fins (optional for an infinite tip: then only the profile uses it).
    thickness : float or None
        m, straight and annular fins.
    width : float
        m, straight fins (default 1 m; the side edges are included in the perimeter).
    diameter : float or None
        m, pin fins.
    inner_radius, outer_radius : float or None
        m, annular fins (outer radius optional for an infinite tip).
    count : int
        Number of fins in an array.
    base_area : float
        Exposed (unfinned) base area between the fins, m^2.
    profile_points : int
    limits : Limits
    """

    shape: str
    conductivity: float
    film_coefficient: float
    base_temperature: float
    ambient: float
    tip: str = "convective"
    tip_temperature: float | None = None
    tip_film_coefficient: float | None = None
    length: float | None = None
    thickness: float | None = None
    width: float = 1.0
    diameter: float | None = None
    inner_radius: float | None = None
    outer_radius: float | None = None
    count: int = 1
    base_area: float = 0.0
    profile_points: int = 51
    limits: Limits = Limits()


@dataclass(frozen=True)
class FinProfile:
    """Positions (m: distance from the base, or radius for annular fins) and temperatures
    (degC)."""

    positions: np.ndarray
    temperatures: np.ndarray


@dataclass(frozen=True)
class FinArrayResult:
    """Array of `count` fins on a base (Incropera Eqs. 3.102-3.104, from memory).

    Attributes
    ----------
    count : int
    base_area : float
        Exposed base area, m^2.
    fin_area : float or None
        count * area of one fin, m^2 (None for infinite fins).
    total_area : float or None
        fin_area + base_area, m^2.
    heat_flow : float
        count * fin heat flow + h base_area (T_b - T_amb), W.
    overall_efficiency : float or None
        heat_flow / (h total_area (T_b - T_amb)) = 1 - (fin_area / total_area)(1 - efficiency).
    effectiveness : float or None
        heat_flow over the heat flow of the bare base (base_area plus the fin footprints).
    """

    count: int
    base_area: float
    fin_area: float | None
    total_area: float | None
    heat_flow: float
    overall_efficiency: float | None
    effectiveness: float | None


@dataclass(frozen=True)
class FinResult:
    """Steady fin.

    Attributes
    ----------
    shape, tip : str
    heat_flow : float
        W, one fin, entering at the base (positive when the base is hotter than the ambient).
    efficiency : float or None
        heat_flow / (h A_fin (T_b - T_amb)) (tip face with its own coefficient); None for
        infinite and fixed-temperature tips.
    effectiveness : float or None
        heat_flow / (h A_base (T_b - T_amb)), A_base the fin's footprint; None when T_b = T_amb
        with a fixed-temperature tip.
    tip_temperature : float
        degC (the ambient for an infinite fin).
    fin_parameter : float
        m = sqrt(h P / (k A_c)) (annular: sqrt(2 h / (k t))), 1/m.
    fin_length : float or None
        m: length (annular: outer - inner radius); None for infinite fins.
    fin_area : float or None
        Heat-transfer area of one fin, m^2 (sides, plus the tip for a convective tip).
    base_cross_section : float
        Footprint area at the base, m^2.
    biot : float
        h (A_c / P) / k (annular t/2): the one-dimensional model wants it well below 0.1.
    profile : FinProfile
    array : FinArrayResult
    notes, warnings : tuple of str
    convergence : Convergence
        Always ``converged`` (closed form) unless a value is not finite (``non_finite``).
    safety : SafetyReport
        Body scope from base to tip; the fin surface is the exposed surface.
    method : str
        ``closed_form``.
    """

    shape: str
    tip: str
    heat_flow: float
    efficiency: float | None
    effectiveness: float | None
    tip_temperature: float
    fin_parameter: float
    fin_length: float | None
    fin_area: float | None
    base_cross_section: float
    biot: float
    profile: FinProfile
    array: FinArrayResult
    notes: tuple[str, ...]
    warnings: tuple[str, ...]
    convergence: Convergence
    safety: SafetyReport
    method: str = "closed_form"


# ------------------------------------------------------------------------------------------------
# Validation and geometry
# ------------------------------------------------------------------------------------------------

def _positive(value: float | None) -> bool:
    return value is not None and math.isfinite(value) and value > 0


def validate_problem(problem: FinProblem) -> None:
    """Reject inputs the schema cannot see (IllPosedError with the field's path)."""
    p = problem
    if p.shape not in SHAPES:
        raise IllPosedError(f"shape must be one of {SHAPES}, got {p.shape!r}", field="shape")
    if p.tip not in TIPS:
        raise IllPosedError(f"tip must be one of {TIPS}, got {p.tip!r}", field="tip")
    for name in ("conductivity", "film_coefficient"):
        if not _positive(getattr(p, name)):
            raise IllPosedError(f"{name} must be > 0", field=name)
    for name in ("base_temperature", "ambient"):
        if not math.isfinite(getattr(p, name)):
            raise IllPosedError(f"{name} must be finite", field=name)
    if p.tip_film_coefficient is not None and not (math.isfinite(p.tip_film_coefficient)
                                                   and p.tip_film_coefficient >= 0):
        raise IllPosedError("tip_film_coefficient must be >= 0", field="tip_film_coefficient")
    if p.tip == "temperature" and (p.tip_temperature is None
                                   or not math.isfinite(p.tip_temperature)):
        raise IllPosedError("tip 'temperature' needs tip_temperature", field="tip.temperature")
    needs_length = p.tip != "infinite"
    if p.shape in ("straight", "pin"):
        if (needs_length or p.length is not None) and not _positive(p.length):
            raise IllPosedError(f"length must be > 0 m for a {p.shape} fin", field="length")
    if p.shape == "straight":
        if not _positive(p.thickness):
            raise IllPosedError("thickness must be > 0 m for a straight fin", field="thickness")
        if not _positive(p.width):
            raise IllPosedError("width must be > 0 m for a straight fin", field="width")
    if p.shape == "pin" and not _positive(p.diameter):
        raise IllPosedError("diameter must be > 0 m for a pin fin", field="diameter")
    if p.shape == "annular":
        if not _positive(p.inner_radius):
            raise IllPosedError("inner_radius must be > 0 m for an annular fin",
                                field="inner_radius")
        if not _positive(p.thickness):
            raise IllPosedError("thickness must be > 0 m for an annular fin", field="thickness")
        if needs_length or p.outer_radius is not None:
            if not _positive(p.outer_radius) or p.outer_radius <= p.inner_radius:  # type: ignore
                raise IllPosedError("outer_radius must exceed inner_radius",
                                    field="outer_radius")
    if not isinstance(p.count, int) or p.count < 1:
        raise IllPosedError("count must be an integer >= 1", field="count")
    if not (math.isfinite(p.base_area) and p.base_area >= 0):
        raise IllPosedError("base_area must be >= 0 m^2", field="base_area")
    if not isinstance(p.profile_points, int) or p.profile_points < 2:
        raise IllPosedError("profile_points must be an integer >= 2", field="profile_points")


@dataclass(frozen=True)
class FinGeometry:
    """Cross-section area A_c (m^2; annular: at the base), perimeter P (m; annular: None),
    fin parameter m (1/m), length (m or None), side area and tip area of one fin (m^2)."""

    cross_section: float
    perimeter: float | None
    m: float
    length: float | None
    side_area: float | None
    tip_area: float


def fin_geometry(problem: FinProblem) -> FinGeometry:
    """Areas and the fin parameter m = sqrt(h P / (k A_c)); annular m = sqrt(2 h / (k t))."""
    h, k = problem.film_coefficient, problem.conductivity
    if problem.shape == "annular":
        t = float(problem.thickness)  # type: ignore[arg-type]
        r1 = float(problem.inner_radius)  # type: ignore[arg-type]
        r2 = problem.outer_radius
        m = math.sqrt(2.0 * h / (k * t))
        if problem.tip == "infinite":
            return FinGeometry(2 * math.pi * r1 * t, None, m, None, None, 0.0)
        r2 = float(r2)  # type: ignore[arg-type]
        return FinGeometry(2 * math.pi * r1 * t, None, m, r2 - r1,
                           2 * math.pi * (r2 * r2 - r1 * r1), 2 * math.pi * r2 * t)
    if problem.shape == "straight":
        t, w = float(problem.thickness), float(problem.width)  # type: ignore[arg-type]
        area, perimeter = w * t, 2.0 * (w + t)
    else:
        d = float(problem.diameter)  # type: ignore[arg-type]
        area, perimeter = math.pi * d * d / 4.0, math.pi * d
    m = math.sqrt(h * perimeter / (k * area))
    if problem.tip == "infinite":
        return FinGeometry(area, perimeter, m, None, None, 0.0)
    length = float(problem.length)  # type: ignore[arg-type]
    return FinGeometry(area, perimeter, m, length, perimeter * length, area)


# ------------------------------------------------------------------------------------------------
# Uniform cross-section (straight and pin)
# ------------------------------------------------------------------------------------------------

def straight_fin_excess(x: np.ndarray, m: float, length: float | None, tip: str,
                        excess_base: float, excess_tip: float = 0.0, tip_ratio: float = 0.0
                        ) -> np.ndarray:
    """Excess temperature theta = T - T_amb along a uniform fin (Incropera Table 3.4, from
    memory), written with exp(-.) only.

    Parameters
    ----------
    x : array
        Distance from the base, m.
    m : float
        Fin parameter, 1/m.
    length : float or None
        m (unused for an infinite tip).
    tip : str
    excess_base, excess_tip : float
        theta at the base and (fixed-temperature tip) at the tip, K.
    tip_ratio : float
        beta = h_tip / (m k) for a convective tip.

    Notes
    -----
    theta'' = m^2 theta, theta(0) = theta_b. Tips: convective -k theta' = h_t theta,
    insulated theta' = 0, infinite theta -> 0, fixed theta(L) = theta_L. E.g. convective:
    theta/theta_b = [cosh m(L-x) + beta sinh m(L-x)] / [cosh mL + beta sinh mL]; multiplying
    through by 2 exp(-mL) gives the exp(-.) form used.
    """
    x = np.asarray(x, dtype=float)
    if tip == "infinite":
        return excess_base * np.exp(-m * x)
    length = float(length)  # type: ignore[arg-type]
    e1 = np.exp(-m * x)
    e2 = np.exp(-m * (2.0 * length - x))
    e2l = math.exp(-2.0 * m * length)
    if tip == "insulated":
        return excess_base * (e1 + e2) / (1.0 + e2l)
    if tip == "convective":
        b = tip_ratio
        return excess_base * (e1 * (1.0 + b) + e2 * (1.0 - b)) / ((1.0 + b) + (1.0 - b) * e2l)
    # Fixed tip: sinh(m(L-x))/sinh(mL) and sinh(mx)/sinh(mL) via expm1 (exact as mL -> 0).
    den = math.expm1(-2.0 * m * length)
    from_base = e1 * np.expm1(-2.0 * m * (length - x)) / den
    from_tip = np.exp(-m * (length - x)) * np.expm1(-2.0 * m * x) / den
    return excess_base * from_base + excess_tip * from_tip


def straight_fin_heat_flow(m: float, length: float | None, tip: str, conductance: float,
                           excess_base: float, excess_tip: float = 0.0, tip_ratio: float = 0.0
                           ) -> float:
    """Heat flow entering the fin at the base, W.

    `conductance` is k A_c m = sqrt(h P k A_c), W/K. Insulated: M tanh(mL); convective:
    M (sinh mL + beta cosh mL)/(cosh mL + beta sinh mL); infinite: M; fixed tip:
    k A_c m (theta_b coth mL - theta_L csch mL) (Incropera Table 3.4, from memory), with
    M = k A_c m theta_b, all in exp(-.) form.
    """
    if tip == "infinite":
        return conductance * excess_base
    mlen = m * float(length)  # type: ignore[arg-type]
    e2l = math.exp(-2.0 * mlen)
    one_minus = -math.expm1(-2.0 * mlen)          # 1 - exp(-2 mL), exact for small mL
    if tip == "insulated":
        return conductance * excess_base * one_minus / (1.0 + e2l)
    if tip == "convective":
        b = tip_ratio
        return conductance * excess_base * (one_minus + b * (1.0 + e2l)) / (
            (1.0 + b) + (1.0 - b) * e2l)
    coth = (1.0 + e2l) / one_minus
    csch = 2.0 * math.exp(-mlen) / one_minus
    return conductance * (excess_base * coth - excess_tip * csch)


# ------------------------------------------------------------------------------------------------
# Annular fin (scaled Bessel functions)
# ------------------------------------------------------------------------------------------------

def annular_coefficients(m: float, inner_radius: float, outer_radius: float | None, tip: str,
                         conductivity: float, tip_film_coefficient: float,
                         excess_base: float, excess_tip: float = 0.0) -> tuple[float, float]:
    """Coefficients (a, b) of theta(r) = a ive0(mr) e^{m(r - r2)} + b kve0(mr) e^{-m(r - r1)}.

    This is the general solution C1 I0(mr) + C2 K0(mr) of (1/r)(r theta')' = m^2 theta
    (modified Bessel equation of order 0) with C1 = a e^{-m r2}, C2 = b e^{m r1}; in this form
    every term is at most of order one on r1 <= r <= r2, so the 2x2 system for (a, b) never
    overflows. Rows: theta(r1) = theta_b; at r2 insulated theta' = 0, convective
    -k theta' = h_t theta, fixed theta = theta_L. Infinite (r2 -> inf): a = 0.
    """
    r1 = inner_radius
    if tip == "infinite":
        return 0.0, excess_base / float(special.kve(0, m * r1))
    r2 = float(outer_radius)  # type: ignore[arg-type]
    e = math.exp(-m * (r2 - r1))
    z1, z2 = m * r1, m * r2
    i0_1, k0_1 = float(special.ive(0, z1)), float(special.kve(0, z1))
    i0_2, k0_2 = float(special.ive(0, z2)), float(special.kve(0, z2))
    i1_2, k1_2 = float(special.ive(1, z2)), float(special.kve(1, z2))
    a11, a12 = i0_1 * e, k0_1
    if tip == "insulated":
        a21, a22, rhs = i1_2, -k1_2 * e, 0.0
    elif tip == "convective":
        km = conductivity * m
        a21 = km * i1_2 + tip_film_coefficient * i0_2
        a22 = (tip_film_coefficient * k0_2 - km * k1_2) * e
        rhs = 0.0
    else:
        a21, a22, rhs = i0_2, k0_2 * e, excess_tip
    det = a11 * a22 - a12 * a21
    return (excess_base * a22 - a12 * rhs) / det, (a11 * rhs - excess_base * a21) / det


def annular_excess(r: np.ndarray, m: float, inner_radius: float, outer_radius: float | None,
                   a: float, b: float) -> np.ndarray:
    """theta(r) from `annular_coefficients` (outer_radius None for an infinite fin)."""
    r = np.asarray(r, dtype=float)
    out = b * special.kve(0, m * r) * np.exp(-m * (r - inner_radius))
    if a != 0.0:
        out = out + a * special.ive(0, m * r) * np.exp(m * (r - float(outer_radius)))  # type: ignore
    return out


def annular_heat_flow(m: float, inner_radius: float, outer_radius: float | None,
                      thickness: float, conductivity: float, a: float, b: float) -> float:
    """Heat flow entering at the base, -k (2 pi r1 t) theta'(r1), W (I0' = I1, K0' = -K1)."""
    r1 = inner_radius
    z1 = m * r1
    slope = -b * float(special.kve(1, z1))
    if a != 0.0:
        slope += a * float(special.ive(1, z1)) * math.exp(-m * (float(outer_radius) - r1))  # type: ignore
    return -2.0 * math.pi * r1 * thickness * conductivity * m * slope


# ------------------------------------------------------------------------------------------------
# Solver
# ------------------------------------------------------------------------------------------------

def _excess_and_flow(problem: FinProblem, geo: FinGeometry, x: np.ndarray, excess_base: float,
                     excess_tip: float) -> tuple[np.ndarray, float]:
    h_tip = (problem.film_coefficient if problem.tip_film_coefficient is None
             else problem.tip_film_coefficient)
    k = problem.conductivity
    if problem.shape == "annular":
        r1 = float(problem.inner_radius)  # type: ignore[arg-type]
        r2 = None if problem.tip == "infinite" else float(problem.outer_radius)  # type: ignore
        a, b = annular_coefficients(geo.m, r1, r2, problem.tip, k, h_tip, excess_base,
                                    excess_tip)
        theta = annular_excess(x, geo.m, r1, r2, a, b)
        q = annular_heat_flow(geo.m, r1, r2, float(problem.thickness), k, a, b)  # type: ignore
        return theta, q
    ratio = h_tip / (geo.m * k)
    theta = straight_fin_excess(x, geo.m, geo.length, problem.tip, excess_base, excess_tip,
                                ratio)
    q = straight_fin_heat_flow(geo.m, geo.length, problem.tip, k * geo.cross_section * geo.m,
                               excess_base, excess_tip, ratio)
    return theta, q


def solve_fin(problem: FinProblem) -> FinResult:
    """Heat flow, efficiency, effectiveness, tip temperature and profile of a fin or fin array.

    Parameters
    ----------
    problem : FinProblem

    Returns
    -------
    FinResult
        Convergence ``converged`` (closed form) or ``non_finite``.

    Raises
    ------
    IllPosedError
        Missing or non-positive dimensions for the shape, unknown shape or tip, bad array data.

    Notes
    -----
    Uniform cross-section: d^2 theta/dx^2 = m^2 theta, m^2 = h P / (k A_c). Annular fin of
    thickness t: (1/r) d/dr (r dtheta/dr) = m^2 theta, m^2 = 2 h / (k t). theta = T - T_amb,
    theta(base) = T_b - T_amb; tip conditions as in `straight_fin_excess` and
    `annular_coefficients`. Efficiency eta = q / (h A_f theta_b); effectiveness
    q / (h A_c,b theta_b); array: q_t = N q + h A_b theta_b, eta_o = q_t / (h A_t theta_b).

    References
    ----------
    Incropera et al., 6th ed., Tables 3.4-3.5 and Eqs. 3.102-3.104 (from memory).
    """
    validate_problem(problem)
    geo = fin_geometry(problem)
    h, k = problem.film_coefficient, problem.conductivity
    h_tip = h if problem.tip_film_coefficient is None else problem.tip_film_coefficient
    theta_b = problem.base_temperature - problem.ambient
    theta_l = ((problem.tip_temperature - problem.ambient)  # type: ignore[operator]
               if problem.tip == "temperature" else 0.0)

    # Positions: from the base (straight, pin) or radii (annular).
    start = float(problem.inner_radius) if problem.shape == "annular" else 0.0  # type: ignore
    if geo.length is not None:
        extent = geo.length
    elif problem.shape == "annular" and problem.outer_radius is not None:
        extent = float(problem.outer_radius) - start
    elif problem.shape != "annular" and problem.length is not None:
        extent = float(problem.length)
    else:
        extent = INFINITE_PROFILE_DECAYS / geo.m
    x = np.linspace(start, start + extent, problem.profile_points)
    theta, q = _excess_and_flow(problem, geo, x, theta_b, theta_l)
    if problem.tip == "infinite":
        tip_excess = 0.0
    else:
        theta[-1] = theta_l if problem.tip == "temperature" else theta[-1]
        tip_excess = float(theta[-1])
    theta[0] = theta_b
    temperatures = problem.ambient + theta

    # Efficiency and effectiveness from the unit problem (they do not depend on theta_b).
    efficiency = None
    effectiveness = None
    if problem.tip != "temperature":
        _, q_unit = _excess_and_flow(problem, geo, x[:1], 1.0, 0.0)
        effectiveness = q_unit / (h * geo.cross_section)
        if geo.side_area is not None:
            tip_part = h_tip * geo.tip_area if problem.tip == "convective" else 0.0
            efficiency = q_unit / (h * geo.side_area + tip_part)
    elif theta_b != 0.0:
        effectiveness = q / (h * geo.cross_section * theta_b)
    fin_area = None
    if geo.side_area is not None:
        fin_area = geo.side_area + (geo.tip_area if problem.tip == "convective" else 0.0)

    # Array.
    n = problem.count
    q_total = n * q + h * problem.base_area * theta_b
    array_fin_area = None if fin_area is None else n * fin_area
    total_area = None if array_fin_area is None else array_fin_area + problem.base_area
    overall = None
    if efficiency is not None and total_area:
        overall = 1.0 - (array_fin_area / total_area) * (1.0 - efficiency)  # type: ignore
    array_eff = None
    bare = problem.base_area + n * geo.cross_section
    if theta_b != 0.0:
        array_eff = q_total / (h * bare * theta_b)
    array = FinArrayResult(count=n, base_area=problem.base_area, fin_area=array_fin_area,
                           total_area=total_area, heat_flow=q_total, overall_efficiency=overall,
                           effectiveness=array_eff)

    # One-dimensional validity and common-practice notes.
    # Half-thickness-like length A_c / P (straight: w t / 2(w + t); pin: D/4; annular: t/2).
    if problem.shape == "annular":
        half = float(problem.thickness) / 2.0  # type: ignore[arg-type]
    else:
        half = geo.cross_section / float(geo.perimeter)  # type: ignore[arg-type]
    biot = h * half / k
    warnings: list[str] = []
    notes: list[str] = []
    if biot > 0.1:
        warnings.append(f"Biot number h (A_c/P) / k = {biot:.3g} exceeds 0.1: temperatures vary "
                        "across the fin and the one-dimensional fin model overestimates the "
                        "heat flow")
    if effectiveness is not None and effectiveness < 2.0:
        notes.append(f"fin effectiveness {effectiveness:.3g} is below 2: such fins are seldom "
                     "justified (common practice)")

    # Safety: body from base to tip; the whole fin surface is exposed. An interior extreme
    # (possible with a fixed tip temperature) is polished by a bounded search between the
    # neighbouring profile points.
    def excess_at(pos: float) -> float:
        return float(_excess_and_flow(problem, geo, np.array([pos]), theta_b, theta_l)[0][0])

    def extreme(index: int, sign: float) -> tuple[float, float]:
        if 0 < index < len(x) - 1:
            opt = optimize.minimize_scalar(lambda p: -sign * excess_at(p),
                                           bounds=(float(x[index - 1]), float(x[index + 1])),
                                           method="bounded", options={"xatol": 1e-12 * extent})
            best = float(opt.x)
            value = excess_at(best)
            if sign * value >= sign * theta[index]:
                return problem.ambient + value, best
        return float(temperatures[index]), float(x[index])

    def where(pos: float) -> str:
        if pos == x[0]:
            return "fin base"
        if pos == x[-1]:
            return "fin tip" if problem.tip != "infinite" else "fin (far end of profile)"
        return "fin interior"
    t_hot, x_hot = extreme(int(np.argmax(temperatures)), 1.0)
    t_cold, x_cold = extreme(int(np.argmin(temperatures)), -1.0)
    hot = Location(t_hot, where(x_hot), (x_hot,))
    cold = Location(t_cold, where(x_cold), (x_cold,))
    safety = check_limits(problem.limits, Scope("fin", hot, cold),
                          [Scope("fin surface", hot, cold)])

    finite = math.isfinite(q) and bool(np.all(np.isfinite(temperatures)))
    convergence = (Convergence(status="converged", message="closed form (exact)", iterations=0)
                   if finite else
                   Convergence(status="non_finite", message="a non-finite value appeared",
                               iterations=0))
    for arr in (x, temperatures):
        arr.flags.writeable = False
    return FinResult(
        shape=problem.shape, tip=problem.tip, heat_flow=q, efficiency=efficiency,
        effectiveness=effectiveness, tip_temperature=problem.ambient + tip_excess,
        fin_parameter=geo.m, fin_length=geo.length, fin_area=fin_area,
        base_cross_section=geo.cross_section, biot=biot,
        profile=FinProfile(positions=x, temperatures=temperatures), array=array,
        notes=tuple(notes), warnings=tuple(warnings), convergence=convergence, safety=safety)
