"""RFC 9457 problem details: the one place that maps exceptions to HTTP error responses.

Every non-2xx response is `application/problem+json` with `type`, `title`, `status`, `detail`,
plus `errors` (JSON path -> messages) for validation failures and `diagnostics` for solver
failures. A crash becomes a generic 500 problem; its traceback goes to the log only.
"""

from __future__ import annotations

import logging
from dataclasses import dataclass, field
from typing import Any

from flask import Flask, Response, current_app, g
from marshmallow import ValidationError
from werkzeug.exceptions import HTTPException

from service.solvers.errors import IllPosedError, TooLargeError

log = logging.getLogger("service.problems")

#: The public, stable list of problem types: identifier -> (status, title).
PROBLEM_TYPES: dict[str, tuple[int, str]] = {
    "/problems/malformed-json": (400, "Request body is not valid JSON"),
    "/problems/bad-request": (400, "Bad request"),
    "/problems/unauthorized": (401, "Missing or unknown API key"),
    "/problems/forbidden": (403, "Not allowed"),
    "/problems/not-found": (404, "No such resource"),
    "/problems/method-not-allowed": (405, "Method not allowed on this resource"),
    "/problems/not-acceptable": (406, "Cannot answer in the requested format"),
    "/problems/too-large": (413, "Request or problem too large"),
    "/problems/unsupported-media-type": (415, "Unsupported content type"),
    "/problems/validation-failed": (422, "Request failed validation"),
    "/problems/physics-rejected": (422, "Problem rejected on physical grounds"),
    "/problems/not-unique": (422, "Problem has no unique solution"),
    "/problems/target-unreachable": (422, "Design target cannot be met"),
    "/problems/not-converged": (422, "Solution did not converge"),
    "/problems/rate-limited": (429, "Too many requests"),
    "/problems/internal-error": (500, "Internal error"),
    "/problems/unavailable": (503, "Service unavailable"),
}

_HTTP_TO_TYPE = {
    400: "/problems/bad-request",
    401: "/problems/unauthorized",
    403: "/problems/forbidden",
    404: "/problems/not-found",
    405: "/problems/method-not-allowed",
    406: "/problems/not-acceptable",
    413: "/problems/too-large",
    415: "/problems/unsupported-media-type",
    429: "/problems/rate-limited",
    503: "/problems/unavailable",
}


class ProblemError(Exception):
    """Raise anywhere in the HTTP layer to answer with a problem-details response."""

    def __init__(self, type_: str, detail: str, *, errors: dict[str, list[str]] | None = None,
                 diagnostics: dict[str, Any] | None = None,
                 headers: dict[str, str] | None = None) -> None:
        if type_ not in PROBLEM_TYPES:
            raise ValueError(f"unregistered problem type {type_}")
        super().__init__(detail)
        self.type = type_
        self.status, self.title = PROBLEM_TYPES[type_]
        self.detail = detail
        self.errors = errors
        self.diagnostics = diagnostics
        self.headers = headers or {}


def flatten_errors(messages: Any, prefix: str = "") -> dict[str, list[str]]:
    """Turn marshmallow's nested error dict into {"edges.right.film_coefficient": [...]}."""
    out: dict[str, list[str]] = {}
    if isinstance(messages, dict):
        for key, value in messages.items():
            key = str(key)
            path = prefix if key in ("_schema",) else (f"{prefix}.{key}" if prefix else key)
            for p, msgs in flatten_errors(value, path).items():
                out.setdefault(p, []).extend(msgs)
    elif isinstance(messages, list) and all(isinstance(m, str) for m in messages):
        out[prefix or "$"] = list(messages)
    elif isinstance(messages, list):
        for m in messages:
            for p, msgs in flatten_errors(m, prefix).items():
                out.setdefault(p, []).extend(msgs)
    else:
        out[prefix or "$"] = [str(messages)]
    return out


@dataclass(frozen=True)
class Problem:
    """One problem, before it becomes a response (batch items embed it as a dict)."""

    type: str
    detail: str
    status: int
    errors: dict[str, list[str]] | None = None
    diagnostics: dict[str, Any] | None = None
    headers: dict[str, str] = field(default_factory=dict)

    def body(self) -> dict[str, Any]:
        out: dict[str, Any] = {"type": self.type, "title": PROBLEM_TYPES[self.type][1],
                               "status": self.status, "detail": self.detail}
        if self.errors is not None:
            out["errors"] = self.errors
        if self.diagnostics is not None:
            out["diagnostics"] = self.diagnostics
        return out


def make_problem(type_: str, detail: str, **kwargs: Any) -> Problem:
    status = kwargs.pop("status", None) or PROBLEM_TYPES[type_][0]
    return Problem(type_, detail, status, **kwargs)


def problem_of(exc: Exception) -> Problem | None:
    """The problem a request-level exception stands for; None for anything else (a bug)."""
    if isinstance(exc, ProblemError):
        return make_problem(exc.type, exc.detail, errors=exc.errors,
                            diagnostics=exc.diagnostics, headers=exc.headers)
    if isinstance(exc, ValidationError):
        errors = flatten_errors(exc.messages)
        first = next(iter(errors.items()))
        detail = f"{len(errors)} field(s) failed validation; first: {first[0]}: {first[1][0]}"
        return make_problem("/problems/validation-failed", detail, errors=errors)
    if isinstance(exc, IllPosedError):
        type_ = f"/problems/{exc.reason}"
        if type_ not in PROBLEM_TYPES:
            type_ = "/problems/physics-rejected"
        return make_problem(type_, exc.message,
                            errors={exc.field: [exc.message]} if exc.field else None)
    if isinstance(exc, TooLargeError):
        return make_problem("/problems/too-large", exc.message,
                            errors={exc.field: [exc.message]} if exc.field else None)
    return None


def respond(problem: Problem) -> Response:
    body = problem.body()
    request_id = getattr(g, "request_id", None)
    if request_id:
        body["request_id"] = request_id
    response: Response = current_app.json.response(body)  # type: ignore[assignment]
    response.status_code = problem.status
    response.mimetype = "application/problem+json"
    for key, value in problem.headers.items():
        response.headers[key] = value
    return response


def problem_response(type_: str, detail: str, **kwargs: Any) -> Response:
    return respond(make_problem(type_, detail, **kwargs))


def _from_known(exc: Exception) -> Response:
    problem = problem_of(exc)
    assert problem is not None  # registered only for the known exception types
    return respond(problem)


def _from_http(exc: HTTPException) -> Response:
    status = exc.code or 500
    type_ = _HTTP_TO_TYPE.get(status, "/problems/bad-request" if status < 500
                              else "/problems/internal-error")
    headers = {}
    if status == 405 and exc.response is None:
        allowed = getattr(exc, "valid_methods", None)
        if allowed:
            headers["Allow"] = ", ".join(allowed)
    detail = exc.description or PROBLEM_TYPES[type_][1]
    if status == 413:
        limit = current_app.config.get("MAX_CONTENT_LENGTH")
        detail = f"Request body exceeds the limit of {limit} bytes."
    return problem_response(type_, detail, status=status, headers=headers)


def _from_crash(exc: Exception) -> Response:
    log.exception("unhandled error while serving request %s", getattr(g, "request_id", "-"))
    return problem_response("/problems/internal-error",
                            "The service failed unexpectedly; the error has been logged.")


def register_error_handlers(app: Flask) -> None:
    for known in (ProblemError, ValidationError, IllPosedError, TooLargeError):
        app.register_error_handler(known, _from_known)
    app.register_error_handler(HTTPException, _from_http)
    app.register_error_handler(Exception, _from_crash)
