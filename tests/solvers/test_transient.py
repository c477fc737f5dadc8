"""Tests of the transient-conduction solver (service/solvers/transient.py, semi_infinite.py).

Reference values and independent reference solutions live in reference_transient.py; each
check names its source beside it. Scenarios are invented (die blocks, kiln parts, brackets).
"""

from __future__ import annotations

import dataclasses
import math

import mpmath as mp
import numpy as np
import pytest

from service.solvers import transient as tr
from service.solvers.errors import IllPosedError, TooLargeError
from service.solvers.safety import Limits
from service.solvers.transient import (
    Surface,
    Target,
    TransientProblem,
    body_response,
    coefficient_bounds,
    solve_transient,
    sum_series,
    tail_bound,
    truncation_terms,
)
from tests.solvers import reference_transient as ref

GEOMETRIES = ("slab", "cylinder", "sphere")

# A forged steel die block quenched in an oil bath (invented scenario): k 45 W/(m K),
# rho 7800 kg/m^3, c 460 J/(kg K), 900 degC into oil at 30 degC with h = 500 W/(m^2 K).
STEEL = dict(conductivity=45.0, density=7800.0, specific_heat=460.0)
ALPHA_STEEL = 45.0 / (7800.0 * 460.0)


def die_block(shape: str = "slab", **changes) -> TransientProblem:
    geometry = {"slab": dict(half_thickness=0.05), "cylinder": dict(radius=0.05),
                "sphere": dict(radius=0.05), "bar": dict(half_widths=(0.05, 0.03)),
                "box": dict(half_widths=(0.05, 0.03, 0.08)),
                "short_cylinder": dict(radius=0.05, half_length=0.08),
                "lumped": dict(volume=1e-4, area=0.02), "semi_infinite": {}}.get(shape, {})
    base = dict(shape=shape, initial_temperature=900.0,
                surface=Surface("convection", film_coefficient=500.0, ambient=30.0),
                times=(10.0, 60.0, 600.0, 3600.0), **STEEL, **geometry)
    base.update(changes)
    return TransientProblem(**base)


# --------------------------------------------------------------------------- published table


@pytest.mark.parametrize("case", ref.ONE_TERM_TABLE, ids=lambda c: c.id)
def test_first_root_and_coefficient_match_table(case: ref.RefCase) -> None:
    # Recover zeta_1 and C_1 from the solver's centre temperature at Fo = 2 and 3, where the
    # second term is below 1e-9 of the first: theta0 = C1 exp(-zeta1^2 Fo).
    geometry, biot = case.inputs["geometry"], case.inputs["biot"]
    r = body_response(geometry, biot, np.array([2.0, 3.0]), np.array([0.0]), 1e-14, 200)
    t2, t3 = r.theta[:, 0]
    zeta1 = math.sqrt(math.log(t2 / t3))
    c1 = t2 * math.exp(2.0 * zeta1**2)
    # source: Incropera et al. 6th ed. Table 5.1 (from memory), see reference_transient
    np.testing.assert_allclose(zeta1, case.expected["zeta1"], rtol=case.rtol, atol=case.atol)
    np.testing.assert_allclose(c1, case.expected["c1"], rtol=case.rtol, atol=case.atol)


# --------------------------------------------------------------------------- mpmath series


@pytest.mark.parametrize("biot", ref.MPMATH_BIOTS)
@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_series_matches_mpmath(geometry: str, biot: float) -> None:
    fo = np.array(ref.MPMATH_FOURIER)
    xi = np.array(ref.MPMATH_XI)
    r = body_response(geometry, biot, fo, xi, 1e-12, 200)
    theta, mean = ref.mp_series(geometry, biot, list(fo), list(xi))
    # source: independent mpmath evaluation (mpmath.findroot roots, series summed in mpmath)
    np.testing.assert_allclose(r.theta, theta, rtol=0.0, atol=1e-11)
    np.testing.assert_allclose(r.mean, mean, rtol=0.0, atol=1e-11)
    assert np.all(r.theta_error <= 1e-12)


@pytest.mark.parametrize("case", ref.LAPLACE_CASES, ids=lambda c: c.id)
def test_short_time_form_matches_mpmath_laplace_inversion(case: ref.RefCase) -> None:
    g, bi, fo, xi = (case.inputs[k] for k in ("geometry", "biot", "fourier", "xi"))
    r = body_response(g, bi, np.array([fo]), np.array(xi), 1e-9, 200)
    assert r.short_time.tolist() == [True]
    expected = [ref.mp_laplace_theta(g, bi, fo, x) for x in xi]
    # source: mpmath.invertlaplace (Talbot, 30 digits) of the textbook transform
    np.testing.assert_allclose(r.theta[0], expected, rtol=case.rtol, atol=case.atol)


@pytest.mark.parametrize("fo", [1e-8, 1e-6, 1e-4])
def test_short_time_form_matches_image_series(fo: float) -> None:
    xi = np.array([0.2, 0.9, 0.999, 0.99999, 1.0])
    slab = body_response("slab", math.inf, np.array([fo]), xi, 1e-10, 200)
    sphere = body_response("sphere", math.inf, np.array([fo]), xi, 1e-10, 200)
    # source: error-function image series (Carslaw and Jaeger 3.3 and 9.3, from memory),
    # evaluated in mpmath
    np.testing.assert_allclose(slab.theta[0], [ref.mp_image_slab(fo, x) for x in xi],
                               rtol=0.0, atol=1e-10)
    np.testing.assert_allclose(sphere.theta[0], [ref.mp_image_sphere(fo, x) for x in xi],
                               rtol=0.0, atol=1e-10)


@pytest.mark.parametrize("fo", [1e-6, 1e-4, 1e-2])
def test_penetration_bound_covers_image_series(fo: float) -> None:
    xi = np.linspace(0.01, 0.999, 60)
    deficit = np.array([1.0 - ref.mp_image_sphere(fo, x) for x in xi])
    # source: sphere image series in mpmath (reference_transient.mp_image_sphere); the sphere
    # with a fixed surface temperature has the largest deficit of all bodies and Biot numbers
    assert np.all(deficit <= tr.penetration_bound(np.array([fo]), xi)[0] + 1e-15)


@pytest.mark.parametrize("biot", [0.5, 50.0, math.inf])
@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_skipping_untouched_positions_changes_nothing(geometry: str, biot: float) -> None:
    fo = np.geomspace(1e-8, 1e-2, 13)
    xi = np.linspace(0.0, 1.0, 201)
    skipped, _ = tr.invert_talbot(geometry, biot, fo, xi, skip_below=1e-12)
    full, _ = tr.invert_talbot(geometry, biot, fo, xi, skip_below=0.0)
    # common practice, no source: the skipped positions are at theta = 1 to within 1e-12
    np.testing.assert_allclose(skipped, full, rtol=0.0, atol=1e-12)


# --------------------------------------------------------------------------- finite volumes


@pytest.mark.parametrize(("geometry", "biot"), [("slab", 0.5), ("slab", 20.0),
                                                ("cylinder", 0.5), ("cylinder", math.inf),
                                                ("sphere", 0.5), ("sphere", math.inf)])
def test_series_matches_method_of_lines(geometry: str, biot: float) -> None:
    fo = [0.01, 0.05, 0.2, 1.0]
    coarse, coarse_mean = ref.mol_body(geometry, biot, fo, 100)
    fine, fine_mean = ref.mol_body(geometry, biot, fo, 200)
    r = body_response(geometry, biot, np.array(fo), np.array([0.0, 0.5, 1.0]), 1e-12, 200)
    # source: method-of-lines finite volumes (solve_ivp BDF, 100 and 200 cells, Richardson
    # extrapolated), reference_transient.mol_body
    np.testing.assert_allclose(r.theta, ref.richardson(coarse, fine), rtol=0.0, atol=1e-7)
    np.testing.assert_allclose(r.mean, ref.richardson(coarse_mean, fine_mean), rtol=0.0,
                               atol=2e-7)


@pytest.mark.parametrize(("shape", "cells", "atol", "mean_atol"), [
    ("bar", 20, 1e-5, 1e-6), ("short_cylinder", 20, 1e-5, 1e-6), ("box", 6, 1e-3, 1e-4)])
def test_product_bodies_match_multidimensional_finite_volumes(shape: str, cells: int,
                                                              atol: float,
                                                              mean_atol: float) -> None:
    # k = alpha = 1, h = 2: Bi = 2 L per direction; lengths 1, 0.6 (0.8)
    lengths = {"bar": (1.0, 0.6), "short_cylinder": (1.0, 0.6), "box": (1.0, 0.6, 0.8)}[shape]
    kinds = {"bar": ("slab", "slab"), "short_cylinder": ("cylinder", "slab"),
             "box": ("slab", "slab", "slab")}[shape]
    factors = [(g, length, 2.0 * length) for g, length in zip(kinds, lengths, strict=True)]
    times = [0.02, 0.1, 0.4]
    geometry = dict(radius=1.0, half_length=0.6) if shape == "short_cylinder" \
        else dict(half_widths=lengths)
    problem = TransientProblem(shape=shape, conductivity=1.0, diffusivity=1.0,
                               initial_temperature=1.0, surface=Surface("convection", 2.0, 0.0),
                               times=tuple(times), atol=1e-12,
                               positions=(tuple(0.0 for _ in lengths), lengths), **geometry)
    r = solve_transient(problem)
    rtol_ivp = 1e-10 if shape != "box" else 1e-8
    coarse, coarse_mean = ref.mol_product(factors, times, [cells] * len(lengths), rtol_ivp)
    fine, fine_mean = ref.mol_product(factors, times, [2 * cells] * len(lengths), rtol_ivp)
    # source: one 2D / 3D finite-volume system integrated by solve_ivp (no product rule),
    # Richardson extrapolated from two grids, reference_transient.mol_product
    np.testing.assert_allclose(r.temperatures, ref.richardson(coarse, fine), rtol=0.0,
                               atol=atol)
    np.testing.assert_allclose(1.0 - r.energy_fraction, ref.richardson(coarse_mean, fine_mean),
                               rtol=0.0, atol=mean_atol)


# --------------------------------------------------------------------------- limits of Biot


@pytest.mark.parametrize(("geometry", "j"), [("slab", 0), ("cylinder", 1), ("sphere", 2)])
def test_small_biot_tends_to_lumped_body(geometry: str, j: int) -> None:
    # Bi = h L / k = 1e-4; the lumped body with V/A = L / (j + 1) decays as
    # exp(-(j + 1) Bi Fo); its non-uniformity is of order Bi, hence rtol 2e-4.
    length, h = 0.05, 0.09  # k = 45 W/(m K): Bi = h L / k = 1e-4
    times = (600.0, 6000.0, 60000.0)
    shape_field = "half_thickness" if geometry == "slab" else "radius"
    body = solve_transient(die_block(geometry, **{shape_field: length},
                                     surface=Surface("convection", h, 30.0), times=times,
                                     positions=(0.0, length)))
    lumped = solve_transient(die_block("lumped", volume=length / (j + 1), area=1.0,
                                       surface=Surface("convection", h, 30.0), times=times))
    assert body.biot[0] == pytest.approx(1e-4, rel=1e-12)
    # source: lumped-body closed form exp(-t/tau) (Incropera eq. 5.6, from memory)
    np.testing.assert_allclose(body.temperatures - 30.0,
                               np.repeat(lumped.temperatures - 30.0, 2, axis=1),
                               rtol=2e-4, atol=0.0)
    np.testing.assert_allclose(body.energy_fraction, lumped.energy_fraction, rtol=2e-4, atol=0.0)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_large_biot_tends_to_fixed_surface_temperature(geometry: str) -> None:
    shape_field = "half_thickness" if geometry == "slab" else "radius"
    common = dict(times=(1.0, 30.0, 300.0), positions=(0.0, 0.03, 0.05), atol=1e-9,
                  **{shape_field: 0.05})
    convective = solve_transient(die_block(geometry, surface=Surface("convection", 9e8, 30.0),
                                           **common))
    fixed = solve_transient(die_block(geometry, surface=Surface("temperature", value=30.0),
                                      **common))
    assert convective.biot[0] == pytest.approx(1e6, rel=1e-12)
    # common practice, no source: Bi = 1e6 differs from Bi = inf by about (surface gradient)/Bi
    # of the 870 K step; the gradient is about 1/sqrt(pi Fo) = 8 at t = 1 s (Fo = 0.005)
    np.testing.assert_allclose(convective.temperatures, fixed.temperatures, rtol=0.0,
                               atol=870.0 * 1e-5)


# --------------------------------------------------------------------------- error estimates


@pytest.mark.parametrize("biot", [0.3, 8.0, math.inf])
@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_tail_bound_exceeds_true_truncation_error(geometry: str, biot: float) -> None:
    fo = np.array([0.004, 0.01, 0.05])
    xi = np.array([0.0, 0.5, 0.95, 1.0])
    exact, exact_mean = ref.mp_series(geometry, biot, list(fo), list(xi))
    c_bound, e_bound = coefficient_bounds(geometry, biot)
    for terms in (1, 2, 4, 8, 16):
        n = np.full(fo.size, terms)
        theta, mean = sum_series(geometry, biot, fo, xi, n)
        error = np.abs(theta - exact).max(axis=1)
        bound = tail_bound(fo, n, c_bound)
        # source: mpmath series (reference_transient.mp_series) as the exact value
        assert np.all(error <= bound + 1e-15), (terms, error, bound)
        assert np.all(np.abs(mean - exact_mean) <= tail_bound(fo, n, e_bound) + 1e-15)
    # the rule's own count meets the tolerance it was asked for
    needed = truncation_terms(fo, 1e-6, c_bound)
    assert np.all(tail_bound(fo, needed, c_bound) <= 1e-6)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_reported_error_estimate_bounds_true_error(geometry: str) -> None:
    # a loose atol (0.5 K of an 870 K step) so few terms are used and the estimate is not tiny
    shape_field = "half_thickness" if geometry == "slab" else "radius"
    times = (0.2, 2.0, 20.0, 200.0)
    xs = (0.0, 0.02, 0.045, 0.05)
    r = solve_transient(die_block(geometry, times=times, positions=xs, atol=0.5,
                                  **{shape_field: 0.05}))
    fo = [ALPHA_STEEL * t / 0.05**2 for t in times]
    theta, _ = ref.mp_series(geometry, 500.0 * 0.05 / 45.0, fo, [x / 0.05 for x in xs])
    true_error = np.abs(r.temperatures - (30.0 + 870.0 * theta)).max()
    # source: mpmath series (reference_transient.mp_series)
    assert r.convergence.converged
    assert true_error <= r.convergence.error_estimate <= 0.5, (true_error, r.convergence)


@pytest.mark.parametrize("geometry", GEOMETRIES)
def test_short_time_error_estimate_bounds_true_error(geometry: str) -> None:
    fo = np.array([1e-7, 1e-6])
    xi = np.array([0.999, 1.0])
    r = body_response(geometry, 4.0, fo, xi, 1e-9, 200)
    exact = np.array([[ref.mp_laplace_theta(geometry, 4.0, f, x) for x in xi] for f in fo])
    # source: mpmath.invertlaplace (reference_transient.mp_laplace_theta)
    assert np.all(r.short_time)
    assert np.all(np.abs(r.theta - exact).max(axis=1) <= r.theta_error)


def test_too_tight_atol_is_reported_not_raised() -> None:
    # 1e-15 K of an 870 K step is below double precision: reported, not raised
    r = solve_transient(die_block(times=(1e-5, 600.0), positions=(0.05,), atol=1e-15,
                                  half_thickness=0.05))
    assert r.short_time.tolist() == [True, False]
    assert r.convergence.status == "max_terms"
    assert not r.convergence.converged
    assert r.convergence.error_estimate > 1e-15
    assert np.all(np.isfinite(r.temperatures))


def test_max_terms_moves_early_times_to_short_time_form() -> None:
    base = die_block(times=(5.0, 600.0), positions=(0.0, 0.05), atol=1e-6)
    few = solve_transient(dataclasses.replace(base, max_terms=2))
    many = solve_transient(base)
    assert few.short_time.tolist() == [True, False] and many.short_time.tolist() == [False] * 2
    # same problem by the series and by the Laplace form: independent formulas agree
    np.testing.assert_allclose(few.temperatures, many.temperatures, rtol=0.0, atol=2e-6)


# --------------------------------------------------------------------------- whole solves


@pytest.mark.parametrize("shape", ["slab", "cylinder", "sphere", "bar", "box", "short_cylinder",
                                   "lumped", "semi_infinite"])
@pytest.mark.parametrize("heating", [False, True])
def test_monotone_approach_to_ambient(shape: str, heating: bool) -> None:
    initial, ambient = (20.0, 650.0) if heating else (900.0, 30.0)
    times = tuple(np.geomspace(0.01, 2e4, 40))
    r = solve_transient(die_block(shape, times=times, initial_temperature=initial,
                                  surface=Surface("convection", 500.0, ambient), atol=1e-8))
    sign = 1.0 if heating else -1.0
    steps = sign * np.diff(r.temperatures, axis=0)
    assert np.all(steps >= -2e-8)  # never moves away from the ambient (beyond 2 atol)
    low, high = min(initial, ambient), max(initial, ambient)
    assert np.all((r.temperatures >= low - 1e-9) & (r.temperatures <= high + 1e-9))
    assert np.all(sign * np.diff(r.energy) >= -1e-6)
    if r.energy_fraction is not None:
        assert np.all(np.diff(r.energy_fraction) >= -1e-12)
        assert np.all((r.energy_fraction >= 0.0) & (r.energy_fraction <= 1.0 + 1e-12))


def test_results_are_vectorised_and_read_only() -> None:
    times = tuple(np.geomspace(1.0, 1e4, 300))
    positions = tuple(np.linspace(0.0, 0.05, 40))
    r = solve_transient(die_block("cylinder", times=times, positions=positions))
    assert r.temperatures.shape == (300, 40)
    assert r.fourier.shape == (300, 1) and r.energy.shape == (300,)
    for array in (r.temperatures, r.energy, r.energy_fraction, r.fourier, r.times, r.positions):
        assert not array.flags.writeable
    assert r.method == "series" and r.energy_unit == "J/m" and r.directions == ("r",)
    np.testing.assert_allclose(r.fourier[:, 0], ALPHA_STEEL * np.array(times) / 0.05**2,
                               rtol=1e-14, atol=0.0)  # common practice, no source: definition


def test_initial_state_at_time_zero_and_no_change_without_film() -> None:
    r = solve_transient(die_block(times=(0.0, 60.0), positions=(0.0, 0.05)))
    np.testing.assert_allclose(r.temperatures[0], [900.0, 900.0], rtol=0.0, atol=0.0)
    still = solve_transient(die_block(surface=Surface("convection", 0.0, 30.0)))
    np.testing.assert_allclose(still.temperatures, 900.0, rtol=0.0, atol=0.0)


@pytest.mark.parametrize(("shape", "unit", "volume"), [
    ("slab", "J/m^2", 2 * 0.05), ("cylinder", "J/m", math.pi * 0.05**2),
    ("sphere", "J", 4.0 / 3.0 * math.pi * 0.05**3), ("bar", "J/m", 4 * 0.05 * 0.03),
    ("box", "J", 8 * 0.05 * 0.03 * 0.08), ("short_cylinder", "J", 2 * math.pi * 0.05**2 * 0.08),
    ("lumped", "J", 1e-4)])
def test_energy_in_joules(shape: str, unit: str, volume: float) -> None:
    r = solve_transient(die_block(shape))
    assert r.energy_unit == unit
    # common practice, no source: Q = rho c V (T_inf - Ti) Q/Q0, positive into the body
    np.testing.assert_allclose(r.energy, 7800.0 * 460.0 * volume * (30.0 - 900.0)
                               * r.energy_fraction, rtol=1e-12, atol=0.0)
    # diffusivity instead of density and specific heat: rho c = k / alpha, same energy
    alt = solve_transient(dataclasses.replace(die_block(shape), density=None, specific_heat=None,
                                              diffusivity=ALPHA_STEEL))
    np.testing.assert_allclose(alt.energy, r.energy, rtol=1e-12, atol=0.0)


def test_slab_energy_fraction_matches_mpmath() -> None:
    r = solve_transient(die_block(times=(30.0, 300.0, 3000.0), atol=1e-9))
    fo = [ALPHA_STEEL * t / 0.05**2 for t in (30.0, 300.0, 3000.0)]
    _, mean = ref.mp_series("slab", 500.0 * 0.05 / 45.0, fo, [0.0])
    # source: mpmath series (reference_transient.mp_series)
    np.testing.assert_allclose(r.energy_fraction, 1.0 - mean, rtol=0.0, atol=1e-11)


# --------------------------------------------------------------------------- lumped body


def test_lumped_body_closed_form_and_biot_warning() -> None:
    # a small brass kiln-door hinge pin (invented): V/A = 1e-4 / 0.02 = 5 mm, k 110 W/(m K)
    pin = die_block("lumped", conductivity=110.0, density=8500.0, specific_heat=380.0,
                    times=(0.0, 100.0, 1000.0))
    r = solve_transient(pin)
    tau = 8500.0 * 380.0 * 1e-4 / (500.0 * 0.02)
    expected = [float(30.0 + 870.0 * mp.exp(-mp.mpf(t) / tau)) for t in (0.0, 100.0, 1000.0)]
    # source: lumped-body closed form (Incropera eq. 5.6, from memory) in mpmath
    np.testing.assert_allclose(r.temperatures[:, 0], expected, rtol=1e-13, atol=0.0)
    assert r.time_constant == pytest.approx(tau, rel=1e-14)
    assert r.biot[0] == pytest.approx(500.0 * 5e-3 / 110.0, rel=1e-14)
    assert r.warnings == ()
    thick = solve_transient(dataclasses.replace(pin, conductivity=2.0))
    assert any("exceeds 0.1" in w and "'slab', 'cylinder', 'sphere'" in w
               for w in thick.warnings)


# --------------------------------------------------------------------------- semi-infinite


def _ground(kind: str, **changes) -> TransientProblem:
    # a refractory floor under a furnace charge (invented): k 1.2, rho 2000, c 900
    surface = {"temperature": Surface("temperature", value=400.0),
               "convection": Surface("convection", film_coefficient=80.0, ambient=400.0),
               "flux": Surface("flux", value=2.5e4)}[kind]
    base = dict(shape="semi_infinite", conductivity=1.2, density=2000.0, specific_heat=900.0,
                initial_temperature=20.0, surface=surface, times=(0.0, 1.0, 60.0, 3600.0, 86400.0),
                positions=(0.0, 0.001, 0.02, 0.3))
    base.update(changes)
    return TransientProblem(**base)


@pytest.mark.parametrize("kind", ["temperature", "convection", "flux"])
def test_semi_infinite_matches_mpmath(kind: str) -> None:
    problem = _ground(kind)
    r = solve_transient(problem)
    alpha = 1.2 / (2000.0 * 900.0)
    expected = np.array([[ref.mp_semi_infinite(kind, x, t, alpha=alpha, k=1.2, ti=20.0, ts=400.0,
                                               h=80.0, ambient=400.0, q=2.5e4) if t > 0 else 20.0
                          for x in problem.positions] for t in problem.times])
    # source: published erf/erfc forms evaluated directly in mpmath (reference_transient)
    np.testing.assert_allclose(r.temperatures, expected, rtol=1e-12, atol=1e-9)
    assert r.method == "closed_form" and r.energy_fraction is None and r.energy_unit == "J/m^2"
    if kind == "flux":
        # common practice, no source: a constant flux delivers q t
        np.testing.assert_allclose(r.energy, 2.5e4 * np.array(problem.times), rtol=1e-14, atol=0.0)
    else:
        energy = [ref.mp_semi_infinite_energy(kind, t, alpha=alpha, k=1.2, ti=20.0, ts=400.0,
                                              h=80.0, ambient=400.0) if t > 0 else 0.0
                  for t in problem.times]
        # source: mpmath.quad of the surface heat flux (reference_transient)
        np.testing.assert_allclose(r.energy, energy, rtol=1e-10, atol=1e-9)


def test_semi_infinite_convection_without_overflow() -> None:
    # h x / k = 1e6 * 0.3 / 1.2 = 2.5e5: the published form's exp() would overflow
    problem = _ground("convection", surface=Surface("convection", 1e6, 400.0))
    r = solve_transient(problem)
    alpha = 1.2 / (2000.0 * 900.0)
    expected = [[ref.mp_semi_infinite("convection", x, t, alpha=alpha, k=1.2, ti=20.0, h=1e6,
                                      ambient=400.0) for x in problem.positions]
                for t in problem.times[1:]]
    # source: published form evaluated in mpmath at 40 digits (reference_transient)
    np.testing.assert_allclose(r.temperatures[1:], expected, rtol=1e-12, atol=1e-9)


# --------------------------------------------------------------------------- target time


@pytest.mark.parametrize(("shape", "position"), [
    ("slab", 0.0), ("slab", 0.04), ("cylinder", 0.02), ("sphere", 0.0), ("bar", (0.01, 0.02)),
    ("box", (0.0, 0.0, 0.0)), ("short_cylinder", (0.05, 0.0)), ("lumped", 0.0),
    ("semi_infinite", 0.01)])
def test_target_time_round_trip(shape: str, position) -> None:
    problem = die_block(shape, target=Target(temperature=200.0, position=position))
    r = solve_transient(problem)
    assert r.target_time is not None and r.target_time > 0.0
    again = solve_transient(dataclasses.replace(problem, times=(r.target_time,),
                                                positions=(position,), target=None))
    # common practice, no source: the found time reproduces the target temperature
    np.testing.assert_allclose(again.temperatures[0, 0], 200.0, rtol=0.0, atol=1e-6)
    assert r.convergence.converged and r.convergence.iterations is not None
    assert r.convergence.residual <= 1e-6


@pytest.mark.parametrize("kind", ["temperature", "flux"])
def test_semi_infinite_target_time_matches_closed_inversion(kind: str) -> None:
    alpha = 1.2 / (2000.0 * 900.0)
    x, target = 0.02, 150.0
    r = solve_transient(_ground(kind, target=Target(target, x)))
    if kind == "temperature":
        # (T - Ts)/(Ti - Ts) = erf(x / (2 sqrt(alpha t)))  ->  t = x^2 / (4 alpha erfinv(.)^2)
        eta = mp.erfinv(mp.mpf(target - 400.0) / (20.0 - 400.0))
        expected = float(x**2 / (4 * alpha * eta**2))
    else:
        expected = float(mp.findroot(lambda t: ref.mp_semi_infinite(
            "flux", x, t, alpha=alpha, k=1.2, ti=20.0, q=2.5e4) - target, 200.0))
    # source: mpmath erfinv / mpmath findroot on the published forms
    np.testing.assert_allclose(r.target_time, expected, rtol=1e-9, atol=0.0)


@pytest.mark.parametrize(("shape", "temperature"), [("slab", 20.0), ("slab", 950.0),
                                                    ("sphere", 30.0), ("lumped", 10.0),
                                                    ("semi_infinite", 5.0)])
def test_unreachable_target_is_ill_posed(shape: str, temperature: float) -> None:
    with pytest.raises(IllPosedError, match="unreachable") as info:
        solve_transient(die_block(shape, target=Target(temperature, 0.0)))
    assert info.value.reason == "target-unreachable"
    assert info.value.field == "target.temperature"


def test_flux_target_in_wrong_direction_is_ill_posed() -> None:
    with pytest.raises(IllPosedError, match="only upwards") as info:
        solve_transient(_ground("flux", target=Target(10.0, 0.0)))
    assert info.value.reason == "target-unreachable"


def test_target_on_fixed_temperature_surface_is_immediate() -> None:
    r = solve_transient(die_block(surface=Surface("temperature", value=30.0),
                                  target=Target(200.0, 0.05)))
    assert r.target_time == 0.0
    assert any("at once" in w for w in r.warnings)


def test_find_target_time_reports_failure() -> None:
    time, iterations, ok = tr.find_target_time(lambda t: 1.0, 1.0)  # never crosses
    assert not ok and math.isnan(time) and iterations == 200


# --------------------------------------------------------------------------- safety, warnings


def test_safety_first_crossing_and_scopes() -> None:
    times = (10.0, 60.0, 600.0, 3600.0)
    r = solve_transient(die_block(times=times, positions=(0.025,),
                                  limits=Limits(min_temperature=500.0,
                                                max_surface_temperature=905.0)))
    by_limit = {c.limit: c for c in r.safety.checks}
    cold = by_limit["min_temperature"]
    # the surface (not requested) is the coldest point; it falls below 500 degC first
    assert cold.where.description == "surface" and cold.status == "exceeded"
    surface_temps = solve_transient(die_block(times=times, positions=(0.05,))).temperatures[:, 0]
    first = times[int(np.argmax(surface_temps < 500.0))]
    assert cold.first_crossed_time == first
    hot = by_limit["max_surface_temperature"]
    assert hot.status == "warning" and hot.extreme == 900.0 and hot.where.time == 0.0
    assert r.safety.status == "exceeded"


def test_safety_surface_scope_of_heated_product() -> None:
    r = solve_transient(die_block("box", initial_temperature=20.0,
                                  surface=Surface("convection", 500.0, 650.0),
                                  times=(60.0, 600.0), positions=((0.0, 0.0, 0.0),),
                                  limits=Limits(max_surface_temperature=300.0)))
    check = r.safety.checks[0]
    assert check.where.description == "corner" and check.where.time == 600.0
    assert check.where.position == (0.05, 0.03, 0.08)


def test_one_term_warning_only_at_early_times() -> None:
    early = solve_transient(die_block(times=(5.0, 3600.0), positions=(0.0, 0.05)))
    late = solve_transient(die_block(times=(1800.0, 3600.0), positions=(0.0, 0.05)))
    assert any("one-term approximation" in w for w in early.warnings)
    assert not any("one-term approximation" in w for w in late.warnings)


# --------------------------------------------------------------------------- input rules


@pytest.mark.parametrize(("changes", "field", "message"), [
    (dict(positions=(0.0, 0.051)), "positions.1", "outside the body"),
    (dict(shape="cylinder", radius=0.05, positions=(-0.01,)), "positions.0", "must be >= 0"),
    (dict(shape="bar", half_widths=(0.05, 0.03), positions=(0.01,)), "positions.0",
     r"\(x, y\)"),
    (dict(shape="bar", half_widths=(0.05, 0.03, 0.02)), "half_widths", "needs 2"),
    (dict(half_thickness=None), "half_thickness", "required"),
    (dict(specific_heat=None), "specific_heat", "density and specific_heat, or diffusivity"),
    (dict(density=None, specific_heat=None), "diffusivity", "or diffusivity"),
    (dict(diffusivity=2e-5), "diffusivity", "disagrees"),
    (dict(surface=Surface("flux", value=1e3)), "surface.type", "semi_infinite shape only"),
    (dict(shape="lumped", volume=1e-4, area=0.02, surface=Surface("temperature", value=30.0)),
     "surface.type", "lumped body"),
    (dict(surface=Surface("convection", ambient=30.0)), "surface.film_coefficient", "required"),
    (dict(surface=Surface("temperature")), "surface.value", "required"),
    (dict(times=(10.0, -1.0)), "times.1", ">= 0"),
    (dict(target=Target(200.0, 0.06)), "target.position", "outside the body"),
    (dict(shape="semi_infinite", positions=(-0.1,)), "positions.0", "depth"),
    (dict(shape="prism"), "shape", "must be one of"),
    (dict(max_terms=0), "max_terms", "between 1"),
])
def test_input_rules(changes: dict, field: str, message: str) -> None:
    with pytest.raises(IllPosedError, match=message) as info:
        solve_transient(die_block(**changes))
    assert info.value.field == field


def test_too_many_points(monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(tr, "MAX_POINTS", 100)
    with pytest.raises(TooLargeError, match="exceeds the budget") as info:
        solve_transient(die_block(times=tuple(range(1, 60)), positions=(0.0, 0.05)))
    assert info.value.field == "positions"
    monkeypatch.undo()
    with pytest.raises(TooLargeError, match="lower max_terms") as info:
        solve_transient(die_block(max_terms=100_000, positions=tuple(np.linspace(0, 0.05, 300))))
    assert info.value.field == "max_terms"
