"""Compute budgets: how much work one request may ask for.

The HTTP layer fills `CURRENT_BUDGETS` from the app configuration (environment variables with
the CONDUCTION_ prefix, see README); schemas refuse oversized work with `TooLargeError` (413)
before anything is allocated.
"""

from __future__ import annotations

from contextvars import ContextVar
from dataclasses import dataclass

from service.solvers.errors import TooLargeError


@dataclass(frozen=True)
class Budgets:
    max_points: int = 10_000            # requested evaluation points per request
    max_output_values: int = 1_000_000  # output grid values (nx * ny, or times x positions)
    max_series_terms: int = 20_000      # series terms per sub-problem and point
    max_cells: int = 1_000_000          # finite-volume cells (x time steps for transients)
    max_time_steps: int = 100_000       # transient steps of the grid solver
    max_profile_points: int = 10_000    # points in one boundary profile or table
    max_batch_items: int = 1_000        # items in one batch
    max_sweep_cases: int = 1_000        # cases in one sweep


DEFAULT_BUDGETS = Budgets()
def refuse_profile_points(data: object) -> None:
    """413 before parsing when a raw request asks for more profile points than allowed."""
    if not isinstance(data, dict):
        return
    limit = CURRENT_BUDGETS.get().max_profile_points
    points = data.get("profile_points")
    if isinstance(points, int) and not isinstance(points, bool) and points > limit:
        raise TooLargeError(f"profile_points: {points} asked, the limit is {limit}",
                            field="profile_points")


CURRENT_BUDGETS: ContextVar[Budgets] = ContextVar("budgets", default=DEFAULT_BUDGETS)  # noqa: B039 - frozen
