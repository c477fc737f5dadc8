"""Properties every solution must have, checked on generated problems (hypothesis).

Sources: these are mathematical properties of the heat equation, common practice, no source:
the maximum principle (no generation: extremes on the boundary data/ambients), symmetry,
linearity (superposition), the energy balance, monotone approach to ambient, and agreement
of two independent methods (series and finite volumes) within their reported errors.
Example counts are bounded so the file runs in seconds.
"""

from __future__ import annotations

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from service.solvers.grid import solve_grid
from service.solvers.grid_model import Cells, Edges, GridProblem, Segment
from service.solvers.plate import Edge, PlateProblem, solve_plate, temperature_at
from service.solvers.transient import Surface, TransientProblem, solve_transient

FAST = settings(max_examples=15, deadline=None, derandomize=True, database=None,
                suppress_health_check=list(HealthCheck))

temperatures = st.floats(min_value=-50.0, max_value=500.0)
films = st.floats(min_value=0.5, max_value=5000.0)
sizes = st.floats(min_value=0.05, max_value=3.0)
conductivities = st.floats(min_value=0.05, max_value=400.0)


@st.composite
def edges(draw, allow_flux: bool = True):
    kind = draw(st.sampled_from(["temperature", "convection", "insulated"]
                                + (["flux"] if allow_flux else [])))
    if kind == "temperature":
        return Edge("temperature", value=draw(temperatures))
    if kind == "convection":
        return Edge("convection", film_coefficient=draw(films), ambient=draw(temperatures))
    if kind == "flux":
        return Edge("flux", value=draw(st.floats(min_value=-2000.0, max_value=2000.0)))
    return Edge("insulated")


@st.composite
def plates(draw, allow_flux: bool = False):
    sides = [draw(edges(allow_flux)) for _ in range(4)]
    if all(e.type in ("insulated", "flux") for e in sides):
        sides[0] = Edge("temperature", value=draw(temperatures))
    return PlateProblem(width=draw(sizes), height=draw(sizes),
                        conductivity=draw(conductivities), bottom=sides[0], right=sides[1],
                        top=sides[2], left=sides[3])


def _levels(problem: PlateProblem) -> list[float]:
    out = []
    for e in (problem.bottom, problem.right, problem.top, problem.left):
        if e.type == "temperature":
            out.append(e.value)
        elif e.type == "convection":
            out.append(e.ambient)
    return out


INTERIOR = np.linspace(0.05, 0.95, 7)


@FAST
@given(plates())
def test_plate_maximum_principle_without_generation(problem):
    x, y = np.meshgrid(INTERIOR * problem.width, INTERIOR * problem.height)
    t = temperature_at(problem, x.ravel(), y.ravel())
    low, high = min(_levels(problem)), max(_levels(problem))
    slack = 1e-6 * max(1.0, high - low)
    assert np.all(t <= high + slack) and np.all(t >= low - slack)


@FAST
@given(plates())
def test_plate_energy_balance_closes(problem):
    result = solve_plate(problem)
    if result.energy_balance.relative_error is not None:
        assert result.energy_balance.relative_error < 1e-6


@FAST
@given(plates(), st.floats(min_value=-3.0, max_value=3.0), st.floats(min_value=-100, max_value=100))
def test_plate_linearity_in_the_data(problem, scale, shift):
    """T[a f + b] = a T[f] + b when every temperature and ambient is mapped the same way and
    fluxes scale by a (superposition)."""
    def mapped(e: Edge) -> Edge:
        if e.type == "temperature":
            return Edge("temperature", value=scale * e.value + shift)
        if e.type == "convection":
            return Edge("convection", film_coefficient=e.film_coefficient,
                        ambient=scale * e.ambient + shift)
        return e

    other = PlateProblem(width=problem.width, height=problem.height,
                         conductivity=problem.conductivity, bottom=mapped(problem.bottom),
                         right=mapped(problem.right), top=mapped(problem.top),
                         left=mapped(problem.left))
    x, y = INTERIOR * problem.width, INTERIOR[::-1] * problem.height
    base = temperature_at(problem, x, y)
    np.testing.assert_allclose(temperature_at(other, x, y), scale * base + shift,
                               rtol=1e-7, atol=1e-5 * (1 + abs(scale) * 600))


@FAST
@given(plates())
def test_plate_mirror_symmetry(problem):
    """Swapping left and right edges mirrors the field in x."""
    mirrored = PlateProblem(width=problem.width, height=problem.height,
                            conductivity=problem.conductivity, bottom=problem.bottom,
                            right=problem.left, top=problem.top, left=problem.right)
    x, y = INTERIOR * problem.width, INTERIOR * problem.height
    scale = 1e-5 * (1 + max(abs(v) for v in _levels(problem)))
    np.testing.assert_allclose(temperature_at(mirrored, problem.width - x, y),
                               temperature_at(problem, x, y), rtol=1e-7, atol=scale)


@FAST
@given(st.sampled_from(["slab", "cylinder", "sphere"]), temperatures, temperatures, films,
       conductivities)
def test_transient_monotone_approach_to_ambient(shape, initial, ambient, film, conductivity):
    size = {"slab": "half_thickness", "cylinder": "radius", "sphere": "radius"}[shape]
    problem = TransientProblem(
        shape=shape, conductivity=conductivity, initial_temperature=initial,
        surface=Surface("convection", film_coefficient=film, ambient=ambient),
        times=tuple(np.geomspace(1.0, 1e6, 25)), positions=(0.0, 0.05), diffusivity=1e-5,
        **{size: 0.05})
    t = solve_transient(problem).temperatures
    distance = np.abs(t - ambient)
    scale = 1e-6 * max(1.0, abs(initial - ambient))
    assert np.all(np.diff(distance, axis=0) <= scale)  # never moves away from ambient
    assert np.all(distance <= abs(initial - ambient) + scale)  # never overshoots


@settings(max_examples=4, deadline=None, derandomize=True, database=None,
          suppress_health_check=list(HealthCheck))
@given(plates())
def test_series_and_grid_agree_within_their_errors(problem):
    """Series-versus-grid cross-check: two independent methods on the same rectangle."""
    segment = {
        "temperature": lambda e: Segment("temperature", value=e.value),
        "convection": lambda e: Segment("convection", film_coefficient=e.film_coefficient,
                                        ambient=e.ambient),
        "insulated": lambda e: Segment("insulated"),
    }
    grid = GridProblem(
        width=problem.width, height=problem.height, cells=Cells(80, 80),
        conductivity=problem.conductivity,
        edges=Edges(**{name: (segment[getattr(problem, name).type](getattr(problem, name)),)
                       for name in ("bottom", "right", "top", "left")}),
        points=((0.5 * problem.width, 0.5 * problem.height),
                (0.25 * problem.width, 0.75 * problem.height)),
        verify_mesh=True)
    fv = solve_grid(grid)
    series = temperature_at(problem, np.array([0.5, 0.25]) * problem.width,
                            np.array([0.5, 0.75]) * problem.height)
    estimates = np.asarray(fv.point_error_estimates)
    span = max(_levels(problem)) - min(_levels(problem))
    # the grid's Richardson estimate, with a floor of 1e-3 of the span for its own uncertainty
    assert np.all(np.abs(np.asarray(fv.point_temperatures) - series)
                  <= 3 * np.abs(estimates) + 1e-3 * max(span, 1.0))
