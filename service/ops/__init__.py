"""Operations: request IDs and JSON logs, API keys, readiness, the time budget and metrics.

`install_ops(app)` is the one entry point (called by `create_app`). This package is imported by
the gunicorn master too (the JSON log formatter, the container health check), so importing it
must stay cheap: the submodules that need Flask or prometheus-client are imported inside
`install_ops`. In particular prometheus-client must not be imported before gunicorn's
`on_starting` hook has set PROMETHEUS_MULTIPROC_DIR, or the workers would count in private,
single-process memory.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

if TYPE_CHECKING:
    from flask import Flask


def install_ops(app: Flask) -> None:
    """Wire the operational machinery into `app`.

    Order matters: Flask runs `before_request` functions in registration order and
    `after_request` functions in reverse. The request ID comes first (so every problem and log
    line carries it), then metrics, readiness, keys, and last the time budget (armed only for
    requests that passed the key check; disarmed before any other `after_request` runs).
    """
    from service.ops import deadline, keys, lifecycle, logs, metrics

    logs.install(app)
    metrics.install(app)
    lifecycle.install(app)
    keys.install(app)
    deadline.install(app)
