"""The verification report: published benchmark cases run through the service's own pipeline.

Each case is a request exactly as a caller would send it, the dotted path of the checked value
in the response, the published value, its source and the tolerance. `GET /v1/verification`
and `make verify` run them all; a quality reviewer files the table with a calculation.

Published values here are quoted from memory where the source says so; the tolerance is then
half a unit in the last printed digit unless the source states its own acceptance band.
"""

from __future__ import annotations

import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any


@dataclass(frozen=True)
class Case:
    id: str
    title: str
    source: str
    kind: str                 # the solve family (path segment), or "eigenvalues"
    payload: dict[str, Any]   # the request body (eigenvalues: the query parameters)
    select: str               # dotted path of the checked value in the response
    published: float
    atol: float               # pass when |computed - published| <= atol + rtol |published|
    rtol: float = 0.0
    unit: str = ""


@dataclass(frozen=True)
class Outcome:
    case: Case
    computed: float | None
    difference: float | None
    tolerance: float
    passed: bool
    note: str


_ONE_TERM_SOURCE = ("one-term transient coefficient table of standard heat transfer textbooks "
                    "(e.g. Incropera et al., 6th ed.), from memory")

ONE_TERM = [
    # (geometry, Bi, first root, first coefficient)
    ("slab", 1.0, 0.8603, 1.1191),
    ("slab", 10.0, 1.4289, 1.2620),
    ("cylinder", 1.0, 1.2558, 1.2071),
    ("cylinder", 10.0, 2.1795, 1.5677),
    ("sphere", 1.0, 1.5708, 1.2732),
    ("sphere", 10.0, 2.8363, 1.9249),
]

_T4_PLATE = {
    "width": 0.6, "height": 1.0, "conductivity": 52.0,
    "edges": {"bottom": {"type": "temperature", "value": 100.0},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 750.0, "ambient": 0.0},
              "top": {"type": "convection", "film_coefficient": 750.0, "ambient": 0.0}},
    "points": [[0.6, 0.2]],
}
_T4_SOURCE = ("NAFEMS standard benchmark T4 (2D steady conduction with convection), target "
              "temperature 18.25 degC at point E (0.6 m, 0.2 m); from memory")

_T4_GRID = {**_T4_PLATE, "cells": {"nx": 60, "ny": 100}}
_T4_GRID_SOURCE = (_T4_SOURCE + "; tolerance +-0.05 K as for the series case (not recalled from "
                   "the document)")

# NAFEMS T3: a 0.1 m bar, k = 35.0 W/(m K), rho = 7200 kg/m^3, c = 440.5 J/(kg K), initially
# 0 degC, held at 0 degC at x = 0 and at 100 sin(pi t / 40) degC at x = 0.1 m. The sine is given
# as a time table every 0.2 s (its linear interpolation is within 0.003 K of the sine).
_T3_STEP = 0.2
_T3_GRID = {
    "width": 0.1, "height": 0.01, "cells": {"nx": 200, "ny": 1},
    "conductivity": 35.0, "density": 7200.0, "specific_heat": 440.5,
    "edges": {"left": {"type": "temperature", "value": 0.0},
              "right": {"type": "temperature", "value": {"table": [
                  [round(i * _T3_STEP, 10),
                   round(100.0 * math.sin(math.pi * i * _T3_STEP / 40.0), 10)]
                  for i in range(161)]}},
              "bottom": {"type": "insulated"}, "top": {"type": "insulated"}},
    "points": [[0.08, 0.005]],
    "transient": {"initial_temperature": 0.0, "times": [32.0], "time_step": _T3_STEP,
                  "scheme": "crank_nicolson"},
}
_T3_SOURCE = ("NAFEMS standard benchmark T3 (1D transient conduction with a sinusoidal end "
              "temperature), target 36.60 degC at x = 0.08 m, t = 32 s; from memory (an "
              "independent Fourier-series solution with numpy of the recalled inputs gives "
              "36.603 degC)")

CASES: list[Case] = [
    *(Case(id=f"eigen-{g}-bi{bi:g}-root", title=f"{g}, Bi = {bi:g}: first eigenvalue",
           source=_ONE_TERM_SOURCE, kind="eigenvalues",
           payload={"geometry": g, "biot": bi, "count": 1}, select="roots.0", published=mu,
           atol=5e-5) for g, bi, mu, _ in ONE_TERM),
    *(Case(id=f"eigen-{g}-bi{bi:g}-coefficient", title=f"{g}, Bi = {bi:g}: first coefficient",
           source=_ONE_TERM_SOURCE, kind="eigenvalues",
           payload={"geometry": g, "biot": bi, "count": 1}, select="coefficients.0",
           published=c1, atol=5e-5) for g, bi, _, c1 in ONE_TERM),
    Case(id="nafems-t4-series", title="NAFEMS T4 by the plate series", source=_T4_SOURCE,
         kind="plate", payload=_T4_PLATE, select="results.points.0.temperature",
         published=18.25, atol=0.05, unit="degC"),
    Case(id="wall-630w", title="Plane wall between two surface temperatures",
         source="worked example 'heat loss through a wall' in Cengel, Heat and Mass Transfer "
                "(from memory): 3 m x 5 m, 0.3 m, k = 0.9 W/(m K), faces 16 and 2 degC",
         kind="layers", payload={"geometry": "plane", "area": 15.0,
                                 "layers": [{"name": "brick", "thickness": 0.3,
                                             "conductivity": 0.9}],
                                 "inside": {"type": "temperature", "value": 16.0},
                                 "outside": {"type": "temperature", "value": 2.0}},
         select="results.heat_flow", published=630.0, atol=1e-6, unit="W"),
    *(Case(id=f"single-pane-{what.replace(' ', '-')}", title=f"Single-pane window: {what}",
           source="worked example 'heat loss through a single-pane window' in Cengel, Heat and "
                  "Mass Transfer (from memory): 0.8 m x 1.5 m, 8 mm glass k = 0.78, room 20 "
                  "degC h = 10, outdoors -10 degC h = 40",
           kind="layers", payload={"geometry": "plane", "area": 1.2,
                                   "layers": [{"name": "glass", "thickness": 0.008,
                                               "conductivity": 0.78}],
                                   "inside": {"type": "convection", "film_coefficient": 10.0,
                                              "ambient": 20.0},
                                   "outside": {"type": "convection", "film_coefficient": 40.0,
                                               "ambient": -10.0}},
           select=select, published=value, atol=atol, unit=unit)
      for what, select, value, atol, unit in (
          ("heat loss", "results.heat_flow", 266.0, 0.5, "W"),
          ("inner surface", "results.surface_temperatures.inside", -2.2, 0.05, "degC"))),
    Case(id="steam-main-121", title="Insulated steam pipe, heat loss per metre",
         source="worked example 'heat loss through an insulated steam pipe' in Cengel, Heat "
                "and Mass Transfer (from memory): cast iron k = 80, D 5/5.5 cm, 3 cm glass wool "
                "k = 0.05, steam 320 degC h = 60, air 5 degC h = 18",
         kind="layers", payload={"geometry": "cylinder", "inner_radius": 0.025,
                                 "layers": [{"name": "pipe", "thickness": 0.0025,
                                             "conductivity": 80.0},
                                            {"name": "glass wool", "thickness": 0.03,
                                             "conductivity": 0.05}],
                                 "inside": {"type": "convection", "film_coefficient": 60.0,
                                            "ambient": 320.0},
                                 "outside": {"type": "convection", "film_coefficient": 18.0,
                                             "ambient": 5.0}},
         select="results.heat_flow_per_length", published=121.0, atol=0.5, unit="W/m"),
    *(Case(id=f"long-rod-{name}", title=f"Very long 5 mm {name} rod as an infinite fin",
           source="worked example on very long rods as infinite fins in Incropera et al., 6th "
                  "ed. (from memory): base 100 degC, air 25 degC, h = 100 W/(m^2 K)",
           kind="fin", payload={"shape": "pin", "diameter": 0.005, "conductivity": k,
                                "film_coefficient": 100.0, "base_temperature": 100.0,
                                "ambient": 25.0, "tip": "infinite"},
           select="results.heat_flow", published=q, atol=0.05, unit="W")
      for name, k, q in (("copper", 398.0, 8.3), ("aluminium", 180.0, 5.6),
                         ("stainless", 14.0, 1.6))),
    Case(id="nafems-t4-grid", title="NAFEMS T4 by the finite-volume grid (60 x 100 cells)",
         source=_T4_GRID_SOURCE, kind="grid", payload=_T4_GRID,
         select="results.points.0.temperature", published=18.25, atol=0.05, unit="degC"),
    Case(id="nafems-t4-plate-grid", title="NAFEMS T4 by the plate with method grid",
         source=_T4_GRID_SOURCE, kind="plate", payload={**_T4_PLATE, "method": "grid"},
         select="results.points.0.temperature", published=18.25, atol=0.05, unit="degC"),
    Case(id="nafems-t3-grid", title="NAFEMS T3 by the finite-volume grid (transient, 200 cells)",
         source=_T3_SOURCE, kind="grid", payload=_T3_GRID,
         select="results.points.0.temperature", published=36.60, atol=0.005, unit="degC"),
]


def run_cases(solve: Callable[[str, dict[str, Any]], dict[str, Any]],
              cases: list[Case] | None = None) -> list[Outcome]:
    """Run every case with `solve(kind, payload) -> response body`; failures are outcomes."""
    outcomes = []
    for case in cases if cases is not None else CASES:
        tolerance = case.atol + case.rtol * abs(case.published)
        try:
            value = _select(solve(case.kind, case.payload), case.select)
            computed = float(value)
        except Exception as exc:  # a case that cannot run is reported, never hidden
            outcomes.append(Outcome(case, None, None, tolerance, False,
                                    f"did not run: {type(exc).__name__}: {exc}"))
            continue
        difference = computed - case.published
        passed = abs(difference) <= tolerance
        outcomes.append(Outcome(case, computed, difference, tolerance, passed,
                                "" if passed else "outside tolerance"))
    return outcomes


def _select(body: Any, path: str) -> Any:
    for part in path.split("."):
        body = body[part] if isinstance(body, dict) else body[int(part)]
    return body


def markdown_table(outcomes: list[Outcome]) -> str:
    lines = ["| case | published | computed | tolerance | result | source |",
             "| --- | --- | --- | --- | --- | --- |"]
    for o in outcomes:
        computed = "-" if o.computed is None else f"{o.computed:.6g}"
        lines.append(f"| {o.case.id} | {o.case.published:g} {o.case.unit} | {computed} | "
                     f"{o.tolerance:.2g} | {'pass' if o.passed else 'FAIL'} | "
                     f"{o.case.source} |")
    return "\n".join(lines)
