# TEMPORARY STUB for framework testing; replaced by the real solver from the plate branch.
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from service.solvers.convergence import Convergence
from service.solvers.safety import Limits, Location, SafetyReport, Scope, check_limits


@dataclass(frozen=True)
class Edge:
    type: str
    value: float | None = None
    profile: tuple[tuple[float, float], ...] | None = None
    film_coefficient: float | None = None
    ambient: float | None = None

@dataclass(frozen=True)
class PlateProblem:
    width: float; height: float; conductivity: float
    bottom: Edge; right: Edge; top: Edge; left: Edge
    generation: float = 0.0
    points: tuple[tuple[float, float], ...] = ()
    grid: tuple[int, int] | None = None
    atol: float | None = None
    max_terms: int = 20000
    limits: Limits = field(default_factory=Limits)

@dataclass(frozen=True)
class EdgeHeatFlow:
    bottom: float | None; right: float | None; top: float | None; left: float | None

@dataclass(frozen=True)
class EnergyBalance:
    net: float | None; relative_error: float | None

@dataclass(frozen=True)
class PlateResult:
    method: str
    point_coordinates: np.ndarray
    point_temperatures: np.ndarray
    grid_x: np.ndarray | None
    grid_y: np.ndarray | None
    grid_temperature: np.ndarray | None
    edge_heat_flow: EdgeHeatFlow
    generation_heat: float
    energy_balance: EnergyBalance
    hottest: Location
    coldest: Location
    convergence: Convergence
    safety: SafetyReport
    warnings: tuple[str, ...]

def solve_plate(p: PlateProblem) -> PlateResult:
    pts = np.array(p.points, dtype=float).reshape(-1, 2)
    t = np.full(len(pts), 50.0)
    gx = gy = gt = None
    if p.grid:
        gx = np.linspace(0, p.width, p.grid[0]); gy = np.linspace(0, p.height, p.grid[1]); gt = np.full((p.grid[1], p.grid[0]), 50.0)
    hot = Location(100.0, "bottom edge", (0.3, 0.0)); cold = Location(0.0, "top edge", (0.3, 1.0))
    return PlateResult("series", pts, t, gx, gy, gt, EdgeHeatFlow(1.0, -1.0, None, 0.0), 0.0, EnergyBalance(0.0, 0.0), hot, cold,
                       Convergence("converged", "stub", terms=3, error_estimate=1e-7, atol=1e-6),
                       check_limits(p.limits, Scope("body", hot, cold)), ())
