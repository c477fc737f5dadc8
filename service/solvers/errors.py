"""Exceptions raised by solvers for problems that cannot be solved as posed.

Running out of terms or iterations is *not* an exception: it is reported in the result's
`Convergence` record. The HTTP layer maps these exceptions to RFC 9457 problem details.
"""

from __future__ import annotations


class IllPosedError(ValueError):
    """The problem has no (unique) solution as posed, or the physics is rejected.

    Parameters
    ----------
    message : str
        Names the argument and the rule, e.g. "edges: all edges are flux or insulated and the
        net heat input is 12.5 W/m, so no steady state exists".
    field : str or None
        Dotted JSON path of the offending request field, when one field is to blame.
    reason : str
        Short stable code that becomes the problem ``type`` suffix: ``physics-rejected``
        (default), ``target-unreachable``, ``not-unique``, or ``validation-failed`` for an
        input the schema could not judge alone (e.g. a position outside the body).
    """

    def __init__(self, message: str, *, field: str | None = None,
                 reason: str = "physics-rejected") -> None:
        super().__init__(message)
        self.message = message
        self.field = field
        self.reason = reason


class TooLargeError(ValueError):
    """The work asked for exceeds a compute budget (maps to HTTP 413)."""

    def __init__(self, message: str, *, field: str | None = None) -> None:
        super().__init__(message)
        self.message = message
        self.field = field
