"""Plate series solver timings (prints figures; not a test).

Run from the repository root:  OPENBLAS_NUM_THREADS=1 python bench/plate_series.py

For a one-hot-edge square and for a mixed-edges plate with generation, times `solve_plate` on
101 x 101 and 501 x 501 output grids at the default tolerance (target: at most 5 ms for 101 x 101),
and the stages: building the series (data, coefficients' constants), the grid summation, the
edge heat flows and the rest (extremes with local refinement, safety). Reports the minimum and
the median of repeated runs (the minimum is the figure to compare on a shared machine).
"""

from __future__ import annotations

import os
import statistics
import sys
import time
from collections.abc import Callable

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

import numpy as np  # noqa: E402

from service.solvers.plate import Edge, PlateProblem, PlateSeries, solve_plate  # noqa: E402

ONE_HOT = PlateProblem(  # a kiln door lining cross-section, hot face at the bottom
    width=0.4, height=0.4, conductivity=1.2,
    bottom=Edge("temperature", value=400.0), right=Edge("temperature", value=30.0),
    top=Edge("temperature", value=30.0), left=Edge("temperature", value=30.0))

MIXED = PlateProblem(  # an electrically heated bus-bar clamp
    width=0.12, height=0.08, conductivity=40.0, generation=5.0e5,
    bottom=Edge("temperature", profile=((0.0, 60.0), (0.05, 90.0), (0.12, 70.0))),
    right=Edge("convection", film_coefficient=120.0, ambient=25.0),
    top=Edge("flux", value=-1500.0), left=Edge("insulated"))


def timed(fn: Callable[[], object], repeat: int) -> tuple[float, float]:
    """(minimum, median) wall time in ms."""
    fn()  # warm the eigenvalue cache and imports
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        fn()
        times.append((time.perf_counter() - start) * 1e3)
    return min(times), statistics.median(times)


def main() -> None:
    print(f"numpy {np.__version__}, OPENBLAS_NUM_THREADS={os.environ.get('OPENBLAS_NUM_THREADS')}")
    print(f"{'case':<10} {'grid':>8} {'solve min':>10} {'median':>8} {'build':>7} {'sum':>7} "
          f"{'flows':>7} {'rest':>7} {'terms':>6} {'err/atol':>9}")
    for name, base in (("one-hot", ONE_HOT), ("mixed+gen", MIXED)):
        for n in (101, 501):
            problem = PlateProblem(**{**base.__dict__, "grid": (n, n)})
            repeat = 30 if n == 101 else 5
            solve_min, solve_med = timed(lambda p=problem: solve_plate(p), repeat)
            build, _ = timed(lambda p=problem: PlateSeries(p), repeat)
            gx = np.linspace(0.0, problem.width, n)
            gy = np.linspace(0.0, problem.height, n)

            def build_and_sum(p: PlateProblem = problem, gx: np.ndarray = gx,
                              gy: np.ndarray = gy) -> None:
                PlateSeries(p).grid(gx, gy)

            def build_and_flows(p: PlateProblem = problem) -> None:
                PlateSeries(p).edge_heat_flows()

            with_sum, _ = timed(build_and_sum, repeat)
            with_flows, _ = timed(build_and_flows, repeat)
            result = solve_plate(problem)
            conv = result.convergence
            summ, flows = with_sum - build, with_flows - build
            rest = solve_min - build - summ - flows
            print(f"{name:<10} {n:>4}x{n:<3} {solve_min:>8.2f}ms {solve_med:>6.2f}ms "
                  f"{build:>5.2f}ms {summ:>5.2f}ms {flows:>5.2f}ms {rest:>5.2f}ms "
                  f"{conv.terms:>6} {conv.error_estimate / conv.atol:>9.3f}")


if __name__ == "__main__":
    main()
