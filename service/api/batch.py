"""POST /v1/batch (many problems, one call) and POST /v1/sweep (one problem, varied)."""

from __future__ import annotations

import copy
import logging
import time
from typing import Any

from flask import Blueprint, Response, current_app, g

from schemas.batch import (
    BatchRequestSchema,
    BatchResponseSchema,
    SweepRequestSchema,
    SweepResponseSchema,
    sweep_cases,
)
from schemas.fields import Quantity
from schemas.units import DEFAULT_UNITS
from service import __version__
from service.api.common import (
    FAMILIES,
    GENERAL_CAUTION,
    ProblemError,
    csv_separator,
    read_json,
    run_solve,
    wanted_format,
)
from service.problems import make_problem, problem_of
from service.tables import SelectError, field_at, select, unit_of, write_csv

bp = Blueprint("batch", __name__)
log = logging.getLogger("service.batch")


def _meta(started: float) -> dict[str, Any]:
    return {"service_version": __version__, "elapsed_ms": (time.perf_counter() - started) * 1e3,
            "request_id": getattr(g, "request_id", "")}


def _unknown_kind(kind: str) -> ProblemError:
    return ProblemError("/problems/validation-failed", f"Unknown kind {kind!r}.",
                        errors={"kind": [f"Must be one of: {', '.join(sorted(FAMILIES))}."]})


def solve_one(kind: str, payload: Any) -> tuple[int, dict[str, Any] | None,
                                                dict[str, Any] | None]:
    """(status, result, problem) for one item; a failure never escapes to spoil the others."""
    try:
        if kind not in FAMILIES:
            raise _unknown_kind(kind)
        return 200, run_solve(FAMILIES[kind], payload), None
    except Exception as exc:  # each item answers for itself, like a request of its own
        problem = problem_of(exc)
        if problem is None:
            log.exception("batch item of kind %s failed unexpectedly", kind)
            problem = make_problem("/problems/internal-error",
                                   "This item failed unexpectedly; the error has been logged.")
        return problem.status, None, problem.body()


@bp.post("/v1/batch")
def batch() -> Response:
    started = time.perf_counter()
    request_items = BatchRequestSchema().load(read_json())["items"]
    items = []
    for index, item in enumerate(request_items):
        status, result, problem = solve_one(item["kind"], item["problem"])
        items.append({"index": index, "id": item["id"], "kind": item["kind"], "status": status,
                      "result": result, "problem": problem})
    failed = sum(1 for item in items if item["status"] != 200)
    body = {"items": items, "summary": {"count": len(items), "succeeded": len(items) - failed,
                                        "failed": failed}, "meta": _meta(started)}
    return current_app.json.response(BatchResponseSchema().dump(body))  # type: ignore[return-value]


def set_path(payload: Any, path: str, value: Any) -> None:
    """Put `value` at a dotted path of a problem (list indices as numbers); KeyError if the
    parent does not exist."""
    parts = path.split(".")
    target = payload
    for part in parts[:-1]:
        target = target[int(part)] if isinstance(target, list) else target[part]
    last = parts[-1]
    if isinstance(target, list):
        target[int(last)] = value
    elif isinstance(target, dict):
        target[last] = value
    else:
        raise KeyError(last)


def _check_paths(base: dict[str, Any], vary: list[dict[str, Any]]) -> None:
    errors = {}
    for i, item in enumerate(vary):
        try:
            set_path(copy.deepcopy(base), item["path"], item["values"][0])
        except (KeyError, IndexError, ValueError, TypeError):
            errors[f"vary.{i}.path"] = [f"No place {item['path']!r} in the base problem: every "
                                        "part but the last must already exist."]
    if errors:
        raise ProblemError("/problems/validation-failed", next(iter(errors.values()))[0],
                           errors=errors)


@bp.post("/v1/sweep")
def sweep() -> Response:
    started = time.perf_counter()
    fmt = wanted_format(("json", "csv"))
    request = SweepRequestSchema().load(read_json())
    kind = request["kind"]
    if kind not in FAMILIES:
        raise _unknown_kind(kind)
    family = FAMILIES[kind]
    _check_paths(request["base"], request["vary"])
    rows: list[list[Any]] = []
    errors: list[dict[str, Any]] = []
    units: dict[str, str] = {}
    for case, values in enumerate(sweep_cases(request["vary"], request["combine"])):
        payload = copy.deepcopy(request["base"])
        for item, value in zip(request["vary"], values, strict=True):
            set_path(payload, item["path"], value)
        status, result, problem = solve_one(kind, payload)
        outputs: list[Any] = [None] * len(request["outputs"])
        if result is None:
            errors.append({"case": case, "problem": problem})
        else:
            if not units:  # the first solved case: every output path must exist in it
                units = result["units"]
                _check_outputs(result, request["outputs"])
            outputs = [_pick(result, path) for path in request["outputs"]]
        rows.append([*values, *outputs])
    request_schema, response_schema = family.request_schema, family.response_schema
    columns = [{"name": v["path"], "unit": _input_unit(request_schema, v["path"]),
                "role": "varied"} for v in request["vary"]]
    columns += [{"name": path, "unit": unit_of(response_schema, path, units), "role": "output"}
                for path in request["outputs"]]
    if fmt == "csv":
        header = [f"{c['name']} [{c['unit']}]" if c["unit"] else c["name"] for c in columns]
        return Response(write_csv(header, rows, csv_separator()), mimetype="text/csv")
    body = {"kind": kind, "columns": columns, "rows": rows, "cases": len(rows),
            "failed": len(errors), "errors": errors,
            "cautions": [GENERAL_CAUTION, *family.cautions], "meta": _meta(started)}
    return current_app.json.response(SweepResponseSchema().dump(body))  # type: ignore[return-value]


def _check_outputs(result: dict[str, Any], outputs: list[str]) -> None:
    errors = {}
    for i, path in enumerate(outputs):
        try:
            select(result, path)
        except SelectError as exc:
            errors[f"outputs.{i}"] = [str(exc)]
    if errors:
        raise ProblemError("/problems/validation-failed", next(iter(errors.values()))[0],
                           errors=errors)


def _pick(result: dict[str, Any], path: str) -> Any:
    try:
        return select(result, path)
    except SelectError:
        return None


def _input_unit(schema: Any, path: str) -> str:
    field = field_at(schema, path)
    return DEFAULT_UNITS[field.kind] if isinstance(field, Quantity) else ""
