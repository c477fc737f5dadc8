"""The convergence record every solver result carries."""

from __future__ import annotations

from dataclasses import dataclass

#: Allowed values of `Convergence.status`.
STATUSES = ("converged", "max_terms", "max_iterations", "non_finite", "stagnated")


@dataclass(frozen=True)
class Convergence:
    """How far a result can be trusted.

    Attributes
    ----------
    status : str
        ``converged``, ``max_terms`` (a series ran out of terms), ``max_iterations`` (an
        iteration ran out of steps), ``non_finite`` (a NaN or infinity appeared) or
        ``stagnated`` (an iteration stopped improving).
    message : str
        One sentence for a human.
    terms : int or None
        Series terms used (the largest count over all evaluation points).
    iterations : int or None
        Iterations of a root finder, fixed-point or linear solver.
    error_estimate : float or None
        Estimated absolute error of reported temperatures, K (series: a tail bound; grid: a
        mesh-refinement estimate when asked).
    residual : float or None
        Final residual of an iteration, in the unit of the equation it solves (stated in
        `message` where not obvious).
    atol, rtol : float or None
        Tolerances asked of the solver (atol in K).
    cells : int or None
        Grid solvers: number of cells.
    energy_balance_error : float or None
        Grid solvers: global energy-balance error relative to the largest heat flow.
    """

    status: str
    message: str
    terms: int | None = None
    iterations: int | None = None
    error_estimate: float | None = None
    residual: float | None = None
    atol: float | None = None
    rtol: float | None = None
    cells: int | None = None
    energy_balance_error: float | None = None

    def __post_init__(self) -> None:
        if self.status not in STATUSES:
            raise ValueError(f"status must be one of {STATUSES}, got {self.status!r}")

    @property
    def converged(self) -> bool:
        return self.status == "converged"


def worst(*records: Convergence) -> Convergence:
    """Combine records of sub-solutions: the first non-converged one wins, else the one with the
    largest error estimate; terms and iterations are the maxima over all records."""
    if not records:
        raise ValueError("worst() needs at least one Convergence record")
    failing = [r for r in records if not r.converged]
    base = failing[0] if failing else max(records, key=lambda r: r.error_estimate or 0.0)
    terms = [r.terms for r in records if r.terms is not None]
    iterations = [r.iterations for r in records if r.iterations is not None]
    errors = [r.error_estimate for r in records if r.error_estimate is not None]
    return Convergence(
        status=base.status,
        message=base.message,
        terms=max(terms) if terms else None,
        iterations=max(iterations) if iterations else None,
        error_estimate=sum(errors) if errors else None,
        residual=base.residual,
        atol=base.atol,
        rtol=base.rtol,
        cells=base.cells,
        energy_balance_error=base.energy_balance_error,
    )
