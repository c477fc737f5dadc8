"""gunicorn settings for the conduction service (`make serve`, the tests and the container).

Every value can be changed through an environment variable (CONDUCTION_BIND, ...), so the same
file serves a developer's machine and a container platform.
"""

from __future__ import annotations

import multiprocessing
import os

# Multi-threaded BLAS inside each worker slows the small matrix products the series solvers do
# (measured: 1.2x when quiet, far worse when the other core is busy): one BLAS thread per worker.
for _var in ("OPENBLAS_NUM_THREADS", "OMP_NUM_THREADS", "MKL_NUM_THREADS",
             "NUMEXPR_NUM_THREADS"):
    os.environ.setdefault(_var, "1")

wsgi_app = "service.app:create_app()"
bind = os.environ.get("CONDUCTION_BIND", "127.0.0.1:8000")
# Plain sync workers, one per core, behaved best here (threaded workers with keep-alive
# sometimes piled every connection onto one worker).
workers = int(os.environ.get("CONDUCTION_WORKERS", multiprocessing.cpu_count()))
worker_class = "sync"
timeout = int(os.environ.get("CONDUCTION_WORKER_TIMEOUT", "60"))
graceful_timeout = int(os.environ.get("CONDUCTION_GRACEFUL_TIMEOUT", "30"))
keepalive = 2
# Spreadsheet GET requests carry the whole problem in the query string.
limit_request_line = int(os.environ.get("CONDUCTION_LIMIT_REQUEST_LINE", "16384"))
limit_request_field_size = 16384
# Restart workers now and then so any slow growth is bounded (with jitter to avoid herds).
max_requests = int(os.environ.get("CONDUCTION_MAX_REQUESTS", "20000"))
max_requests_jitter = 2000
accesslog = os.environ.get("CONDUCTION_ACCESS_LOG", "-")
errorlog = "-"
loglevel = os.environ.get("CONDUCTION_LOG_LEVEL", "info").lower()
