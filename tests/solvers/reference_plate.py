"""Reference cases for the plate series solver, with their sources.

Each case has an id, a source, the inputs (a `PlateProblem` and evaluation points), expected
temperatures and tolerances. Expected values come from:

* exact solutions (by symmetry and superposition, or 1D solutions, common practice, no source);
* independent high-precision evaluations with mpmath (30 significant digits) of the classic
  separated-variable series, written here from their textbook forms and summed term by term
  until the remaining terms are below 1e-22 of the data, with eigenvalues from mpmath.findroot
  where they are not closed-form. mpmath is the independent implementation: it shares no code
  with the solver (no eigen tables, no tail bounds, no corner polynomial).

Scenarios are invented (a kiln door lining, a steam header support bracket, a heater block).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from functools import lru_cache

import mpmath

from service.solvers.plate import Edge, PlateProblem

mpmath.mp.dps = 30


@dataclass(frozen=True)
class ReferenceCase:
    id: str
    source: str
    problem: PlateProblem
    points: tuple[tuple[float, float], ...]
    expected: tuple[float, ...]
    rtol: float
    atol: float


def _fixed(value: float) -> Edge:
    return Edge("temperature", value=value)


# --------------------------------------------------------------------------- series in mpmath


def one_hot_series(x: float, y: float, width: float, height: float, hot: float,
                   cold: float) -> float:
    """Bottom edge at `hot`, the other three at `cold`:
    T = cold + (hot - cold) sum_{n odd} 4/(n pi) sin(n pi x/W) sinh(n pi (H - y)/W) / sinh(n pi H/W)
    (the classic Fourier sine series; mpmath, summed until terms < 1e-22)."""
    x, y, w, h = (mpmath.mpf(v) for v in (x, y, width, height))
    total = mpmath.mpf(0)
    n = 1
    while True:
        a = n * mpmath.pi / w
        # sinh(a (H - y)) / sinh(a H) written with decaying exponentials
        decay = mpmath.exp(-a * y)
        total += 4 / (n * mpmath.pi) * mpmath.sin(a * x) * decay * mpmath.expm1(
            -2 * a * (h - y)) / mpmath.expm1(-2 * a * h)
        if 4 / (n * mpmath.pi) * decay < mpmath.mpf("1e-22"):
            break
        n += 2
    return float(cold + (hot - cold) * total)


def one_hot_top_flow(width: float, height: float, conductivity: float, hot: float,
                     cold: float) -> float:
    """Heat flow into the body through the top edge of the one-hot problem, W/m:
    Q = -k (hot - cold) sum_{n odd} 8 / (n pi sinh(n pi H / W)) (term-wise derivative and
    integral of the series above; mpmath)."""
    w, h = mpmath.mpf(width), mpmath.mpf(height)
    total = mpmath.mpf(0)
    for n in range(1, 400, 2):
        total += 8 / (n * mpmath.pi * mpmath.sinh(n * mpmath.pi * h / w))
    return float(-conductivity * (hot - cold) * total)


@lru_cache(maxsize=4)
def _profile_coefficients(width: float, profile: tuple[tuple[float, float], ...],
                          count: int) -> tuple[mpmath.mpf, ...]:
    """b_n = 2/W int_0^W f sin(n pi x / W) dx, n = 1..count, from the antiderivative
    -(p + q x) cos(a x) / a + q sin(a x) / a^2 of each linear piece p + q x (mpmath)."""
    w = mpmath.mpf(width)
    s = [mpmath.mpf(0)] + [mpmath.mpf(p[0]) for p in profile] + [w]
    t = [mpmath.mpf(profile[0][1])] + [mpmath.mpf(p[1]) for p in profile] + \
        [mpmath.mpf(profile[-1][1])]
    out = []
    for n in range(1, count + 1):
        a = n * mpmath.pi / w
        total = mpmath.mpf(0)
        for i in range(len(s) - 1):
            if s[i + 1] <= s[i]:
                continue
            q = (t[i + 1] - t[i]) / (s[i + 1] - s[i])
            p0 = t[i] - q * s[i]

            def anti(v: mpmath.mpf, p0: mpmath.mpf = p0, q: mpmath.mpf = q,
                     a: mpmath.mpf = a) -> mpmath.mpf:
                return -(p0 + q * v) * mpmath.cos(a * v) / a + q * mpmath.sin(a * v) / a**2

            total += anti(s[i + 1]) - anti(s[i])
        out.append(2 / w * total)
    return tuple(out)


def profile_series(x: float, y: float, width: float, height: float,
                   profile: tuple[tuple[float, float], ...]) -> float:
    """Bottom edge with a piecewise-linear profile (held constant beyond its ends), the other
    edges at 0: T = sum_n b_n sin(n pi x/W) sinh(n pi (H - y)/W) / sinh(n pi H/W) with
    b_n = 2/W int_0^W f sin(n pi x / W) dx by mpmath.quad over the linear pieces (mpmath).
    Needs y >= 0.04 W (coefficients beyond n = 400 are not summed)."""
    assert y >= 0.04 * width
    w, h = mpmath.mpf(width), mpmath.mpf(height)
    x, y = mpmath.mpf(x), mpmath.mpf(y)
    total = mpmath.mpf(0)
    for n, b in enumerate(_profile_coefficients(width, profile, 400), start=1):
        a = n * mpmath.pi / w
        total += b * mpmath.sin(a * x) * mpmath.exp(-a * y) * -mpmath.expm1(-2 * a * (h - y)) \
            / -mpmath.expm1(-2 * a * h)
    return float(total)


def generation_series(x: float, y: float, width: float, height: float, conductivity: float,
                      generation: float) -> float:
    """All edges at 0 with uniform generation g:
    T = g x (W - x) / (2k) - sum_{n odd} 4 g W^2 / (k n^3 pi^3) sin(n pi x/W)
        cosh(n pi (y - H/2)/W) / cosh(n pi H / (2W))
    (the classic single-series form; mpmath)."""
    x, y, w, h = (mpmath.mpf(v) for v in (x, y, width, height))
    g, k = mpmath.mpf(generation), mpmath.mpf(conductivity)
    total = g * x * (w - x) / (2 * k)
    n = 1
    while True:
        a = n * mpmath.pi / w
        term = 4 * g * w**2 / (k * (n * mpmath.pi) ** 3)
        total -= term * mpmath.sin(a * x) * mpmath.cosh(a * (y - h / 2)) / mpmath.cosh(a * h / 2)
        if term * mpmath.exp(-a * min(y, h - y)) < mpmath.mpf("1e-24") * g * w**2 / k:
            break
        n += 2
    return float(total)


def convective_bottom_series(x: float, y: float, width: float, height: float,
                             conductivity: float, film: float, ambient: float,
                             others: float) -> float:
    """Bottom edge convective (h, T_amb), the other three fixed at `others`:
    T - others = sum_{n odd} 4/(n pi) h (T_amb - others) sin(a x) sinh(a (H - y))
    / (k a cosh(a H) + h sinh(a H)), a = n pi / W (Robin data edge; mpmath)."""
    x, y, w, h = (mpmath.mpf(v) for v in (x, y, width, height))
    k, hf = mpmath.mpf(conductivity), mpmath.mpf(film)
    total = mpmath.mpf(0)
    n = 1
    while True:
        a = n * mpmath.pi / w
        # numerator and denominator scaled by 2 exp(-a H): decaying exponentials only
        num = mpmath.exp(-a * y) * -mpmath.expm1(-2 * a * (h - y))
        den = k * a * (1 + mpmath.exp(-2 * a * h)) + hf * -mpmath.expm1(-2 * a * h)
        term = 4 / (n * mpmath.pi) * hf * (ambient - others) / den
        total += term * mpmath.sin(a * x) * num
        if abs(term) * mpmath.exp(-a * y) < mpmath.mpf("1e-22"):
            break
        n += 2
    return float(others + total)


@lru_cache(maxsize=8)
def robin_roots(biot: float, count: int) -> tuple[mpmath.mpf, ...]:
    """Roots of (mu^2 - Bi^2) sin(mu) - 2 Bi mu cos(mu) = 0 (convective at both ends of [0, 1];
    the tan form tan(mu) = 2 Bi mu / (mu^2 - Bi^2)), one in each ((n - 1) pi, n pi), found with
    mpmath.findroot (Anderson's bracketing method)."""
    bi = mpmath.mpf(biot)

    def f(mu: mpmath.mpf) -> mpmath.mpf:
        return (mu * mu - bi * bi) * mpmath.sin(mu) - 2 * bi * mu * mpmath.cos(mu)

    roots = []
    for n in range(1, count + 1):
        lo = (n - 1) * mpmath.pi + mpmath.mpf("1e-20")
        hi = n * mpmath.pi - mpmath.mpf("1e-20")
        roots.append(mpmath.findroot(f, (lo, hi), solver="anderson"))
    return tuple(roots)


@lru_cache(maxsize=4)
def _robin_projections(biot: float, count: int) -> tuple[tuple[mpmath.mpf, mpmath.mpf], ...]:
    """(mu_n, <1, X_n> / <X_n, X_n>) with X_n(s) = mu_n cos(mu_n s) + Bi sin(mu_n s):
    <1, X> = sin mu + Bi (1 - cos mu) / mu and <X, X> = mu^2 (1/2 + sin 2mu / (4 mu))
    + Bi sin^2 mu + Bi^2 (1/2 - sin 2mu / (4 mu)) (integrated by hand; mpmath)."""
    bi = mpmath.mpf(biot)
    out = []
    for mu in robin_roots(biot, count):
        one = mpmath.sin(mu) + bi * (1 - mpmath.cos(mu)) / mu
        q = mpmath.sin(2 * mu) / (4 * mu)
        norm = mu**2 * (mpmath.mpf(1) / 2 + q) + bi * mpmath.sin(mu) ** 2 + bi**2 * (
            mpmath.mpf(1) / 2 - q)
        out.append((mu, one / norm))
    return tuple(out)


def robin_sides_series(x: float, y: float, width: float, height: float, conductivity: float,
                       film: float, ambient: float, bottom: float, top: float,
                       count: int = 110) -> float:
    """Left and right edges convective (h, T_amb), bottom and top fixed:
    T - T_amb = sum_n X_n(x/W) [A_n sinh(l (H - y)) + B_n sinh(l y)] / sinh(l H), l = mu_n / W,
    X_n(s) = mu_n cos(mu_n s) + Bi sin(mu_n s), A_n = (bottom - T_amb) <1, X_n> / <X_n, X_n>,
    B_n likewise with top (mpmath, roots from `robin_roots`). Needs y and H - y >= 0.15 W."""
    assert min(y, height - y) >= 0.15 * width - 1e-12
    bi = film * width / conductivity
    w, h = mpmath.mpf(width), mpmath.mpf(height)
    s, yy = mpmath.mpf(x) / w, mpmath.mpf(y)
    total = mpmath.mpf(0)
    for mu, proj in _robin_projections(bi, count):
        lam = mu / w
        perp = ((bottom - ambient) * mpmath.sinh(lam * (h - yy))
                + (top - ambient) * mpmath.sinh(lam * yy)) / mpmath.sinh(lam * h)
        total += proj * (mu * mpmath.cos(mu * s) + bi * mpmath.sin(mu * s)) * perp
    return float(ambient + total)


# --------------------------------------------------------------------------- the cases


KILN = PlateProblem(  # a kiln door lining cross-section, hot face at the bottom
    width=0.4, height=0.4, conductivity=1.2,
    bottom=_fixed(400.0), right=_fixed(30.0), top=_fixed(30.0), left=_fixed(30.0))

BRACKET = PlateProblem(  # a steam header support bracket web, hot root at the bottom
    width=0.5, height=0.3, conductivity=15.0,
    bottom=_fixed(250.0), right=_fixed(20.0), top=_fixed(20.0), left=_fixed(20.0))
BRACKET_POINTS = tuple((x, y) for x in (0.01, 0.05, 0.125, 0.25, 0.4, 0.49)
                       for y in (0.006, 0.03, 0.075, 0.15, 0.24, 0.294))

FIN_ROOT = PlateProblem(  # a finned heat-exchanger root block: convective sides
    width=0.3, height=0.2, conductivity=45.0,
    bottom=_fixed(180.0), top=_fixed(60.0),
    left=Edge("convection", film_coefficient=60.0, ambient=20.0),
    right=Edge("convection", film_coefficient=60.0, ambient=20.0))
FIN_ROOT_POINTS = tuple((x, y) for x in (0.0, 0.02, 0.1, 0.15, 0.27, 0.3)
                        for y in (0.045, 0.07, 0.1, 0.155))

HEATER = PlateProblem(  # a resistance heater block held at 0 degC (rise above coolant)
    width=0.08, height=0.05, conductivity=16.0, generation=2.0e6,
    bottom=_fixed(0.0), right=_fixed(0.0), top=_fixed(0.0), left=_fixed(0.0))
HEATER_POINTS = tuple((x, y) for x in (0.004, 0.02, 0.04, 0.07)
                      for y in (0.0025, 0.0125, 0.025, 0.045))

QUENCH = PlateProblem(  # a quench tank wall section: hot oil film on the bottom face
    width=0.25, height=0.15, conductivity=25.0,
    bottom=Edge("convection", film_coefficient=400.0, ambient=300.0),
    right=_fixed(20.0), top=_fixed(20.0), left=_fixed(20.0))
QUENCH_POINTS = tuple((x, y) for x in (0.0125, 0.05, 0.125, 0.2)
                      for y in (0.01, 0.04, 0.1, 0.14))

PROFILE = ((0.06, 50.0), (0.24, 120.0), (0.42, 80.0))
PROFILED = PlateProblem(  # a furnace wall panel with a measured hot-face profile
    width=0.6, height=0.5, conductivity=2.0,
    bottom=Edge("temperature", profile=PROFILE), right=_fixed(0.0), top=_fixed(0.0),
    left=_fixed(0.0))
PROFILED_POINTS = tuple((x, y) for x in (0.03, 0.15, 0.3, 0.5)
                        for y in (0.03, 0.1, 0.25, 0.45))


def _cases() -> tuple[ReferenceCase, ...]:
    series = "independent implementation: mpmath, 30 digits"
    return (
        ReferenceCase(
            "kiln-centre-by-symmetry",
            "exact by symmetry and superposition: four rotated one-hot problems sum to a "
            "uniform plate, so the centre takes (T1 + 3 T0) / 4 (common practice, no source)",
            KILN, ((0.2, 0.2),), ((400.0 + 3 * 30.0) / 4,), 0.0, 1e-7),
        ReferenceCase(
            "bracket-one-hot-series",
            f"{series}: classic one-hot-edge Fourier sine series (`one_hot_series`)",
            BRACKET, BRACKET_POINTS,
            tuple(one_hot_series(x, y, 0.5, 0.3, 250.0, 20.0) for x, y in BRACKET_POINTS),
            0.0, 1e-6),
        ReferenceCase(
            "fin-root-convective-sides",
            f"{series}: Robin-Robin eigenfunctions with mpmath.findroot eigenvalues "
            "(`robin_sides_series`)",
            FIN_ROOT, FIN_ROOT_POINTS,
            tuple(robin_sides_series(x, y, 0.3, 0.2, 45.0, 60.0, 20.0, 180.0, 60.0)
                  for x, y in FIN_ROOT_POINTS),
            0.0, 1e-6),
        ReferenceCase(
            "quench-convective-bottom",
            f"{series}: Fourier sine series with a convective data edge "
            "(`convective_bottom_series`)",
            QUENCH, QUENCH_POINTS,
            tuple(convective_bottom_series(x, y, 0.25, 0.15, 25.0, 400.0, 300.0, 20.0)
                  for x, y in QUENCH_POINTS),
            0.0, 1e-6),
        ReferenceCase(
            "heater-generation",
            f"{series}: classic single series for a heated rectangle with cold edges "
            "(`generation_series`)",
            HEATER, HEATER_POINTS,
            tuple(generation_series(x, y, 0.08, 0.05, 16.0, 2.0e6) for x, y in HEATER_POINTS),
            0.0, 1e-6),
        ReferenceCase(
            "panel-profile-series",
            f"{series}: Fourier sine series of a clamped piecewise-linear profile, "
            "coefficients by mpmath.quad (`profile_series`)",
            PROFILED, PROFILED_POINTS,
            tuple(profile_series(x, y, 0.6, 0.5, PROFILE) for x, y in PROFILED_POINTS),
            0.0, 1e-6),
    )


REFERENCE_CASES = _cases()

#: The one-hot bracket's top-edge heat flow, W/m (independent implementation: mpmath).
BRACKET_TOP_FLOW = one_hot_top_flow(0.5, 0.3, 15.0, 250.0, 20.0)


def by_id(case_id: str) -> ReferenceCase:
    return next(c for c in REFERENCE_CASES if c.id == case_id)


def temperature_scale(case: ReferenceCase) -> float:
    """Largest temperature difference, K (for relative tolerances in the tests)."""
    return max(abs(v) for v in case.expected) if math.isfinite(max(case.expected)) else 1.0
