"""JSON logs with the request ID, and the request ID itself.

One JSON object per line: `time` (UTC, ISO 8601), `level`, `logger`, `message`, `request_id`
(when a request is being served) and any `fields` passed with `extra={"fields": {...}}`.
Every request produces one `request` line (method, route, path without its query string,
status, duration, family) at INFO, or at DEBUG for probes and metric scrapes.

What never reaches a log: request bodies, query strings (a spreadsheet GET carries the whole
problem and possibly an `api_key` there), headers, API keys. As a second line of defence the
formatter masks `api_key=...` values, bearer tokens and query strings in any message, including
gunicorn's own (see `redact`).

gunicorn's master process imports `JsonFormatter` through `logconfig_dict`
(deploy/gunicorn.conf.py), so this module imports only the standard library (and orjson when
present) and nothing of Flask or prometheus-client.
"""

from __future__ import annotations

import json
import logging
import re
import sys
import time
import uuid
from contextvars import ContextVar
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from flask import Flask, Response

REQUEST_ID_HEADER = "X-Request-ID"
MAX_REQUEST_ID_LENGTH = 128

#: The ID of the request this process is serving ("" between requests). A context variable so
#: log records made anywhere (solvers excepted: they do not log) can carry it.
REQUEST_ID: ContextVar[str] = ContextVar("request_id", default="")  # noqa: B039 - str

#: Routes logged at DEBUG rather than INFO: probes and scrapes would drown everything else.
QUIET_ROUTES = frozenset({"/healthz", "/readyz", "/metrics"})

_REDACTIONS = (
    # api_key=<value> in a query string or form body
    (re.compile(r"(?i)(api_key=)[^&\s\"']+"), r"\1[redacted]"),
    # Authorization: Bearer <token>
    (re.compile(r"(?i)(bearer\s+)[^\s\"',;]+"), r"\1[redacted]"),
    # X-API-Key: <token>
    (re.compile(r"(?i)(x-api-key[\"']?\s*[:=]\s*[\"']?)[^\s\"',;]+"), r"\1[redacted]"),
    # any other query string on a path: it may hold a whole problem
    (re.compile(r"(/[^\s?\"']*)\?[^\s\"']+"), r"\1?[query omitted]"),
)


_TRIGGERS = ("?", "api_key", "bearer", "x-api-key")


def redact(text: str) -> str:
    """Mask API keys, bearer tokens and query strings in a log message."""
    lowered = text.lower()
    if not any(trigger in lowered for trigger in _TRIGGERS):
        return text  # the common case, without running the patterns
    for pattern, replacement in _REDACTIONS:
        text = pattern.sub(replacement, text)
    return text


def _dumps(entry: dict[str, Any]) -> str:
    return json.dumps(entry, default=str)


try:  # orjson (a service dependency) is about 15 times faster; the standard library will do
    import orjson

    def _dumps(entry: dict[str, Any]) -> str:  # noqa: F811 - the faster twin
        return orjson.dumps(entry, default=str).decode()
except ImportError:  # pragma: no cover - orjson is installed with the service
    pass


class JsonFormatter(logging.Formatter):
    """One JSON object per line; see the module docstring for the fields."""

    CORE_KEYS = ("time", "level", "logger", "message", "request_id", "exception")

    def format(self, record: logging.LogRecord) -> str:
        entry: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, UTC).isoformat(
                timespec="milliseconds").replace("+00:00", "Z"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": redact(record.getMessage()),
        }
        request_id = getattr(record, "request_id", None) or REQUEST_ID.get()
        if request_id:
            entry["request_id"] = request_id
        fields = getattr(record, "fields", None)
        if isinstance(fields, dict):
            for key, value in fields.items():
                if key not in self.CORE_KEYS:
                    entry[key] = value
        if record.exc_info:
            entry["exception"] = redact(self.formatException(record.exc_info))
        return _dumps(entry)


class StdoutHandler(logging.Handler):
    """Writes to whatever `sys.stdout` is at the time (test runners swap it)."""

    def emit(self, record: logging.LogRecord) -> None:
        try:
            stream = sys.stdout
            stream.write(self.format(record) + "\n")
            stream.flush()
        except Exception:  # noqa: BLE001 - logging must never break a request
            self.handleError(record)


def configure_service_logger(log_format: str, level: str) -> logging.Logger:
    """Give the `service` logger one stdout handler in the chosen format (idempotent)."""
    logger = logging.getLogger("service")
    logger.setLevel(level)
    formatter: logging.Formatter
    if log_format == "json":
        formatter = JsonFormatter()
    elif log_format == "text":
        formatter = logging.Formatter("%(asctime)s %(levelname)s %(name)s: %(message)s")
    else:
        raise ValueError(f"CONDUCTION_LOG_FORMAT must be 'json' or 'text', not {log_format!r}")
    handler = next((h for h in logger.handlers if isinstance(h, StdoutHandler)), None)
    if handler is None:
        handler = StdoutHandler()
        logger.addHandler(handler)
    handler.setFormatter(formatter)
    logger.propagate = False
    return logger


def accept_request_id(incoming: str | None) -> str:
    """The caller's X-Request-ID if it is printable and non-empty (cut to 128 characters),
    else a fresh one."""
    if incoming and incoming.isprintable():
        return incoming[:MAX_REQUEST_ID_LENGTH]
    return uuid.uuid4().hex


def install(app: Flask) -> None:
    """Request IDs (accept, echo in the header, `meta` and problems) and the request log."""
    from flask import g, request

    configure_service_logger(str(app.config["LOG_FORMAT"]).lower(), app.config["LOG_LEVEL"])
    request_log = logging.getLogger("service.request")
    log_requests = bool(app.config["REQUEST_LOG"])

    @app.before_request
    def _request_id() -> None:
        g.started = time.perf_counter()
        g.request_id = accept_request_id(request.headers.get(REQUEST_ID_HEADER))
        REQUEST_ID.set(g.request_id)

    @app.after_request
    def _echo_and_log(response: Response) -> Response:
        response.headers[REQUEST_ID_HEADER] = getattr(g, "request_id", "")
        route = request.url_rule.rule if request.url_rule is not None else "unmatched"
        level = logging.DEBUG if route in QUIET_ROUTES else logging.INFO
        if log_requests and request_log.isEnabledFor(level):
            fields: dict[str, Any] = {
                "event": "request", "method": request.method, "route": route,
                "path": request.path, "status": response.status_code,
                "duration_ms": round((time.perf_counter() - g.get("started", 0.0)) * 1e3, 3),
            }
            family = g.get("family")
            if family:
                fields["family"] = family
            if g.get("answer_reused"):
                fields["reused"] = True
            client = g.get("api_client")
            if client:
                fields["client"] = client
            request_log.log(level, "%s %s %d", request.method, request.path,
                            response.status_code, extra={"fields": fields})
        return response

    @app.teardown_request
    def _forget_request_id(exc: BaseException | None) -> None:
        REQUEST_ID.set("")
