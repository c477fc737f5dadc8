"""GET /v1/verification: the published benchmark cases run through the service itself."""

from __future__ import annotations

import sys
import time
from typing import Any

from flask import Blueprint, Response, current_app, g
from marshmallow import Schema, fields

from schemas.common import MetaSchema
from schemas.fields import Integer, Number
from service import __version__
from service.api.common import FAMILIES, csv_separator, run_solve, wanted_format
from service.api.meta import EIGENVALUES_QUERY, EIGENVALUES_RESPONSE, eigen_table
from service.tables import write_csv
from service.verification import Outcome, markdown_table, run_cases

bp = Blueprint("verification", __name__)


class OutcomeSchema(Schema):
    id = fields.String(attribute="case.id")
    title = fields.String(attribute="case.title")
    source = fields.String(attribute="case.source")
    kind = fields.String(attribute="case.kind")
    select = fields.String(attribute="case.select")
    unit = fields.String(attribute="case.unit")
    published = Number(attribute="case.published")
    computed = Number(allow_none=True)
    difference = Number(allow_none=True)
    tolerance = Number()
    passed = fields.Boolean()
    note = fields.String()


class SummarySchema(Schema):
    cases = Integer()
    passed = Integer()
    failed = Integer()


class VerificationResponseSchema(Schema):
    cases = fields.List(fields.Nested(OutcomeSchema))
    summary = fields.Nested(SummarySchema)
    meta = fields.Nested(MetaSchema)


def solve_case(kind: str, payload: dict[str, Any]) -> dict[str, Any]:
    """Answer a case exactly as the endpoint of its kind answers a caller."""
    if kind == "eigenvalues":
        return EIGENVALUES_RESPONSE.dump(eigen_table(**EIGENVALUES_QUERY.load(payload)))
    return run_solve(FAMILIES[kind], payload)


def report() -> list[Outcome]:
    return run_cases(solve_case)


@bp.get("/v1/verification")
def verification() -> Response:
    started = time.perf_counter()
    fmt = wanted_format(("json", "csv"))
    outcomes = current_app.extensions["conduction"]["verification"]()
    if fmt == "csv":
        rows = [(o.case.id, o.case.published, o.computed, o.tolerance,
                 "pass" if o.passed else "fail", o.case.unit, o.case.source) for o in outcomes]
        return Response(write_csv(["case", "published", "computed", "tolerance", "result",
                                   "unit", "source"], rows, csv_separator()),
                        mimetype="text/csv")
    passed = sum(o.passed for o in outcomes)
    body = {"cases": outcomes,
            "summary": {"cases": len(outcomes), "passed": passed,
                        "failed": len(outcomes) - passed},
            "meta": {"service_version": __version__,
                     "elapsed_ms": (time.perf_counter() - started) * 1e3,
                     "request_id": getattr(g, "request_id", "")}}
    return current_app.json.response(  # type: ignore[return-value]
        VerificationResponseSchema().dump(body))


README_START = "<!-- verification table: written by make verify -->"
README_END = "<!-- end of verification table -->"


def main() -> int:
    """`make verify`: print the table (markdown), rewrite the README's copy when asked with
    --readme, and fail when any case fails."""
    import pathlib

    from service.app import create_app

    app = create_app({"TESTING": True, "LOG_LEVEL": "WARNING"})
    with app.test_request_context():
        outcomes = report()
    table = markdown_table(outcomes)
    failed = [o for o in outcomes if not o.passed]
    summary = f"{len(outcomes) - len(failed)} passed, {len(failed)} failed"
    print(table + "\n\n" + summary)
    if "--readme" in sys.argv:
        readme = pathlib.Path(__file__).resolve().parents[2] / "README.md"
        text = readme.read_text()
        head, rest = text.split(README_START, 1)
        _, tail = rest.split(README_END, 1)
        readme.write_text(f"{head}{README_START}\n{table}\n\n{summary} (service "
                          f"{__version__}).\n{README_END}{tail}")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
