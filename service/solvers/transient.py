"""Unsteady conduction in simple bodies after a sudden change of surface condition.

Bodies: plane slab, long cylinder, sphere (eigenfunction series, with a short-time Laplace form
for the first instants), semi-infinite solid and lumped body (closed forms), and the product
bodies rectangular bar (slab x slab), box (slab x slab x slab) and short cylinder (cylinder x
slab). Every body starts at a uniform temperature and meets, from t = 0, one surface condition
on all of its faces: convection to a fluid at a fixed ambient temperature, a fixed surface
temperature, or (semi-infinite solid only) a constant heat flux.

Stages (each a public function, testable alone):

1. eigenvalues and coefficients: `service.solvers.eigen.body_roots` / `body_coefficients`;
2. truncation rule: `truncation_terms` (terms per time from a tail bound) and `tail_bound`;
3. summation: `spatial_modes`, `sum_series` (one matrix product per group of times);
4. short-time form: `laplace_kernels`, `invert_talbot` (times whose series would need more than
   `max_terms` terms);
5. one body: `body_response`; products, energy, safety and the target time in `solve_transient`.

Caches: none here; the eigenvalue tables are cached (bounded) in `service.solvers.eigen`. Root
tables are requested in power-of-two lengths so that repeated solves hit that cache.

References
----------
Carslaw, H. S. and Jaeger, J. C., *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959:
sect. 3.10 (slab), 7.7 (cylinder), 9.3 (sphere), 1.15 and 12.x (Laplace-transform solutions)
(from memory).
Incropera, F. P. et al., *Fundamentals of Heat and Mass Transfer*, 6th ed., Wiley, 2007:
eqs. 5.5-5.6 (lumped body), 5.39-5.52 (one-term forms and energy), 5.64-5.69 (product
solutions) (from memory).
Langston, L. S., "Heat transfer from multidimensional objects using one-dimensional solutions
for heat loss", Int. J. Heat Mass Transfer 25 (1982) 149-150 (product rule for Q/Q0) (from
memory).
Abate, J. and Valko, P. P., "Multi-precision Laplace transform inversion", Int. J. Numer. Meth.
Engng 60 (2004) 979-993 (fixed Talbot contour) (from memory).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from scipy import optimize, special

from service.solvers import eigen
from service.solvers.convergence import Convergence
from service.solvers.errors import IllPosedError, TooLargeError
from service.solvers.safety import Limits, Location, SafetyReport, Scope, check_limits
from service.solvers.semi_infinite import (
    convection_response,
    energy_per_area,
    fixed_temperature_response,
    flux_rise,
)

SHAPES = ("slab", "cylinder", "sphere", "semi_infinite", "lumped", "bar", "box",
          "short_cylinder")
SURFACE_TYPES = ("convection", "temperature", "flux")
#: Above this Biot number h (V/A) / k the lumped model is flagged (common practice, no source).
LUMPED_BIOT_LIMIT = 0.1
#: Relative error of the one-term approximation above which a warning is given.
ONE_TERM_TOLERANCE = 0.01
DEFAULT_MAX_TERMS = 200
#: Default atol as a fraction of |initial - ambient| (API.md: 1e-6 of the largest difference).
DEFAULT_RELATIVE_ATOL = 1e-6
#: Fixed-Talbot node counts: the answer and the coarser check that gives its error estimate.
TALBOT_NODES = 20
TALBOT_CHECK_NODES = 16
#: Shortest root table requested from the eigenvalue cache.
MIN_TABLE = 16
#: Budget: times x positions evaluated in one solve.
MAX_POINTS = 2_000_000
#: Budget: max_terms x positions (the largest matrix of eigenfunction values a solve may build).
MAX_SERIES_WORK = 20_000_000
#: Relative mismatch allowed between a given diffusivity and k / (rho c).
DIFFUSIVITY_MISMATCH = 0.02
#: Error estimate of closed forms, as a fraction of the temperature change (rounding only).
_ROUNDING = 1e-14
#: Relative slack when checking that a position lies inside the body (rounding in inputs).
POSITION_SLACK = 1e-9

_Array = np.ndarray


# --------------------------------------------------------------------------- inputs


@dataclass(frozen=True)
class Surface:
    """The condition met by every exposed face from t = 0.

    Attributes
    ----------
    type : {"convection", "temperature", "flux"}
        ``flux`` only for the semi-infinite solid.
    film_coefficient : float or None
        h, W/(m^2 K) (convection).
    ambient : float or None
        Fluid temperature T_inf, degC (convection).
    value : float or None
        Surface temperature, degC (temperature), or heat flux into the body, W/m^2 (flux).
    """

    type: str
    film_coefficient: float | None = None
    ambient: float | None = None
    value: float | None = None


@dataclass(frozen=True)
class Target:
    """Find the time at which `position` reaches `temperature` (degC).

    `position` uses the same frame as `TransientProblem.positions` (a number for slab,
    cylinder, sphere and semi-infinite solid; (x, y), (x, y, z) or (r, z) for products).
    """

    temperature: float
    position: float | tuple[float, ...] = 0.0


@dataclass(frozen=True)
class TransientProblem:
    """An unsteady conduction problem; maps 1:1 onto the fields of POST /v1/transient.

    Attributes
    ----------
    shape : str
        One of `SHAPES`.
    conductivity : float
        k, W/(m K).
    initial_temperature : float
        Uniform temperature at t = 0, degC.
    surface : Surface
    times : tuple of float
        Output times, s (>= 0, any order).
    positions : tuple
        Output positions, m: distance from the centre (slab mid-plane, cylinder axis, sphere
        centre), depth from the surface (semi_infinite), (x, y) / (x, y, z) from the centre
        (bar, box), (r, z) from the centre (short_cylinder); ignored by ``lumped``. Empty: the
        centre and the surface (the corner for products).
    half_thickness : float or None
        Slab, m.
    radius : float or None
        Cylinder, sphere, short cylinder, m.
    half_length : float or None
        Short cylinder, m (half the length along the axis).
    half_widths : tuple of float or None
        Bar (a, b) or box (a, b, c), m.
    volume, area : float or None
        Lumped body, m^3 and m^2 (exposed area).
    density, specific_heat : float or None
        rho in kg/m^3 and c in J/(kg K).
    diffusivity : float or None
        alpha, m^2/s; may replace density and specific heat (then rho c = k / alpha).
    target : Target or None
    atol : float or None
        Absolute temperature accuracy, K; default 1e-6 |initial - ambient|.
    max_terms : int
        Most series terms per time; earlier times use the short-time Laplace form.
    limits : Limits
    """

    shape: str
    conductivity: float
    initial_temperature: float
    surface: Surface
    times: tuple[float, ...]
    positions: tuple[float | tuple[float, ...], ...] = ()
    half_thickness: float | None = None
    radius: float | None = None
    half_length: float | None = None
    half_widths: tuple[float, ...] | None = None
    volume: float | None = None
    area: float | None = None
    density: float | None = None
    specific_heat: float | None = None
    diffusivity: float | None = None
    target: Target | None = None
    atol: float | None = None
    max_terms: int = DEFAULT_MAX_TERMS
    limits: Limits = field(default_factory=Limits)


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class BodyResponse:
    """Dimensionless response of one slab, cylinder or sphere (`body_response`).

    Attributes
    ----------
    theta : numpy.ndarray, shape (n_times, n_positions)
        (T - T_inf) / (Ti - T_inf).
    mean : numpy.ndarray, shape (n_times,)
        Volume mean of theta, = 1 - Q/Q0.
    theta_error, mean_error : numpy.ndarray, shape (n_times,)
        Error estimates of theta (largest over positions) and of mean.
    terms : numpy.ndarray of int, shape (n_times,)
        Series terms used (0 at t = 0, for Bi = 0 and where the short-time form was used).
    short_time : numpy.ndarray of bool, shape (n_times,)
        True where the short-time Laplace form was used.
    """

    theta: _Array
    mean: _Array
    theta_error: _Array
    mean_error: _Array
    terms: _Array
    short_time: _Array


@dataclass(frozen=True)
class TransientResult:
    """Result of `solve_transient`. Arrays are read-only.

    Attributes
    ----------
    shape : str
    method : {"series", "closed_form", "lumped"}
        ``series`` for slab, cylinder, sphere and products (early times may use the short-time
        Laplace form, see `short_time`), ``closed_form`` for the semi-infinite solid.
    times : numpy.ndarray, shape (n_times,)
        s, as given.
    positions : numpy.ndarray, shape (n_positions,) or (n_positions, n_directions)
        m, as given (products: one row per point).
    temperatures : numpy.ndarray, shape (n_times, n_positions)
        degC.
    energy_fraction : numpy.ndarray or None, shape (n_times,)
        Q/Q0, the fraction of the largest possible heat exchange done by each time (0 at t = 0,
        1 at equilibrium); None for the semi-infinite solid (Q0 is unbounded).
    energy : numpy.ndarray, shape (n_times,)
        Heat taken up by the body since t = 0 (positive into the body), in `energy_unit`; the
        volumetric heat capacity is density * specific_heat, or k / alpha when only the
        diffusivity is given.
    energy_unit : str
        ``J`` (sphere, box, short cylinder, lumped body), ``J/m`` (cylinder and bar, per metre
        of length), ``J/m^2`` (slab: per square metre of face, whole thickness 2L; semi-infinite
        solid: per square metre of surface).
    directions : tuple of str
        The one-dimensional factors: ("x",) slab, ("r",) cylinder and sphere, ("x", "y") bar,
        ("x", "y", "z") box, ("r", "z") short cylinder, ("lumped",) lumped body, () semi-infinite.
    biot : tuple of float
        Biot number per direction, h L / k with L the half-thickness or radius (inf for a fixed
        surface temperature); lumped body: h (V/A) / k.
    fourier : numpy.ndarray, shape (n_times, n_directions)
        alpha t / L^2 per direction (lumped body: L = V/A).
    terms : numpy.ndarray of int, shape (n_times,)
        Series terms used per time (largest over directions).
    short_time : numpy.ndarray of bool, shape (n_times,)
        Times evaluated with the short-time Laplace form instead of the series.
    time_constant : float or None
        Lumped body: rho c V / (h A), s.
    target_time : float or None
        s, when a target was asked.
    convergence : Convergence
        Series: terms, error_estimate (K), atol (K). With a target also iterations and
        residual (|T(target_time) - target temperature|, K). Status ``max_terms`` when the
        error estimate exceeds atol, ``max_iterations`` when the target search failed,
        ``non_finite`` when a NaN or infinity appeared.
    safety : SafetyReport
        Limits checked at every output time (and t = 0) over the requested positions plus the
        centre, the surface (face centres and corner for products).
    warnings : tuple of str
    """

    shape: str
    method: str
    times: _Array
    positions: _Array
    temperatures: _Array
    energy_fraction: _Array | None
    energy: _Array
    energy_unit: str
    directions: tuple[str, ...]
    biot: tuple[float, ...]
    fourier: _Array
    terms: _Array
    short_time: _Array
    time_constant: float | None
    target_time: float | None
    convergence: Convergence
    safety: SafetyReport
    warnings: tuple[str, ...]


# --------------------------------------------------------------------------- stage 2: truncation


def truncation_terms(fourier: _Array, atol: float, bound: float) -> _Array:
    """Series terms needed per Fourier number for a tail below `atol` (truncation rule).

    Parameters
    ----------
    fourier : numpy.ndarray
        Fo = alpha t / L^2 (> 0).
    atol : float
        Allowed dimensionless error of theta (K divided by |Ti - T_inf|).
    bound : float
        Bound on |C_n S_n| (largest coefficient magnitude; |S| <= 1).

    Returns
    -------
    numpy.ndarray of int
        N >= 1 such that `tail_bound(fourier, N, bound) <= atol`.

    Notes
    -----
    Every root satisfies mu_n >= (n - 1) pi for the slab, cylinder and sphere, so the tail after
    N terms is at most bound * sum_{m >= N} exp(-(m pi)^2 Fo) <=
    bound * exp(-a^2) (1 + 1 / (2 sqrt(pi Fo))) with a = N pi sqrt(Fo) (integral test, erfc <=
    exp(-a^2)). Setting this equal to atol gives a closed form for N.
    """
    fo = np.asarray(fourier, dtype=float)
    ratio = bound * (1.0 + 1.0 / (2.0 * np.sqrt(math.pi * fo))) / atol
    a = np.sqrt(np.log(np.maximum(ratio, 1.0)))
    n = np.ceil(a / (math.pi * np.sqrt(fo)))
    # cap before the int cast: absurd counts are simply "more than max_terms"
    return np.clip(n, 1, 10 * eigen.MAX_COUNT).astype(int)


def tail_bound(fourier: _Array, terms: _Array, bound: float) -> _Array:
    """Bound on the series remainder after `terms` terms (see `truncation_terms`).

    Returns bound * (exp(-a^2) + erfc(a) / (2 sqrt(pi Fo))), a = terms * pi * sqrt(Fo).
    """
    fo = np.asarray(fourier, dtype=float)
    a = np.asarray(terms, dtype=float) * math.pi * np.sqrt(fo)
    return bound * (np.exp(-a * a) + special.erfc(a) / (2.0 * np.sqrt(math.pi * fo)))


# --------------------------------------------------------------------------- stage 3: summation


def spatial_modes(geometry: str, roots: _Array, xi: _Array) -> _Array:
    """Eigenfunctions S(mu_n xi), shape (n_roots, n_positions).

    cos (slab), J0 (cylinder), sin(z)/z (sphere); xi = position / L in [0, 1].
    """
    z = np.outer(roots, xi)
    if geometry == "slab":
        return np.cos(z)
    if geometry == "cylinder":
        return special.j0(z)
    if geometry == "sphere":
        return np.sinc(z / math.pi)  # numpy's sinc is sin(pi u) / (pi u)
    raise ValueError(f"geometry must be one of {eigen.GEOMETRIES}, got {geometry!r}")


def _table_length(count: int) -> int:
    """Power-of-two table length >= count (so repeated solves reuse cached tables), capped at
    the eigenvalue module's largest table."""
    return min(max(MIN_TABLE, 1 << max(0, int(count) - 1).bit_length()), eigen.MAX_COUNT)


def sum_series(geometry: str, biot: float, fourier: _Array, xi: _Array,
               terms: _Array) -> tuple[_Array, _Array]:
    """Sum the eigenfunction series with an explicit number of terms per time.

    Parameters
    ----------
    geometry : {"slab", "cylinder", "sphere"}
    biot : float
        h L / k (inf for a fixed surface temperature).
    fourier : numpy.ndarray, shape (n_times,)
    xi : numpy.ndarray, shape (n_positions,)
        Position / L, in [0, 1].
    terms : numpy.ndarray of int, shape (n_times,)
        Terms to use at each time (>= 1).

    Returns
    -------
    (theta, mean) : numpy.ndarray, shapes (n_times, n_positions) and (n_times,)

    Notes
    -----
    theta = sum_n C_n exp(-mu_n^2 Fo) S(mu_n xi) and mean theta = 1 - Q/Q0 =
    sum_n E_n exp(-mu_n^2 Fo). Times sharing a term count are summed as one matrix product
    (exp(-mu^2 Fo) * C) @ S.
    """
    fo = np.asarray(fourier, dtype=float)
    terms = np.asarray(terms, dtype=int)
    theta = np.empty((fo.size, np.size(xi)))
    mean = np.empty(fo.size)
    if fo.size == 0:
        return theta, mean
    count = _table_length(int(terms.max()))
    mu = eigen.body_roots(geometry, biot, count)
    c, e = eigen.body_coefficients(geometry, biot, count)
    modes = spatial_modes(geometry, mu[: int(terms.max())], xi)
    for k in np.unique(terms):
        rows = terms == k
        decay = np.exp(-np.outer(fo[rows], mu[:k] ** 2))  # underflows harmlessly to 0
        theta[rows] = (decay * c[:k]) @ modes[:k]
        mean[rows] = decay @ e[:k]
    return theta, mean


# --------------------------------------------------------------------------- stage 4: short time


def laplace_kernels(geometry: str, biot: float, s: _Array, xi: _Array
                    ) -> tuple[_Array, _Array]:
    """Laplace-domain kernels G and G_mean of a body, overflow-free for complex s.

    Parameters
    ----------
    geometry : {"slab", "cylinder", "sphere"}
    biot : float
    s : numpy.ndarray of complex, any shape
        Transform variable (dimensionless, conjugate to Fo).
    xi : numpy.ndarray, shape (n_positions,)

    Returns
    -------
    (G, G_mean) : shapes s.shape + (n_positions,) and s.shape
        The transforms of theta and mean theta are (1 - G) / s and (1 - G_mean) / s.

    Notes
    -----
    With q = sqrt(s) (Re q >= 0) and 1/Bi = 0 for a fixed surface temperature:

    slab:     G = [cosh(q xi) / cosh q] / (1 + q tanh(q) / Bi),
              G_mean = [tanh(q) / q] / (1 + q tanh(q) / Bi);
    cylinder: G = [I0(q xi) / I0(q)] / (1 + q I1(q) / (Bi I0(q))),
              G_mean = [2 I1(q) / (q I0(q))] / (1 + q I1(q) / (Bi I0(q)));
    sphere:   G = [sinh(q xi) / (xi sinh q)] / (1 + p / Bi), G_mean = [3 p / q^2] / (1 + p / Bi),
              p = q coth(q) - 1.

    They solve s theta_bar - 1 = Laplacian(theta_bar) with a symmetric centre and
    d theta_bar / d xi + Bi theta_bar = 0 at xi = 1 (Carslaw and Jaeger, sect. 12.x, from
    memory). Hyperbolic ratios are written with exp(-q (...)) and Bessel ratios with the
    scaled functions ive, so nothing overflows.
    """
    s = np.asarray(s, dtype=complex)
    q = np.sqrt(s)[..., None]
    x = np.asarray(xi, dtype=float)
    inv_biot = 0.0 if math.isinf(biot) else 1.0 / biot
    if geometry == "slab":
        e2 = np.exp(-2.0 * q)
        tanh = -np.expm1(-2.0 * q) / (1.0 + e2)
        ratio = (np.exp(q * (x - 1.0)) + np.exp(-q * (x + 1.0))) / (1.0 + e2)
        denominator = 1.0 + q * tanh * inv_biot
        mean_ratio = tanh / q
    elif geometry == "cylinder":
        i0 = special.ive(0, q)
        i1_over_i0 = special.ive(1, q) / i0
        # I0(q xi) / I0(q) = ive(0, q xi) / ive(0, q) * exp(Re(q) (xi - 1))
        ratio = special.ive(0, q * x) / i0 * np.exp(q.real * (x - 1.0))
        denominator = 1.0 + q * i1_over_i0 * inv_biot
        mean_ratio = 2.0 * i1_over_i0 / q
    elif geometry == "sphere":
        one_minus_e2 = -np.expm1(-2.0 * q)
        # (1 - exp(-2 q xi)) / xi, with its limit 2 q at the centre
        safe_x = np.where(x > 0.0, x, 1.0)
        front = np.where(x > 0.0, -np.expm1(-2.0 * q * x) / safe_x, 2.0 * q)
        ratio = np.exp(q * (x - 1.0)) * front / one_minus_e2
        # p = q coth q - 1, by its series where the direct form cancels
        q2 = q * q
        direct = q * (1.0 + np.exp(-2.0 * q)) / one_minus_e2 - 1.0
        series = q2 / 3.0 - q2 * q2 / 45.0 + 2.0 * q2**3 / 945.0 - q2**4 / 4725.0
        p = np.where(np.abs(q) < 0.1, series, direct)
        denominator = 1.0 + p * inv_biot
        mean_ratio = 3.0 * p / q2
    else:
        raise ValueError(f"geometry must be one of {eigen.GEOMETRIES}, got {geometry!r}")
    return ratio / denominator, (mean_ratio / denominator)[..., 0]


def _talbot_nodes(nodes: int) -> tuple[_Array, _Array]:
    """Fixed-Talbot contour (Abate and Valko 2004): s_k = z_k / t, f(t) ~ Re sum w_k F(s_k) / t.

    Returns (z, w) for the transform F(s) = G(s) / s as f(t) = Re sum_k (w_k / z_k) G(z_k / t);
    the returned weights already include the 1 / z_k.
    """
    m = nodes
    r = 2.0 * m / 5.0
    theta = np.arange(1, m) * math.pi / m
    cot = 1.0 / np.tan(theta)
    z = np.concatenate(([1.0 + 0.0j], theta * (cot + 1.0j)))
    sigma = theta + (theta * cot - 1.0) * cot
    w = np.concatenate(([0.5 * math.exp(r)], np.exp(r * z[1:]) * (1.0 + 1.0j * sigma)))
    return r * z, w / (m * z)


def penetration_bound(fourier: _Array, xi: _Array) -> _Array:
    """Bound on the deficit 1 - theta felt at xi by time Fo, valid for Fo <= `PENETRATION_FO`.

    Returns 4 / sqrt(pi Fo) exp(-(1 - xi)^2 / (4 Fo)), shape (n_times, n_positions).

    Notes
    -----
    A fixed surface temperature (Bi = inf) cools fastest (comparison principle), and the
    sphere fastest of the three bodies near its surface. Its first image pair,
    (1/r) [erfc((1 - r)/c) - erfc((1 + r)/c)] with c = 2 sqrt(Fo) (Carslaw and Jaeger 9.3,
    from memory), is at most (2 / sqrt(pi Fo)) exp(-(1 - r)^2 / (4 Fo)) by the mean-value
    theorem; the factor 2 more covers the further images, which for Fo <= 0.01 are below
    erfc(10) relative to it.
    """
    fo = np.asarray(fourier, dtype=float)[:, None]
    depth = 1.0 - np.asarray(xi, dtype=float)[None, :]
    return 4.0 / np.sqrt(math.pi * fo) * np.exp(-depth * depth / (4.0 * fo))


#: Largest Fourier number at which `penetration_bound` is used to skip untouched positions.
PENETRATION_FO = 0.01
#: Positions whose deficit bound is below this fraction of atol keep theta = 1 exactly.
PENETRATION_MARGIN = 1e-3


def invert_talbot(geometry: str, biot: float, fourier: _Array, xi: _Array,
                  nodes: int = TALBOT_NODES, skip_below: float = 0.0
                  ) -> tuple[_Array, _Array]:
    """Short-time form: theta and mean theta by Laplace inversion on a fixed Talbot contour.

    Parameters
    ----------
    geometry, biot, fourier, xi
        As in `sum_series` (fourier > 0).
    nodes : int
        Contour nodes; 20 gives about 1e-13, 16 about 1e-11 (measured against the series).
    skip_below : float
        Positions whose `penetration_bound` is below this (at Fo <= `PENETRATION_FO`) are not
        evaluated: the surface change has not reached them and theta = 1 is returned. 0 turns
        this off.

    Returns
    -------
    (theta, mean) : shapes (n_times, n_positions) and (n_times,)

    Notes
    -----
    theta = 1 - L^-1[G / s](Fo), with G from `laplace_kernels`. Its accuracy does not depend on
    Fo, which is why it replaces the series at the first instants, where the series needs of
    order sqrt(ln(1/atol) / Fo) / pi terms. Times are processed in order of Fo, in chunks; each
    chunk evaluates only the positions its latest time has reached.
    """
    fo = np.asarray(fourier, dtype=float)
    x = np.asarray(xi, dtype=float)
    z, w = _talbot_nodes(nodes)
    theta = np.ones((fo.size, x.size))
    mean = np.empty(fo.size)
    order = np.argsort(fo, kind="stable")
    chunk = int(np.clip(200_000 // (nodes * max(1, x.size)), 1, 64))  # bounds work arrays
    for start in range(0, fo.size, chunk):
        rows = order[start:start + chunk]
        latest = fo[rows].max()
        if skip_below > 0.0 and latest <= PENETRATION_FO:
            cols = np.flatnonzero(penetration_bound(np.array([latest]), x)[0] >= skip_below)
        else:
            cols = np.arange(x.size)
        s = z[None, :] / fo[rows, None]
        g, g_mean = laplace_kernels(geometry, biot, s, x[cols])
        theta[np.ix_(rows, cols)] = 1.0 - np.einsum("k,tkp->tp", w, g).real
        mean[rows] = 1.0 - (g_mean @ w).real
    return theta, mean


# --------------------------------------------------------------------------- stage 5: one body


def coefficient_bounds(geometry: str, biot: float) -> tuple[float, float]:
    """Bounds (max |C_n|, max |E_n|) used by the truncation rule, from the first `MIN_TABLE`
    coefficients (the largest magnitudes come first or stay level as n grows)."""
    c, e = eigen.body_coefficients(geometry, biot, MIN_TABLE)
    return float(np.abs(c).max()), float(np.abs(e).max())


def body_response(geometry: str, biot: float, fourier: _Array, xi: _Array, atol: float,
                  max_terms: int) -> BodyResponse:
    """Response of one slab, cylinder or sphere at many times and positions.

    Parameters
    ----------
    geometry : {"slab", "cylinder", "sphere"}
    biot : float
        h L / k, L the half-thickness or radius; ``math.inf`` for a fixed surface temperature.
    fourier : numpy.ndarray, shape (n_times,)
        alpha t / L^2 (>= 0).
    xi : numpy.ndarray, shape (n_positions,)
        Distance from the centre / L, in [0, 1].
    atol : float
        Allowed dimensionless error of theta.
    max_terms : int
        Most series terms per time.

    Returns
    -------
    BodyResponse

    Notes
    -----
    Governing equation dtheta/dFo = xi^-j d/dxi (xi^j dtheta/dxi), j = 0, 1, 2 for slab,
    cylinder, sphere; dtheta/dxi = 0 at xi = 0; dtheta/dxi + Bi theta = 0 at xi = 1 (theta = 0
    for Bi = inf); theta = 1 at Fo = 0. Each time uses the series with the fewest power-of-two
    terms meeting `truncation_terms`, unless that exceeds `max_terms`, when it uses the
    short-time Laplace form (`invert_talbot`, error estimated by a coarser contour). At Fo = 0
    the initial state is returned.
    """
    fo = np.asarray(fourier, dtype=float)
    x = np.asarray(xi, dtype=float)
    nt = fo.size
    theta = np.ones((nt, x.size))
    mean = np.ones(nt)
    theta_error = np.zeros(nt)
    mean_error = np.zeros(nt)
    terms = np.zeros(nt, dtype=int)
    short = np.zeros(nt, dtype=bool)
    live = fo > 0.0
    if biot > 0.0 and live.any():
        c_bound, e_bound = coefficient_bounds(geometry, biot)
        needed = np.zeros(nt, dtype=int)
        needed[live] = truncation_terms(fo[live], atol, max(c_bound, e_bound))
        series = live & (needed <= max_terms)
        short = live & ~series
        if series.any():
            # power-of-two counts: few distinct groups in `sum_series`, cached tables reused
            pow2 = np.maximum(MIN_TABLE, 2 ** np.ceil(np.log2(needed[series]))).astype(int)
            k = np.minimum(pow2, max_terms)
            theta[series], mean[series] = sum_series(geometry, biot, fo[series], x, k)
            # truncation (tail bound) plus rounding in the sum (4 eps sum |C_n| of the terms used)
            c_all, e_all = eigen.body_coefficients(geometry, biot, _table_length(int(k.max())))
            eps4 = 4.0 * np.finfo(float).eps
            theta_error[series] = tail_bound(fo[series], k, c_bound) \
                + eps4 * np.cumsum(np.abs(c_all))[k - 1]
            mean_error[series] = tail_bound(fo[series], k, e_bound) \
                + eps4 * np.cumsum(np.abs(e_all))[k - 1]
            terms[series] = k
        if short.any():
            skip = PENETRATION_MARGIN * atol
            theta[short], mean[short] = invert_talbot(geometry, biot, fo[short], x, TALBOT_NODES,
                                                      skip)
            check, check_mean = invert_talbot(geometry, biot, fo[short], x, TALBOT_CHECK_NODES,
                                              skip)
            theta_error[short] = np.abs(theta[short] - check).max(axis=1, initial=0.0)
            mean_error[short] = np.abs(mean[short] - check_mean)
    return BodyResponse(theta=theta, mean=mean, theta_error=theta_error, mean_error=mean_error,
                        terms=terms, short_time=short)


def one_term(geometry: str, biot: float, fourier: _Array, xi: _Array) -> _Array:
    """One-term approximation C1 exp(-mu1^2 Fo) S(mu1 xi), shape (n_times, n_positions)."""
    if biot == 0.0:
        return np.ones((np.size(fourier), np.size(xi)))
    mu = eigen.body_roots(geometry, biot, MIN_TABLE)[:1]
    c = eigen.body_coefficients(geometry, biot, MIN_TABLE)[0][:1]
    return (c * np.exp(-np.outer(fourier, mu**2))) @ spatial_modes(geometry, mu, xi)


# --------------------------------------------------------------------------- setting up the problem


@dataclass(frozen=True)
class _Factor:
    """One one-dimensional factor of a body: slab across x, cylinder across r, ..."""

    geometry: str  # slab | cylinder | sphere
    length: float  # half-thickness or radius, m
    direction: str
    name: str  # JSON path of the length


@dataclass(frozen=True)
class _Setup:
    """Validated, derived quantities shared by all stages of `solve_transient`."""

    factors: tuple[_Factor, ...]
    times: _Array
    positions: _Array  # (n, d); d = 1 for one-dimensional bodies
    diffusivity: float
    heat_capacity: float  # rho c, J/(m^3 K)
    ambient: float  # T_inf (convection) or surface temperature, degC; nan for flux
    film_coefficient: float  # inf for a fixed surface temperature; nan for flux
    atol: float  # K
    unit_volume: float  # m^3 (per m or per m^2 where energy_unit says so)
    energy_unit: str


_FACTORS = {"slab": ("x",), "cylinder": ("r",), "sphere": ("r",), "bar": ("x", "y"),
            "box": ("x", "y", "z"), "short_cylinder": ("r", "z")}


def _positive(value: float | None, name: str, rule: str = "must be > 0") -> float:
    if value is None:
        raise IllPosedError(f"{name} is required for this shape", field=name)
    if not (math.isfinite(value) and value > 0.0):
        raise IllPosedError(f"{name} {rule}, got {value}", field=name)
    return float(value)


def _factors(problem: TransientProblem) -> tuple[_Factor, ...]:
    shape = problem.shape
    if shape == "slab":
        return (_Factor("slab", _positive(problem.half_thickness, "half_thickness"), "x",
                        "half_thickness"),)
    if shape in ("cylinder", "sphere"):
        return (_Factor(shape, _positive(problem.radius, "radius"), "r", "radius"),)
    if shape in ("bar", "box"):
        count = 2 if shape == "bar" else 3
        widths = problem.half_widths
        if widths is None or len(widths) != count:
            raise IllPosedError(f"half_widths: a {shape} needs {count} half-widths, got "
                                f"{None if widths is None else len(widths)}",
                                field="half_widths")
        return tuple(_Factor("slab", _positive(w, f"half_widths.{i}"), "xyz"[i],
                             f"half_widths.{i}") for i, w in enumerate(widths))
    if shape == "short_cylinder":
        return (_Factor("cylinder", _positive(problem.radius, "radius"), "r", "radius"),
                _Factor("slab", _positive(problem.half_length, "half_length"), "z",
                        "half_length"))
    return ()


def _thermal_properties(problem: TransientProblem) -> tuple[float, float]:
    """(alpha, rho c) from conductivity with density and specific heat, or diffusivity."""
    k = _positive(problem.conductivity, "conductivity")
    given = [name for name in ("density", "specific_heat") if getattr(problem, name) is not None]
    if problem.diffusivity is None and len(given) < 2:
        missing = "specific_heat" if given == ["density"] else \
            "density" if given == ["specific_heat"] else "diffusivity"
        raise IllPosedError(
            f"{missing}: give density and specific_heat, or diffusivity, to fix the thermal "
            "diffusivity alpha = k / (rho c)", field=missing)
    if len(given) == 2:
        rho_c = _positive(problem.density, "density") \
            * _positive(problem.specific_heat, "specific_heat")
        alpha = k / rho_c
        if problem.diffusivity is not None:
            stated = _positive(problem.diffusivity, "diffusivity")
            if abs(stated - alpha) > DIFFUSIVITY_MISMATCH * alpha:
                raise IllPosedError(
                    f"diffusivity {stated:.6g} m^2/s disagrees with conductivity / (density * "
                    f"specific_heat) = {alpha:.6g} m^2/s by more than "
                    f"{DIFFUSIVITY_MISMATCH:.0%}; give one or make them agree",
                    field="diffusivity")
        return alpha, rho_c
    alpha = _positive(problem.diffusivity, "diffusivity")
    return alpha, k / alpha


def _surface(problem: TransientProblem) -> tuple[float, float]:
    """(ambient or surface temperature degC, film coefficient; inf = fixed temperature)."""
    surface = problem.surface
    if surface.type not in SURFACE_TYPES:
        raise IllPosedError(f"surface.type must be one of {SURFACE_TYPES}, got "
                            f"{surface.type!r}", field="surface.type")
    if surface.type == "convection":
        if surface.film_coefficient is None:
            raise IllPosedError("surface.film_coefficient is required for convection",
                                field="surface.film_coefficient")
        h = float(surface.film_coefficient)
        if not (math.isfinite(h) and h >= 0.0):
            raise IllPosedError(f"surface.film_coefficient must be >= 0 and finite, got {h}",
                                field="surface.film_coefficient")
        if surface.ambient is None or not math.isfinite(surface.ambient):
            raise IllPosedError("surface.ambient (finite, degC) is required for convection",
                                field="surface.ambient")
        return float(surface.ambient), h
    if surface.value is None or not math.isfinite(surface.value):
        raise IllPosedError(f"surface.value (finite) is required for a {surface.type} surface",
                            field="surface.value")
    if surface.type == "flux":
        if problem.shape != "semi_infinite":
            raise IllPosedError(
                f"surface.type 'flux' is served for the semi_infinite shape only, not for "
                f"{problem.shape!r}; use convection or a fixed surface temperature",
                field="surface.type")
        return math.nan, math.nan
    if problem.shape == "lumped":
        raise IllPosedError(
            "surface.type 'temperature' cannot drive a lumped body (it would jump to the "
            "surface temperature at once); use convection, or a distributed shape",
            field="surface.type")
    return float(surface.value), math.inf


def _positions(problem: TransientProblem, factors: tuple[_Factor, ...]) -> _Array:
    """Positions as an (n, d) array, checked against the body; defaults when none given."""
    shape = problem.shape
    d = max(1, len(factors))
    if not problem.positions:
        if shape in ("lumped", "semi_infinite"):
            return np.zeros((1, 1))
        centre = np.zeros(d)
        edge = np.array([f.length for f in factors])
        return np.stack([centre, edge])
    rows = []
    for i, p in enumerate(problem.positions):
        rows.append(_position(p, shape, factors, f"positions.{i}"))
    return np.array(rows, dtype=float).reshape(len(rows), d)


def _position(p: float | tuple[float, ...], shape: str, factors: tuple[_Factor, ...],
              name: str) -> tuple[float, ...]:
    values: tuple[float, ...]
    if isinstance(p, tuple | list | np.ndarray):
        values = tuple(float(v) for v in p)
    else:
        values = (float(p),)
    d = max(1, len(factors))
    if len(values) != d:
        frame = {"bar": "(x, y)", "box": "(x, y, z)", "short_cylinder": "(r, z)"}.get(
            shape, "one number")
        raise IllPosedError(f"{name}: a {shape} position is {frame}, got {len(values)} "
                            "coordinates", field=name,
                            reason="validation-failed")
    out: list[float] = []
    for value in values:
        if not math.isfinite(value):
            raise IllPosedError(f"{name} must be finite, got {value}", field=name,
                            reason="validation-failed")
        out.append(value)
    if shape == "semi_infinite" and out[0] < 0.0:
        raise IllPosedError(f"{name}: depth below the surface must be >= 0 m, got {out[0]}",
                            field=name,
                            reason="validation-failed")
    for value, f in zip(out, factors, strict=False):
        if f.geometry != "slab" and value < 0.0:
            raise IllPosedError(f"{name}: radius {value} m must be >= 0", field=name,
                            reason="validation-failed")
        if abs(value) > f.length * (1.0 + POSITION_SLACK):
            raise IllPosedError(
                f"{name}: {f.direction} = {value} m lies outside the body ({f.name} = "
                f"{f.length} m, positions are measured from the centre)", field=name,
                            reason="validation-failed")
    return tuple(out)


def _setup(problem: TransientProblem) -> _Setup:
    if problem.shape not in SHAPES:
        raise IllPosedError(f"shape must be one of {SHAPES}, got {problem.shape!r}",
                            field="shape")
    factors = _factors(problem)
    alpha, rho_c = _thermal_properties(problem)
    if not math.isfinite(problem.initial_temperature):
        raise IllPosedError("initial_temperature must be finite", field="initial_temperature")
    ambient, h = _surface(problem)
    times = np.asarray(problem.times, dtype=float).reshape(-1)
    if times.size == 0:
        raise IllPosedError("times: give at least one output time", field="times")
    for i, t in enumerate(times):
        if not (math.isfinite(t) and t >= 0.0):
            raise IllPosedError(f"times.{i} must be >= 0 s and finite, got {t}",
                                field=f"times.{i}")
    if not 1 <= problem.max_terms <= eigen.MAX_COUNT:
        raise IllPosedError(f"max_terms must be between 1 and {eigen.MAX_COUNT}, got "
                            f"{problem.max_terms}", field="max_terms")
    positions = _positions(problem, factors)
    if times.size * positions.shape[0] > MAX_POINTS:
        raise TooLargeError(f"times x positions = {times.size * positions.shape[0]} exceeds "
                            f"the budget of {MAX_POINTS} evaluations", field="positions")
    if factors and problem.max_terms * (positions.shape[0] + 2 + len(factors)) > MAX_SERIES_WORK:
        raise TooLargeError(f"max_terms x positions = {problem.max_terms} x "
                            f"{positions.shape[0]} exceeds the budget of {MAX_SERIES_WORK}; "
                            "lower max_terms (early times then use the short-time form)",
                            field="max_terms")
    step = problem.initial_temperature - ambient if math.isfinite(ambient) else 0.0
    if problem.atol is not None:
        atol = _positive(problem.atol, "atol")
    elif problem.shape == "semi_infinite" and problem.surface.type == "flux":
        atol = 1e-9  # closed form: reported for completeness only
    else:
        atol = DEFAULT_RELATIVE_ATOL * abs(step) if step != 0.0 else DEFAULT_RELATIVE_ATOL
    shape = problem.shape
    if shape == "lumped":
        volume = _positive(problem.volume, "volume")
        _positive(problem.area, "area")
        unit_volume, unit = volume, "J"
    elif shape == "semi_infinite":
        unit_volume, unit = 1.0, "J/m^2"
    else:
        lengths = [f.length for f in factors]
        if shape == "slab":
            unit_volume, unit = 2.0 * lengths[0], "J/m^2"
        elif shape == "cylinder":
            unit_volume, unit = math.pi * lengths[0] ** 2, "J/m"
        elif shape == "sphere":
            unit_volume, unit = 4.0 / 3.0 * math.pi * lengths[0] ** 3, "J"
        elif shape == "bar":
            unit_volume, unit = 4.0 * lengths[0] * lengths[1], "J/m"
        elif shape == "box":
            unit_volume, unit = 8.0 * lengths[0] * lengths[1] * lengths[2], "J"
        else:  # short cylinder
            unit_volume, unit = 2.0 * math.pi * lengths[0] ** 2 * lengths[1], "J"
    return _Setup(factors=factors, times=times, positions=positions, diffusivity=alpha,
                  heat_capacity=rho_c, ambient=ambient, film_coefficient=h, atol=atol,
                  unit_volume=unit_volume, energy_unit=unit)


# --------------------------------------------------------------------------- product bodies


@dataclass(frozen=True)
class _ProductResponse:
    theta: _Array  # (nt, npos)
    mean: _Array  # (nt,)
    error: _Array  # (nt,) dimensionless theta error
    mean_error: _Array
    terms: _Array
    short_time: _Array


def _biot(factor: _Factor, setup: _Setup, conductivity: float) -> float:
    h = setup.film_coefficient
    return math.inf if math.isinf(h) else h * factor.length / conductivity


def product_response(factors: tuple[_Factor, ...], biots: tuple[float, ...], times: _Array,
                     positions: _Array, diffusivity: float, atol: float,
                     max_terms: int) -> _ProductResponse:
    """theta and mean theta of a body that is the product of one-dimensional factors.

    Notes
    -----
    theta(x, y, z, t) = theta_x(x, t) theta_y(y, t) theta_z(z, t) solves the multi-dimensional
    problem when each factor solves its own (same Biot condition on every face, uniform initial
    temperature) (Incropera eqs. 5.64-5.69, from memory). The mean of a product of separable
    factors is the product of their means, so Q/Q0 = 1 - prod(1 - (Q/Q0)_i) (Langston 1982).
    Each factor is asked for atol / (number of factors); the error estimates add.
    """
    nt, npos = times.size, positions.shape[0]
    theta = np.ones((nt, npos))
    mean = np.ones(nt)
    error = np.zeros(nt)
    mean_error = np.zeros(nt)
    terms = np.zeros(nt, dtype=int)
    short = np.zeros(nt, dtype=bool)
    share = atol / len(factors)
    for i, (factor, biot) in enumerate(zip(factors, biots, strict=True)):
        fo = diffusivity * times / factor.length**2
        xi = np.minimum(np.abs(positions[:, i]) / factor.length, 1.0)
        part = body_response(factor.geometry, biot, fo, xi, share, max_terms)
        theta *= part.theta
        mean *= part.mean
        error += part.theta_error
        mean_error += part.mean_error
        terms = np.maximum(terms, part.terms)
        short |= part.short_time
    return _ProductResponse(theta=theta, mean=mean, error=error, mean_error=mean_error,
                            terms=terms, short_time=short)


# --------------------------------------------------------------------------- target time


def find_target_time(excess: Callable[[float], float], time_scale: float,
                     xtol: float = 1e-12) -> tuple[float, int, bool]:
    """Time at which a monotone response crosses zero, by brentq on log(time).

    Parameters
    ----------
    excess : callable
        t -> f(t), positive before the crossing and negative after it (monotone in t).
    time_scale : float
        A first guess of the crossing time, s (> 0).
    xtol : float
        Absolute tolerance on log(time), i.e. relative tolerance on time.

    Returns
    -------
    (time, iterations, converged)
        iterations counts bracket steps plus brentq iterations; converged is False when no
        bracket was found within 200 factor-of-4 steps each way or brentq failed.
    """
    lo = hi = math.log(time_scale)
    f_lo = f_hi = excess(math.exp(hi))
    steps = 0
    while f_hi > 0.0 and steps < 200:  # march later until the response has crossed
        lo, f_lo = hi, f_hi
        hi += math.log(4.0)
        f_hi = excess(math.exp(hi))
        steps += 1
    while f_lo <= 0.0 and steps < 400:  # march earlier until it has not
        hi, f_hi = lo, f_lo
        lo -= math.log(4.0)
        f_lo = excess(math.exp(lo))
        steps += 1
    if not (f_lo > 0.0 >= f_hi):
        return math.nan, steps, False
    if f_hi == 0.0:
        return math.exp(hi), steps, True
    root, info = optimize.brentq(lambda u: excess(math.exp(u)), lo, hi, xtol=xtol,
                                 full_output=True, disp=False)
    return math.exp(root), steps + info.iterations, bool(info.converged)


# --------------------------------------------------------------------------- safety helpers


def _scope(name: str, times: _Array, temperatures: _Array,
           positions: list[tuple[float, ...]], labels: list[str]) -> Scope:
    """Extremes over times (rows) and points (columns), with the per-time history."""
    hot = np.unravel_index(int(np.argmax(temperatures)), temperatures.shape)
    cold = np.unravel_index(int(np.argmin(temperatures)), temperatures.shape)
    history = tuple(zip(times.tolist(), temperatures.max(axis=1).tolist(),
                        temperatures.min(axis=1).tolist(), strict=True))
    return Scope(
        name=name,
        hottest=Location(temperature=float(temperatures[hot]), description=labels[hot[1]],
                         position=positions[hot[1]],
                         time=float(times[hot[0]])),
        coldest=Location(temperature=float(temperatures[cold]), description=labels[cold[1]],
                         position=positions[cold[1]],
                         time=float(times[cold[0]])),
        history=history)


def _safety_points(shape: str, factors: tuple[_Factor, ...]) -> tuple[_Array, list[str], _Array]:
    """Points that bound the body's extremes, their labels, and which lie on the surface.

    theta is largest at the centre and smallest at the surface (the corner for products) at
    every time; on the surface of a product body it ranges between the corner and the face
    centres. Temperatures follow theta up or down with the sign of Ti - T_inf.
    """
    d = len(factors)
    lengths = np.array([f.length for f in factors])
    points = [np.zeros(d)]
    labels = ["centre"]
    surface = [False]
    if d == 1:
        points.append(lengths.copy())
        labels.append("surface")
        surface.append(True)
        return np.array(points), labels, np.array(surface)
    for i, f in enumerate(factors):
        p = np.zeros(d)
        p[i] = f.length
        points.append(p)
        labels.append(f"centre of the face {f.direction} = {f.length:g} m")
        surface.append(True)
    points.append(lengths.copy())
    labels.append("corner" if shape != "short_cylinder" else "edge of an end face")
    surface.append(True)
    return np.array(points), labels, np.array(surface)


def _with_initial(times: _Array, temperatures: _Array, initial: float
                  ) -> tuple[_Array, _Array]:
    """Prepend the initial state at t = 0 (unless t = 0 is an output time), sorted by time."""
    order = np.argsort(times, kind="stable")
    times, temperatures = times[order], temperatures[order]
    if times.size and times[0] == 0.0:
        return times, temperatures
    first = np.full((1, temperatures.shape[1]), initial)
    return np.concatenate(([0.0], times)), np.concatenate((first, temperatures))


# --------------------------------------------------------------------------- solver entry


def solve_transient(problem: TransientProblem) -> TransientResult:
    """Temperatures, energy and (optionally) a target time for an unsteady conduction problem.

    Parameters
    ----------
    problem : TransientProblem

    Returns
    -------
    TransientResult
        See its attributes. ``convergence.status`` is ``converged`` when the error estimate is
        within atol (and the target search converged); ``max_terms`` when it is not (e.g. an
        atol below what the short-time form can give); ``max_iterations`` when the target
        search failed; ``non_finite`` when a NaN or infinity appeared.

    Raises
    ------
    IllPosedError
        Missing or inconsistent inputs (field named), a position outside the body, a flux
        surface on a finite body, an unreachable target (reason ``target-unreachable``).
    TooLargeError
        More than `MAX_POINTS` time-position pairs, or max_terms x positions above
        `MAX_SERIES_WORK`.

    Notes
    -----
    Governing equation rho c dT/dt = k div grad T in the body, T = Ti at t = 0, and on every
    exposed face from t = 0+: -k dT/dn = h (T - T_inf) (convection), T = Ts (temperature) or
    -k dT/dn = -q (flux into a semi-infinite solid). Lumped body: rho c V dT/dt =
    -h A (T - T_inf). Series bodies report theta = (T - T_inf) / (Ti - T_inf) as a sum of
    eigenfunctions (see `body_response`), products multiply the factors
    (`product_response`).

    References
    ----------
    See the module docstring.
    """
    setup = _setup(problem)
    if problem.shape == "lumped":
        return _solve_lumped(problem, setup)
    if problem.shape == "semi_infinite":
        return _solve_semi_infinite(problem, setup)
    return _solve_series(problem, setup)


def _freeze(*arrays: _Array | None) -> None:
    for a in arrays:
        if a is not None:
            a.setflags(write=False)


def _status(error_k: float, atol: float, finite: bool, what: str) -> tuple[str, str]:
    if not finite:
        return "non_finite", f"{what}: a NaN or infinity appeared in the results"
    if error_k > atol:
        return "max_terms", (f"{what}: error estimate {error_k:.3g} K exceeds atol {atol:.3g} K;"
                             " relax atol (rounding limits the series and the short-time form "
                             "to about 1e-13 of the temperature step)")
    return "converged", f"{what}: error estimate {error_k:.3g} K within atol {atol:.3g} K"


def _reported_positions(problem: TransientProblem, setup: _Setup) -> _Array:
    d = setup.positions.shape[1]
    return setup.positions[:, 0].copy() if d == 1 else setup.positions.copy()


def _target_theta(problem: TransientProblem, temperature_step: float, ambient: float) -> float:
    """theta of the target temperature; raises when it lies outside [ambient, initial)."""
    assert problem.target is not None
    target = problem.target.temperature
    if not math.isfinite(target):
        raise IllPosedError("target.temperature must be finite", field="target.temperature")
    theta = (target - ambient) / temperature_step if temperature_step != 0.0 else math.nan
    if not (0.0 < theta <= 1.0):
        raise IllPosedError(
            f"target.temperature {target:g} degC is unreachable: the body moves from its "
            f"initial temperature {problem.initial_temperature:g} degC towards {ambient:g} degC "
            "and only approaches the latter, so a target must lie between them (the ambient "
            "itself excluded)", field="target.temperature", reason="target-unreachable")
    return theta


def _solve_series(problem: TransientProblem, setup: _Setup) -> TransientResult:
    factors = setup.factors
    k = problem.conductivity
    biots = tuple(_biot(f, setup, k) for f in factors)
    step = problem.initial_temperature - setup.ambient
    atol_star = setup.atol / abs(step) if step != 0.0 else 1.0
    times = setup.times
    warnings: list[str] = []

    # requested positions and the points that bound the body's extremes, in one evaluation
    extra, labels, on_surface = _safety_points(problem.shape, factors)
    points = np.concatenate((setup.positions, extra))
    response = product_response(factors, biots, times, points, setup.diffusivity, atol_star,
                                problem.max_terms)
    npos = setup.positions.shape[0]
    temperatures_all = setup.ambient + step * response.theta
    temperatures = temperatures_all[:, :npos]
    fraction = 1.0 - response.mean
    energy = setup.heat_capacity * setup.unit_volume * (-step) * fraction + 0.0  # no -0.0
    fourier = np.stack([setup.diffusivity * times / f.length**2 for f in factors], axis=1)
    error_k = float(response.error.max(initial=0.0)) * abs(step)

    # one-term approximation check at the requested times and positions
    warnings += _one_term_warning(factors, biots, fourier, setup.positions,
                                  response.theta[:, :npos], atol_star, times)

    # target time
    target_time: float | None = None
    iterations: int | None = None
    residual: float | None = None
    target_ok = True
    if problem.target is not None:
        target_time, iterations, residual, target_ok, note = _series_target(
            problem, setup, biots, step, atol_star)
        if note:
            warnings.append(note)

    finite = bool(np.isfinite(temperatures_all).all() and np.isfinite(fraction).all())
    status, message = _status(error_k, setup.atol, finite, "series")
    short_count = int(response.short_time.sum())
    if short_count:
        message += (f"; {short_count} early time(s) used the short-time Laplace form "
                    f"(Talbot contour, {TALBOT_NODES} nodes)")
    if status == "converged" and not target_ok:
        status, message = "max_iterations", message + "; the target-time search did not converge"
    elif problem.target is not None:
        message += f"; target time found in {iterations} iterations"
    convergence = Convergence(status=status, message=message,
                              terms=int(response.terms.max(initial=0)),
                              error_estimate=error_k, atol=setup.atol,
                              iterations=iterations, residual=residual)

    # safety over all times (and the initial state) and all evaluated points
    all_labels = [_label(setup.positions[i], problem.shape) for i in range(npos)] + labels
    safety_times, safety_temps = _with_initial(times, temperatures_all,
                                               problem.initial_temperature)
    point_tuples = [tuple(float(v) for v in row) for row in points]
    body = _scope("body", safety_times, safety_temps, point_tuples, all_labels)
    surface_cols = np.flatnonzero(np.concatenate((np.zeros(npos, dtype=bool), on_surface)))
    surface = _scope("surface", safety_times, safety_temps[:, surface_cols],
                     [point_tuples[i] for i in surface_cols],
                     [all_labels[i] for i in surface_cols])
    safety = check_limits(problem.limits, body, [surface])

    _freeze(temperatures, fraction, energy, fourier, response.terms, response.short_time)
    reported = _reported_positions(problem, setup)
    _freeze(reported)
    times_out = times.copy()
    _freeze(times_out)
    return TransientResult(
        shape=problem.shape, method="series", times=times_out, positions=reported,
        temperatures=temperatures, energy_fraction=fraction, energy=energy,
        energy_unit=setup.energy_unit, directions=tuple(f.direction for f in factors),
        biot=biots, fourier=fourier, terms=response.terms, short_time=response.short_time,
        time_constant=None, target_time=target_time, convergence=convergence, safety=safety,
        warnings=tuple(warnings))


def _label(position: _Array, shape: str) -> str:
    if position.size == 1:
        frame = "depth" if shape == "semi_infinite" else "position"
        return f"{frame} {float(position[0]):g} m"
    return "point (" + ", ".join(f"{float(v):g}" for v in position) + ") m"


def _one_term_warning(factors: tuple[_Factor, ...], biots: tuple[float, ...], fourier: _Array,
                      positions: _Array, theta: _Array, atol_star: float,
                      times: _Array) -> list[str]:
    """Warn where C1 exp(-mu1^2 Fo) S(mu1 xi) (per factor) is off by more than 1 %."""
    approx = np.ones_like(theta)
    for i, (f, bi) in enumerate(zip(factors, biots, strict=True)):
        xi = np.minimum(np.abs(positions[:, i]) / f.length, 1.0)
        approx *= one_term(f.geometry, bi, fourier[:, i], xi)
    live = (times > 0.0)[:, None] & (np.abs(theta) > 10.0 * atol_star)
    if not live.any():
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        relative = np.where(live, np.abs(approx - theta) / np.abs(theta), 0.0)
    bad = relative > ONE_TERM_TOLERANCE
    if not bad.any():
        return []
    t_i, p_i = np.unravel_index(int(np.argmax(relative)), relative.shape)
    fo_text = ", ".join(f"{v:.3g}" for v in fourier[t_i])
    latest = float(times[bad.any(axis=1)].max())
    return [f"a one-term approximation would be off by more than "
            f"{ONE_TERM_TOLERANCE:.0%} at {int(bad.sum())} of the requested time-position "
            f"pairs (worst {relative[t_i, p_i]:.3g} relative error of T - T_inf at t = "
            f"{float(times[t_i]):g} s, {_label(positions[p_i], 'body')}, Fo = {fo_text}; up to "
            f"t = {latest:g} s); the full series was used"]


def _series_target(problem: TransientProblem, setup: _Setup, biots: tuple[float, ...],
                   step: float, atol_star: float
                   ) -> tuple[float, int, float, bool, str]:
    """(time s, iterations, residual K, converged, note) for the target of a series body."""
    assert problem.target is not None
    theta_target = _target_theta(problem, step, setup.ambient)
    point = np.array(_position(problem.target.position, problem.shape, setup.factors,
                               "target.position"), dtype=float).reshape(1, -1)
    if theta_target == 1.0:
        return 0.0, 0, 0.0, True, "target.temperature equals the initial temperature: t = 0"
    if setup.film_coefficient == 0.0:
        raise IllPosedError("target.temperature is unreachable: with a zero film coefficient "
                            "the body keeps its initial temperature",
                            field="target.temperature", reason="target-unreachable")
    at_fixed_surface = any(
        math.isinf(bi) and abs(point[0, i]) >= f.length * (1.0 - POSITION_SLACK)
        for i, (f, bi) in enumerate(zip(setup.factors, biots, strict=True)))
    if at_fixed_surface:
        return (0.0, 0, abs(problem.target.temperature - setup.ambient), True,
                "target.position lies on a face held at the surface temperature, which it "
                "takes at once: target time 0 s")

    def theta_at(t: float) -> float:
        r = product_response(setup.factors, biots, np.array([t]), point, setup.diffusivity,
                             atol_star, problem.max_terms)
        return float(r.theta[0, 0])

    # first guess from the slowest factor's one-term decay: theta ~ exp(-mu1^2 Fo)
    scale = min(f.length for f in setup.factors) ** 2 / setup.diffusivity
    slowest = min(float(eigen.body_roots(f.geometry, bi, MIN_TABLE)[0]) ** 2 / f.length**2
                  for f, bi in zip(setup.factors, biots, strict=True))
    guess = -math.log(theta_target) / (slowest * setup.diffusivity)
    guess = max(guess, 1e-6 * scale) if math.isfinite(guess) and guess > 0.0 else scale
    time, iterations, ok = find_target_time(lambda t: theta_at(t) - theta_target, guess)
    residual = abs(theta_at(time) - theta_target) * abs(step) if ok else math.nan
    return time, iterations, residual, ok, ""


# --------------------------------------------------------------------------- lumped body


def _solve_lumped(problem: TransientProblem, setup: _Setup) -> TransientResult:
    k = problem.conductivity
    volume, area = float(problem.volume), float(problem.area)  # type: ignore[arg-type]
    h = setup.film_coefficient
    length = volume / area  # characteristic length V/A
    biot = h * length / k
    times = setup.times
    step = problem.initial_temperature - setup.ambient
    warnings: list[str] = []
    if biot > LUMPED_BIOT_LIMIT:
        warnings.append(
            f"lumped Biot number h (V/A) / k = {biot:.3g} exceeds {LUMPED_BIOT_LIMIT}: the "
            "body is not nearly uniform in temperature; use the distributed model for its "
            "shape ('slab', 'cylinder', 'sphere', or the products 'bar', 'box', "
            "'short_cylinder')")
    # exp(-t / tau), tau = rho c V / (h A) (lumped-capacitance equation, Incropera eq. 5.6)
    tau = setup.heat_capacity * volume / (h * area) if h > 0.0 else math.inf
    theta = np.exp(-times / tau) if h > 0.0 else np.ones_like(times)
    temperatures = (setup.ambient + step * theta)[:, None] \
        * np.ones((1, setup.positions.shape[0]))
    fraction = 1.0 - theta
    energy = setup.heat_capacity * volume * (-step) * fraction + 0.0  # eq. 5.8; no -0.0
    fourier = (setup.diffusivity * times / length**2)[:, None]

    target_time = None
    iterations = residual = None
    if problem.target is not None:
        theta_target = _target_theta(problem, step, setup.ambient)
        if theta_target < 1.0 and not math.isfinite(tau):
            raise IllPosedError("target.temperature is unreachable: with a zero film "
                                "coefficient the body keeps its initial temperature",
                                field="target.temperature", reason="target-unreachable")
        target_time = -tau * math.log(theta_target) if theta_target < 1.0 else 0.0
        iterations = 0
        residual = abs(setup.ambient + step * math.exp(-target_time / tau)
                       - problem.target.temperature) if math.isfinite(tau) else 0.0

    finite = bool(np.isfinite(temperatures).all())
    status = "converged" if finite else "non_finite"
    convergence = Convergence(status=status, message="lumped body: closed form exp(-t/tau)",
                              error_estimate=_ROUNDING * abs(step), atol=setup.atol,
                              iterations=iterations, residual=residual)
    safety_times, safety_temps = _with_initial(times, temperatures[:, :1],
                                               problem.initial_temperature)
    body = _scope("body", safety_times, safety_temps, [()], ["lumped body"])
    safety = check_limits(problem.limits, body, [body])
    positions = setup.positions[:, 0].copy()
    times_out = times.copy()
    _freeze(temperatures, fraction, energy, fourier, positions, times_out)
    terms = np.zeros(times.size, dtype=int)
    short = np.zeros(times.size, dtype=bool)
    _freeze(terms, short)
    return TransientResult(
        shape="lumped", method="lumped", times=times_out, positions=positions,
        temperatures=temperatures, energy_fraction=fraction, energy=energy, energy_unit="J",
        directions=("lumped",), biot=(biot,), fourier=fourier, terms=terms, short_time=short,
        time_constant=tau if math.isfinite(tau) else None, target_time=target_time,
        convergence=convergence, safety=safety, warnings=tuple(warnings))


# --------------------------------------------------------------------------- semi-infinite solid


def _semi_infinite_rise(problem: TransientProblem, setup: _Setup, times: _Array,
                        depths: _Array) -> _Array:
    """T - Ti on the (time, depth) grid."""
    alpha, k = setup.diffusivity, problem.conductivity
    kind = problem.surface.type
    if kind == "flux":
        return flux_rise(depths, times, alpha, k, float(problem.surface.value))  # type: ignore[arg-type]
    step = setup.ambient - problem.initial_temperature
    if kind == "temperature":
        return step * fixed_temperature_response(depths, times, alpha)
    return step * convection_response(depths, times, alpha, k, setup.film_coefficient)


def _solve_semi_infinite(problem: TransientProblem, setup: _Setup) -> TransientResult:
    times = setup.times
    depths = setup.positions[:, 0]
    kind = problem.surface.type
    ti = problem.initial_temperature
    rise = _semi_infinite_rise(problem, setup, times, np.concatenate((depths, [0.0])))
    temperatures_all = ti + rise
    temperatures = temperatures_all[:, :-1]
    k, alpha = problem.conductivity, setup.diffusivity
    energy = energy_per_area(
        times, kind, conductivity=k, diffusivity=alpha,
        temperature_step=(setup.ambient - ti) if kind != "flux" else 0.0,
        film_coefficient=setup.film_coefficient if kind == "convection" else 0.0,
        flux=float(problem.surface.value) if kind == "flux" else 0.0)  # type: ignore[arg-type]
    energy = energy + 0.0  # no -0.0 at t = 0
    warnings: list[str] = []

    target_time = None
    iterations: int | None = None
    residual: float | None = None
    ok = True
    if problem.target is not None:
        target_time, iterations, residual, ok, note = _semi_infinite_target(problem, setup)
        if note:
            warnings.append(note)
    finite = bool(np.isfinite(temperatures_all).all() and np.isfinite(energy).all())
    status = "converged" if finite else "non_finite"
    message = "semi-infinite solid: closed form (scaled complementary error functions)"
    if not finite:
        message = "semi-infinite solid: a NaN or infinity appeared in the results"
    if status == "converged" and not ok:
        status, message = "max_iterations", message + "; the target-time search did not converge"
    # closed form: only rounding in erfc / erfcx (relative accuracy ~1e-15) remains
    rounding = _ROUNDING * float(np.abs(rise).max(initial=0.0)) if finite else math.inf
    convergence = Convergence(status=status, message=message, error_estimate=rounding,
                              atol=setup.atol, iterations=iterations, residual=residual)

    # safety: requested depths, the surface, and the far interior (still at Ti)
    points = [(float(x),) for x in depths] + [(0.0,), ()]
    cols = np.concatenate((temperatures_all, np.full((times.size, 1), ti)), axis=1)
    labels = [_label(setup.positions[i], "semi_infinite") for i in range(depths.size)] \
        + ["surface", "far interior (initial temperature)"]
    safety_times, safety_temps = _with_initial(times, cols, ti)
    body = _scope("body", safety_times, safety_temps, points, labels)
    surface = _scope("surface", safety_times, safety_temps[:, -2:-1], [(0.0,)], ["surface"])
    safety = check_limits(problem.limits, body, [surface])

    positions = depths.copy()
    times_out = times.copy()
    fourier = np.zeros((times.size, 0))
    terms = np.zeros(times.size, dtype=int)
    short = np.zeros(times.size, dtype=bool)
    _freeze(temperatures, energy, positions, times_out, fourier, terms, short)
    biot: tuple[float, ...] = ()
    return TransientResult(
        shape="semi_infinite", method="closed_form", times=times_out, positions=positions,
        temperatures=temperatures, energy_fraction=None, energy=energy, energy_unit="J/m^2",
        directions=(), biot=biot, fourier=fourier, terms=terms, short_time=short,
        time_constant=None, target_time=target_time, convergence=convergence, safety=safety,
        warnings=tuple(warnings))


def _semi_infinite_target(problem: TransientProblem, setup: _Setup
                          ) -> tuple[float, int, float, bool, str]:
    assert problem.target is not None
    depth = _position(problem.target.position, "semi_infinite", (), "target.position")[0]
    ti = problem.initial_temperature
    target = problem.target.temperature
    if not math.isfinite(target):
        raise IllPosedError("target.temperature must be finite", field="target.temperature")
    alpha = setup.diffusivity
    if problem.surface.type == "flux":
        q = float(problem.surface.value)  # type: ignore[arg-type]
        if target == ti:
            return 0.0, 0, 0.0, True, "target.temperature equals the initial temperature: t = 0"
        if q == 0.0 or (target - ti) * q < 0.0:
            raise IllPosedError(
                f"target.temperature {target:g} degC is unreachable: a surface flux of {q:g} "
                f"W/m^2 moves the solid from {ti:g} degC only "
                f"{'upwards' if q > 0 else 'downwards' if q < 0 else 'nowhere'}",
                field="target.temperature", reason="target-unreachable")
        # the rise grows without bound like sqrt(t): normalise so the excess falls through 0
        def excess(t: float) -> float:
            rise = float(_semi_infinite_rise(problem, setup, np.array([t]),
                                             np.array([depth]))[0, 0])
            return 1.0 - rise / (target - ti)
        scale = max(depth**2 / alpha, (math.pi / alpha) * (problem.conductivity
                                                            * (target - ti) / (2.0 * q)) ** 2)
    else:
        step = ti - setup.ambient
        theta_target = _target_theta(problem, step, setup.ambient)
        if theta_target == 1.0:
            return 0.0, 0, 0.0, True, "target.temperature equals the initial temperature: t = 0"
        if depth == 0.0 and problem.surface.type == "temperature":
            return (0.0, 0, abs(target - setup.ambient), True,
                    "target.position is the surface, held at the surface temperature, which "
                    "it takes at once: target time 0 s")

        def excess(t: float) -> float:
            rise = float(_semi_infinite_rise(problem, setup, np.array([t]),
                                             np.array([depth]))[0, 0])
            return (rise + step) / step - theta_target  # theta(t) - theta_target
        h = setup.film_coefficient
        if h == 0.0:
            raise IllPosedError("target.temperature is unreachable: with a zero film "
                                "coefficient the solid keeps its initial temperature",
                                field="target.temperature", reason="target-unreachable")
        scale = depth**2 / alpha if depth > 0.0 else (problem.conductivity / h) ** 2 / alpha
    time, iterations, ok = find_target_time(excess, max(scale, 1e-300))
    if not ok:
        return math.nan, iterations, math.nan, False, ""
    temperature = ti + float(_semi_infinite_rise(problem, setup, np.array([time]),
                                                 np.array([depth]))[0, 0])
    return time, iterations, abs(temperature - target), True, ""
