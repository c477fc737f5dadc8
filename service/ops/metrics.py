"""Prometheus metrics, multi-process aware, served at GET /metrics.

Under gunicorn every worker is its own process: deploy/gunicorn.conf.py points
PROMETHEUS_MULTIPROC_DIR at a fresh directory before any worker starts, each worker writes its
samples to memory-mapped files there, and a scrape of any worker merges them all
(`MultiProcessCollector`). Without that variable (the Flask test client, `flask run`) the
metrics live in this process's default registry.

Metrics (all prefixed `conduction_`):

- `http_requests_total{family, route, method, status}`: requests answered. `route` is the URL
  rule (`/v1/plate`) or `unmatched`; `family` the solve family behind the route (`plate`), empty
  for other routes.
- `http_request_duration_seconds{family, route, status}`: latency histogram, from the first
  `before_request` to the response object (body transfer excluded).
- `http_requests_in_flight`: requests being served, summed over live workers.
- `solve_duration_seconds{family, method, outcome}`: time in the solver proper (schema
  validation and dumping excluded), per solve (a batch item counts as one); `outcome` is the
  Convergence status.
- `series_terms{family}`, `grid_cells{family}`, `solver_iterations{family}`: histograms of the
  Convergence record's `terms`, `cells` and `iterations` where the solver reports them.
- `time_budget_exceeded_total{route}`, `auth_failures_total{reason}`.
- `connections_dropped_total{reason}`: connections the request-buffering worker
  (service/ops/worker.py) closed or answered itself instead of serving, per `DROP_REASONS`:
  `expired` (no complete request within CONDUCTION_REQUEST_READ_SECONDS: a 408, or a silent
  close when nothing was sent), `evicted` (closed, oldest first, to stay within
  CONDUCTION_PENDING_CONNECTIONS or CONDUCTION_PENDING_BYTES, or when accept() ran out of file
  descriptors), `too_large` (a chunked body past CONDUCTION_MAX_BODY_BYTES, answered 413 by
  the worker) and `line_too_long` (a request line past limit_request_line, answered 414).
  Not counted here: clients that hang up before finishing (their own choice), connections
  closed because the worker is stopping, and refusals
  the app or gunicorn's parser answer (a declared Content-Length over the limit gets the
  app's 413 and shows in `http_requests_total`). Incremented by the worker only when it
  drops a connection: served requests cost nothing.
- `plate_models_total{result}`: plate solves by whether the plate's series model was `kept`
  (found in the worker's cache of plate models, `service.solvers.plate.CORES`) or `built`;
  batch and sweep items count one each, like requests. Grid-method solves use no model and
  are not counted.
- `plate_model_bytes`: bytes held by the kept plate models, summed over live workers (each
  worker's value is set after each of its plate solves).
- `answers_total{family, result}`: solve answers `reused` (an identical problem answered
  earlier by the same worker, service/api/answers.py) or `computed`, counted only while answer
  reuse is on (CONDUCTION_ANSWER_CACHE_BYTES > 0). Batch and sweep items are always computed
  and not counted here.
- `answer_cache_bytes`: bytes held by the kept answers, summed over live workers.
- `build_info{version}`: always 1.

The metric objects are module-level because a Prometheus registry is process-wide by design:
creating them per app would register duplicate series.
"""

from __future__ import annotations

import os
import time
from typing import TYPE_CHECKING, Any

from prometheus_client import (
    CONTENT_TYPE_LATEST,
    REGISTRY,
    CollectorRegistry,
    Counter,
    Gauge,
    Histogram,
    generate_latest,
)
from prometheus_client import multiprocess as _multiprocess

from service import __version__

if TYPE_CHECKING:
    from flask import Flask, Response

    from service.solvers.convergence import Convergence

MULTIPROCESS_ENV = "PROMETHEUS_MULTIPROC_DIR"

#: Latency buckets, s: from a cached series at a few points (about 1 ms) to the time budget.
LATENCY_BUCKETS = (0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0,
                   30.0, 60.0)
TERM_BUCKETS = (1, 3, 10, 30, 100, 300, 1_000, 3_000, 10_000, 30_000)
CELL_BUCKETS = (100, 1_000, 10_000, 30_000, 100_000, 300_000, 1_000_000, 3_000_000, 10_000_000)
ITERATION_BUCKETS = (1, 3, 10, 30, 100, 300, 1_000, 10_000, 100_000)

STANDARD_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})

HTTP_REQUESTS = Counter(
    "conduction_http_requests_total", "HTTP requests answered.",
    ("family", "route", "method", "status"))
HTTP_DURATION = Histogram(
    "conduction_http_request_duration_seconds",
    "Time from the start of request handling to the response object, s.",
    ("family", "route", "status"), buckets=LATENCY_BUCKETS)
IN_FLIGHT = Gauge(
    "conduction_http_requests_in_flight", "Requests being served.",
    multiprocess_mode="livesum")
SOLVE_DURATION = Histogram(
    "conduction_solve_duration_seconds", "Time in the solver proper, per solve, s.",
    ("family", "method", "outcome"), buckets=LATENCY_BUCKETS)
SERIES_TERMS = Histogram(
    "conduction_series_terms", "Series terms used per solve (Convergence.terms).",
    ("family",), buckets=TERM_BUCKETS)
GRID_CELLS = Histogram(
    "conduction_grid_cells", "Grid cells per solve (Convergence.cells).",
    ("family",), buckets=CELL_BUCKETS)
SOLVER_ITERATIONS = Histogram(
    "conduction_solver_iterations", "Solver iterations per solve (Convergence.iterations).",
    ("family",), buckets=ITERATION_BUCKETS)
TIME_BUDGET_EXCEEDED = Counter(
    "conduction_time_budget_exceeded_total",
    "Requests stopped because they used up the per-request time budget.", ("route",))
AUTH_FAILURES = Counter(
    "conduction_auth_failures_total", "Requests refused by the API-key check.", ("reason",))
#: Why the worker dropped a connection (the only values of `connections_dropped_total`'s
#: `reason`; see the module docstring).
DROP_REASONS = ("expired", "evicted", "too_large", "line_too_long")
CONNECTIONS_DROPPED = Counter(
    "conduction_connections_dropped_total",
    "Connections the request-buffering worker closed or answered itself instead of serving.",
    ("reason",))
PLATE_MODELS = Counter(
    "conduction_plate_models_total",
    "Plate solves by whether the plate's series model was kept from an earlier request or "
    "built.", ("result",))
PLATE_MODEL_BYTES = Gauge(
    "conduction_plate_model_bytes", "Bytes held by the kept plate series models.",
    multiprocess_mode="livesum")
ANSWERS = Counter(
    "conduction_answers_total",
    "Solve answers by whether they were reused (an identical problem answered earlier by this "
    "worker) or computed.", ("family", "result"))
ANSWER_CACHE_BYTES = Gauge(
    "conduction_answer_cache_bytes", "Bytes held by the kept answers.",
    multiprocess_mode="livesum")
BUILD_INFO = Gauge(
    "conduction_build_info", "Service version (value always 1).", ("version",),
    multiprocess_mode="max")


#: Decided once, at import, as prometheus-client decides where its samples live.
_MULTIPROCESS = bool(os.environ.get(MULTIPROCESS_ENV))


def multiprocess_enabled() -> bool:
    return _MULTIPROCESS


def observe_solve(kind: str, method: str, convergence: Convergence, seconds: float) -> None:
    """Record one solve: solver time, and the terms, cells and iterations it reports."""
    SOLVE_DURATION.labels(kind, method, convergence.status).observe(seconds)
    if convergence.terms is not None:
        SERIES_TERMS.labels(kind).observe(convergence.terms)
    if convergence.cells is not None:
        GRID_CELLS.labels(kind).observe(convergence.cells)
    if convergence.iterations is not None:
        SOLVER_ITERATIONS.labels(kind).observe(convergence.iterations)


# bound once: a labelled child costs a dictionary look-up and a lock per `labels()` call
_PLATE_MODELS_KEPT = PLATE_MODELS.labels("kept")
_PLATE_MODELS_BUILT = PLATE_MODELS.labels("built")


def observe_plate_models(kept: int, built: int, nbytes: int) -> None:
    """Record plate models kept and built by one solve, and the bytes the cache now holds
    (counts below 1, e.g. after the cache was cleared mid-solve, are not recorded)."""
    if kept > 0:
        _PLATE_MODELS_KEPT.inc(kept)
    if built > 0:
        _PLATE_MODELS_BUILT.inc(built)
    PLATE_MODEL_BYTES.set(nbytes)


def observe_answer(kind: str, reused: bool) -> None:
    """Record one solve answer, reused or computed (only while answer reuse is on)."""
    ANSWERS.labels(kind, "reused" if reused else "computed").inc()


def observe_answer_bytes(nbytes: int) -> None:
    ANSWER_CACHE_BYTES.set(nbytes)


def connection_drop_counters() -> dict[str, Any]:
    """reason -> its child of `connections_dropped_total`, for the worker (every reason is
    created at once, so each series is exported from 0 before the first drop)."""
    return {reason: CONNECTIONS_DROPPED.labels(reason) for reason in DROP_REASONS}


def exposition() -> tuple[bytes, str]:
    """The current metrics in the Prometheus text format, merged over workers if need be."""
    if multiprocess_enabled():
        registry = CollectorRegistry()
        _multiprocess.MultiProcessCollector(registry)  # type: ignore[no-untyped-call]
        return generate_latest(registry), CONTENT_TYPE_LATEST
    return generate_latest(REGISTRY), CONTENT_TYPE_LATEST


def family_routes() -> dict[str, str]:
    """URL rule -> solve family, from the families registered so far."""
    from service.api.common import FAMILIES

    return {family.path: kind for kind, family in FAMILIES.items()}


def install(app: Flask) -> None:
    """Count and time every request, and serve GET /metrics."""
    from flask import Blueprint, Response, g, request

    BUILD_INFO.labels(__version__).set(1)

    @app.before_request
    def _start() -> None:
        rule = request.url_rule.rule if request.url_rule is not None else "unmatched"
        g.route = rule
        g.family = family_routes().get(rule, "")
        IN_FLIGHT.inc()
        g.in_flight = True

    @app.after_request
    def _count(response: Response) -> Response:
        status = str(response.status_code)
        route, family = g.get("route", "unmatched"), g.get("family", "")
        method = request.method if request.method in STANDARD_METHODS else "other"
        HTTP_REQUESTS.labels(family, route, method, status).inc()
        started = g.get("started")
        if started is not None:
            HTTP_DURATION.labels(family, route, status).observe(time.perf_counter() - started)
        return response

    @app.teardown_request
    def _done(exc: BaseException | None) -> None:
        if g.pop("in_flight", False):
            IN_FLIGHT.dec()

    bp = Blueprint("ops_metrics", __name__)

    @bp.get("/metrics")
    def metrics() -> Any:
        body, content_type = exposition()
        return Response(body, content_type=content_type)

    app.register_blueprint(bp)
