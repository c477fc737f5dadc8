"""Speed figures for the transient-conduction solver (prints; no assertions).

Run from the repository root:  python bench/transient.py

Targets (issue): 1000 times x 100 positions per body at atol 1e-6 in at most 50 ms of solver
time; the roots of a new Biot number after the tables are warm in at most 1 ms; a target time
in at most 10 ms. Figures are medians of repeated runs; the machine is shared, so read them as
orders of magnitude.
"""

from __future__ import annotations

import os

# one BLAS thread, as in the service workers (MEASURED.md)
for _name in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS"):
    os.environ.setdefault(_name, "1")

import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from collections.abc import Callable  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.solvers import eigen  # noqa: E402
from service.solvers.transient import (  # noqa: E402
    Surface,
    Target,
    TransientProblem,
    solve_transient,
)

# a quenched steel die part (invented): k 45 W/(m K), rho 7800 kg/m^3, c 460 J/(kg K)
K, RHO, C = 45.0, 7800.0, 460.0
ALPHA = K / (RHO * C)
L = 0.05


def median_ms(run: Callable[[], object], repeats: int = 15) -> float:
    run()  # warm caches
    samples = []
    for _ in range(repeats):
        start = time.perf_counter()
        run()
        samples.append(time.perf_counter() - start)
    return 1e3 * statistics.median(samples)


def problem(shape: str, fo_min: float, **changes: object) -> TransientProblem:
    geometry = {"slab": {"half_thickness": L}, "cylinder": {"radius": L},
                "sphere": {"radius": L}}[shape]
    base: dict[str, object] = dict(
        shape=shape, conductivity=K, density=RHO, specific_heat=C, initial_temperature=900.0,
        surface=Surface("convection", film_coefficient=500.0, ambient=30.0),
        times=tuple(np.geomspace(fo_min, 3.0, 1000) * L**2 / ALPHA),
        positions=tuple(np.linspace(0.0, L, 100)), atol=1e-6, **geometry)
    base.update(changes)
    return TransientProblem(**base)  # type: ignore[arg-type]


def main() -> None:
    print("transient solver benchmark (median ms, OPENBLAS_NUM_THREADS=1)")
    print()
    print("1000 times x 100 positions, atol 1e-6 K, Bi = 0.56 (target <= 50 ms)")
    for fo_min in (1e-4, 1e-8):
        for shape in ("slab", "cylinder", "sphere"):
            p = problem(shape, fo_min)
            r = solve_transient(p)
            ms = median_ms(lambda p=p: solve_transient(p))
            print(f"  {shape:8s} Fo {fo_min:.0e}..3: {ms:7.2f} ms   terms <= "
                  f"{r.convergence.terms}, short-time times {int(r.short_time.sum()):4d}, "
                  f"error estimate {r.convergence.error_estimate:.1e} K, "
                  f"{r.convergence.status}")

    print()
    print("roots + coefficients of a new Biot number, tables warm (target <= 1 ms)")
    for shape in ("slab", "cylinder", "sphere"):
        for count in (16, 64, 256):
            eigen.body_coefficients(shape, 0.123, count)  # warm the Bessel-zero tables
            biots = iter(np.geomspace(0.01, 100.0, 1000) * (1.0 + 1e-9 * count))
            ms = median_ms(lambda s=shape, n=count, b=biots: eigen.body_coefficients(
                s, float(next(b)), n), repeats=25)
            print(f"  {shape:8s} {count:4d} roots: {ms:6.3f} ms")

    print()
    print("whole solve at a new Biot number, 10 times x 10 positions")
    for shape in ("slab", "cylinder", "sphere"):
        films = iter(np.linspace(100.0, 900.0, 1000))
        small = problem(shape, 1e-3, times=tuple(np.geomspace(1.0, 3600.0, 10)),
                        positions=tuple(np.linspace(0.0, L, 10)))

        def run(s: TransientProblem = small, f: object = films) -> object:
            h = float(next(f))  # type: ignore[call-overload]
            return solve_transient(TransientProblem(**{
                **s.__dict__, "surface": Surface("convection", film_coefficient=h,
                                                 ambient=30.0)}))
        print(f"  {shape:8s}: {median_ms(run, repeats=25):6.2f} ms")

    print()
    print("target time (one time, one position; includes the forward solve) (target <= 10 ms)")
    for shape in ("slab", "cylinder", "sphere"):
        p = problem(shape, 1e-3, times=(60.0,), positions=(0.0,),
                    target=Target(temperature=200.0, position=0.0))
        r = solve_transient(p)
        ms = median_ms(lambda p=p: solve_transient(p))
        print(f"  {shape:8s}: {ms:6.2f} ms   t = {r.target_time:.6g} s, "
              f"{r.convergence.iterations} iterations, residual {r.convergence.residual:.1e} K")


if __name__ == "__main__":
    main()
