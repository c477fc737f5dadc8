"""The verification report: published benchmark cases run through the service's own pipeline.

Each case is a request exactly as a caller would send it, the dotted path of the checked value
in the response, the published value, its source and the tolerance. `GET /v1/verification`
and `make verify` run them all; a quality reviewer files the table with a calculation.

Published values here are quoted from memory where the source says so; the tolerance is then
half a unit in the last printed digit unless the source states its own acceptance band.
"""

from __future__ import annotations

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
