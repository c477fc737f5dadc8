"""The per-request time budget (SIGALRM soft deadline), with the Flask test client."""

from __future__ import annotations

import signal
import time

from service.app import create_app
from service.ops.deadline import TimeBudgetExceeded

BUDGET = 0.2


class TimerState:
    """The SIGALRM handler and real-time timer before a request (a test runner may own them)."""

    def __init__(self) -> None:
        self.handler = signal.getsignal(signal.SIGALRM)
        self.remaining = signal.getitimer(signal.ITIMER_REAL)[0]
        self.taken = time.monotonic()

    def assert_restored(self) -> None:
        assert signal.getsignal(signal.SIGALRM) is self.handler
        remaining = signal.getitimer(signal.ITIMER_REAL)[0]
        if self.remaining == 0:
            assert remaining == 0
        else:  # the earlier timer runs on, less the time spent
            spent = time.monotonic() - self.taken
            assert self.remaining - spent - 0.5 < remaining <= self.remaining


def _app_with_slow_views(budget: float = BUDGET):
    app = create_app({"TESTING": True, "TIME_BUDGET_SECONDS": budget})

    @app.get("/test/busy")
    def busy():  # pure-Python work, as a schema or a solver loop would do
        end = time.monotonic() + 5.0
        n = 0
        while time.monotonic() < end:
            n += 1
        return {"n": n}

    @app.get("/test/swallowing")
    def swallowing():  # a batch loop that turns every exception into a per-item error
        end = time.monotonic() + 5.0
        errors = 0
        while time.monotonic() < end:
            try:
                sum(range(1000))
            except Exception:  # noqa: BLE001 - the point of the test
                errors += 1
        return {"errors": errors}

    return app


def test_slow_request_is_stopped_with_a_413_stating_the_budget():
    client = _app_with_slow_views().test_client()
    state = TimerState()
    started = time.monotonic()
    response = client.get("/test/busy")
    elapsed = time.monotonic() - started
    assert response.status_code == 413
    body = response.get_json()
    assert body["type"] == "/problems/too-large"
    assert "time budget of 0.2 s" in body["detail"]
    assert body["diagnostics"] == {"time_budget_seconds": BUDGET}
    assert elapsed < 2.0  # the view alone would run 5 s
    state.assert_restored()


def test_a_swallowed_budget_exception_is_raised_again():
    client = _app_with_slow_views().test_client()
    started = time.monotonic()
    response = client.get("/test/swallowing")
    assert time.monotonic() - started < 3.0
    assert response.status_code == 413


def test_fast_requests_are_untouched_and_the_timer_is_cleared(plate_payload):
    client = _app_with_slow_views().test_client()
    state = TimerState()
    for _ in range(3):
        assert client.post("/v1/plate", json=plate_payload).status_code == 200
    state.assert_restored()


def test_an_earlier_timer_and_handler_are_restored(plate_payload):
    fired = []

    def outer_handler(signum, frame):
        fired.append(signum)

    previous = signal.signal(signal.SIGALRM, outer_handler)
    signal.setitimer(signal.ITIMER_REAL, 100.0)
    try:
        client = _app_with_slow_views().test_client()
        assert client.get("/test/busy").status_code == 413
        remaining, _ = signal.getitimer(signal.ITIMER_REAL)
        assert 90.0 < remaining <= 100.0
        assert signal.getsignal(signal.SIGALRM) is outer_handler
        assert fired == []
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, previous)


def test_probes_are_exempt_and_zero_turns_the_budget_off(monkeypatch):
    from service.ops import deadline

    off = _app_with_slow_views(budget=0)
    assert "full_dispatch_request" not in vars(off)  # Flask's own, unwrapped
    armed = []
    monkeypatch.setattr(deadline._DEADLINE, "arm", armed.append)
    client = _app_with_slow_views().test_client()
    for path in ("/healthz", "/readyz", "/metrics"):
        assert client.get(path).status_code == 200
    assert armed == []
    client.get("/v1/eigenvalues?geometry=slab&count=2")
    assert armed == [BUDGET]


def test_budget_exceeded_passes_through_except_exception():
    assert not issubclass(TimeBudgetExceeded, Exception)
