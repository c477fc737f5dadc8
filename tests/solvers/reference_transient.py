"""Reference cases and independent reference solutions for the transient-conduction solver.

Everything here is independent of `service.solvers` (no import of it): published table values
(from memory where so), mpmath evaluations (roots by mpmath.findroot, series summed in
mpmath, Laplace inversion by mpmath.invertlaplace, error-function forms), and small
method-of-lines finite-volume solutions integrated with scipy.integrate.solve_ivp.

Dimensionless variables throughout: theta = (T - T_inf) / (Ti - T_inf), xi = position / L,
Fo = alpha t / L^2, Bi = h L / k (L = half-thickness or radius).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Any

import mpmath as mp
import numpy as np
import scipy.sparse as sp
from scipy.integrate import solve_ivp


@dataclass(frozen=True)
class RefCase:
    """One reference case: id, source, inputs, expected values and tolerances."""

    id: str
    source: str
    inputs: dict[str, Any]
    expected: dict[str, float] = field(default_factory=dict)
    rtol: float = 0.0
    atol: float = 0.0


# ----------------------------------------------------------------------------------------------
# Published table: first root zeta_1 and one-term coefficient C_1 over Biot numbers.
# Source: Incropera, DeWitt, Bergman, Lavine, Fundamentals of Heat and Mass Transfer, 6th ed.,
# Table 5.1 "Coefficients used in the one-term approximation" (from memory). Printed to four
# decimals; atol 2e-4 allows for the printed rounding and one unit of memory slack (the table's
# Bi = inf cylinder root reads 2.4050 while j_{0,1} = 2.404826, a 1.7e-4 difference; the
# tight checks of the roots are the mpmath comparisons).
# ----------------------------------------------------------------------------------------------
_TABLE_SOURCE = "Incropera et al., Fundamentals of Heat and Mass Transfer, 6th ed., Table 5.1 " \
                "(from memory)"
_TABLE_5_1 = {
    # Bi: ((plane wall zeta1, C1), (infinite cylinder zeta1, C1), (sphere zeta1, C1))
    0.01: ((0.0998, 1.0017), (0.1412, 1.0025), (0.1730, 1.0030)),
    0.1: ((0.3111, 1.0161), (0.4417, 1.0246), (0.5423, 1.0298)),
    0.5: ((0.6533, 1.0701), (0.9408, 1.1143), (1.1656, 1.1441)),
    1.0: ((0.8603, 1.1191), (1.2558, 1.2071), (1.5708, 1.2732)),
    2.0: ((1.0769, 1.1785), (1.5995, 1.3384), (2.0288, 1.4793)),
    5.0: ((1.3138, 1.2402), (1.9898, 1.5029), (2.5704, 1.7870)),
    10.0: ((1.4289, 1.2620), (2.1795, 1.5677), (2.8363, 1.9249)),
    math.inf: ((1.5708, 1.2733), (2.4050, 1.6018), (3.1416, 2.0000)),
}
ONE_TERM_TABLE: list[RefCase] = [
    RefCase(id=f"table-5.1-{geometry}-Bi{biot:g}", source=_TABLE_SOURCE,
            inputs={"geometry": geometry, "biot": biot},
            expected={"zeta1": row[i][0], "c1": row[i][1]}, rtol=0.0, atol=2e-4)
    for biot, row in _TABLE_5_1.items()
    for i, geometry in enumerate(("slab", "cylinder", "sphere"))
]

# Biot numbers and Fourier numbers for the mpmath series comparison (independent library).
MPMATH_BIOTS = (1e-6, 0.1, 1.0, 10.0, 1e6, math.inf)
MPMATH_FOURIER = (4e-3, 0.02, 0.3, 2.0)
MPMATH_XI = (0.0, 0.37, 0.8, 1.0)

# Short-time points for the mpmath Laplace inversion (independent library).
LAPLACE_CASES: list[RefCase] = [
    RefCase(id=f"laplace-{g}-Bi{bi:g}-Fo{fo:g}", source="mpmath.invertlaplace (talbot) of the "
            "Laplace-domain solution (Carslaw and Jaeger sect. 12.x, from memory)",
            inputs={"geometry": g, "biot": bi, "fourier": fo, "xi": (0.0, 0.98, 0.999, 1.0)},
            rtol=0.0, atol=1e-9)
    for g in ("slab", "cylinder", "sphere") for bi, fo in ((3.0, 1e-5), (math.inf, 1e-7))
]


# ----------------------------------------------------------------------------------------------
# mpmath: roots, coefficients, series
# ----------------------------------------------------------------------------------------------

def _mp_characteristic(geometry: str, biot: mp.mpf):
    """The transcendental equation in a pole-free form, f(mu) = 0."""
    if geometry == "slab":  # mu tan mu = Bi, times cos mu
        return lambda mu: mu * mp.sin(mu) - biot * mp.cos(mu)
    if geometry == "cylinder":  # mu J1(mu) = Bi J0(mu)
        return lambda mu: mu * mp.besselj(1, mu) - biot * mp.besselj(0, mu)
    return lambda mu: mu * mp.cos(mu) + (biot - 1) * mp.sin(mu)  # 1 - mu cot mu = Bi, times sin


def mp_roots(geometry: str, biot: float, count: int) -> list[mp.mpf]:
    """First `count` positive roots by mpmath.findroot on brackets that each hold one root.

    Brackets: slab ((n-1) pi, (n-1/2) pi); cylinder (j_{1,n-1}, j_{0,n}) with mpmath's
    besseljzero; sphere ((n-1) pi, n pi) (Carslaw and Jaeger 3.10, 7.7, 9.3, from memory).
    Bi = inf gives the closed forms (n - 1/2) pi, j_{0,n}, n pi.
    """
    roots = []
    for n in range(1, count + 1):
        if geometry == "slab":
            lo, hi = (n - 1) * mp.pi, (n - mp.mpf(1) / 2) * mp.pi
        elif geometry == "cylinder":
            lo = mp.besseljzero(1, n - 1) if n > 1 else mp.mpf(0)
            hi = mp.besseljzero(0, n)
        else:
            lo, hi = (n - 1) * mp.pi, n * mp.pi
        if math.isinf(biot):
            roots.append(hi)
            continue
        f = _mp_characteristic(geometry, mp.mpf(biot))
        eps = mp.mpf(10) ** (-mp.mp.dps + 5)
        # keep the sphere's trivial root mu = 0 out of its first bracket
        lo = lo + eps if geometry != "sphere" or n > 1 else mp.mpf(10) ** (-(mp.mp.dps // 2))
        hi = hi - eps
        try:
            roots.append(mp.findroot(f, (lo, hi), solver="anderson"))
        except ValueError:  # flat f near a tiny first root: plain bisection always works
            roots.append(mp.findroot(f, (lo, hi), solver="bisect"))
    return roots


def mp_coefficients(geometry: str, mu: mp.mpf) -> tuple[mp.mpf, mp.mpf]:
    """(C_n, mean of S_n): C_n = <1, S_n> / <S_n, S_n> with the body's weight, evaluated in
    mpmath from the textbook norms (Incropera eqs. 5.39b, 5.50b, 5.51c, from memory)."""
    if geometry == "slab":
        c = 4 * mp.sin(mu) / (2 * mu + mp.sin(2 * mu))
        return c, mp.sin(mu) / mu
    if geometry == "cylinder":
        j0, j1 = mp.besselj(0, mu), mp.besselj(1, mu)
        return 2 / mu * j1 / (j0**2 + j1**2), 2 * j1 / mu
    s = mp.sin(mu) - mu * mp.cos(mu)
    return 4 * s / (2 * mu - mp.sin(2 * mu)), 3 * s / mu**3


def _mp_mode(geometry: str, z: mp.mpf) -> mp.mpf:
    if geometry == "slab":
        return mp.cos(z)
    if geometry == "cylinder":
        return mp.besselj(0, z)
    return mp.mpf(1) if z == 0 else mp.sin(z) / z


def mp_series(geometry: str, biot: float, fourier: list[float], xi: list[float],
              count: int | None = None) -> tuple[np.ndarray, np.ndarray]:
    """theta (n_fo, n_xi) and mean theta (n_fo,) summed in mpmath.

    With count None, enough terms that the next one is below 1e-20 at the smallest Fo.
    """
    with mp.workdps(25):
        if count is None:
            count = int(math.ceil(math.sqrt(47.0 / min(fourier)) / math.pi)) + 2
        mus = mp_roots(geometry, biot, count)
        coeffs = [mp_coefficients(geometry, mu) for mu in mus]
        theta = np.empty((len(fourier), len(xi)))
        mean = np.empty(len(fourier))
        modes = [[_mp_mode(geometry, mu * mp.mpf(x)) for x in xi] for mu in mus]
        for i, fo in enumerate(fourier):
            decay = [mp.exp(-mu**2 * mp.mpf(fo)) for mu in mus]
            for j in range(len(xi)):
                theta[i, j] = float(mp.fsum(c * d * m[j] for (c, _), d, m
                                            in zip(coeffs, decay, modes, strict=True)))
            mean[i] = float(mp.fsum(c * a * d for (c, a), d in zip(coeffs, decay, strict=True)))
    return theta, mean


def mp_laplace_theta(geometry: str, biot: float, fourier: float, xi: float) -> float:
    """theta by mpmath.invertlaplace (Talbot) of the transform written in its textbook form.

    slab: (1/s) [1 - Bi cosh(q x) / (q sinh q + Bi cosh q)]; cylinder: (1/s)[1 - Bi I0(q r) /
    (q I1(q) + Bi I0(q))]; sphere: (1/s)[1 - Bi sinh(q r) / (r (q cosh q + (Bi - 1) sinh q))];
    q = sqrt(s); fixed surface temperature as Bi -> inf (Carslaw and Jaeger sect. 12.x, from
    memory).
    """
    x = mp.mpf(xi)
    inf = math.isinf(biot)
    b = mp.mpf(biot) if not inf else None

    def transform(s):
        q = mp.sqrt(s)
        if geometry == "slab":
            g = mp.cosh(q * x) / mp.cosh(q) if inf else \
                b * mp.cosh(q * x) / (q * mp.sinh(q) + b * mp.cosh(q))
        elif geometry == "cylinder":
            g = mp.besseli(0, q * x) / mp.besseli(0, q) if inf else \
                b * mp.besseli(0, q * x) / (q * mp.besseli(1, q) + b * mp.besseli(0, q))
        else:
            shape = q if x == 0 else mp.sinh(q * x) / x
            g = shape / mp.sinh(q) if inf else \
                b * shape / (q * mp.cosh(q) + (b - 1) * mp.sinh(q))
        return g / s

    with mp.workdps(30):
        return float(1 - mp.invertlaplace(transform, mp.mpf(fourier), method="talbot"))


def mp_image_slab(fourier: float, xi: float, images: int = 60) -> float:
    """Fixed-surface-temperature slab by the error-function image series (Carslaw and Jaeger
    sect. 3.3, from memory): theta = 1 - sum_n (-1)^n [erfc((2n+1-x)/(2 sqrt Fo)) +
    erfc((2n+1+x)/(2 sqrt Fo))]."""
    with mp.workdps(30):
        r = 2 * mp.sqrt(mp.mpf(fourier))
        x = mp.mpf(xi)
        total = mp.fsum((-1) ** n * (mp.erfc((2 * n + 1 - x) / r) + mp.erfc((2 * n + 1 + x) / r))
                        for n in range(images))
        return float(1 - total)


def mp_image_sphere(fourier: float, xi: float, images: int = 60) -> float:
    """Fixed-surface-temperature sphere by the image series (Carslaw and Jaeger sect. 9.3,
    from memory): theta = 1 - (1/r) sum_n [erfc((2n+1-r)/(2 sqrt Fo)) - erfc((2n+1+r)/(2 sqrt
    Fo))], r > 0."""
    with mp.workdps(30):
        c = 2 * mp.sqrt(mp.mpf(fourier))
        r = mp.mpf(xi)
        total = mp.fsum(mp.erfc((2 * n + 1 - r) / c) - mp.erfc((2 * n + 1 + r) / c)
                        for n in range(images))
        return float(1 - total / r)


# ----------------------------------------------------------------------------------------------
# Semi-infinite solid: the published forms, evaluated directly in mpmath (no rescaling)
# Source: Incropera et al. 6th ed. eqs. 5.57, 5.59, 5.60; Carslaw and Jaeger 2.4, 2.7, 2.9
# (from memory).
# ----------------------------------------------------------------------------------------------

def mp_semi_infinite(kind: str, depth: float, time: float, *, alpha: float, k: float,
                     ti: float, ts: float = 0.0, h: float = 0.0, ambient: float = 0.0,
                     q: float = 0.0) -> float:
    """Temperature, degC, of a semi-infinite solid at `depth` m and `time` s."""
    with mp.workdps(40):
        x, t, a, kk = (mp.mpf(v) for v in (depth, time, alpha, k))
        eta = x / (2 * mp.sqrt(a * t))
        if kind == "temperature":
            return float(ts + (ti - ts) * mp.erf(eta))
        if kind == "flux":
            return float(ti + 2 * q * mp.sqrt(a * t / mp.pi) / kk * mp.exp(-eta**2)
                         - q * x / kk * mp.erfc(eta))
        hh = mp.mpf(h)
        frac = mp.erfc(eta) - mp.exp(hh * x / kk + hh**2 * a * t / kk**2) \
            * mp.erfc(eta + hh * mp.sqrt(a * t) / kk)
        return float(ti + (ambient - ti) * frac)


def mp_semi_infinite_energy(kind: str, time: float, *, alpha: float, k: float, ti: float,
                            ts: float = 0.0, h: float = 0.0, ambient: float = 0.0) -> float:
    """Heat into the surface per m^2 up to `time`: mpmath quadrature of the surface flux.

    Surface flux: fixed temperature k (Ts - Ti) / sqrt(pi alpha t); convection
    h (T_inf - Ts(t)) with Ts(t) from `mp_semi_infinite` at depth 0.
    """
    with mp.workdps(30):
        a, kk = mp.mpf(alpha), mp.mpf(k)
        if kind == "temperature":
            flux = lambda t: kk * (ts - ti) / mp.sqrt(mp.pi * a * t)  # noqa: E731
        else:
            hh = mp.mpf(h)

            def flux(t):
                beta = hh * mp.sqrt(a * t) / kk
                surface = ti + (ambient - ti) * (1 - mp.exp(beta**2) * mp.erfc(beta))
                return hh * (ambient - surface)
        return float(mp.quad(flux, [0, time]))


# ----------------------------------------------------------------------------------------------
# Method of lines: cell-centred finite volumes in xi, integrated with solve_ivp (BDF)
# ----------------------------------------------------------------------------------------------

def mol_operator(geometry: str, biot: float, cells: int) -> tuple[sp.csr_matrix, np.ndarray,
                                                                  np.ndarray]:
    """Finite-volume operator A (d theta / d Fo = A theta) on [0, 1], cell volumes, surface
    row weights.

    Symmetry (zero flux) at xi = 0; at xi = 1 the Robin condition through the half cell:
    flux out = a_1 theta_N / (h/2 + 1/Bi). Face areas xi^j, cell volumes int xi^j, j = 0, 1, 2.
    Returns (A, volumes, surface_factor) with theta_surface = surface_factor * theta_N.
    """
    j = {"slab": 0, "cylinder": 1, "sphere": 2}[geometry]
    h = 1.0 / cells
    faces = np.linspace(0.0, 1.0, cells + 1)
    area = faces**j
    volume = (faces[1:] ** (j + 1) - faces[:-1] ** (j + 1)) / (j + 1)
    inner = area[1:-1] / h  # conductance between neighbours
    diag = np.zeros(cells)
    diag[:-1] -= inner
    diag[1:] -= inner
    resistance = 0.5 * h + (0.0 if math.isinf(biot) else 1.0 / biot)
    diag[-1] -= area[-1] / resistance
    a = sp.diags([inner, diag, inner], [-1, 0, 1], format="csr")
    a = sp.diags(1.0 / volume) @ a
    surface_factor = (1.0 / biot) / resistance if not math.isinf(biot) else 0.0
    return a.tocsr(), volume, np.array(surface_factor)


def mol_body(geometry: str, biot: float, fourier: list[float], cells: int
             ) -> tuple[np.ndarray, np.ndarray]:
    """theta at xi = (0, 0.5, 1) and mean theta at each Fo; `cells` must be even.

    Centre: quadratic (even) extrapolation (9 theta_0 - theta_1) / 8; xi = 0.5: average of the
    two cells that share that face; surface: the half-cell Robin value. All O(h^2) with a
    grid-independent coefficient, so Richardson extrapolation (`richardson`) applies.
    """
    a, volume, surface_factor = mol_operator(geometry, biot, cells)
    sol = solve_ivp(lambda _t, y: a @ y, (0.0, max(fourier)), np.ones(cells), method="BDF",
                    jac=a, t_eval=sorted(fourier), rtol=1e-10, atol=1e-13)
    y = sol.y.T  # (n_fo, cells)
    order = np.argsort(np.argsort(fourier))
    y = y[order]
    half = cells // 2
    theta = np.stack([(9.0 * y[:, 0] - y[:, 1]) / 8.0, 0.5 * (y[:, half - 1] + y[:, half]),
                      surface_factor * y[:, -1]], axis=1)
    mean = y @ volume / volume.sum()
    return theta, mean


def richardson(coarse: np.ndarray, fine: np.ndarray) -> np.ndarray:
    """Second-order Richardson extrapolation from grids h and h/2."""
    return (4.0 * fine - coarse) / 3.0


def mol_product(factors: list[tuple[str, float, float]], fourier_unit: list[float],
                cells: list[int], rtol: float = 1e-10) -> tuple[np.ndarray, np.ndarray]:
    """A 2D or 3D finite-volume run of a product body, integrated as one system by solve_ivp.

    factors: (geometry, length L_i, Biot_i) per direction, with alpha = 1 so Fo_i =
    t / L_i^2; `fourier_unit` are the times t. The operator is the Kronecker sum of the
    directional operators scaled by 1/L_i^2 (same cell-centred scheme as `mol_operator`),
    assembled as one sparse matrix and integrated as a whole: no product rule is used.
    Returns theta at the centre-extrapolated point and at the outer corner (the half-cell
    Robin values multiplied along each direction's surface cell), and the volume mean.
    """
    ops, vols, surf = [], [], []
    for (geometry, length, biot), n in zip(factors, cells, strict=True):
        a, v, s = mol_operator(geometry, biot, n)
        ops.append(a / length**2)
        vols.append(v)
        surf.append(float(s))
    size = [len(v) for v in vols]
    total = sp.csr_matrix((int(np.prod(size)), int(np.prod(size))))
    for i, a in enumerate(ops):
        term = sp.identity(1, format="csr")
        for jdx in range(len(ops)):
            term = sp.kron(term, a if jdx == i else sp.identity(size[jdx]), format="csr")
        total = total + term
    total = total.tocsr()
    sol = solve_ivp(lambda _t, y: total @ y, (0.0, max(fourier_unit)), np.ones(total.shape[0]),
                    method="BDF", jac=total, t_eval=sorted(fourier_unit), rtol=rtol,
                    atol=1e-3 * rtol)
    y = sol.y.T.reshape([len(fourier_unit)] + size)
    weight = vols[0]
    for v in vols[1:]:
        weight = np.multiply.outer(weight, v)
    mean = (y * weight).reshape(len(fourier_unit), -1).sum(axis=1) / weight.sum()
    centre = y
    corner = y
    for axis in range(len(size)):
        # even extrapolation to the centre plane; half-cell Robin value at the surface
        centre = (9.0 * np.take(centre, 0, axis=1) - np.take(centre, 1, axis=1)) / 8.0
        corner = surf[axis] * np.take(corner, -1, axis=1)
    return np.stack([centre, corner], axis=1), mean
