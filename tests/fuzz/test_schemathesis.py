"""Fuzz every operation of the served OpenAPI document against the real gunicorn server.

Bounded: a fixed number of examples per operation, loopback only. Checks: no server error
(5xx) for any input, and every response conforms to the documented schema and status codes.
"""

from __future__ import annotations

import os

import pytest
import schemathesis
from hypothesis import HealthCheck, given, settings
from schemathesis.checks import not_a_server_error
from schemathesis.specs.openapi.checks import (
    response_schema_conformance,
    status_code_conformance,
)

#: examples per operation: 25 in the suite, more with `make fuzz`
EXAMPLES = int(os.environ.get("CONDUCTION_FUZZ_EXAMPLES", "25"))
CHECKS = (not_a_server_error, response_schema_conformance, status_code_conformance)


@pytest.fixture(scope="module")
def operations(server):
    schema = schemathesis.openapi.from_url(server + "/v1/openapi.json")
    schema.config.update(base_url=server)
    return [result.ok() for result in schema.get_all_operations()]


def _fuzz(operation, statuses: dict[str, set[int]]) -> None:
    @given(case=operation.as_strategy())
    @settings(max_examples=EXAMPLES, deadline=None, derandomize=True, database=None,
              suppress_health_check=list(HealthCheck))
    def run(case):
        response = case.call(timeout=30)
        statuses.setdefault(operation.label, set()).add(response.status_code)
        case.validate_response(response, checks=CHECKS)

    run()


def test_every_operation(operations):
    assert len(operations) >= 5
    statuses: dict[str, set[int]] = {}
    for operation in operations:
        _fuzz(operation, statuses)
    # the fuzzer reached every operation and got both answers and rejections
    assert set(statuses) == {op.label for op in operations}
    assert any(200 in codes for codes in statuses.values())
    assert any(422 in codes for codes in statuses.values())
