"""Steady one-dimensional conduction through plane, cylindrical and spherical layers.

Walls, insulated pipes and vessels: any number of layers with contact resistances between them,
uniform heat generation and a conductivity that varies linearly with temperature in any layer,
and surface conditions of fixed temperature, heat flux, convection, convection plus radiation, or
an automatic coefficient for still or moving air. `solve_for` finds the thickness of one layer
that meets an outside-surface temperature or a heat-loss target.

Stages (each a named function): `validate_problem` -> `build_stack` (geometry integrals of each
layer) -> `solve_stack` (one scalar unknown: exact when the problem is linear, else a bracketed
root) -> `solve_thickness` (only with `solve_for`: a bracketed root on the thickness) ->
post-processing (`march_faces`, `temperature_profile`, resistances, safety).

Positions are depths from the inside face for plane walls and radii for cylinders and spheres.
Heat flows are in W for plane walls (for the given `area`) and spheres, W per metre of length
for cylinders ("per basis" below); temperatures in degC.

References
----------
.. [1] Incropera, DeWitt, Bergman, Lavine, *Fundamentals of Heat and Mass Transfer*, 6th ed.,
   sections 3.1-3.5 (resistances, contact resistance, critical radius, generation) and
   Tables 3.3 (from memory).
.. [2] H. S. Carslaw and J. C. Jaeger, *Conduction of Heat in Solids*, 2nd ed., section 1.7
   (Kirchhoff transformation for temperature-dependent conductivity) (from memory).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, replace

import numpy as np
from scipy import optimize

from .air import (
    CYLINDER_ORIENTATIONS,
    KELVIN,
    PLANE_ORIENTATIONS,
    STEFAN_BOLTZMANN,
    AirCoefficient,
    air_coefficient,
)
from .convergence import Convergence
from .errors import IllPosedError
from .safety import Limits, Location, SafetyReport, Scope, check_limits

GEOMETRIES = ("plane", "cylinder", "sphere")
SURFACE_TYPES = ("temperature", "flux", "convection", "convection_radiation", "air")
TARGET_QUANTITIES = ("surface_temperature", "heat_flow_per_length", "heat_flux", "heat_flow")

#: Largest thickness `solve_for` tries, m: beyond it a target is reported unreachable.
MAX_SOLVED_THICKNESS = 100.0

_INF = math.inf


# ------------------------------------------------------------------------------------------------
# Inputs
# ------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Layer:
    """One layer of the wall, pipe or vessel, listed from the inside out.

    Attributes
    ----------
    thickness : float
        m (with `solve_for` on this layer: the first guess).
    conductivity : float
        W/(m K) at `conductivity_temperature`.
    name : str
        Used in messages and locations (default "layer <index>").
    conductivity_slope : float
        dk/dT, W/(m K^2): k(T) = conductivity + conductivity_slope (T - conductivity_temperature).
    conductivity_temperature : float
        degC, the temperature at which `conductivity` is given (default 0, so that
        k = conductivity + conductivity_slope * T with T in degC).
    generation : float
        Uniform volumetric heat generation, W/m^3.
    max_temperature : float or None
        Service (hot-face) limit of the material, degC.
    """

    thickness: float
    conductivity: float
    name: str = ""
    conductivity_slope: float = 0.0
    conductivity_temperature: float = 0.0
    generation: float = 0.0
    max_temperature: float | None = None

    def conductivity_at(self, temperature: float) -> float:
        """k(T), W/(m K), by the layer's linear law."""
        return self.conductivity + self.conductivity_slope * (
            temperature - self.conductivity_temperature)


@dataclass(frozen=True)
class SurfaceCondition:
    """Condition on the inside or outside surface.

    Attributes
    ----------
    type : str
        ``temperature`` (`value` degC), ``flux`` (`value` W/m^2, positive into the body),
        ``convection`` (`film_coefficient`, `ambient`), ``convection_radiation`` (adds
        `emissivity` and `surroundings`), ``air`` (coefficient from correlations: `ambient`,
        `emissivity`, `wind_speed`, `orientation`, `characteristic_length`, `surroundings`).
    value : float or None
        degC or W/m^2 as above.
    film_coefficient : float or None
        W/(m^2 K).
    ambient : float or None
        Fluid temperature, degC.
    emissivity : float or None
        Grey-body emissivity, 0..1.
    surroundings : float or None
        Radiating surroundings, degC (default: `ambient`).
    wind_speed : float
        m/s (``air`` only; 0 = still air).
    orientation : str or None
        ``air`` only. Plane: ``vertical`` (default), ``facing_up``, ``facing_down``; cylinder:
        ``horizontal`` (default), ``vertical``.
    characteristic_length : float
        m (``air`` only): height of vertical surfaces, area/perimeter of horizontal plane faces,
        length along the wind on plane faces. Horizontal cylinders and spheres use the diameter.
    """

    type: str
    value: float | None = None
    film_coefficient: float | None = None
    ambient: float | None = None
    emissivity: float | None = None
    surroundings: float | None = None
    wind_speed: float = 0.0
    orientation: str | None = None
    characteristic_length: float = 1.0


@dataclass(frozen=True)
class DesignTarget:
    """Exactly one of the fields is set.

    Attributes
    ----------
    surface_temperature : float or None
        Outside surface temperature, degC (personnel protection).
    heat_flow_per_length : float or None
        Heat flow through the outside surface, W/m (cylinders).
    heat_flux : float or None
        Heat flux through the outside surface, W/m^2.
    heat_flow : float or None
        Heat flow through the outside surface of the whole body, W.

    Heat-flow targets are magnitudes (> 0): a loss for hot lines, a gain for cold ones.
    """

    surface_temperature: float | None = None
    heat_flow_per_length: float | None = None
    heat_flux: float | None = None
    heat_flow: float | None = None

    @property
    def quantity(self) -> str:
        """Name of the field that is set (the first one when several are)."""
        for name in TARGET_QUANTITIES:
            if getattr(self, name) is not None:
                return name
        return ""

    @property
    def value(self) -> float:
        return float(getattr(self, self.quantity))


@dataclass(frozen=True)
class SolveFor:
    """Find the thickness of `layer` (index, inside = 0) that meets `target`."""

    layer: int
    target: DesignTarget


@dataclass(frozen=True)
class LayersProblem:
    """A layered wall, pipe or vessel.

    Attributes
    ----------
    geometry : {"plane", "cylinder", "sphere"}
    layers : tuple of Layer
        From the inside out.
    inside, outside : SurfaceCondition
    inner_radius : float or None
        m, cylinder and sphere (0 for a solid core, whose inside condition must then be a zero
        heat flux).
    length : float
        Cylinder length, m (heat flows are reported per metre; totals use it).
    area : float
        Plane wall area, m^2.
    contact_resistances : tuple of float
        m^2 K/W, one per interface (len(layers) - 1), or empty for none.
    solve_for : SolveFor or None
    profile_points : int
        About this many profile points in total (at least two per layer).
    limits : Limits
    atol : float or None
        Absolute temperature accuracy, K (default 1e-6 of the largest temperature difference in
        the problem, at least 1e-6 K).
    max_iterations : int
        Per root finder (state and thickness).
    """

    geometry: str
    layers: tuple[Layer, ...]
    inside: SurfaceCondition
    outside: SurfaceCondition
    inner_radius: float | None = None
    length: float = 1.0
    area: float = 1.0
    contact_resistances: tuple[float, ...] = ()
    solve_for: SolveFor | None = None
    profile_points: int = 51
    limits: Limits = Limits()
    atol: float | None = None
    max_iterations: int = 100


# ------------------------------------------------------------------------------------------------
# Results
# ------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class SurfaceResult:
    """One surface at the solution.

    Attributes
    ----------
    name : {"inside", "outside"}
    position : float
        m (depth or radius).
    area : float
        m^2 (cylinder: per metre of length, m^2/m).
    temperature : float
        degC.
    heat_flow : float
        Into the body through this surface, W (cylinder: W/m).
    heat_flux : float
        Into the body, W/m^2.
    convective_coefficient, radiative_coefficient : float or None
        W/(m^2 K) for convective surfaces (radiative on surface - surroundings).
    correlation : str or None
        ``air`` surfaces: the correlations used.
    nusselt, rayleigh, reynolds : float or None
        ``air`` surfaces.
    """

    name: str
    position: float
    area: float
    temperature: float
    heat_flow: float
    heat_flux: float
    convective_coefficient: float | None = None
    radiative_coefficient: float | None = None
    correlation: str | None = None
    nusselt: float | None = None
    rayleigh: float | None = None
    reynolds: float | None = None


@dataclass(frozen=True)
class LayerResult:
    """One layer at the solution (positions m, temperatures degC, heat flows outward per basis).

    `resistance` (K per W of heat flow per basis) is the conduction resistance at the Kirchhoff
    mean conductivity, which for the linear law is k at the mean of the face temperatures; None
    for a solid core. `hottest`/`coldest` include an interior extreme where generation puts one.
    """

    index: int
    name: str
    inner_position: float
    outer_position: float
    thickness: float
    inner_temperature: float
    outer_temperature: float
    hottest_temperature: float
    hottest_position: float
    coldest_temperature: float
    coldest_position: float
    mean_conductivity: float
    heat_flow_inner: float
    heat_flow_outer: float
    resistance: float | None
    share: float | None


@dataclass(frozen=True)
class InterfaceResult:
    """Interface between layer `index` and `index + 1`."""

    index: int
    position: float
    temperature_inner_side: float
    temperature_outer_side: float
    contact_resistance: float     # m^2 K/W as given
    heat_flux: float              # W/m^2, outward


@dataclass(frozen=True)
class ResistanceElement:
    """One element of the series network, K per W of heat flow per basis (cylinder K m/W).

    kind: ``film`` (1 / ((h_conv + h_rad) A), linearised at the solution), ``layer`` or
    ``contact``. `share` is the fraction of the total.
    """

    name: str
    kind: str
    resistance: float | None
    share: float | None


@dataclass(frozen=True)
class Profile:
    """Temperature profile: positions (m, depth or radius), temperatures (degC), and the layer
    index of each point. Interfaces appear twice (both sides of a contact resistance)."""

    positions: np.ndarray
    temperatures: np.ndarray
    layer: np.ndarray


@dataclass(frozen=True)
class SolvedThickness:
    """Outcome of `solve_for`.

    Attributes
    ----------
    layer : int
    name : str
    thickness : float
        m, the thickness found (results are for it).
    outer_position : float
        m, outer radius (or depth) of the layer's outer face.
    quantity : str
        Target field name.
    target, achieved : float
        In the target's unit (degC, W/m, W/m^2 or W).
    iterations : int
        Thickness root-finder iterations.
    alternative_thickness : float or None
        A thinner layer that gives the same value (heat flow below the critical radius).
    note : str or None
    """

    layer: int
    name: str
    thickness: float
    outer_position: float
    quantity: str
    target: float
    achieved: float
    iterations: int
    alternative_thickness: float | None = None
    note: str | None = None


@dataclass(frozen=True)
class CriticalRadius:
    """Critical radius of the outermost layer: r_c = k/h (cylinder), 2k/h (sphere).

    `film_coefficient` is the outside convective plus radiative coefficient at the solution and
    `conductivity` the layer's mean conductivity. `insulation_increases_heat_flow` is True when
    the outer radius is below r_c, so that more of this layer would increase the heat flow.
    """

    layer: int
    radius: float
    outer_radius: float
    conductivity: float
    film_coefficient: float
    insulation_increases_heat_flow: bool
    note: str


@dataclass(frozen=True)
class LayersResult:
    """Steady state of the layered body.

    Attributes
    ----------
    geometry : str
    basis : str
        Unit of heat flows: ``W`` (plane wall of the given area, sphere) or ``W/m`` (cylinder).
    heat_flow : float
        Heat flow leaving the outside surface per basis (positive = heat lost outward).
    heat_flow_total : float
        The same for the whole body, W (cylinder: times `length`).
    outside_heat_flux : float
        The same per square metre of outside surface, W/m^2 (for a plane wall, the heat flow
        per m^2 of wall).
    surfaces : tuple of SurfaceResult
        (inside, outside).
    layers : tuple of LayerResult
    interfaces : tuple of InterfaceResult
    resistances : tuple of ResistanceElement
    total_resistance : float or None
        Sum of the elements, K per W of heat flow per basis (None with a solid core).
    overall_coefficient : float or None
        U on the outside area, W/(m^2 K): heat_flow / (A_out (T_in - T_out)) with the inside and
        outside fluid (or fixed surface) temperatures; None with generation or a flux surface.
    profile : Profile
    solved : SolvedThickness or None
    critical_radius : CriticalRadius or None
        Cylinders and spheres with a convective outside surface.
    notes, warnings : tuple of str
    convergence : Convergence
        `iterations`: residual evaluations of the final state's root finder (0 when the
        problem is linear and solved exactly) plus, with `solve_for`, the number of trial
        thicknesses (each a full state solve); `residual` is the final imbalance of the surface
        conditions expressed as a temperature, K; `atol` the temperature tolerance used.
    safety : SafetyReport
    method : str
        ``closed_form``: exact profiles in each layer.
    """

    geometry: str
    basis: str
    heat_flow: float
    heat_flow_total: float
    outside_heat_flux: float
    surfaces: tuple[SurfaceResult, SurfaceResult]
    layers: tuple[LayerResult, ...]
    interfaces: tuple[InterfaceResult, ...]
    resistances: tuple[ResistanceElement, ...]
    total_resistance: float | None
    overall_coefficient: float | None
    profile: Profile
    solved: SolvedThickness | None
    critical_radius: CriticalRadius | None
    notes: tuple[str, ...]
    warnings: tuple[str, ...]
    convergence: Convergence
    safety: SafetyReport
    method: str = "closed_form"

    @property
    def surface_temperatures(self) -> tuple[float, float]:
        """(inside, outside), degC."""
        return (self.surfaces[0].temperature, self.surfaces[1].temperature)

    @property
    def interface_temperatures(self) -> tuple[tuple[float, float], ...]:
        """(inner side, outer side) per interface, degC."""
        return tuple((i.temperature_inner_side, i.temperature_outer_side)
                     for i in self.interfaces)


# ------------------------------------------------------------------------------------------------
# Stage 1: validation
# ------------------------------------------------------------------------------------------------

def _finite(x: float | None) -> bool:
    return x is not None and math.isfinite(x)


def _check_surface(cond: SurfaceCondition, side: str, geometry: str) -> None:
    if cond.type not in SURFACE_TYPES:
        raise IllPosedError(f"{side}.type must be one of {SURFACE_TYPES}, got {cond.type!r}",
                            field=f"{side}.type")
    if cond.type in ("temperature", "flux"):
        if not _finite(cond.value):
            raise IllPosedError(f"{side}.value is required for a {cond.type} surface",
                                field=f"{side}.value")
        return
    if not _finite(cond.ambient):
        raise IllPosedError(f"{side}.ambient is required for a {cond.type} surface",
                            field=f"{side}.ambient")
    if cond.surroundings is not None and not _finite(cond.surroundings):
        raise IllPosedError(f"{side}.surroundings must be finite", field=f"{side}.surroundings")
    if cond.type in ("convection", "convection_radiation"):
        h = cond.film_coefficient
        if not _finite(h) or h <= 0:  # type: ignore[operator]
            raise IllPosedError(f"{side}.film_coefficient must be > 0 W/(m^2 K) for a "
                                f"{cond.type} surface", field=f"{side}.film_coefficient")
    if cond.type in ("convection_radiation", "air"):
        e = cond.emissivity
        if not _finite(e) or not 0.0 <= e <= 1.0:  # type: ignore[operator]
            raise IllPosedError(f"{side}.emissivity must be between 0 and 1 for a {cond.type} "
                                "surface", field=f"{side}.emissivity")
    if cond.type == "air":
        if side == "inside" and geometry != "plane":
            raise IllPosedError("inside.type 'air' applies to plane walls only: the bore of a "
                                "pipe or vessel needs a convection condition",
                                field="inside.type")
        if not _finite(cond.wind_speed) or cond.wind_speed < 0:
            raise IllPosedError(f"{side}.wind_speed must be >= 0 m/s",
                                field=f"{side}.wind_speed")
        if not _finite(cond.characteristic_length) or cond.characteristic_length <= 0:
            raise IllPosedError(f"{side}.characteristic_length must be > 0 m",
                                field=f"{side}.characteristic_length")
        allowed: tuple[str, ...] = {"plane": PLANE_ORIENTATIONS,
                                    "cylinder": CYLINDER_ORIENTATIONS}.get(geometry, ())
        if cond.orientation is not None and allowed and cond.orientation not in allowed:
            raise IllPosedError(f"{side}.orientation must be one of {allowed} for a {geometry}",
                                field=f"{side}.orientation")


def validate_problem(problem: LayersProblem) -> None:
    """Reject what the request schema cannot see (or a caller bypassing it).

    Raises
    ------
    IllPosedError
        With ``field`` the dotted request path: unknown geometry, no layers, non-positive
        thickness or conductivity, contact resistance count mismatch, missing surface
        parameters, two flux surfaces, a solid core without a zero-flux inside, a bad
        `solve_for`.
    """
    if problem.geometry not in GEOMETRIES:
        raise IllPosedError(f"geometry must be one of {GEOMETRIES}, got {problem.geometry!r}",
                            field="geometry")
    n = len(problem.layers)
    if n == 0:
        raise IllPosedError("layers: at least one layer is needed", field="layers")
    for i, lay in enumerate(problem.layers):
        if not _finite(lay.thickness) or lay.thickness <= 0:
            raise IllPosedError(f"layers.{i}.thickness must be > 0 m",
                                field=f"layers.{i}.thickness")
        if not _finite(lay.conductivity) or lay.conductivity <= 0:
            raise IllPosedError(f"layers.{i}.conductivity must be > 0 W/(m K)",
                                field=f"layers.{i}.conductivity")
        for attr in ("conductivity_slope", "conductivity_temperature", "generation"):
            if not _finite(getattr(lay, attr)):
                raise IllPosedError(f"layers.{i}.{attr} must be finite",
                                    field=f"layers.{i}.{attr}")
        if lay.max_temperature is not None and not _finite(lay.max_temperature):
            raise IllPosedError(f"layers.{i}.max_temperature must be finite",
                                field=f"layers.{i}.max_temperature")
    if problem.geometry == "plane":
        if not _finite(problem.area) or problem.area <= 0:
            raise IllPosedError("area must be > 0 m^2", field="area")
    else:
        r0 = problem.inner_radius
        if not _finite(r0) or r0 < 0:  # type: ignore[operator]
            raise IllPosedError(f"inner_radius (m, >= 0) is required for a {problem.geometry}",
                                field="inner_radius")
        if problem.geometry == "cylinder" and (not _finite(problem.length)
                                               or problem.length <= 0):
            raise IllPosedError("length must be > 0 m", field="length")
        if r0 == 0 and not (problem.inside.type == "flux" and problem.inside.value == 0):
            raise IllPosedError("inner_radius 0 makes layer 0 a solid core: the inside "
                                "condition must then be {type: flux, value: 0}",
                                field="inside.type")
    rc = problem.contact_resistances
    if len(rc) not in (0, n - 1):
        raise IllPosedError(f"contact_resistances needs one value per interface ({n - 1} for "
                            f"{n} layers) or none, got {len(rc)}", field="contact_resistances")
    for j, value in enumerate(rc):
        if not _finite(value) or value < 0:
            raise IllPosedError(f"contact_resistances.{j} must be >= 0 m^2 K/W",
                                field=f"contact_resistances.{j}")
    _check_surface(problem.inside, "inside", problem.geometry)
    _check_surface(problem.outside, "outside", problem.geometry)
    if problem.inside.type == "flux" and problem.outside.type == "flux":
        raise IllPosedError("inside and outside are both heat-flux surfaces: a steady state "
                            "would need the fluxes and generation to balance exactly, and even "
                            "then the temperature level is not fixed; make one surface a "
                            "temperature or convection condition", field="outside.type",
                            reason="not-unique")
    if not isinstance(problem.profile_points, int) or problem.profile_points < 2:
        raise IllPosedError("profile_points must be an integer >= 2", field="profile_points")
    if not isinstance(problem.max_iterations, int) or problem.max_iterations < 1:
        raise IllPosedError("max_iterations must be an integer >= 1", field="max_iterations")
    if problem.atol is not None and (not _finite(problem.atol) or problem.atol <= 0):
        raise IllPosedError("atol must be > 0 K", field="atol")
    sf = problem.solve_for
    if sf is not None:
        if not 0 <= sf.layer < n:
            raise IllPosedError(f"solve_for.layer must be a layer index 0..{n - 1}",
                                field="solve_for.layer")
        given = [q for q in TARGET_QUANTITIES if getattr(sf.target, q) is not None]
        if len(given) != 1:
            raise IllPosedError(f"solve_for.target needs exactly one of {TARGET_QUANTITIES}",
                                field="solve_for.target")
        quantity = given[0]
        path = f"solve_for.target.{quantity}"
        if not _finite(sf.target.value):
            raise IllPosedError(f"{path} must be finite", field=path)
        if quantity != "surface_temperature" and sf.target.value <= 0:
            raise IllPosedError(f"{path} is a magnitude (heat loss or gain) and must be > 0",
                                field=path)
        if quantity == "heat_flow_per_length" and problem.geometry != "cylinder":
            raise IllPosedError("heat_flow_per_length targets apply to cylinders; use heat_flux "
                                "or heat_flow", field=path)
        if quantity == "surface_temperature" and problem.outside.type == "temperature":
            raise IllPosedError("the outside surface temperature is fixed by the outside "
                                "condition, so it cannot be a target", field=path)
        if quantity != "surface_temperature" and problem.outside.type == "flux":
            raise IllPosedError("the outside heat flux is fixed by the outside condition, so "
                                "the heat loss cannot be a target", field=path)
        if sf.layer == 0 and problem.geometry != "plane" and problem.inner_radius == 0:
            raise IllPosedError("the solid core (layer 0) cannot be solved for",
                                field="solve_for.layer")


def _default_atol(problem: LayersProblem) -> float:
    temps = [c.value for c in (problem.inside, problem.outside)
             if c.type == "temperature" and c.value is not None]
    for c in (problem.inside, problem.outside):
        if c.type not in ("temperature", "flux"):
            temps.extend(v for v in (c.ambient, c.surroundings) if v is not None)
    span = (max(temps) - min(temps)) if len(temps) > 1 else 0.0
    return 1e-6 * max(span, 1.0)


# ------------------------------------------------------------------------------------------------
# Stage 2: geometry (the layer stack)
# ------------------------------------------------------------------------------------------------

def surface_area(geometry: str, position: float | np.ndarray, area: float, length: float
                 ) -> float | np.ndarray:
    """Area normal to the heat flow at `position`, m^2 (plane: `area`; cylinder 2 pi r L;
    sphere 4 pi r^2)."""
    if geometry == "plane":
        return area + 0.0 * position
    if geometry == "cylinder":
        return 2.0 * math.pi * length * position
    return 4.0 * math.pi * position * position


def shape_integrals(geometry: str, inner: float, position: float | np.ndarray, area: float,
                    length: float) -> tuple:
    """Geometry integrals of a layer from `inner` to `position` (scalar or array).

    Returns
    -------
    s : 1/m
        Integral of dr / A(r): the conduction resistance times the conductivity.
    w : m^2
        Integral of (V(r) - V(inner)) / A(r) dr: the generation term.
    v : m^3
        Volume V(position) - V(inner).

    Notes
    -----
    With the Kirchhoff transform phi(T) = integral of k dT, the layer equation
    (1/A) d/dr (A dphi/dr) = -g integrates to phi(r) = phi(inner) - Q_inner s(r) - g w(r), where
    Q_inner is the heat flow leaving the inner face outward. Closed forms (u = r - inner):
    plane s = u/area, w = u^2/2; cylinder s = ln(r/inner)/(2 pi L),
    w = (r^2 - inner^2)/4 - inner^2 ln(r/inner)/2; sphere s = u/(4 pi inner r),
    w = u^2 (3 inner + u)/(6 r). The cylinder w loses digits to cancellation when u << inner, so
    its Taylor series x^2/2 + sum_{n>=3} (-1)^n x^n/(2n) (x = u/inner) is used for x < 0.01.
    With inner = 0 (solid core) s is infinite and only w is used.
    """
    u = position - inner
    if geometry == "plane":
        return u / area, 0.5 * u * u, area * u
    if geometry == "cylinder":
        v = math.pi * length * u * (2.0 * inner + u)
        if inner == 0.0:
            return _INF + 0.0 * u, 0.25 * u * u, v
        x = u / inner
        s = np.log1p(x) / (2.0 * math.pi * length)
        series = 0.5 * x * x
        power = x * x * x
        for n in range(3, 14):
            series = series + (1.0 if n % 2 == 0 else -1.0) * power / (2.0 * n)
            power = power * x
        closed = 0.25 * x * (2.0 + x) - 0.5 * np.log1p(x)
        w = inner * inner * np.where(x < 1e-2, series, closed)
        return s, w, v
    r = position
    v = (4.0 / 3.0) * math.pi * u * (r * r + r * inner + inner * inner)
    if inner == 0.0:
        return _INF + 0.0 * u, u * u / 6.0, v
    return u / (4.0 * math.pi * inner * r), u * u * (3.0 * inner + u) / (6.0 * r), v


@dataclass(frozen=True)
class LayerStack:
    """Per-layer constants for marching through the body (all plain floats, SI, W for the whole
    body). `contact` holds R''_c / A_interface, K/W."""

    geometry: str
    area: float
    length: float
    positions: tuple[float, ...]
    s: tuple[float, ...]
    w: tuple[float, ...]
    v: tuple[float, ...]
    k0: tuple[float, ...]
    slope: tuple[float, ...]
    t_ref: tuple[float, ...]
    generation: tuple[float, ...]
    contact: tuple[float, ...]
    inner_area: float
    outer_area: float

    @property
    def n(self) -> int:
        return len(self.s)

    @property
    def basis_factor(self) -> float:
        """Divide whole-body heat flows by this to get the reporting basis (cylinder: L)."""
        return self.length if self.geometry == "cylinder" else 1.0


def build_stack(problem: LayersProblem, thicknesses: tuple[float, ...] | None = None
                ) -> LayerStack:
    """Positions and geometry integrals of every layer (thicknesses may override the problem's,
    for `solve_for`; a zero thickness is allowed there)."""
    geom = problem.geometry
    if thicknesses is None:
        thicknesses = tuple(lay.thickness for lay in problem.layers)
    start = 0.0 if geom == "plane" else float(problem.inner_radius or 0.0)
    positions = [start]
    for t in thicknesses:
        positions.append(positions[-1] + t)
    s, w, v = [], [], []
    for i in range(len(thicknesses)):
        si, wi, vi = shape_integrals(geom, positions[i], positions[i + 1], problem.area,
                                     problem.length)
        s.append(float(si))
        w.append(float(wi))
        v.append(float(vi))
    rc = problem.contact_resistances or (0.0,) * (len(thicknesses) - 1)
    contact = tuple(float(rc[j]) / float(surface_area(geom, positions[j + 1], problem.area,
                                                      problem.length))
                    for j in range(len(thicknesses) - 1))
    return LayerStack(
        geometry=geom, area=problem.area, length=problem.length, positions=tuple(positions),
        s=tuple(s), w=tuple(w), v=tuple(v),
        k0=tuple(float(lay.conductivity) for lay in problem.layers),
        slope=tuple(float(lay.conductivity_slope) for lay in problem.layers),
        t_ref=tuple(float(lay.conductivity_temperature) for lay in problem.layers),
        generation=tuple(float(lay.generation) for lay in problem.layers),
        contact=contact,
        inner_area=float(surface_area(geom, positions[0], problem.area, problem.length)),
        outer_area=float(surface_area(geom, positions[-1], problem.area, problem.length)),
    )


def _stationary_position(st: LayerStack, i: int, q_inner: float) -> float | None:
    """Position inside layer i where the heat flow Q(r) = Q_inner + g (V(r) - V(inner)) is zero
    (an interior temperature extreme), or None."""
    g = st.generation[i]
    if g == 0.0:
        return None
    r_a, r_b = st.positions[i], st.positions[i + 1]
    dv = -q_inner / g
    if dv <= 0.0:
        return None
    if st.geometry == "plane":
        r = r_a + dv / st.area
    elif st.geometry == "cylinder":
        r = math.sqrt(r_a * r_a + dv / (math.pi * st.length))
    else:
        r = (r_a ** 3 + 3.0 * dv / (4.0 * math.pi)) ** (1.0 / 3.0)
    return r if r_a < r < r_b else None


# ------------------------------------------------------------------------------------------------
# Stage 3: marching through the layers (exact per layer)
# ------------------------------------------------------------------------------------------------

def temperature_change(k_inner: float, slope: float, dphi: float) -> float | None:
    """Temperature change across a Kirchhoff-potential change `dphi` (W/m... per unit shape).

    For k(T) = k_inner + slope (T - T_inner), phi = k_inner dT + slope dT^2 / 2, so
    dT = 2 dphi / (k_inner + sqrt(k_inner^2 + 2 slope dphi)) (the root with k > 0, written
    without cancellation; slope = 0 gives dphi / k_inner). None when the conductivity would
    reach zero.
    """
    disc = k_inner * k_inner + 2.0 * slope * dphi
    if disc < 0.0 or k_inner <= 0.0:
        return None
    return 2.0 * dphi / (k_inner + math.sqrt(disc))


def march(st: LayerStack, temperature: float, heat_flow: float, nonlinear: bool = True
          ) -> tuple[float, float, int]:
    """Outside-surface temperature and outward heat flow from the inside-surface ones.

    Parameters
    ----------
    st : LayerStack
    temperature : float
        Inside surface temperature, degC.
    heat_flow : float
        Heat flow leaving the inside surface outward (into the body), W (whole body).
    nonlinear : bool
        False evaluates every layer at its `conductivity` (slopes ignored), for first guesses.

    Returns
    -------
    (outside temperature degC, outward heat flow at the outside W, flag)
        flag 0 when valid; -1 when a conductivity would reach zero on the cold side (the
        temperatures are too low), +1 on the hot side.

    Notes
    -----
    Per layer: Q_out = Q_in + g V; phi(T_out) - phi(T_in) = -(Q_in s + g w) (Kirchhoff
    transform, see `shape_integrals`); interfaces drop Q R''_c / A.
    """
    t, q = temperature, heat_flow
    n = len(st.s)
    for i in range(n):
        s = st.slope[i] if nonlinear else 0.0
        k_a = st.k0[i] + s * (t - st.t_ref[i]) if nonlinear else st.k0[i]
        g = st.generation[i]
        dphi = -g * st.w[i]
        if q != 0.0:
            dphi -= q * st.s[i]
        if s == 0.0:
            t += dphi / k_a
        else:
            dt = temperature_change(k_a, s, dphi)
            if dt is None:
                return t, q, (-1 if s > 0 else 1)
            if g != 0.0:
                r_star = _stationary_position(st, i, q)
                if r_star is not None:
                    s_star, w_star, _ = shape_integrals(st.geometry, st.positions[i], r_star,
                                                        st.area, st.length)
                    d_star = -g * float(w_star) - (q * float(s_star) if q != 0.0 else 0.0)
                    if temperature_change(k_a, s, d_star) is None:
                        return t, q, (-1 if s > 0 else 1)
            t += dt
        q += g * st.v[i]
        if i < n - 1:
            t -= q * st.contact[i]
    return t, q, 0


# ------------------------------------------------------------------------------------------------
# Stage 4: surface conditions and the steady state
# ------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Surface:
    kind: str                 # temperature | flux | film
    value: float = 0.0        # degC or W/m^2 into the body
    h: float = 0.0
    ambient: float = 0.0
    emissivity: float = 0.0
    surroundings: float = 0.0
    air: bool = False
    shape: str = "plane"
    orientation: str | None = None
    diameter: float | None = None
    characteristic_length: float = 1.0
    wind_speed: float = 0.0

    @property
    def nonlinear(self) -> bool:
        return self.kind == "film" and (self.air or self.emissivity > 0.0)


def _surface(cond: SurfaceCondition, geometry: str, radius: float) -> _Surface:
    if cond.type in ("temperature", "flux"):
        return _Surface(kind=cond.type, value=float(cond.value))  # type: ignore[arg-type]
    ambient = float(cond.ambient)  # type: ignore[arg-type]
    surroundings = ambient if cond.surroundings is None else float(cond.surroundings)
    if cond.type == "convection":
        return _Surface(kind="film", h=float(cond.film_coefficient),  # type: ignore[arg-type]
                        ambient=ambient, surroundings=surroundings)
    if cond.type == "convection_radiation":
        return _Surface(kind="film", h=float(cond.film_coefficient),  # type: ignore[arg-type]
                        ambient=ambient, emissivity=float(cond.emissivity),  # type: ignore
                        surroundings=surroundings)
    return _Surface(kind="film", ambient=ambient, emissivity=float(cond.emissivity),  # type: ignore
                    surroundings=surroundings, air=True, shape=geometry,
                    orientation=cond.orientation,
                    diameter=None if geometry == "plane" else 2.0 * radius,
                    characteristic_length=float(cond.characteristic_length),
                    wind_speed=float(cond.wind_speed))


def _air(sf: _Surface, temperature: float) -> AirCoefficient:
    return air_coefficient(temperature, sf.ambient, shape=sf.shape, orientation=sf.orientation,
                           diameter=sf.diameter, characteristic_length=sf.characteristic_length,
                           wind_speed=sf.wind_speed, emissivity=sf.emissivity,
                           surroundings=sf.surroundings)


def surface_loss(sf: _Surface, temperature: float) -> float:
    """Heat flux leaving the body through a film surface at `temperature`, W/m^2 (NaN below
    absolute zero when the surface radiates).

    Newton cooling h (T - T_amb) plus grey-body exchange emissivity sigma (T^4 - T_sur^4), the
    latter factored as (T - T_sur)(T + T_sur)(T^2 + T_sur^2) in K to keep digits; ``air``
    surfaces take both from `air_coefficient`.
    """
    if (sf.air or sf.emissivity > 0.0) and temperature < -KELVIN:
        return math.nan
    if sf.air:
        return _air(sf, temperature).heat_flux
    loss = sf.h * (temperature - sf.ambient)
    if sf.emissivity > 0.0:
        ts, tsur = temperature + KELVIN, sf.surroundings + KELVIN
        loss += sf.emissivity * STEFAN_BOLTZMANN * (ts - tsur) * (ts + tsur) * (ts * ts
                                                                              + tsur * tsur)
    return loss


def _linearised(sf: _Surface, temperature: float) -> _Surface:
    """A non-radiating convection surface with the same loss slope near `temperature`."""
    if not sf.nonlinear:
        return sf
    if sf.air:
        c = _air(sf, temperature)
        h_c, h_r = c.convective_coefficient, c.radiative_coefficient
    else:
        h_c = sf.h
        ts, tsur = temperature + KELVIN, sf.surroundings + KELVIN
        h_r = sf.emissivity * STEFAN_BOLTZMANN * (ts + tsur) * (ts * ts + tsur * tsur)
    h = max(h_c + h_r, 1e-12)
    return _Surface(kind="film", h=h, ambient=(h_c * sf.ambient + h_r * sf.surroundings) / h,
                    surroundings=sf.surroundings)


@dataclass(frozen=True)
class StackState:
    """The solved state at both surfaces (whole-body heat flows, W, outward).

    `residual` is the final imbalance of the outside condition as a temperature, K: the
    mismatch of a fixed outside temperature, or an energy imbalance (W) divided by the film
    conductance (W/K) of the surface that takes it up, or times the layers' resistance.
    `iterations` counts residual evaluations (0 = exact).
    """

    inside_temperature: float
    inside_heat_flow: float
    outside_temperature: float
    outside_heat_flow: float
    iterations: int
    residual: float
    converged: bool


def _residual_kelvin(r: float, st: LayerStack, inside: _Surface, outside: _Surface,
                     t_in: float, t_out: float, layer_resistance: float) -> float:
    """Express a final residual (K or W, see `_residual_function`) as a temperature, K."""
    if outside.kind == "temperature":
        return abs(r)
    if outside.kind == "film":
        h = _linearised(outside, t_out).h if outside.nonlinear else outside.h
        return abs(r) / (h * st.outer_area)
    if inside.kind == "film" and st.inner_area > 0:
        h = _linearised(inside, t_in).h if inside.nonlinear else inside.h
        return abs(r) / (h * st.inner_area)
    return abs(r) * layer_resistance


def _residual_function(st: LayerStack, ins: _Surface, out: _Surface, nonlinear: bool
                       ) -> tuple[Callable[[float], tuple[float, float]],
                                  Callable[[float], float], int]:
    """r(p) for the single unknown p and the map p -> (inside temperature, inside heat flow).

    p is the inside heat flow when the inside temperature is fixed (r decreases with p), else
    the inside surface temperature (r increases with p). r > 0 means the outside surface is
    hotter than its condition allows: +inf/-inf stand for states beyond the valid range of a
    conductivity law (too hot / too cold) or below absolute zero at a radiating surface.
    """
    a_in, a_out = st.inner_area, st.outer_area
    if ins.kind == "temperature":
        t_fixed = ins.value

        def state(p: float) -> tuple[float, float]:
            return t_fixed, p
        direction = -1
    elif ins.kind == "flux":
        q_fixed = ins.value * a_in

        def state(p: float) -> tuple[float, float]:
            return p, q_fixed
        direction = 1
    else:
        def state(p: float) -> tuple[float, float]:
            return p, -surface_loss(ins, p) * a_in
        direction = 1

    def residual(p: float) -> float:
        t_in, q_in = state(p)
        if q_in != q_in:
            return -_INF
        t_out, q_out, flag = march(st, t_in, q_in, nonlinear)
        if flag:
            return flag * _INF
        if out.kind == "temperature":
            return t_out - out.value
        if out.kind == "flux":
            return -out.value * a_out - q_out
        loss = surface_loss(out, t_out)
        if loss != loss:
            return -_INF
        return loss * a_out - q_out

    return state, residual, direction


def _reference_temperatures(ins: _Surface, out: _Surface) -> tuple[float, float]:
    def ref(sf: _Surface) -> float | None:
        if sf.kind == "temperature":
            return sf.value
        if sf.kind == "film":
            return sf.ambient
        return None
    a, b = ref(ins), ref(out)
    a = b if a is None else a
    b = a if b is None else b
    return float(a), float(b)  # type: ignore[arg-type]


def _affine_root(residual: Callable[[float], float], p0: float, step: float
                 ) -> tuple[float, int]:
    """Root of an affine r(p) from two evaluations plus one secant refinement."""
    r0, r1 = residual(p0), residual(p0 + step)
    slope = (r1 - r0) / step
    if slope == 0.0 or not math.isfinite(slope):
        raise IllPosedError("the surface conditions do not determine the steady state "
                            "(no exchange with the surroundings)", field="outside.type",
                            reason="not-unique")
    p = p0 - r0 / slope
    p -= residual(p) / slope
    return p, 4


def _bracket(residual: Callable[[float], float], p0: float, step: float, direction: int,
             limit: int = 400
             ) -> tuple[float, float, float, float, int]:
    """Expand from p0 (doubling steps) until r changes sign, then pull infinite ends in by
    bisection. Returns (a, r(a), b, r(b), evaluations) with finite r of opposite signs."""
    evals = 1
    ra = residual(p0)
    a = p0
    if ra == 0.0:
        return a, ra, a, ra, evals
    move = -direction if ra > 0 else direction
    b, rb = a, ra
    found = False
    for _ in range(limit):
        b = a + move * step
        rb = residual(b)
        evals += 1
        if (rb > 0) != (ra > 0) or rb == 0.0:
            found = True
            break
        a, ra = b, rb
        step *= 2.0
        if abs(b) > 1e30:
            break
    if not found:
        raise IllPosedError("no steady state exists: every trial state leaves the range where "
                            "all conductivities are positive and radiating surfaces are above "
                            "absolute zero (check conductivity_slope, generation and fluxes)",
                            field="layers")
    # Pull an infinite end towards the finite one, keeping the sign change.
    for _ in range(limit):
        if math.isfinite(ra) and math.isfinite(rb):
            break
        mid = 0.5 * (a + b)
        rm = residual(mid)
        evals += 1
        if rm == 0.0:
            return mid, rm, mid, rm, evals
        if (rm > 0) == (ra > 0):
            a, ra = mid, rm
        else:
            b, rb = mid, rm
    if not (math.isfinite(ra) and math.isfinite(rb)):
        raise IllPosedError("no steady state exists within the valid range of the conductivity "
                            "laws", field="layers")
    return a, ra, b, rb, evals


def solve_stack(st: LayerStack, inside: _Surface, outside: _Surface, atol: float,
                max_iterations: int) -> StackState:
    """Steady state for one layer stack.

    Linear problems (constant conductivities, no radiation or air surfaces) have an affine
    residual and are solved exactly. Otherwise a first guess from the linearised problem starts a
    bracket expansion and Brent's method (scipy.optimize.brentq) on the single unknown, to a
    temperature accuracy of `atol`.
    """
    nonlinear = (inside.nonlinear or outside.nonlinear
                 or any(s != 0.0 for s in st.slope))
    t_in_ref, t_out_ref = _reference_temperatures(inside, outside)
    span = abs(t_in_ref - t_out_ref) + 1.0

    # First guess: the linear (or linearised) problem, solved exactly.
    guess_temp = 0.5 * (t_in_ref + t_out_ref)
    lin_in, lin_out = _linearised(inside, guess_temp), _linearised(outside, guess_temp)
    state, lin_residual, direction = _residual_function(st, lin_in, lin_out, False)
    p_lin, evals = _affine_root(lin_residual, 0.0 if direction < 0 else t_in_ref,
                                1.0 if direction < 0 else span)
    # Sensitivity of the outside temperature to p (linearised), to turn atol into a tolerance
    # on p: temperatures through the body change linearly between the inside surface (0 or 1 K
    # per unit of p) and the outside surface, so the outside bounds the error.
    t_a = march(st, *state(p_lin), nonlinear=False)[0]
    t_b = march(st, *state(p_lin + 1.0), nonlinear=False)[0]
    sens = abs(t_b - t_a)
    layer_sens = sens if direction < 0 and math.isfinite(sens) else 0.0
    if direction < 0:
        # p is the heat flow from a fixed inside temperature: an error dQ shifts temperatures
        # by dQ times the resistance downstream, outside film included.
        sens = sens if sens > 0 and math.isfinite(sens) else 1.0
        if lin_out.kind == "film" and lin_out.h > 0:
            sens += 1.0 / (lin_out.h * st.outer_area)
        xtol = atol / (4.0 * sens)
        step = 0.1 * span / sens
    else:
        sens = max(sens, 1.0) if math.isfinite(sens) else 1.0
        xtol = atol / (4.0 * sens)
        step = 0.05 * span
    state, residual, direction = _residual_function(st, inside, outside, True)
    if not nonlinear:
        p = p_lin
        r = residual(p)
        t_in, q_in = state(p)
        t_out, q_out, _ = march(st, t_in, q_in)
        return StackState(t_in, q_in, t_out, q_out, 0,
                          _residual_kelvin(r, st, inside, outside, t_in, t_out, layer_sens),
                          True)

    a, ra, b, rb, more = _bracket(residual, p_lin, step, direction)
    evals += more
    if a == b:
        p, converged = a, True
    else:
        p, info = optimize.brentq(residual, min(a, b), max(a, b), xtol=xtol,
                                  rtol=4 * np.finfo(float).eps, maxiter=max_iterations,
                                  full_output=True, disp=False)
        evals += info.function_calls
        converged = bool(info.converged)
    t_in, q_in = state(p)
    t_out, q_out, _ = march(st, t_in, q_in)
    r = residual(p)
    return StackState(t_in, q_in, t_out, q_out, evals,
                      _residual_kelvin(r, st, inside, outside, t_in, t_out, layer_sens),
                      converged)


# ------------------------------------------------------------------------------------------------
# Stage 5: design target (solve_for)
# ------------------------------------------------------------------------------------------------

_TARGET_LABEL = {
    "surface_temperature": ("the outside surface temperature", "degC"),
    "heat_flow_per_length": ("the heat flow per metre", "W/m"),
    "heat_flux": ("the outside heat flux", "W/m^2"),
    "heat_flow": ("the heat flow", "W"),
}


def _target_value(quantity: str, st: LayerStack, state: StackState) -> float:
    if quantity == "surface_temperature":
        return state.outside_temperature
    if quantity == "heat_flux":
        return state.outside_heat_flow / st.outer_area
    if quantity == "heat_flow_per_length":
        return state.outside_heat_flow / st.length
    return state.outside_heat_flow


def solve_thickness(problem: LayersProblem, atol: float
                    ) -> tuple[SolvedThickness, int, bool, tuple[str, ...]]:
    """Thickness of layer `solve_for.layer` that meets `solve_for.target`.

    Returns
    -------
    (SolvedThickness, state evaluations, converged, notes)

    Raises
    ------
    IllPosedError
        reason ``target-unreachable``, field ``solve_for.target.<quantity>``, when no thickness
        between 0 and MAX_SOLVED_THICKNESS gives the target; the message gives the values at
        zero thickness and at the largest thickness, and the peak where the heat flow first
        rises (below the critical radius).

    Notes
    -----
    The outside surface temperature and heat flux change monotonically with thickness; the
    heat flow of cylinders and spheres first rises while the outer radius is below the critical
    radius. When it does (detected from a small first step), the thickness of maximum heat flow
    is located (bounded scalar search) and the root is taken on the falling branch beyond it,
    where added thickness keeps reducing the loss; a root on the rising branch is reported as
    `alternative_thickness`. Roots are bracketed by expanding upward from the given thickness
    and polished with Brent's method.
    """
    sf = problem.solve_for
    assert sf is not None
    j = sf.layer
    quantity = sf.target.quantity
    target = sf.target.value
    label, unit = _TARGET_LABEL[quantity]
    name = problem.layers[j].name or f"layer {j}"
    base = [lay.thickness for lay in problem.layers]
    counter = {"states": 0, "converged": True}

    def value(t: float) -> float:
        th = list(base)
        th[j] = t
        st = build_stack(problem, tuple(th))
        ins = _surface(problem.inside, problem.geometry, st.positions[0])
        out = _surface(problem.outside, problem.geometry, st.positions[-1])
        state = solve_stack(st, ins, out, atol, problem.max_iterations)
        counter["states"] += 1
        counter["converged"] = counter["converged"] and state.converged
        value = _target_value(quantity, st, state)
        # Heat-flow targets are magnitudes (loss of a hot line or gain of a cold one).
        return value if quantity == "surface_temperature" else abs(value)

    def f(t: float) -> float:
        return value(t) - target

    field = f"solve_for.target.{quantity}"
    v0 = value(0.0)
    notes: list[str] = []
    lower, f_lower = 0.0, v0 - target
    peak: tuple[float, float] | None = None
    if quantity in ("heat_flow", "heat_flow_per_length") and problem.geometry != "plane":
        r_in = (problem.inner_radius or 0.0) + sum(base[:j])
        # A 1 % step: large enough that the rise below the critical radius stands clear of the
        # state solver's tolerance, small enough not to step over a peak that matters.
        delta = max(0.01 * r_in, 1e-5)
        if abs(value(delta)) > abs(v0) * (1.0 + 1e-7):
            # Below the critical radius: locate the thickness of maximum heat flow.
            hi = delta
            v_hi = value(hi)
            while hi < MAX_SOLVED_THICKNESS:
                nxt = min(hi * 4.0, MAX_SOLVED_THICKNESS)
                v_nxt = value(nxt)
                if abs(v_nxt) < abs(v_hi):
                    hi = nxt
                    break
                hi, v_hi = nxt, v_nxt
            opt = optimize.minimize_scalar(lambda t: -abs(value(t)), bounds=(0.0, hi),
                                           method="bounded", options={"xatol": 1e-9 * hi})
            t_peak = float(opt.x)
            v_peak = value(t_peak)
            peak = (t_peak, v_peak)
            lower, f_lower = t_peak, v_peak - target
    if f_lower == 0.0:
        root, outer_iterations = lower, 0
    else:
        t_lo, f_lo = lower, f_lower
        t_hi = max(problem.layers[j].thickness, 2.0 * lower, 1e-6)
        t_hi = min(t_hi, MAX_SOLVED_THICKNESS)
        while True:
            f_hi = f(t_hi)
            if f_hi == 0.0 or (f_hi > 0) != (f_lo > 0):
                break
            if t_hi >= MAX_SOLVED_THICKNESS:
                _raise_unreachable(problem, quantity, target, v0, f_hi + target, peak,
                                   name, label, unit, field)
            t_lo, f_lo = t_hi, f_hi
            t_hi = min(4.0 * t_hi, MAX_SOLVED_THICKNESS)
        if f_hi == 0.0:
            root, outer_iterations = t_hi, 0
        else:
            root, info = optimize.brentq(f, t_lo, t_hi, xtol=1e-12, rtol=1e-10,
                                         maxiter=problem.max_iterations, full_output=True,
                                         disp=False)
            outer_iterations = info.iterations
            counter["converged"] = counter["converged"] and bool(info.converged)
    alternative = None
    note = None
    if peak is not None:
        t_peak, v_peak = peak
        r_peak = (problem.inner_radius or 0.0) + sum(base[:j]) + t_peak
        note = (f"layer '{name}' starts below the critical radius: {label} rises with thickness "
                f"up to {v_peak:.6g} {unit} at a thickness of {t_peak:.4g} m (outer radius "
                f"{r_peak:.4g} m) and falls beyond it; the thickness reported is on the "
                "falling branch")
        if (v0 - target > 0) != (v_peak - target > 0) and v0 != target:
            alt = optimize.brentq(f, 0.0, t_peak, xtol=1e-12, rtol=1e-10,
                                  maxiter=problem.max_iterations)
            alternative = float(alt)
            note += (f"; a thinner layer of {alternative:.4g} m gives the same value, and "
                     "thicknesses in between give more")
        notes.append(note)
    th = list(base)
    th[j] = float(root)
    outer_position = build_stack(problem, tuple(th)).positions[j + 1]
    achieved = value(float(root))
    solved = SolvedThickness(layer=j, name=name, thickness=float(root),
                             outer_position=outer_position, quantity=quantity, target=target,
                             achieved=achieved, iterations=int(outer_iterations),
                             alternative_thickness=alternative, note=note)
    return solved, counter["states"], bool(counter["converged"]), tuple(notes)


def _raise_unreachable(problem: LayersProblem, quantity: str, target: float, v0: float,
                       v_cap: float, peak: tuple[float, float] | None, name: str, label: str,
                       unit: str, field: str) -> None:
    parts = [f"solve_for: {label} cannot reach {target:.6g} {unit} by changing the thickness "
             f"of layer '{name}': it is {v0:.6g} {unit} with zero thickness and {v_cap:.6g} "
             f"{unit} at {MAX_SOLVED_THICKNESS:g} m"]
    if peak is not None:
        parts.append(f"and never exceeds {peak[1]:.6g} {unit} (at a thickness of {peak[0]:.4g} "
                     "m, the critical radius)")
    if quantity in ("heat_flow", "heat_flow_per_length", "heat_flux"):
        if problem.geometry == "sphere":
            parts.append("(around a sphere a layer's resistance never exceeds "
                         "1/(4 pi k r_inner), so the heat flow tends to a finite limit as the "
                         "thickness grows without bound)")
        elif problem.geometry == "cylinder" and quantity != "heat_flux":
            parts.append("(around a cylinder the heat flow falls only logarithmically with "
                         "thickness)")
        else:
            parts.append("(the limit as the thickness grows without bound is the heat flow "
                         "from the other layers' generation alone, zero without generation)")
    else:
        parts.append("(as the thickness grows without bound it approaches the outside "
                     "ambient, or the temperature the other layers' generation sustains)")
    raise IllPosedError(" ".join(parts), field=field, reason="target-unreachable")


# ------------------------------------------------------------------------------------------------
# Stage 6: post-processing
# ------------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class _Face:
    t_inner: float
    t_outer: float
    q_inner: float
    q_outer: float
    k_mean: float
    stationary: float | None


def march_faces(st: LayerStack, temperature: float, heat_flow: float) -> tuple[_Face, ...]:
    """Face temperatures, heat flows and Kirchhoff mean conductivities of every layer."""
    faces = []
    t, q = temperature, heat_flow
    for i in range(st.n):
        k_a = st.k0[i] + st.slope[i] * (t - st.t_ref[i])
        dphi = -st.generation[i] * st.w[i] - (q * st.s[i] if q != 0.0 else 0.0)
        dt = temperature_change(k_a, st.slope[i], dphi)
        if dt is None:
            dt = math.nan
        r_star = _stationary_position(st, i, q)
        q_b = q + st.generation[i] * st.v[i]
        # Kirchhoff mean conductivity of the linear law: k at the mean face temperature.
        faces.append(_Face(t, t + dt, q, q_b, k_a + 0.5 * st.slope[i] * dt, r_star))
        t = t + dt
        q = q_b
        if i < st.n - 1:
            t -= q * st.contact[i]
    return tuple(faces)


def _layer_temperatures(st: LayerStack, i: int, face: _Face, positions: np.ndarray
                        ) -> np.ndarray:
    s, w, _ = shape_integrals(st.geometry, st.positions[i], positions, st.area, st.length)
    dphi = -st.generation[i] * w
    if face.q_inner != 0.0:
        dphi = dphi - face.q_inner * s
    k_a = st.k0[i] + st.slope[i] * (face.t_inner - st.t_ref[i])
    disc = np.maximum(k_a * k_a + 2.0 * st.slope[i] * dphi, 0.0)
    return face.t_inner + 2.0 * dphi / (k_a + np.sqrt(disc))


def temperature_profile(st: LayerStack, faces: tuple[_Face, ...], points: int) -> Profile:
    """Profile with about `points` points shared by thickness (two or more per layer), plus the
    interior extreme of any generating layer."""
    total = st.positions[-1] - st.positions[0]
    pos, temp, lay = [], [], []
    for i, face in enumerate(faces):
        r_a, r_b = st.positions[i], st.positions[i + 1]
        count = max(2, int(round(points * (r_b - r_a) / total)) if total > 0 else 2)
        x = np.linspace(r_a, r_b, count)
        if face.stationary is not None:
            x = np.sort(np.append(x, face.stationary))
        t = _layer_temperatures(st, i, face, x)
        t[0], t[-1] = face.t_inner, face.t_outer  # exact faces
        pos.append(x)
        temp.append(t)
        lay.append(np.full(x.size, i))
    positions = np.concatenate(pos)
    temperatures = np.concatenate(temp)
    layer = np.concatenate(lay)
    for arr in (positions, temperatures, layer):
        arr.flags.writeable = False
    return Profile(positions=positions, temperatures=temperatures, layer=layer)


def _layer_extremes(st: LayerStack, i: int, face: _Face
                    ) -> tuple[tuple[float, float], tuple[float, float]]:
    """((hottest T, position), (coldest T, position)) of layer i, exact."""
    cands = [(face.t_inner, st.positions[i]), (face.t_outer, st.positions[i + 1])]
    if face.stationary is not None:
        t = float(_layer_temperatures(st, i, face, np.array([face.stationary]))[0])
        cands.append((t, face.stationary))
    return max(cands), min(cands)


def _surface_result(name: str, sf: _Surface, position: float, area: float, temperature: float,
                    heat_flow_in: float, basis: float) -> tuple[SurfaceResult, float | None,
                                                                tuple[str, ...]]:
    """SurfaceResult, the combined film coefficient (or None), and air warnings."""
    flux = heat_flow_in / area if area > 0 else 0.0
    common = dict(name=name, position=position, area=area / basis, temperature=temperature,
                  heat_flow=heat_flow_in / basis, heat_flux=flux)
    if sf.kind != "film":
        if sf.kind == "flux":
            common["heat_flux"] = sf.value
        return SurfaceResult(**common), None, ()  # type: ignore[arg-type]
    if sf.air:
        c = _air(sf, temperature)
        return (SurfaceResult(**common, convective_coefficient=c.convective_coefficient,  # type: ignore[arg-type]
                              radiative_coefficient=c.radiative_coefficient,
                              correlation=c.correlation, nusselt=c.nusselt,
                              rayleigh=c.rayleigh, reynolds=c.reynolds),
                c.convective_coefficient + c.radiative_coefficient, c.warnings)
    ts, tsur = temperature + KELVIN, sf.surroundings + KELVIN
    h_r = sf.emissivity * STEFAN_BOLTZMANN * (ts + tsur) * (ts * ts + tsur * tsur)
    return (SurfaceResult(**common, convective_coefficient=sf.h,  # type: ignore[arg-type]
                          radiative_coefficient=h_r if sf.emissivity > 0 else None),
            sf.h + h_r, ())


def solve_layers(problem: LayersProblem) -> LayersResult:
    """Steady conduction through layers, with an optional thickness design target.

    Parameters
    ----------
    problem : LayersProblem

    Returns
    -------
    LayersResult
        See its attributes. Convergence status ``converged`` or ``max_iterations`` (a root
        finder ran out of iterations) or ``non_finite``.

    Raises
    ------
    IllPosedError
        Input rules (see `validate_problem`), no steady state within the valid range of the
        conductivity laws, an unreachable design target (reason ``target-unreachable``).

    Notes
    -----
    Each layer obeys (1/r^n) d/dr (r^n k(T) dT/dr) + g = 0 (n = 0 plane, 1 cylinder, 2 sphere).
    With k linear in T the Kirchhoff potential phi = integral of k dT turns it into a linear
    equation, solved exactly (`shape_integrals`); phi is inverted in closed form
    (`temperature_change`). Interfaces: continuous heat flow, temperature drop q R''_c.
    Surfaces: T = value; -k dT/dn = value (into the body); convection h (T - T_amb); plus
    radiation emissivity sigma (T^4 - T_sur^4); ``air``: coefficients from
    `service.solvers.air`. The one unknown (the inside heat flow or surface temperature) is
    found exactly for linear problems and by a bracketed Brent root otherwise.

    References
    ----------
    Incropera et al., 6th ed., sections 3.1-3.5 (from memory); Carslaw and Jaeger, 2nd ed.,
    section 1.7 (Kirchhoff transform) (from memory).
    """
    validate_problem(problem)
    atol = problem.atol if problem.atol is not None else _default_atol(problem)
    notes: list[str] = []
    solved = None
    outer_states = 0
    outer_converged = True
    if problem.solve_for is not None:
        solved, outer_states, outer_converged, more = solve_thickness(problem, atol)
        notes.extend(more)
        layers = list(problem.layers)
        layers[solved.layer] = replace(layers[solved.layer], thickness=solved.thickness)
        problem = replace(problem, layers=tuple(layers))

    st = build_stack(problem)
    ins = _surface(problem.inside, problem.geometry, st.positions[0])
    out = _surface(problem.outside, problem.geometry, st.positions[-1])
    state = solve_stack(st, ins, out, atol, problem.max_iterations)
    faces = march_faces(st, state.inside_temperature, state.inside_heat_flow)
    basis = st.basis_factor
    names = [lay.name or f"layer {i}" for i, lay in enumerate(problem.layers)]

    # Surfaces.
    inside_res, h_in, warn_in = _surface_result(
        "inside", ins, st.positions[0], st.inner_area, state.inside_temperature,
        state.inside_heat_flow, basis)
    outside_res, h_out, warn_out = _surface_result(
        "outside", out, st.positions[-1], st.outer_area, state.outside_temperature,
        -state.outside_heat_flow, basis)
    warnings = list(dict.fromkeys(warn_in + warn_out))

    # Resistances (per basis).
    elements: list[tuple[str, str, float | None]] = []
    layer_element: list[int] = []
    if h_in is not None and st.inner_area > 0:
        elements.append(("inside film", "film",
                         basis / (h_in * st.inner_area) if h_in > 0 else None))
    solid_core = problem.geometry != "plane" and st.positions[0] == 0.0
    rc = problem.contact_resistances or (0.0,) * (st.n - 1)
    for i, face in enumerate(faces):
        r_layer = None if (solid_core and i == 0) else basis * st.s[i] / face.k_mean
        layer_element.append(len(elements))
        elements.append((f"layer '{names[i]}'", "layer", r_layer))
        if i < st.n - 1 and rc[i] > 0:
            elements.append((f"contact {i}-{i + 1}", "contact", basis * st.contact[i]))
    if h_out is not None:
        elements.append(("outside film", "film",
                         basis / (h_out * st.outer_area) if h_out > 0 else None))
    known = [r for _, _, r in elements if r is not None]
    total = sum(known) if len(known) == len(elements) else None
    resistances = tuple(ResistanceElement(n_, k_, r_, (r_ / total) if (total and r_ is not None)
                                          else None) for n_, k_, r_ in elements)

    # Overall coefficient on the outside area.
    any_generation = any(g != 0.0 for g in st.generation)
    overall = None
    if not any_generation and ins.kind != "flux" and out.kind != "flux" and not solid_core:
        t_in_ref, t_out_ref = _reference_temperatures(ins, out)
        if t_in_ref != t_out_ref:
            overall = state.outside_heat_flow / (st.outer_area * (t_in_ref - t_out_ref))

    # Layers and interfaces.
    layer_results = []
    for i, face in enumerate(faces):
        (t_hot, x_hot), (t_cold, x_cold) = _layer_extremes(st, i, face)
        element = resistances[layer_element[i]]
        layer_results.append(LayerResult(
            index=i, name=names[i], inner_position=st.positions[i],
            outer_position=st.positions[i + 1],
            thickness=st.positions[i + 1] - st.positions[i], inner_temperature=face.t_inner,
            outer_temperature=face.t_outer, hottest_temperature=t_hot, hottest_position=x_hot,
            coldest_temperature=t_cold, coldest_position=x_cold,
            mean_conductivity=face.k_mean, heat_flow_inner=face.q_inner / basis,
            heat_flow_outer=face.q_outer / basis, resistance=element.resistance,
            share=element.share))
    interfaces = tuple(
        InterfaceResult(index=i, position=st.positions[i + 1],
                        temperature_inner_side=faces[i].t_outer,
                        temperature_outer_side=faces[i + 1].t_inner,
                        contact_resistance=float(rc[i]),
                        heat_flux=faces[i].q_outer / float(surface_area(
                            problem.geometry, st.positions[i + 1], st.area, st.length)))
        for i in range(st.n - 1))
    profile = temperature_profile(st, faces, problem.profile_points)

    # Critical radius of the outermost layer.
    critical = None
    if problem.geometry != "plane" and h_out is not None and h_out > 0:
        i = st.n - 1
        k_m = faces[i].k_mean
        factor = 1.0 if problem.geometry == "cylinder" else 2.0
        r_c = factor * k_m / h_out
        r_out = st.positions[-1]
        rule = "k/h" if factor == 1.0 else "2k/h"
        if r_out < r_c:
            text = (f"the outer radius {r_out:.4g} m is below the critical radius {rule} = "
                    f"{r_c:.4g} m of layer '{names[i]}': adding more of it increases the heat "
                    f"flow until the outer radius reaches {r_c:.4g} m")
            notes.append(text)
        elif st.positions[i] < r_c:
            text = (f"layer '{names[i]}' starts inside its critical radius {rule} = {r_c:.4g} m: "
                    f"its first {r_c - st.positions[i]:.4g} m added heat flow, beyond that "
                    "radius more thickness reduces it")
            notes.append(text)
        else:
            text = (f"the critical radius {rule} = {r_c:.4g} m lies inside the inner radius of "
                    f"layer '{names[i]}': more thickness always reduces the heat flow")
        critical = CriticalRadius(layer=i, radius=r_c, outer_radius=r_out, conductivity=k_m,
                                  film_coefficient=h_out,
                                  insulation_increases_heat_flow=r_out < r_c, note=text)

    # Safety.
    body_hot: tuple[float, float, str] | None = None
    body_cold: tuple[float, float, str] | None = None
    materials = []
    for i, face in enumerate(faces):
        (t_hot, x_hot), (t_cold, x_cold) = _layer_extremes(st, i, face)

        def where(x: float, i: int = i, face_word: str = "hot") -> str:
            if x == st.positions[i]:
                return f"layer '{names[i]}' {face_word} face (inner)"
            if x == st.positions[i + 1]:
                return f"layer '{names[i]}' {face_word} face (outer)"
            return f"layer '{names[i]}' interior"
        hot_loc = Location(t_hot, where(x_hot, i, "hot"), (x_hot,))
        cold_loc = Location(t_cold, where(x_cold, i, "cold"), (x_cold,))
        if body_hot is None or t_hot > body_hot[0]:
            body_hot = (t_hot, x_hot, hot_loc.description)
        if body_cold is None or t_cold < body_cold[0]:
            body_cold = (t_cold, x_cold, cold_loc.description)
        limit = problem.layers[i].max_temperature
        if limit is not None:
            materials.append((f"layers.{i}.max_temperature", float(limit),
                              Scope(f"layer '{names[i]}'", hot_loc, cold_loc)))
    assert body_hot is not None and body_cold is not None
    body = Scope("body", Location(body_hot[0], body_hot[2], (body_hot[1],)),
                 Location(body_cold[0], body_cold[2], (body_cold[1],)))
    out_loc = Location(state.outside_temperature, "outside surface", (st.positions[-1],))
    surfaces = [Scope("outside surface", out_loc, out_loc)]
    if ins.air:
        in_loc = Location(state.inside_temperature, "inside surface", (st.positions[0],))
        surfaces.append(Scope("inside surface", in_loc, in_loc))
    safety = check_limits(problem.limits, body, surfaces, materials)

    # Convergence.
    iterations = state.iterations + outer_states
    converged = state.converged and outer_converged
    finite = all(math.isfinite(x) for x in (state.inside_temperature, state.outside_temperature,
                                              state.inside_heat_flow, state.outside_heat_flow))
    finite = finite and bool(np.all(np.isfinite(profile.temperatures)))
    residual = state.residual
    res_unit = "K (surface energy imbalance as a temperature)"
    if not finite:
        status, message = "non_finite", "a non-finite temperature or heat flow appeared"
    elif not converged:
        status, message = "max_iterations", (
            f"a root finder stopped after max_iterations = {problem.max_iterations}; residual "
            f"in {res_unit}")
    elif state.iterations == 0 and problem.solve_for is None:
        status, message = "converged", f"linear problem solved exactly; residual in {res_unit}"
    else:
        status, message = "converged", (
            "bracketed root (Brent) on the surface energy balance"
            + (" and on the layer thickness" if problem.solve_for is not None else "")
            + f"; residual in {res_unit}")
    convergence = Convergence(status=status, message=message, iterations=iterations,
                              residual=residual, atol=atol)

    q_out = state.outside_heat_flow
    return LayersResult(
        geometry=problem.geometry, basis="W/m" if problem.geometry == "cylinder" else "W",
        heat_flow=q_out / basis, heat_flow_total=q_out, outside_heat_flux=q_out / st.outer_area,
        surfaces=(inside_res, outside_res), layers=tuple(layer_results),
        interfaces=interfaces, resistances=resistances, total_resistance=total,
        overall_coefficient=overall, profile=profile, solved=solved, critical_radius=critical,
        notes=tuple(notes), warnings=tuple(warnings), convergence=convergence, safety=safety)
