"""Problem-details shapes for every failure class, through the Flask test client."""

from __future__ import annotations

import json

import pytest
from flask import Blueprint

from service.app import create_app
from service.problems import PROBLEM_TYPES

PROBLEM_KEYS = {"type", "title", "status", "detail"}


def _problem(response, status, type_):
    assert response.status_code == status, response.get_data(as_text=True)
    assert response.mimetype == "application/problem+json"
    body = response.get_json(force=True)
    assert PROBLEM_KEYS <= set(body)
    assert body["type"] == type_ and body["status"] == status
    assert type_ in PROBLEM_TYPES
    assert "Traceback" not in response.get_data(as_text=True)
    return body


def test_malformed_json_is_400(client):
    _problem(client.post("/v1/plate", data="{bad", content_type="application/json"), 400,
             "/problems/malformed-json")


@pytest.mark.parametrize("literal", ["NaN", "Infinity", "-Infinity"])
def test_non_json_numbers_are_400(client, plate_payload, literal):
    text = json.dumps(plate_payload).replace('"conductivity": 52', f'"conductivity": {literal}')
    _problem(client.post("/v1/plate", data=text, content_type="application/json"), 400,
             "/problems/malformed-json")


def test_wrong_content_type_is_415(client, plate_payload):
    _problem(client.post("/v1/plate", data=json.dumps(plate_payload), content_type="text/csv"),
             415, "/problems/unsupported-media-type")


def test_body_over_limit_is_413():
    small = create_app({"TESTING": True, "MAX_BODY_BYTES": 100}).test_client()
    body = _problem(small.post("/v1/plate", data="[" + "1," * 200 + "1]",
                               content_type="application/json"), 413, "/problems/too-large")
    assert "100 bytes" in body["detail"]


def test_unknown_path_is_404(client):
    _problem(client.get("/v1/nothing-here"), 404, "/problems/not-found")


def test_wrong_method_is_405_with_allow(client):
    response = client.delete("/v1/plate")
    _problem(response, 405, "/problems/method-not-allowed")
    assert "POST" in response.headers["Allow"]


def test_validation_is_422_with_json_paths(client, plate_payload):
    plate_payload["edges"]["right"]["film_coefficient"] = -5
    plate_payload["widht"] = 2
    body = _problem(client.post("/v1/plate", json=plate_payload), 422,
                    "/problems/validation-failed")
    assert set(body["errors"]) == {"edges.right.film_coefficient", "widht"}


def test_top_level_array_is_422(client):
    _problem(client.post("/v1/plate", json=[1, 2]), 422, "/problems/validation-failed")


def test_oversized_grid_is_413(client, plate_payload):
    plate_payload["grid"] = {"nx": 10**6, "ny": 10**6}
    body = _problem(client.post("/v1/plate", json=plate_payload), 413, "/problems/too-large")
    assert "grid" in body["errors"]


def test_crash_is_generic_500_without_traceback(caplog):
    app = create_app({"TESTING": False})
    boom = Blueprint("boom", __name__)

    @boom.get("/boom")
    def _boom():
        raise RuntimeError("secret internal detail")

    app.register_blueprint(boom)
    response = app.test_client().get("/boom")
    body = _problem(response, 500, "/problems/internal-error")
    assert "secret" not in json.dumps(body)
    assert "secret internal detail" in caplog.text  # the traceback goes to the log only


def test_request_id_is_propagated(client):
    response = client.get("/healthz", headers={"X-Request-ID": "sheet-42"})
    assert response.headers["X-Request-ID"] == "sheet-42"


def test_json_provider_never_writes_nan(app):
    import numpy as np

    with app.app_context():
        text = app.json.dumps({"a": float("nan"), "b": np.array([np.inf, 1.0])})
    assert text == '{"a":null,"b":[null,1.0]}'
