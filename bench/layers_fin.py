"""Solver-time figures for the layers and fin solvers (no HTTP).

Targets: a layers request with radiation and solve_for at most 5 ms; a fin at most 1 ms.
Run from the repository root:  python bench/layers_fin.py [--repeat N]
Prints the median, 10th and 90th percentile of per-call wall time, and the key results, so a
change in speed can be told apart from a change in work.
"""

from __future__ import annotations

import argparse
import os
import statistics
import sys
import time

# Single-threaded BLAS, as in the service workers (see the measurements shared by the team).
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_var, "1")
sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

from service.solvers.fin import FinProblem, solve_fin  # noqa: E402
from service.solvers.layers import (  # noqa: E402
    DesignTarget,
    Layer,
    LayersProblem,
    SolveFor,
    SurfaceCondition,
    solve_layers,
)
from service.solvers.safety import Limits  # noqa: E402

# The contract's example: a steam line insulated for personnel protection.
STEAM_LINE = LayersProblem(
    geometry="cylinder", inner_radius=0.0545, length=1.0,
    layers=(Layer(0.004, 45.0, "pipe"),
            Layer(0.05, 0.04, "insulation", max_temperature=650.0)),
    contact_resistances=(0.0,),
    inside=SurfaceCondition("convection", film_coefficient=1000.0, ambient=250.0),
    outside=SurfaceCondition("convection_radiation", film_coefficient=8.0, ambient=20.0,
                             emissivity=0.9, surroundings=20.0),
    solve_for=SolveFor(1, DesignTarget(surface_temperature=55.0)),
    limits=Limits(max_surface_temperature=60.0),
)

CASES = {
    "layers: steam line, radiation, solve_for surface temperature (target <= 5 ms)": (
        solve_layers, STEAM_LINE, 5.0),
    "layers: same, outside 'air' with 3 m/s wind": (
        solve_layers, LayersProblem(**{**STEAM_LINE.__dict__, "outside": SurfaceCondition(
            "air", ambient=20.0, emissivity=0.9, wind_speed=3.0)}), 5.0),
    "layers: same, solve_for 40 W/m": (
        solve_layers, LayersProblem(**{**STEAM_LINE.__dict__, "solve_for": SolveFor(
            1, DesignTarget(heat_flow_per_length=40.0))}), 5.0),
    "layers: same, no solve_for (one state)": (
        solve_layers, LayersProblem(**{**STEAM_LINE.__dict__, "solve_for": None}), 5.0),
    "layers: linear three-layer wall": (
        solve_layers, LayersProblem(
            geometry="plane",
            layers=(Layer(0.115, 1.1, "firebrick"), Layer(0.1, 0.12, "board"),
                    Layer(0.006, 45.0, "casing")),
            inside=SurfaceCondition("convection", film_coefficient=30.0, ambient=900.0),
            outside=SurfaceCondition("convection", film_coefficient=10.0, ambient=25.0)), 5.0),
    "fin: straight, convective tip (target <= 1 ms)": (
        solve_fin, FinProblem("straight", 200.0, 25.0, 100.0, 25.0, tip="convective",
                              length=0.05, thickness=0.002, width=1.0), 1.0),
    "fin: annular array of 12, convective tip": (
        solve_fin, FinProblem("annular", 180.0, 60.0, 120.0, 30.0, tip="convective",
                              inner_radius=0.0125, outer_radius=0.035, thickness=0.001,
                              count=12, base_area=0.01), 1.0),
}


def timings(func, problem, repeat: int) -> list[float]:
    func(problem)  # warm-up (imports, first scipy calls)
    out = []
    for _ in range(repeat):
        start = time.perf_counter()
        func(problem)
        out.append((time.perf_counter() - start) * 1e3)
    return out


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--repeat", type=int, default=300)
    args = parser.parse_args()
    print(f"{'case':78s} {'median':>8s} {'p10':>7s} {'p90':>7s} {'target':>7s}")
    for name, (func, problem, target) in CASES.items():
        ms = sorted(timings(func, problem, args.repeat))
        median = statistics.median(ms)
        p10, p90 = ms[len(ms) // 10], ms[(9 * len(ms)) // 10]
        flag = "ok" if median <= target else "SLOW"
        print(f"{name:78s} {median:7.3f}ms {p10:6.3f} {p90:6.3f} {target:6.1f} {flag}")
        res = func(problem)
        if func is solve_layers:
            solved = (f", solved thickness {res.solved.thickness * 1e3:.2f} mm"
                      if res.solved else "")
            print(f"    heat flow {res.heat_flow:.4g} {res.basis}, surfaces "
                  f"{res.surfaces[0].temperature:.2f} / {res.surfaces[1].temperature:.2f} degC"
                  f"{solved}, evaluations {res.convergence.iterations}, residual "
                  f"{res.convergence.residual:.2e} K")
        else:
            eff = "-" if res.efficiency is None else f"{res.efficiency:.4f}"
            print(f"    heat flow {res.heat_flow:.4g} W per fin, efficiency {eff}, tip "
                  f"{res.tip_temperature:.2f} degC, array {res.array.heat_flow:.4g} W")


if __name__ == "__main__":
    main()
