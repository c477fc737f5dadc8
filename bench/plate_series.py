"""Plate series solver timings (prints figures; not a test).

Run from the repository root:  python bench/plate_series.py [--quick]

Times `solve_plate` (solver time only, no HTTP or JSON) at the default tolerance for:

* light requests: 5 points, no output grid (a bottom-fixed plate with convective right and top
  edges; and the 5-point request of bench/http_throughput.py), the latter also with a new film
  coefficient on every run so that the eigenvalue cache never hits;
* a one-hot-edge square and a mixed-edges plate with generation on 101 x 101 and 501 x 501 output
  grids (target: at most 5 ms for 101 x 101, both cases).

"solve" is a fresh solve (the worker's kept plate models, `CORES`, emptied first); "kept" is
the same request again with the plate's model kept, as when a caller asks one plate at new
points or grids. Then the stages in the order a fresh solve runs them: building the series
(data, constants), the edge heat flows (their mode tables then serve the evaluations), the grid
summation, and the rest (points, extremes with their samples and refinement, safety). Reports
the minimum and the median of repeated runs and the load average, since the machine is shared:
compare minima.
OPENBLAS_NUM_THREADS is set to 1 (as for the server's workers) unless already set.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import dataclasses  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from collections.abc import Callable  # noqa: E402

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

import numpy as np  # noqa: E402

from service.solvers.plate import CORES, Edge, PlateProblem, PlateSeries, solve_plate  # noqa: E402

LIGHT = PlateProblem(  # a furnace door frame: hot sill, cooled jamb and head
    width=0.6, height=1.0, conductivity=52.0,
    bottom=Edge("temperature", value=100.0), left=Edge("insulated"),
    right=Edge("convection", film_coefficient=750.0, ambient=0.0),
    top=Edge("convection", film_coefficient=20.0, ambient=15.0),
    points=((0.6, 0.2), (0.3, 0.5), (0.1, 0.1), (0.5, 0.9), (0.0, 0.0)))

HTTP_5 = PlateProblem(  # the 5-point request of bench/http_throughput.py
    width=0.6, height=1.0, conductivity=52.0,
    bottom=Edge("temperature", value=100.0), left=Edge("insulated"),
    right=Edge("convection", film_coefficient=750.0, ambient=0.0),
    top=Edge("flux", value=-200.0),
    points=((0.1, 0.1), (0.3, 0.5), (0.5, 0.9), (0.6, 0.2), (0.0, 1.0)))

ONE_HOT = PlateProblem(  # a kiln door lining cross-section, hot face at the bottom
    width=0.4, height=0.4, conductivity=1.2,
    bottom=Edge("temperature", value=400.0), right=Edge("temperature", value=30.0),
    top=Edge("temperature", value=30.0), left=Edge("temperature", value=30.0))

MIXED = PlateProblem(  # an electrically heated bus-bar clamp
    width=0.12, height=0.08, conductivity=40.0, generation=5.0e5,
    bottom=Edge("temperature", profile=((0.0, 60.0), (0.05, 90.0), (0.12, 70.0))),
    right=Edge("convection", film_coefficient=120.0, ambient=25.0),
    top=Edge("flux", value=-1500.0), left=Edge("insulated"))


def timed(fn: Callable[[int], object], repeat: int) -> tuple[float, float]:
    """(minimum, median) wall time in ms; fn gets the run number."""
    fn(-1)  # warm imports and the eigenvalue cache
    times = []
    for i in range(repeat):
        start = time.perf_counter()
        fn(i)
        times.append((time.perf_counter() - start) * 1e3)
    return min(times), statistics.median(times)


def stages(problem: PlateProblem, repeat: int) -> tuple[float, float, float]:
    """Minimum times (ms) of building, building + flows, building + flows + grid."""
    def build(_: int) -> None:
        PlateSeries(problem)

    def flows(_: int) -> None:
        PlateSeries(problem).edge_heat_flows()

    def grid(_: int) -> None:
        model = PlateSeries(problem)
        model.edge_heat_flows()
        if problem.grid is not None:
            model.grid(np.linspace(0.0, problem.width, problem.grid[0]),
                       np.linspace(0.0, problem.height, problem.grid[1]))

    return timed(build, repeat)[0], timed(flows, repeat)[0], timed(grid, repeat)[0]


def bare_one_hot(n: int, terms: int) -> np.ndarray:
    """The one-hot square's field on an n x n grid as one matrix product with a fixed number of
    odd terms (the reference implementation: no per-point truncation, no error bound, no
    flows, no extremes). T = T0 + (T1 - T0) sum_odd 4/(k pi) sin(k pi x/W) R_k(y), with
    R_k = sinh(k pi (H - y)/W) / sinh(k pi H/W) written with decaying exponentials only."""
    w, h = ONE_HOT.width, ONE_HOT.height
    t1, t0 = ONE_HOT.bottom.value, ONE_HOT.top.value
    assert t1 is not None and t0 is not None
    k = np.arange(1, 2 * terms, 2, dtype=float)[:, None]
    x = np.linspace(0.0, w, n)[None, :]
    y = np.linspace(0.0, h, n)[None, :]
    a = k * np.pi / w
    ratio = np.exp(-a * y) * -np.expm1(-2.0 * a * (h - y)) / -np.expm1(-2.0 * a * h)
    sines = (4.0 / (k * np.pi)) * np.sin(a * x)
    return t0 + (t1 - t0) * (ratio.T @ sines)


def reference(repeat: int) -> None:
    """The one-hot 101 x 101 field by the bare matrix product, timed like the solver, with the
    largest difference from the solver's field away from the hot edge's corners."""
    problem = dataclasses.replace(ONE_HOT, grid=(101, 101))
    conv = solve_plate(problem).convergence
    terms = conv.terms or 1
    bare_min = timed(lambda _: bare_one_hot(101, terms), repeat)[0]

    def fresh(_: int) -> None:
        CORES.clear()
        solve_plate(problem)

    solve_min = timed(fresh, repeat)[0]
    kept_min = timed(lambda _: solve_plate(problem), repeat)[0]
    ours = solve_plate(problem).grid_temperature
    assert ours is not None
    bare = bare_one_hot(101, terms)
    inner = (slice(1, None), slice(1, -1))  # rows above the hot edge, columns off the corners
    diff = float(np.max(np.abs(ours[inner] - bare[inner])))
    print(f"reference: one-hot 101x101 as one numpy matrix product of {terms} odd terms "
          f"(no truncation rule, bounds, flows or extremes): {bare_min:.2f} ms; the solver "
          f"{solve_min:.2f} ms fresh ({solve_min / bare_min:.1f}x), {kept_min:.2f} ms with the "
          f"plate kept ({kept_min / bare_min:.1f}x); largest difference off the hot edge "
          f"{diff:.1e} K")


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--quick", action="store_true", help="fewer repeats")
    args = parser.parse_args()
    scale = 0.2 if args.quick else 1.0
    load_before = os.getloadavg()
    print(f"numpy {np.__version__}, OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}"
          f", load average {load_before[0]:.2f} {load_before[1]:.2f} {load_before[2]:.2f}")
    print(f"{'case':<24} {'grid':>8} {'solve min':>10} {'median':>8} {'kept min':>9} "
          f"{'build':>7} {'flows':>7} {'sum':>7} {'rest':>7} {'terms':>6} {'err/atol':>9}")
    films = 750.0 * (1.0 + 1e-3 * np.arange(1, 100_000))
    cases: list[tuple[str, PlateProblem, int, bool]] = [
        ("light, 5 points", LIGHT, 400, False),
        ("http case, 5 points", HTTP_5, 400, False),
        ("http case, new Biot", HTTP_5, 200, True),
    ]
    for name, base in (("one-hot", ONE_HOT), ("mixed+gen", MIXED)):
        for n in (101, 501):
            cases.append((name, dataclasses.replace(base, grid=(n, n)), 40 if n == 101 else 8,
                          False))
    for name, problem, repeat, new_biot in cases:
        repeat = max(3, int(repeat * scale))

        def run(i: int, p: PlateProblem = problem, vary: bool = new_biot) -> None:
            if vary:  # a film coefficient never seen before: eigenvalues computed afresh
                p = dataclasses.replace(p, right=Edge("convection",
                                                      film_coefficient=float(films[i + 1]),
                                                      ambient=0.0))
            CORES.clear()
            solve_plate(p)

        def again(_: int, p: PlateProblem = problem) -> None:
            solve_plate(p)

        solve_min, solve_med = timed(run, repeat)
        kept_min = timed(again, repeat)[0]
        build, with_flows, with_grid = stages(problem, repeat)
        conv = solve_plate(problem).convergence
        grid = "-" if problem.grid is None else f"{problem.grid[0]}x{problem.grid[1]}"
        flows, summed = with_flows - build, with_grid - with_flows
        rest = solve_min - (with_grid if problem.grid is not None else with_flows)
        sum_text = "-" if problem.grid is None else f"{summed:.2f}ms"
        print(f"{name:<24} {grid:>8} {solve_min:>8.2f}ms {solve_med:>6.2f}ms {kept_min:>7.2f}ms "
              f"{build:>5.2f}ms {flows:>5.2f}ms {sum_text:>7} {rest:>5.2f}ms "
              f"{conv.terms:>6} {conv.error_estimate / conv.atol:>9.3f}")
    reference(repeat=max(3, int(40 * scale)))
    load_after = os.getloadavg()
    print(f"load average after: {load_after[0]:.2f} {load_after[1]:.2f} {load_after[2]:.2f}"
          " (2 cores; figures above ~1 mean other work shared the machine)")


if __name__ == "__main__":
    main()
