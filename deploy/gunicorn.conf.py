"""gunicorn settings for the conduction service (`make serve`, the tests and the container).

Every value can be changed through an environment variable (CONDUCTION_BIND, ...), so the same
file serves a developer's machine and a container platform. The hooks at the end prepare the
shared state the workers need (the Prometheus multi-process directory, the drain marker) and
turn SIGTERM into "drain, then stop gracefully".

This file runs in the gunicorn master before gunicorn puts the working directory on sys.path,
so it imports nothing from the service at load time; `service.ops.logs` is named as a string
and imported later, when the master configures logging.
"""

from __future__ import annotations

import glob
import math
import multiprocessing
import os
import shutil
import tempfile
import time
from typing import Any

# Multi-threaded BLAS inside each worker slows the small matrix products the series solvers do
# (measured: 1.2x when quiet, far worse when the other core is busy): one BLAS thread per worker.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
             "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")


def available_cpus() -> int:
    """CPUs this process may use: the affinity mask, capped by a cgroup CPU quota (a container
    limit of 2 CPUs on a 64-core node gives 2, where multiprocessing.cpu_count() gives 64)."""
    try:
        cpus = len(os.sched_getaffinity(0))
    except (AttributeError, OSError):
        cpus = multiprocessing.cpu_count()
    quota = _cgroup_cpu_quota()
    if quota is not None:
        cpus = min(cpus, max(1, math.ceil(quota)))
    return max(1, cpus)


def _cgroup_cpu_quota() -> float | None:
    """CPU limit in CPUs from cgroup v2 (cpu.max) or v1 (cfs quota / period); None if unlimited."""
    try:
        with open("/sys/fs/cgroup/cpu.max") as handle:
            quota, period = handle.read().split()[:2]
        return None if quota == "max" else int(quota) / int(period)
    except (OSError, ValueError):
        pass
    try:
        with open("/sys/fs/cgroup/cpu/cpu.cfs_quota_us") as handle:
            quota_us = int(handle.read())
        with open("/sys/fs/cgroup/cpu/cpu.cfs_period_us") as handle:
            period_us = int(handle.read())
        return None if quota_us <= 0 else quota_us / period_us
    except (OSError, ValueError):
        return None


def _memory_dir() -> str | None:
    """/dev/shm when it is writable (a tmpfs: no disk I/O, and writable under a read-only root
    filesystem), else None (the system temp directory)."""
    return "/dev/shm" if os.access("/dev/shm", os.W_OK) else None


wsgi_app = "service.app:create_app()"
bind = os.environ.get("CONDUCTION_BIND", "127.0.0.1:8000")
# Sync workers, one per core, behaved best here (threaded workers with keep-alive sometimes
# piled every connection onto one worker). The per-request time budget also needs each request
# on a worker's main thread (see service/ops/deadline.py).
workers = int(os.environ.get("CONDUCTION_WORKERS") or available_cpus())
# gunicorn's sync worker with one step in front (service/ops/worker.py): a request is served
# only once it has arrived completely, so slow or half-sent requests wait in the worker's
# selector loop instead of holding the worker. Its bounds, read by the worker class itself:
# CONDUCTION_REQUEST_READ_SECONDS (10 s from connect to a complete request, then 408),
# CONDUCTION_PENDING_CONNECTIONS (200 incomplete requests per worker) and
# CONDUCTION_PENDING_BYTES (32 MiB buffered per worker); bodies are bounded by
# CONDUCTION_MAX_BODY_BYTES as in the app. gunicorn imports the class by this dotted path
# in the master, after it has put the working directory on sys.path (the container installs
# the package), and the module imports only the standard library and gunicorn there.
worker_class = "service.ops.worker.RequestBufferingWorker"
# Hard backstop behind the per-request time budget (CONDUCTION_TIME_BUDGET_SECONDS, 25 s by
# default): a worker silent for this long is killed. Keep it well above the budget.
timeout = int(os.environ.get("CONDUCTION_WORKER_TIMEOUT", "60"))
# On SIGTERM: first CONDUCTION_DRAIN_SECONDS of draining (readiness 503, still serving), then
# the listener closes and workers get this long to finish the request they are serving.
graceful_timeout = int(os.environ.get("CONDUCTION_GRACEFUL_TIMEOUT", "30"))
drain_seconds = float(os.environ.get("CONDUCTION_DRAIN_SECONDS", "0"))
# Keep-alive (service/ops/worker.py): a connection whose request and response allow it waits
# this long for its next request, at most CONDUCTION_KEEPALIVE_REQUESTS (100) requests, then
# closes so that connections keep spreading over the workers. Behind a proxy that keeps
# upstream connections open, set this above the proxy's idle timeout; 0 closes every
# connection after its response, as plain sync workers do.
keepalive = int(os.environ.get("CONDUCTION_KEEPALIVE_SECONDS", "5"))
# Spreadsheet GET requests carry the whole problem in the query string.
limit_request_line = int(os.environ.get("CONDUCTION_LIMIT_REQUEST_LINE", "16384"))
limit_request_field_size = 16384
# Restart workers now and then so any slow growth is bounded (with jitter to avoid herds). A
# restart costs about 2 s of CPU (imports, first solves) while the other workers carry the
# load: at 20,000 requests a worker answering reused answers restarted every 10 to 15 s under
# full load (measured), so the bound is set where restarts cost about 1 % at full load.
max_requests = int(os.environ.get("CONDUCTION_MAX_REQUESTS", "250000"))
max_requests_jitter = max_requests // 10
# No control socket: it lives at one fixed path per user ($HOME/.gunicorn), which several
# instances on one machine would share and a read-only container filesystem cannot hold, and
# its thread in the master is a hazard for every later fork.
control_socket_disable = True
# Worker heartbeat files in memory: a heartbeat on a slow or read-only disk would stall workers.
worker_tmp_dir = _memory_dir()

# Logs. The service writes one JSON line per request itself (service/ops/logs.py), so gunicorn's
# access log is off unless CONDUCTION_ACCESS_LOG names a file or "-" (stdout); its format has
# the path without the query string, which may carry a whole problem or an API key.
_access_log = os.environ.get("CONDUCTION_ACCESS_LOG", "")
accesslog = _access_log or None
access_log_format = '%(h)s "%(m)s %(U)s" %(s)s %(B)s %(M)sms %({x-request-id}o)s'
errorlog = "-"
loglevel = os.environ.get("CONDUCTION_LOG_LEVEL", "info").lower()
_log_format = os.environ.get("CONDUCTION_LOG_FORMAT", "json").lower()


def _logconfig(log_format: str, access_log: str, level: str) -> dict[str, Any] | None:
    """gunicorn's own messages as JSON lines (errors to stderr, access lines as configured)."""
    if log_format != "json":
        return None
    if not access_log:
        access: dict[str, Any] = {"level": "CRITICAL", "handlers": [], "propagate": False}
        handlers: dict[str, Any] = {}
    else:
        target = ({"class": "logging.StreamHandler", "stream": "ext://sys.stdout"}
                  if access_log == "-" else {"class": "logging.FileHandler",
                                             "filename": access_log})
        handlers = {"access": {**target, "formatter": "json"}}
        access = {"level": "INFO", "handlers": ["access"], "propagate": False}
    return {
        "version": 1,
        "disable_existing_loggers": False,
        "formatters": {"json": {"()": "service.ops.logs.JsonFormatter"}},
        "handlers": {
            "error_console": {"class": "logging.StreamHandler", "formatter": "json",
                              "stream": "ext://sys.stderr"},
            "console": {"class": "logging.StreamHandler", "formatter": "json",
                        "stream": "ext://sys.stdout"},
            **handlers,
        },
        "root": {"level": "WARNING", "handlers": ["console"]},
        "loggers": {
            "gunicorn.error": {"level": level.upper(), "handlers": ["error_console"],
                               "propagate": False},
            "gunicorn.access": access,
        },
    }


logconfig_dict = _logconfig(_log_format, _access_log, loglevel)

# The app, and with it prometheus-client, must be imported by each worker after on_starting has
# set PROMETHEUS_MULTIPROC_DIR: keep the app out of the master.
preload_app = False

_RUNTIME: dict[str, str] = {}


def _remove_orphaned_runtime_dirs(base: str) -> None:
    """Runtime directories of masters that were killed (on_exit never ran) fill a tmpfs."""
    for path in glob.glob(os.path.join(base, "conduction-*", "master.pid")):
        try:
            with open(path) as handle:
                pid = int(handle.read())
            os.kill(pid, 0)
        except ProcessLookupError:
            shutil.rmtree(os.path.dirname(path), ignore_errors=True)
        except (OSError, ValueError):
            continue  # another user's, or unreadable: leave it


def on_starting(server: Any) -> None:
    """Make the shared runtime directory: Prometheus samples and the drain marker.

    The metrics directory is CONDUCTION_METRICS_DIR (or PROMETHEUS_MULTIPROC_DIR) when set,
    else a fresh directory; either way samples left by an earlier run are removed, or they
    would be counted again.
    """
    _remove_orphaned_runtime_dirs(_memory_dir() or tempfile.gettempdir())
    run_dir = tempfile.mkdtemp(prefix="conduction-", dir=_memory_dir())
    _RUNTIME["run_dir"] = run_dir
    with open(os.path.join(run_dir, "master.pid"), "w") as handle:
        handle.write(str(os.getpid()))
    metrics_dir = (os.environ.get("CONDUCTION_METRICS_DIR")
                   or os.environ.get("PROMETHEUS_MULTIPROC_DIR")
                   or os.path.join(run_dir, "metrics"))
    os.makedirs(metrics_dir, exist_ok=True)
    for stale in glob.glob(os.path.join(metrics_dir, "*.db")):
        os.remove(stale)
    os.environ["PROMETHEUS_MULTIPROC_DIR"] = metrics_dir
    os.environ["CONDUCTION_DRAIN_FILE"] = os.path.join(run_dir, "draining")
    server.log.info("runtime directory %s, metrics in %s", run_dir, metrics_dir)


def when_ready(server: Any) -> None:
    """Make SIGTERM drain first: readiness turns 503 at once, the instance keeps serving for
    CONDUCTION_DRAIN_SECONDS so the platform stops routing to it, then the usual graceful stop
    (listener closed, each worker finishes its request within graceful_timeout). A second
    SIGTERM, SIGINT or SIGQUIT stops at once as usual."""
    marker = os.environ["CONDUCTION_DRAIN_FILE"]
    stop_at: list[float] = []
    original_term = server.handle_term
    original_manage = server.manage_workers

    def handle_term() -> None:
        with open(marker, "w") as handle:
            handle.write(str(os.getpid()))
        if stop_at or drain_seconds <= 0:
            original_term()  # raises StopIteration: gunicorn's graceful stop
        stop_at.append(time.monotonic() + drain_seconds)
        server.log.info("SIGTERM: draining for %g s before stopping", drain_seconds)

    def manage_workers() -> None:
        # the master loop calls this at least once a second
        if stop_at and time.monotonic() >= stop_at[0]:
            server.log.info("drain period over: stopping gracefully")
            raise StopIteration
        original_manage()

    server.handle_term = handle_term
    server.manage_workers = manage_workers


def child_exit(server: Any, worker: Any) -> None:
    """Drop the live-gauge samples of a worker that has gone (in-flight requests)."""
    from prometheus_client import multiprocess

    multiprocess.mark_process_dead(worker.pid)


def on_exit(server: Any) -> None:
    run_dir = _RUNTIME.get("run_dir")
    if run_dir:
        shutil.rmtree(run_dir, ignore_errors=True)
