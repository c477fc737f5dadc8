"""Light plate requests on a kept model answer exactly as the full computation does.

Randomized (seeded) comparisons of the shortcuts a kept plate model takes for a few points:
the extremes kept without the reported points against the full choice, and whole solves on a
kept model against fresh solves with an empty cache. The references are the same solver's full
computations (consistency, no outside values).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from service.solvers import plate
from service.solvers.plate import Edge, PlateProblem, solve_plate
from service.solvers.safety import Limits
from tests.solvers import reference_plate as ref

# a furnace door frame (hot sill, insulated jamb, cooled jamb, head losing heat)
FRAME = PlateProblem(
    width=0.6, height=1.0, conductivity=52.0,
    bottom=Edge("temperature", value=100.0), left=Edge("insulated"),
    right=Edge("convection", film_coefficient=750.0, ambient=0.0),
    top=Edge("flux", value=-200.0))
# a heated bus-bar clamp: profile, convection, flux, insulated, generation
CLAMP = PlateProblem(
    width=0.12, height=0.08, conductivity=40.0, generation=5.0e5,
    bottom=Edge("temperature", profile=((0.0, 60.0), (0.05, 90.0), (0.12, 70.0))),
    right=Edge("convection", film_coefficient=120.0, ambient=25.0),
    top=Edge("flux", value=-1500.0), left=Edge("insulated"))
# a kiln door lining with a hot face (two singular corners)
LINING = PlateProblem(
    width=0.4, height=0.4, conductivity=1.2,
    bottom=Edge("temperature", value=400.0), right=Edge("temperature", value=30.0),
    top=Edge("temperature", value=30.0), left=Edge("temperature", value=30.0))
PLATES = (FRAME, CLAMP, LINING, ref.BRACKET, dataclasses.replace(CLAMP, max_terms=100),
          dataclasses.replace(FRAME, max_terms=3))


def _points(rng: np.random.Generator, problem: PlateProblem, count: int) -> tuple:
    """Random points rounded to 1 mm, some on the edges and corners."""
    pts = np.round(rng.random((count, 2)) * (problem.width, problem.height), 3)
    pts = np.minimum(pts, (problem.width, problem.height))
    if rng.random() < 0.3:
        pts[0] = (rng.choice([0.0, problem.width]), pts[0, 1])
    if rng.random() < 0.3:
        pts[-1] = (pts[-1, 0], rng.choice([0.0, problem.height]))
    return tuple(map(tuple, pts.tolist()))


def _fingerprint(result: plate.PlateResult) -> tuple:
    return (result.point_temperatures.tolist(), result.edge_heat_flow, result.hottest,
            result.coldest, result.convergence, result.safety, result.warnings,
            result.energy_balance)


def test_kept_extremes_equal_the_full_choice_with_the_points() -> None:
    # consistency: the kept extremes are used only when the points cannot change them
    rng = np.random.default_rng(12)
    for problem in (FRAME, CLAMP, LINING):
        core = plate.PlateCore(plate.definition_of(problem))
        for surfaces in (False, True):
            cands = core.candidates(surfaces)
            for _ in range(20):
                pts = np.array(_points(rng, problem, 5))
                temp = core.evaluate_points(pts[:, 0], pts[:, 1])[0]
                if rng.random() < 0.3:  # values hotter or colder than every candidate
                    temp = temp + rng.choice([-1.0, 1.0]) * 1e3
                kept = core.extremes(surfaces, pts[:, 0], pts[:, 1], temp)
                full = plate._pick_extremes(core.model, cands, [(pts[:, 0], pts[:, 1], temp)])
                assert kept == full


def test_kept_models_answer_random_point_requests_as_fresh_solves() -> None:
    # consistency: the same solver with an empty cache; only the history differs
    rng = np.random.default_rng(13)
    requests = []
    for problem in PLATES[:4]:
        for _ in range(6):
            limits = Limits(max_surface_temperature=60.0) if rng.random() < 0.3 else Limits()
            requests.append(dataclasses.replace(
                problem, points=_points(rng, problem, int(rng.integers(1, 12))), limits=limits))
    fresh = []
    for request in requests:
        plate.CORES.clear()
        fresh.append(_fingerprint(solve_plate(request)))
    plate.CORES.clear()
    order = rng.permutation(len(requests))
    for i in order:
        kept = _fingerprint(solve_plate(requests[i]))
        np.testing.assert_allclose(kept[0], fresh[i][0], rtol=0.0, atol=0.0)
        assert kept[1:] == fresh[i][1:]
    assert plate.CORES.hits >= len(requests) - 4
    plate.CORES.clear()
