"""The per-request time budget (CONDUCTION_TIME_BUDGET_SECONDS).

The size budgets (points, output values, cells, terms, batch items, sweep cases, body bytes)
refuse oversized work before it starts. This budget bounds what they cannot foresee: a request
that is within every size limit but still slow (a stiff transient, a loaded machine, a slow
upload). It is a soft deadline with a hard backstop:

- Soft: when the budget is used up, SIGALRM raises `TimeBudgetExceeded` in the request, which
  becomes a 413 `/problems/too-large` problem stating the budget. Like KeyboardInterrupt it
  derives from BaseException, so the `except Exception` of a batch loop or a library cannot
  swallow it; `finally` blocks and context managers still run. Python checks for signals
  between bytecodes, so one long native call (a single sparse factorisation, say) finishes
  before the exception is raised: the budget is exceeded by at most the longest such call.
  Should something swallow it anyway (a bare `except:`), it is raised again every
  `REPEAT_SECONDS` until the request ends.
- Hard: gunicorn's worker timeout (CONDUCTION_WORKER_TIMEOUT, larger than the budget) kills a
  worker that is stuck in native code; that caller sees the connection close.

Signals reach only the main thread, so the soft deadline is armed only there (gunicorn's sync
workers, which this service uses, serve each request on the main thread; under a threaded
server it stays off and only the hard backstop applies). Probes and /metrics are exempt. A
timer already running when a request starts (a test runner's own timeout) is restored, less
the time spent, when the request ends.
"""

from __future__ import annotations

import logging
import signal
import threading
import time
from types import FrameType
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from flask import Flask, Response

log = logging.getLogger("service.deadline")

EXEMPT_PATHS = frozenset({"/healthz", "/readyz", "/metrics"})
#: Interval at which a swallowed TimeBudgetExceeded is raised again, s.
REPEAT_SECONDS = 0.25


class TimeBudgetExceeded(BaseException):  # noqa: N818 - reads as the event it reports
    """The request used up its time budget. A BaseException, like KeyboardInterrupt, so that
    per-item error handling (`except Exception`) cannot swallow it."""

    def __init__(self, budget: float) -> None:
        super().__init__(f"time budget of {budget:g} s used up")
        self.budget = budget


class _Deadline:
    """The armed state of this process's one real-time timer."""

    def __init__(self) -> None:
        self.armed = False
        self.budget = 0.0
        self.started = 0.0
        self.previous_handler: Any = None
        self.previous_timer = (0.0, 0.0)

    def arm(self, budget: float) -> None:
        if self.armed or threading.current_thread() is not threading.main_thread():
            return
        self.budget = budget
        self.started = time.monotonic()
        self.previous_handler = signal.signal(signal.SIGALRM, self._on_alarm)
        self.armed = True  # before the timer starts, so even an instant alarm counts
        self.previous_timer = signal.setitimer(signal.ITIMER_REAL, budget)

    def disarm(self) -> None:
        if not self.armed:
            return
        self.armed = False
        signal.setitimer(signal.ITIMER_REAL, 0)
        # None: the earlier handler was not installed from Python; the default is the best guess
        signal.signal(signal.SIGALRM, self.previous_handler or signal.SIG_DFL)
        remaining, interval = self.previous_timer
        if remaining > 0:
            # give the earlier timer back what is left of it (at least a moment)
            left = max(remaining - (time.monotonic() - self.started), 1e-3)
            signal.setitimer(signal.ITIMER_REAL, left, interval)

    def _on_alarm(self, signum: int, frame: FrameType | None) -> None:
        if not self.armed:
            return
        signal.setitimer(signal.ITIMER_REAL, REPEAT_SECONDS)  # in case it is swallowed
        raise TimeBudgetExceeded(self.budget)


_DEADLINE = _Deadline()


def install(app: Flask) -> None:
    """Arm the deadline for each request and answer 413 when it fires."""
    budget = float(app.config["TIME_BUDGET_SECONDS"])
    if budget <= 0:
        return

    from flask import g, request

    from service.ops.metrics import TIME_BUDGET_EXCEEDED
    from service.problems import problem_response

    if threading.current_thread() is not threading.main_thread():
        log.warning("time budget: not on the main thread, only the worker timeout applies")

    @app.before_request
    def _arm() -> None:
        if request.path not in EXEMPT_PATHS:
            _DEADLINE.arm(budget)

    @app.after_request
    def _disarm(response: Response) -> Response:
        # registered last, so it runs first among the after_request functions
        _DEADLINE.disarm()
        return response

    @app.teardown_request
    def _disarm_always(exc: BaseException | None) -> None:
        _DEADLINE.disarm()

    def over_budget(exc: TimeBudgetExceeded) -> Response:
        TIME_BUDGET_EXCEEDED.labels(g.get("route", "unmatched")).inc()
        log.warning("time budget of %g s used up", exc.budget,
                    extra={"fields": {"event": "time_budget_exceeded",
                                      "time_budget_seconds": exc.budget}})
        return problem_response(
            "/problems/too-large",
            f"The request used up its time budget of {exc.budget:g} s before finishing: ask "
            "for less work (fewer points, cells, time steps or batch items) or split it.",
            diagnostics={"time_budget_seconds": exc.budget})

    dispatch = app.full_dispatch_request

    def full_dispatch_request() -> Response:
        # Flask's own handlers catch Exception only: a BaseException raised anywhere between
        # the first before_request and the last after_request arrives here.
        try:
            return dispatch()
        except TimeBudgetExceeded as exc:
            _DEADLINE.disarm()
            return app.finalize_request(over_budget(exc), from_error_handler=True)

    app.full_dispatch_request = full_dispatch_request  # type: ignore[method-assign]
