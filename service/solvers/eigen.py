"""Eigenvalue tables for the series solvers.

Two families of Sturm-Liouville problems are served:

* **Edge pairs** (plate series, and the symmetric slab): X'' + mu^2 X = 0 on s in [0, 1] with
  each end "fixed" (X = 0), "insulated" (X' = 0) or "convective" (X'(0) = Bi X(0) at s = 0,
  -X'(1) = Bi X(1) at s = 1, Bi = h L / k).
* **Bodies** (transient conduction): slab, long cylinder and sphere with a symmetric centre and
  a convective (or fixed, Bi = inf) surface.

Roots are found by a vectorised, bracket-safeguarded Newton iteration over all n at once: each
root has its own bracket that provably holds exactly one root, so none is missed or doubled for
any Biot number (tested from 1e-6 to 1e6).

Caching: `pair_roots`, `body_roots` and `body_coefficients` keep an LRU cache of at most
`CACHE_SIZE` entries each (keyed on kinds, Biot numbers and count); the arrays they return are
read-only. Requests for fewer roots than a cached table reuse a prefix of a larger table only
when asked with the same count, so the cache is bounded by CACHE_SIZE * max count.

References
----------
Carslaw, H. S. and Jaeger, J. C., *Conduction of Heat in Solids*, 2nd ed., Oxford, 1959:
sect. 3.10 (slab), 7.7 (cylinder), 9.3 (sphere) for the eigenvalue equations and coefficients
(from memory).
"""

from __future__ import annotations

import math
from collections.abc import Callable
from functools import lru_cache

import numpy as np
from scipy import special

PAIR_KINDS = ("fixed", "insulated", "convective")
GEOMETRIES = ("slab", "cylinder", "sphere")
CACHE_SIZE = 256
MAX_COUNT = 100_000

_Array = np.ndarray


def _check_count(count: int) -> None:
    if not 1 <= count <= MAX_COUNT:
        raise ValueError(f"count must be between 1 and {MAX_COUNT}, got {count}")


def _check_biot(biot: float, name: str = "biot") -> None:
    if not biot >= 0.0:  # also rejects NaN
        raise ValueError(f"{name} must be >= 0, got {biot}")


def _safeguarded_newton(
    f: Callable[[_Array], _Array],
    fprime: Callable[[_Array], _Array],
    lo: _Array,
    hi: _Array,
    x0: _Array,
    max_iterations: int = 100,
) -> _Array:
    """Vectorised Newton iteration kept inside [lo, hi] by bisection.

    f must change sign on each bracket with f(lo) <= 0 <= f(hi) after orientation; brackets are
    tightened at each step so the iteration cannot leave them.
    """
    lo = lo.astype(float).copy()
    hi = hi.astype(float).copy()
    x = np.clip(x0.astype(float), lo, hi)
    sign_lo = np.sign(f(lo))
    for _ in range(max_iterations):
        fx = f(x)
        # shrink brackets: same sign as f(lo) -> new lo
        same = np.sign(fx) == sign_lo
        lo = np.where(same, x, lo)
        hi = np.where(same, hi, x)
        d = fprime(x)
        with np.errstate(divide="ignore", invalid="ignore"):
            step = np.where(d != 0.0, fx / d, np.inf)
        x_new = x - step
        outside = ~((x_new >= lo) & (x_new <= hi)) | ~np.isfinite(x_new)
        x_new = np.where(outside, 0.5 * (lo + hi), x_new)
        converged = np.abs(x_new - x) <= 4.0 * np.finfo(float).eps * np.maximum(np.abs(x_new), 1.0)
        x = x_new
        if np.all(converged | (hi - lo <= 4.0 * np.finfo(float).eps * np.maximum(np.abs(hi), 1.0))):
            break
    return x


# --------------------------------------------------------------------------- edge pairs


def pair_phase(kind: str, biot: float, mu: _Array) -> _Array:
    """Phase of the eigenfunction at an end: X(s) = sin(mu s + phase).

    phase = arctan(mu / Bi): 0 for a fixed end, pi/2 for an insulated end.
    """
    mu = np.asarray(mu, dtype=float)
    if kind == "fixed":
        return np.zeros_like(mu)
    if kind == "insulated":
        return np.full_like(mu, 0.5 * math.pi)
    if kind == "convective":
        return np.arctan2(mu, biot)
    raise ValueError(f"end kind must be one of {PAIR_KINDS}, got {kind!r}")


def _pair_phase_derivative(kind: str, biot: float, mu: _Array) -> _Array:
    if kind == "convective":
        return biot / (biot * biot + mu * mu)
    return np.zeros_like(mu)


def _normalise_pair(kind: str, biot: float) -> tuple[str, float]:
    """A convective end with Bi = 0 is insulated; with Bi = inf it is fixed."""
    if kind not in PAIR_KINDS:
        raise ValueError(f"end kind must be one of {PAIR_KINDS}, got {kind!r}")
    if kind != "convective":
        return kind, 0.0
    _check_biot(biot)
    if biot == 0.0:
        return "insulated", 0.0
    if math.isinf(biot):
        return "fixed", 0.0
    return kind, float(biot)


def pair_roots(left: str, right: str, left_biot: float = 0.0, right_biot: float = 0.0,
               count: int = 50) -> _Array:
    """Roots mu_n, n = 1..count, of the edge-pair eigenvalue problem on [0, 1].

    Parameters
    ----------
    left, right : {"fixed", "insulated", "convective"}
        End conditions at s = 0 and s = 1.
    left_biot, right_biot : float
        Biot numbers h L / k of convective ends (ignored otherwise).
    count : int
        Number of roots.

    Returns
    -------
    numpy.ndarray
        Read-only, ascending, dimensionless roots. The eigenfunction of root mu_n is
        X_n(s) = sin(mu_n s + pair_phase(left, left_biot, mu_n)). A zero root appears (first)
        only when both ends are insulated.

    Notes
    -----
    With phases phi_l(mu) = arctan(mu / Bi_l) and phi_r(mu) = arctan(mu / Bi_r) the n-th root
    solves F(mu) = mu + phi_l(mu) + phi_r(mu) - n pi = 0. F is strictly increasing and
    phi_l + phi_r lies in [0, pi], so the n-th root lies in [(n - 1) pi, n pi]: one root per
    bracket. This is the phase form of tan(mu) = mu (Bi_l + Bi_r) / (mu^2 - Bi_l Bi_r).
    """
    _check_count(count)
    left, left_biot = _normalise_pair(left, left_biot)
    right, right_biot = _normalise_pair(right, right_biot)
    return _pair_roots_cached(left, right, left_biot, right_biot, int(count))


@lru_cache(maxsize=CACHE_SIZE)
def _pair_roots_cached(left: str, right: str, left_biot: float, right_biot: float,
                       count: int) -> _Array:
    n = np.arange(1, count + 1, dtype=float)
    const = {"fixed": 0.0, "insulated": 0.5 * math.pi}
    if left != "convective" and right != "convective":
        roots = n * math.pi - const[left] - const[right]
    else:
        def f(mu: _Array) -> _Array:
            return (mu + pair_phase(left, left_biot, mu) + pair_phase(right, right_biot, mu)
                    - n * math.pi)

        def fprime(mu: _Array) -> _Array:
            return (1.0 + _pair_phase_derivative(left, left_biot, mu)
                    + _pair_phase_derivative(right, right_biot, mu))

        lo = (n - 1.0) * math.pi
        hi = n * math.pi
        # start from the large-mu asymptote, where the phases tend to pi/2 for convective ends
        guess = n * math.pi - 0.5 * math.pi * (left == "convective") - const.get(left, 0.0) \
            - 0.5 * math.pi * (right == "convective") - const.get(right, 0.0)
        roots = _safeguarded_newton(f, fprime, lo, hi, np.clip(guess, lo + 1e-12, hi))
    roots = np.maximum(roots, 0.0)
    roots.setflags(write=False)
    return roots


def pair_norm(left: str, left_biot: float, mu: _Array, right: str | None = None,
              right_biot: float = 0.0) -> _Array:
    """Integral over [0, 1] of X_n(s)^2 for X_n = sin(mu s + phase_left).

    Equals 1/2 + (sin(2 phi_l) - sin(2 mu + 2 phi_l)) / (4 mu); 1 for the zero root. When the
    right end is given, the equivalent sum of non-negative terms
    1/2 + (sin(2 phi_l) + sin(2 phi_r)) / (4 mu) is used (mu + phi_l + phi_r = n pi), which
    keeps its digits for small roots of convective ends with small Biot numbers.
    """
    mu = np.asarray(mu, dtype=float)
    phi = pair_phase(left, left_biot, mu)
    with np.errstate(divide="ignore", invalid="ignore"):
        if right is None:
            norm = 0.5 + (np.sin(2.0 * phi) - np.sin(2.0 * mu + 2.0 * phi)) / (4.0 * mu)
        else:
            right_kind, right_biot = _normalise_pair(right, right_biot)
            phi_r = pair_phase(right_kind, right_biot, mu)
            norm = 0.5 + (np.sin(2.0 * phi) + np.sin(2.0 * phi_r)) / (4.0 * mu)
    return np.where(mu == 0.0, np.sin(phi) ** 2, norm)


# --------------------------------------------------------------------------- bodies


def _check_geometry(geometry: str) -> None:
    if geometry not in GEOMETRIES:
        raise ValueError(f"geometry must be one of {GEOMETRIES}, got {geometry!r}")


@lru_cache(maxsize=8)
def _bessel_zeros(order: int, count: int) -> _Array:
    zeros = special.jn_zeros(order, count)
    zeros.setflags(write=False)
    return zeros


def body_roots(geometry: str, biot: float, count: int) -> _Array:
    """Roots mu_n of the transient eigenvalue equation of a slab, long cylinder or sphere.

    Parameters
    ----------
    geometry : {"slab", "cylinder", "sphere"}
    biot : float
        h L / k with L the half-thickness (slab) or radius; ``math.inf`` for a fixed surface
        temperature; 0 gives the zero root of an insulated body first.
    count : int

    Returns
    -------
    numpy.ndarray
        Read-only ascending roots:

        - slab: mu tan(mu) = Bi, mu_n in [(n - 1) pi, (n - 1/2) pi]
        - cylinder: mu J1(mu) = Bi J0(mu), mu_n in [j_{1,n-1}, j_{0,n}] (j_{1,0} = 0)
        - sphere: 1 - mu cot(mu) = Bi, mu_n in ((n - 1) pi, n pi)
    """
    _check_geometry(geometry)
    _check_count(count)
    _check_biot(biot)
    return _body_roots_cached(geometry, float(biot), int(count))


@lru_cache(maxsize=CACHE_SIZE)
def _body_roots_cached(geometry: str, biot: float, count: int) -> _Array:
    n = np.arange(1, count + 1, dtype=float)
    if geometry == "slab":
        # centre insulated, surface convective: the (insulated, convective) edge pair
        roots = np.array(pair_roots("insulated", "convective", 0.0, biot, count))
    elif geometry == "cylinder":
        roots = _cylinder_roots(biot, count)
    else:
        roots = _sphere_roots(biot, n)
    roots.setflags(write=False)
    return roots


def _cylinder_roots(biot: float, count: int) -> _Array:
    j0 = np.array(_bessel_zeros(0, count))
    if math.isinf(biot):
        return j0
    j1 = np.concatenate(([0.0], _bessel_zeros(1, count - 1))) if count > 1 else np.zeros(1)
    if biot == 0.0:
        return j1

    # g(mu) = mu J1(mu) - Bi J0(mu); its sign alternates over the brackets, so orient by
    # evaluating at both ends inside the Newton helper.
    def g(mu: _Array) -> _Array:
        return mu * special.j1(mu) - biot * special.j0(mu)

    def gprime(mu: _Array) -> _Array:
        return mu * special.j0(mu) + biot * special.j1(mu)

    # initial guess: interpolate between the two limits with the slab-like weight Bi/(Bi+mu)
    w = biot / (biot + j1 + 1.0)
    guess = j1 + w * (j0 - j1)
    return _safeguarded_newton(g, gprime, j1, j0, guess)


def _sphere_roots(biot: float, n: _Array) -> _Array:
    if math.isinf(biot):
        return n * math.pi
    if biot == 1.0:
        return (n - 0.5) * math.pi
    # f(mu) = mu cos(mu) + (Bi - 1) sin(mu): the sin-multiplied form of 1 - mu cot mu = Bi,
    # free of poles; one root per ((n-1) pi, n pi), the first excluding mu = 0.
    b = biot - 1.0

    def f(mu: _Array) -> _Array:
        return mu * np.cos(mu) + b * np.sin(mu)

    def fprime(mu: _Array) -> _Array:
        return (1.0 + b) * np.cos(mu) - mu * np.sin(mu)

    lo = (n - 1.0) * math.pi
    hi = n * math.pi
    if biot == 0.0:
        # insulated sphere: zero root, then tan(mu) = mu roots
        roots = np.empty_like(n)
        roots[0] = 0.0
        if len(n) > 1:
            roots[1:] = _safeguarded_newton(f, fprime, lo[1:] + 1e-300, (n[1:] - 0.5) * math.pi,
                                            (n[1:] - 0.5) * math.pi - 1e-3)
        return roots
    # a tiny positive lower end for n = 1 keeps the trivial root mu = 0 out of the bracket
    lo = lo.copy()
    lo[0] = min(1e-3, 0.5 * math.sqrt(3.0 * biot)) if biot < 1.0 else 0.5 * math.pi
    guess = np.where(n == 1, min(math.sqrt(3.0 * biot), 0.5 * (lo[0] + math.pi)) if biot < 1.0
                     else 0.5 * (lo[0] + math.pi), (n - 0.5) * math.pi)
    return _safeguarded_newton(f, fprime, lo, hi, np.clip(guess, lo, hi))


def body_coefficients(geometry: str, biot: float, count: int) -> tuple[_Array, _Array]:
    """Series coefficients of the temperature and energy solutions.

    Returns
    -------
    (C, E) : tuple of numpy.ndarray
        theta / theta_i = sum_n C_n exp(-mu_n^2 Fo) S(mu_n r / L), with S = cos (slab),
        J0 (cylinder), sin(z)/z (sphere); and Q / Q0 = 1 - sum_n E_n exp(-mu_n^2 Fo).

    Notes
    -----
    slab:     C = 4 sin mu / (2 mu + sin 2 mu),           E = C sin(mu) / mu
    cylinder: C = 2 J1(mu) / (mu (J0^2(mu) + J1^2(mu))),  E = 2 C J1(mu) / mu
    sphere:   C = 4 (sin mu - mu cos mu) / (2 mu - sin 2 mu), E = 3 C (sin mu - mu cos mu) / mu^3
    (from memory of the standard textbook forms). The zero root of an insulated body has C = 1,
    E = 1 (nothing changes).
    """
    _check_geometry(geometry)
    _check_count(count)
    _check_biot(biot)
    return _body_coefficients_cached(geometry, float(biot), int(count))


@lru_cache(maxsize=CACHE_SIZE)
def _body_coefficients_cached(geometry: str, biot: float, count: int) -> tuple[_Array, _Array]:
    mu = _body_roots_cached(geometry, biot, count)
    zero = mu == 0.0
    safe = np.where(zero, 1.0, mu)
    if geometry == "slab":
        c = 4.0 * np.sin(safe) / (2.0 * safe + np.sin(2.0 * safe))
        e = c * np.sin(safe) / safe
    elif geometry == "cylinder":
        j0, j1 = special.j0(safe), special.j1(safe)
        c = 2.0 * j1 / (safe * (j0 * j0 + j1 * j1))
        e = 2.0 * c * j1 / safe
    else:
        s = np.sin(safe) - safe * np.cos(safe)
        # 2 mu - sin 2 mu loses digits for small mu: use its series below 1e-2
        denom = np.where(safe < 1e-2, (4.0 / 3.0) * safe**3 * (1.0 - safe**2 / 5.0),
                         2.0 * safe - np.sin(2.0 * safe))
        s = np.where(safe < 1e-2, safe**3 / 3.0 * (1.0 - safe**2 / 10.0), s)
        c = 4.0 * s / denom
        e = 3.0 * c * s / safe**3
    c = np.where(zero, 1.0, c)
    e = np.where(zero, 1.0, e)
    c.setflags(write=False)
    e.setflags(write=False)
    return c, e


def cache_info() -> dict[str, tuple[int, int, int | None, int]]:
    """Hits, misses, maxsize and current size of each cache (for metrics and tests)."""
    return {
        "pair_roots": tuple(_pair_roots_cached.cache_info()),  # type: ignore[dict-item]
        "body_roots": tuple(_body_roots_cached.cache_info()),  # type: ignore[dict-item]
        "body_coefficients": tuple(_body_coefficients_cached.cache_info()),  # type: ignore[dict-item]
    }
