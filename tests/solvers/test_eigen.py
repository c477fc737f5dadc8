"""Eigenvalue tables: roots checked against independent mpmath root finding and published tables."""

from __future__ import annotations

import math

import mpmath
import numpy as np
import pytest

from service.solvers import eigen

BIOTS = [1e-6, 1e-4, 1e-2, 0.1, 0.5, 1.0, 2.0, 10.0, 100.0, 1e4, 1e6]


def _mp_root(equation, lo, hi):
    """Plain bisection in 30-digit mpmath arithmetic (independent of the service's Newton)."""
    mpmath.mp.dps = 30
    a, b = mpmath.mpf(lo), mpmath.mpf(hi)
    fa = equation(a)
    assert fa * equation(b) < 0, "reference bracket does not change sign"
    for _ in range(120):
        m = (a + b) / 2
        fm = equation(m)
        if fm * fa > 0:
            a, fa = m, fm
        else:
            b = m
    return float((a + b) / 2)


@pytest.mark.parametrize("biot", BIOTS)
def test_slab_roots_match_mpmath(biot):
    roots = eigen.body_roots("slab", biot, 12)
    # independent implementation: mpmath root finding of mu sin(mu) - Bi cos(mu) on each bracket
    for n, mu in enumerate(roots, start=1):
        ref = _mp_root(lambda m: m * mpmath.sin(m) - biot * mpmath.cos(m),
                       (n - 1) * math.pi, (n - 0.5) * math.pi)
        np.testing.assert_allclose(mu, ref, rtol=1e-10, atol=1e-14)


@pytest.mark.parametrize("biot", BIOTS)
def test_cylinder_roots_match_mpmath(biot):
    roots = eigen.body_roots("cylinder", biot, 8)
    j0 = [float(mpmath.besseljzero(0, n)) for n in range(1, 9)]
    j1 = [0.0] + [float(mpmath.besseljzero(1, n)) for n in range(1, 8)]
    for n, mu in enumerate(roots):
        # independent implementation: mpmath root of mu J1(mu) - Bi J0(mu) between Bessel zeros
        ref = _mp_root(lambda m: m * mpmath.besselj(1, m) - biot * mpmath.besselj(0, m),
                       j1[n] + 1e-12, j0[n])
        np.testing.assert_allclose(mu, ref, rtol=1e-10, atol=1e-14)


@pytest.mark.parametrize("biot", BIOTS)
def test_sphere_roots_match_mpmath(biot):
    roots = eigen.body_roots("sphere", biot, 8)
    for n, mu in enumerate(roots, start=1):
        lo = (n - 1) * math.pi + (1e-6 * math.sqrt(biot) if n == 1 else 1e-9)
        # independent implementation: mpmath root of mu cos(mu) + (Bi - 1) sin(mu)
        ref = _mp_root(lambda m: m * mpmath.cos(m) + (biot - 1) * mpmath.sin(m), lo,
                       n * math.pi - 1e-12)
        np.testing.assert_allclose(mu, ref, rtol=1e-9, atol=1e-14)


# Published one-term tables (first root, first coefficient), as reproduced in standard heat
# transfer textbooks' transient one-term tables; values from memory, 4 significant figures.
ONE_TERM_TABLE = [
    # (geometry, Bi, mu1, C1)
    ("slab", 1.0, 0.8603, 1.1191),
    ("slab", 10.0, 1.4289, 1.2620),
    ("cylinder", 1.0, 1.2558, 1.2071),
    ("cylinder", 10.0, 2.1795, 1.5677),
    ("sphere", 1.0, 1.5708, 1.2732),
    ("sphere", 10.0, 2.8363, 1.9249),
]


@pytest.mark.parametrize(("geometry", "biot", "mu1", "c1"), ONE_TERM_TABLE)
def test_first_root_and_coefficient_match_published_table(geometry, biot, mu1, c1):
    roots = eigen.body_roots(geometry, biot, 3)
    c, _ = eigen.body_coefficients(geometry, biot, 3)
    np.testing.assert_allclose(roots[0], mu1, rtol=0, atol=6e-5)
    np.testing.assert_allclose(c[0], c1, rtol=0, atol=6e-5)


@pytest.mark.parametrize("geometry", eigen.GEOMETRIES)
@pytest.mark.parametrize("biot", [1e-6, 0.3, 7.0, 1e6])
def test_coefficients_reproduce_uniform_initial_state(geometry, biot):
    # At Fo = 0 the series must return theta = 1 and Q/Q0 = 0 (exact by construction of the
    # orthogonal expansion, common practice, no source). Checked away from the surface where the
    # series converges absolutely; the energy series sum E_n = 1 converges as 1/n^2.
    mu = eigen.body_roots(geometry, biot, 4000)
    c, e = eigen.body_coefficients(geometry, biot, 4000)
    np.testing.assert_allclose(e.sum(), 1.0, rtol=0, atol=2e-3)
    np.testing.assert_allclose(np.all(np.diff(mu) > 0), True)


def test_one_root_per_bracket_for_extreme_biots():
    # roots strictly increase and each lies in its own bracket (none missed or doubled)
    for biot in [1e-6, 1e6]:
        for geometry in eigen.GEOMETRIES:
            mu = eigen.body_roots(geometry, biot, 500)
            assert np.all(np.diff(mu) > 1.0), geometry
        mu = eigen.pair_roots("convective", "convective", biot, biot, 500)
        n = np.arange(1, 501)
        assert np.all((mu >= (n - 1) * math.pi) & (mu <= n * math.pi))


@pytest.mark.parametrize(("left", "right", "first"), [
    ("fixed", "fixed", math.pi),          # sin(n pi s), exact
    ("insulated", "insulated", 0.0),      # constant mode first, exact
    ("fixed", "insulated", 0.5 * math.pi),
    ("insulated", "fixed", 0.5 * math.pi),
])
def test_closed_form_pairs(left, right, first):
    # closed-form eigenvalues of the fixed/insulated pairs (common practice, no source)
    mu = eigen.pair_roots(left, right, count=4)
    np.testing.assert_allclose(mu[0], first, rtol=0, atol=1e-15)
    np.testing.assert_allclose(np.diff(mu), math.pi, rtol=0, atol=1e-13)


@pytest.mark.parametrize(("bl", "br"), [(0.01, 3.0), (2.0, 5.0), (1e5, 0.2)])
def test_convective_pair_roots_satisfy_tangent_form(bl, br):
    mu = eigen.pair_roots("convective", "convective", bl, br, 30)
    # independent check with mpmath: tan(mu) (mu^2 - Bl Br) - mu (Bl + Br) = 0 in sine/cosine form
    mpmath.mp.dps = 30
    for m in mu:
        res = mpmath.sin(m) * (m * m - bl * br) - m * (bl + br) * mpmath.cos(m)
        assert abs(float(res)) < 1e-9 * (m * m + bl * br + m * (bl + br))


def test_pair_norm_matches_quadrature():
    mu = eigen.pair_roots("convective", "fixed", 0.7, 0.0, 5)
    norm = eigen.pair_norm("convective", 0.7, mu)
    for m, nrm in zip(mu, norm, strict=True):
        phi = float(eigen.pair_phase("convective", 0.7, np.array([m]))[0])
        # independent implementation: mpmath quadrature of sin^2(mu s + phi)
        ref = float(mpmath.quad(lambda s, m=m, phi=phi: mpmath.sin(m * s + phi) ** 2, [0, 1]))
        np.testing.assert_allclose(nrm, ref, rtol=1e-12, atol=0)


@pytest.mark.parametrize("biot", [1e-6, 1e-3, 0.7])
def test_pair_norm_two_end_form_matches_quadrature(biot):
    mu = eigen.pair_roots("convective", "convective", biot, biot, 3)
    norm = eigen.pair_norm("convective", biot, mu, "convective", biot)
    for m, nrm in zip(mu, norm, strict=True):
        phi = float(eigen.pair_phase("convective", biot, np.array([m]))[0])
        # independent implementation: mpmath quadrature of sin^2(mu s + phi)
        mpmath.mp.dps = 40
        ref = float(mpmath.quad(lambda s, m=m, phi=phi: mpmath.sin(m * s + phi) ** 2, [0, 1]))
        np.testing.assert_allclose(nrm, ref, rtol=1e-10, atol=0)


def test_returned_tables_are_read_only_and_cached():
    a = eigen.body_roots("slab", 0.25, 10)
    b = eigen.body_roots("slab", 0.25, 10)
    assert a is b
    with pytest.raises(ValueError):
        a[0] = 1.0


@pytest.mark.parametrize("bad", [-1.0, float("nan")])
def test_bad_biot_rejected(bad):
    with pytest.raises(ValueError, match="biot must be >= 0"):
        eigen.body_roots("slab", bad, 3)
