"""Benchmark of the finite-volume grid solver (prints figures; not a test).

Run from the repository root:

    python bench/grid.py            # sizes 1e4..1e6, scikit-fem comparison, memory at 1e6
    python bench/grid.py --cap      # also the peak memory and time of a 4.0e6-cell solve (slow)

Problem: steady conduction in the unit square, k = 1, top edge at sin(pi x), other edges at 0
(a Dirichlet problem whose exact solution sin(pi x) sinh(pi y) / sinh(pi) is used to measure
the accuracy of both solvers). scikit-fem is a benchmark-only dependency: linear triangles on
a structured mesh, solved with its default sparse direct solver; its mesh is refined until its
error at the probe points is no larger than the grid solver's at 1e6 cells.

Timings are medians of several runs; the machine is shared, so compare ratios.
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")
os.environ.setdefault("OMP_NUM_THREADS", "1")
os.environ.setdefault("MKL_NUM_THREADS", "1")

import argparse  # noqa: E402
import statistics  # noqa: E402
import subprocess  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from pathlib import Path  # noqa: E402

import numpy as np  # noqa: E402

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from service.solvers.grid import (  # noqa: E402
    Cells,
    Edges,
    GridProblem,
    Segment,
    solve_grid,
)

PROBES = np.array([[x, y] for x in (0.25, 0.5, 0.75) for y in (0.25, 0.5, 0.75)])


def exact(x: np.ndarray, y: np.ndarray) -> np.ndarray:
    return np.sin(np.pi * x) * np.sinh(np.pi * y) / np.sinh(np.pi)


def problem(n: int, solver: str = "auto") -> GridProblem:
    s = np.linspace(0.0, 1.0, 4001)
    top = tuple((float(a), float(np.sin(np.pi * a))) for a in s)
    zero = (Segment("temperature", value=0.0),)
    return GridProblem(
        width=1.0,
        height=1.0,
        cells=Cells(n, n),
        conductivity=1.0,
        edges=Edges(bottom=zero, left=zero, right=zero, top=(Segment("temperature", profile=top),)),
        points=tuple(map(tuple, PROBES)),
        linear_solver=solver,
    )


def time_grid(n: int, solver: str, repeats: int) -> tuple[float, float, str, int]:
    p = problem(n, solver)
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        r = solve_grid(p)
        times.append(time.perf_counter() - t0)
    err = float(np.max(np.abs(r.point_temperatures - exact(PROBES[:, 0], PROBES[:, 1]))))
    return statistics.median(times), err, r.linear_solver, r.linear_iterations


def time_skfem(m: int, repeats: int, solver: str = "default") -> tuple[float, float, int]:
    """scikit-fem on an m x m node mesh; solver "default" (its sparse direct solve) or
    "multigrid" (the same pyamg Ruge-Stuben + CG as the grid solver, for a like-for-like
    comparison of everything but the linear solver)."""
    import skfem
    from skfem.models.poisson import laplace

    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        mesh = skfem.MeshTri.init_tensor(np.linspace(0, 1, m), np.linspace(0, 1, m))
        basis = skfem.Basis(mesh, skfem.ElementTriP1())
        a = laplace.assemble(basis)
        u = np.zeros(basis.N)
        top = basis.get_dofs(lambda x: np.isclose(x[1], 1.0))
        u[top.nodal["u"]] = np.sin(np.pi * mesh.p[0, top.nodal["u"]])
        dofs = basis.get_dofs()
        system = skfem.condense(a, np.zeros(basis.N), x=u, D=dofs)
        if solver == "default":
            u = skfem.solve(*system)
        else:
            import pyamg

            ml = pyamg.ruge_stuben_solver(system[0].tocsr())
            u = skfem.solve(*system, solver=lambda A, b, ml=ml: ml.solve(b, tol=1e-10, accel="cg"))
        times.append(time.perf_counter() - t0)
    values = basis.probes(PROBES.T) @ u
    err = float(np.max(np.abs(values - exact(PROBES[:, 0], PROBES[:, 1]))))
    return statistics.median(times), err, basis.N


def peak_memory(n: int) -> float:
    """Peak resident memory (GB) of one solve of n x n cells in a fresh process.

    Read from the child's own VmHWM: ru_maxrss would carry over the forked parent's size.
    """
    code = (
        f"import sys; sys.path.insert(0, {str(Path(__file__).resolve().parent)!r}); "
        "import grid as b; from service.solvers.grid import solve_grid; "
        f"solve_grid(b.problem({n})); "
        "print(next(l for l in open('/proc/self/status') if l.startswith('VmHWM')).split()[1])"
    )
    out = subprocess.run(
        [sys.executable, "-c", code],
        check=True,
        capture_output=True,
        text=True,
        cwd=str(Path(__file__).resolve().parents[1]),
    )
    return int(out.stdout.strip().splitlines()[-1]) / 1024**2  # VmHWM is in kB


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--cap", action="store_true", help="also measure a 4.0e6-cell solve (the default cap)"
    )
    parser.add_argument("--repeats", type=int, default=3)
    args = parser.parse_args()

    import pyamg  # noqa: F401  (imported once, as a server worker would)

    solve_grid(problem(50, "multigrid"))  # warm-up
    print("grid solver, steady linear, unit square (median of", args.repeats, "runs)")
    print(
        f"{'cells':>10} {'auto s':>8} {'solver':>9} {'cycles':>6} {'multigrid s':>12} "
        f"{'max error K':>12}"
    )
    sizes = (100, 178, 316, 562, 1000)
    cells, t_auto, t_mg = [], [], []
    err_1m = 0.0
    for n in sizes:
        ta, err, kind, its = time_grid(n, "auto", args.repeats)
        tm, _, _, _ = (
            time_grid(n, "multigrid", args.repeats) if kind != "multigrid" else (ta, err, kind, its)
        )
        cells.append(n * n)
        t_auto.append(ta)
        t_mg.append(tm)
        err_1m = err
        print(f"{n * n:>10d} {ta:>8.3f} {kind:>9} {its:>6d} {tm:>12.3f} {err:>12.2e}")
    slope_auto = float(np.polyfit(np.log(cells), np.log(t_auto), 1)[0])
    slope_mg = float(np.polyfit(np.log(cells), np.log(t_mg), 1)[0])
    print(
        f"growth exponent of time vs cells, 1e4..1e6: auto {slope_auto:.2f}, "
        f"multigrid only {slope_mg:.2f}"
    )
    print(f"1e6 cells: {t_auto[-1]:.2f} s (target <= 3 s)")

    try:
        import skfem  # noqa: F401
    except ImportError:
        print("scikit-fem not installed: comparison skipped")
    else:
        # "same accuracy": the first mesh whose probe error is within 10 % of the grid
        # solver's at 1e6 cells
        print("scikit-fem, P1 triangles, default direct solver (mesh + assembly + solve)")
        chosen = None
        for m in (501, 1001):
            ts, es, dofs = time_skfem(m, 1)
            print(f"  {dofs:>9d} nodes: {ts:8.2f} s, max error {es:.2e} K")
            if es <= 1.1 * err_1m:
                chosen = (m, ts, es, dofs)
                break
        if chosen is None:
            print("  no tried mesh reached the grid solver's accuracy")
        else:
            tm, em, _ = time_skfem(chosen[0], 1, "multigrid")
            print(f"  same mesh with pyamg Ruge-Stuben + CG: {tm:.2f} s, max error {em:.2e} K")
            print(
                f"same accuracy ({chosen[2]:.2e} vs {err_1m:.2e} K): scikit-fem "
                f"{chosen[1]:.2f} s vs grid {t_auto[-1]:.2f} s: ratio "
                f"{chosen[1] / t_auto[-1]:.1f}x (goal >= 5x); with the same multigrid "
                f"{tm / t_auto[-1]:.1f}x"
            )

    print(f"peak memory, 1e6 cells: {peak_memory(1000):.2f} GB")
    if args.cap:
        print(f"peak memory, 4.0e6 cells (the default cap): {peak_memory(2000):.2f} GB")
        t0 = time.perf_counter()
        solve_grid(problem(2000))
        print(f"time, 4.0e6 cells: {time.perf_counter() - t0:.1f} s")


if __name__ == "__main__":
    main()
