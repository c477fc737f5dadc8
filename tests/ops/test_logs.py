"""JSON logs, the request log line and request IDs (Flask test client)."""

from __future__ import annotations

import json
import logging
import sys

import pytest

from service.app import create_app
from service.ops.logs import REQUEST_ID, JsonFormatter, accept_request_id, redact

SECRET_KEY = "s3cret-key-value-0001"


def _record(message: str, *args: object, **extra: object) -> logging.LogRecord:
    record = logging.LogRecord("service.test", logging.WARNING, __file__, 1, message, args, None)
    for key, value in extra.items():
        setattr(record, key, value)
    return record


def _json_lines(text: str) -> list[dict]:
    return [json.loads(line) for line in text.splitlines() if line.startswith("{")]


def test_formatter_writes_one_json_object_with_the_request_id():
    token = REQUEST_ID.set("rid-123")
    try:
        line = JsonFormatter().format(_record("solved %s", "plate", fields={"family": "plate"}))
    finally:
        REQUEST_ID.reset(token)
    entry = json.loads(line)
    assert entry["level"] == "warning" and entry["logger"] == "service.test"
    assert entry["message"] == "solved plate"
    assert entry["request_id"] == "rid-123" and entry["family"] == "plate"
    assert entry["time"].endswith("Z")
    assert "\n" not in line


def test_formatter_keeps_the_traceback_in_one_line():
    try:
        raise ValueError("boom")
    except ValueError:
        record = _record("crash")
        record.exc_info = sys.exc_info()
    entry = json.loads(JsonFormatter().format(record))
    assert "ValueError: boom" in entry["exception"]


@pytest.mark.parametrize("message", [
    f"Error handling request /v1/plate?problem=%7B%7D&api_key={SECRET_KEY}",
    f"Authorization: Bearer {SECRET_KEY}",
    f"headers {{'X-API-Key': '{SECRET_KEY}'}}",
    f"GET /v1/layers?api_key={SECRET_KEY} HTTP/1.1",
])
def test_redaction_masks_keys_and_query_strings(message):
    masked = redact(message)
    assert SECRET_KEY not in masked
    assert "problem=%7B" not in masked


def test_request_ids_are_accepted_cut_or_replaced():
    assert accept_request_id("abc-123") == "abc-123"
    assert accept_request_id("x" * 500) == "x" * 128
    fresh = accept_request_id("bad\x00id")
    assert len(fresh) == 32 and fresh != "bad\x00id"
    assert accept_request_id(None) != accept_request_id(None)


def test_request_log_line_has_id_route_status_and_no_payload(capsys, plate_payload):
    app = create_app({"TESTING": True})
    plate_payload["conductivity"] = 52.123456789  # a marker that must not reach the log
    response = app.test_client().post("/v1/plate?api_key=" + SECRET_KEY, json=plate_payload,
                                      headers={"X-Request-ID": "log-check-1"})
    assert response.status_code == 200
    out = capsys.readouterr().out
    assert "52.123456789" not in out and SECRET_KEY not in out
    lines = [e for e in _json_lines(out) if e.get("event") == "request"]
    assert len(lines) == 1
    line = lines[0]
    assert line["request_id"] == "log-check-1"
    assert line["route"] == "/v1/plate" and line["path"] == "/v1/plate"
    assert line["status"] == 200 and line["family"] == "plate"
    assert line["duration_ms"] > 0


def test_probes_are_logged_at_debug_only(capsys):
    app = create_app({"TESTING": True})
    app.test_client().get("/healthz")
    assert not [e for e in _json_lines(capsys.readouterr().out) if e.get("route") == "/healthz"]


def test_request_id_echoed_in_header_meta_and_problems(plate_payload):
    client = create_app({"TESTING": True}).test_client()
    response = client.post("/v1/plate", json=plate_payload, headers={"X-Request-ID": "rid-9"})
    assert response.headers["X-Request-ID"] == "rid-9"
    assert response.get_json()["meta"]["request_id"] == "rid-9"
    problem = client.post("/v1/plate", json={"width": -1}, headers={"X-Request-ID": "rid-10"})
    assert problem.status_code == 422 and problem.get_json()["request_id"] == "rid-10"
    generated = client.get("/healthz").headers["X-Request-ID"]
    assert len(generated) == 32


def test_text_format_and_bad_format():
    app = create_app({"TESTING": True, "LOG_FORMAT": "text"})
    assert app.test_client().get("/healthz").status_code == 200
    with pytest.raises(ValueError, match="CONDUCTION_LOG_FORMAT"):
        create_app({"TESTING": True, "LOG_FORMAT": "xml"})
    create_app({"TESTING": True})  # back to JSON for the tests that follow
