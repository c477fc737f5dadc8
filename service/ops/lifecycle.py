"""Readiness: GET /readyz answers 503 once the instance is draining.

On SIGTERM the gunicorn master (deploy/gunicorn.conf.py) creates a marker file, keeps the
listening socket and the workers running for CONDUCTION_DRAIN_SECONDS so the platform sees the
instance go unready and stops sending it work, then stops the usual graceful way: the listener
closes and each worker finishes the request it is serving (up to CONDUCTION_GRACEFUL_TIMEOUT)
before it exits. The master tells the workers where the marker lives through
CONDUCTION_DRAIN_FILE; a worker started later (after max_requests) reads the same file, so no
signal can be missed. Liveness (/healthz) stays 200 throughout: the process is healthy, just
leaving.
"""

from __future__ import annotations

import os
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from flask import Flask, Response

READINESS_PATH = "/readyz"


def draining(marker: str) -> bool:
    """True once the drain marker exists (always False when no marker path is configured)."""
    return bool(marker) and os.path.exists(marker)


def install(app: Flask) -> None:
    from flask import request

    from service.problems import problem_response

    marker = str(app.config["DRAIN_FILE"])

    @app.before_request
    def _readiness() -> Response | None:
        if request.path == READINESS_PATH and draining(marker):
            return problem_response(
                "/problems/unavailable",
                "This instance is shutting down: it finishes the requests it has and takes no "
                "new ones.", headers={"Retry-After": "5"})
        return None
