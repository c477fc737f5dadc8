"""CSV, PNG, spreadsheet GET cell values, content negotiation, CORS."""

from __future__ import annotations

import json
import urllib.parse

import pytest

from service.app import create_app


def _get_url(payload, select=None, **params):
    query = {"problem": json.dumps(payload, separators=(",", ":")), **params}
    if select:
        query["select"] = select
    return "/v1/plate?" + urllib.parse.urlencode(query)


def test_csv_has_bom_header_and_units(client, plate_payload):
    response = client.post("/v1/plate?format=csv", json=plate_payload)
    assert response.status_code == 200 and response.mimetype == "text/csv"
    text = response.get_data(as_text=True)
    assert text.startswith("\ufeffquantity,value,unit\r\n")
    assert "results.points.0.temperature," in text
    line = next(row for row in text.splitlines() if row.startswith("results.points.0.temperature"))
    assert line.endswith(",degC")


def test_csv_by_accept_header_with_semicolons(client, plate_payload):
    plate_payload["output_units"] = {"temperature": "degF"}
    response = client.post("/v1/plate?sep=;", json=plate_payload, headers={"Accept": "text/csv"})
    text = response.get_data(as_text=True)
    assert text.startswith("\ufeffquantity;value;unit")
    line = next(row for row in text.splitlines() if row.startswith("results.points.0.temperature"))
    assert line.endswith(";degF")


def test_unknown_separator_is_422(client, plate_payload):
    response = client.post("/v1/plate?format=csv&sep=tab", json=plate_payload)
    assert response.status_code == 422 and "sep" in response.get_json()["errors"]


def test_png_picture(client, plate_payload):
    del plate_payload["grid"]
    response = client.post("/v1/plate", json=plate_payload, headers={"Accept": "image/png"})
    assert response.status_code == 200 and response.mimetype == "image/png"
    assert response.data[:8] == b"\x89PNG\r\n\x1a\n"


@pytest.mark.parametrize(("kwargs", "status"), [
    ({"query_string": {"format": "xml"}}, 406),
    ({"headers": {"Accept": "application/xml"}}, 406),
])
def test_unknown_format_is_406(client, plate_payload, kwargs, status):
    response = client.post("/v1/plate", json=plate_payload, **kwargs)
    assert response.status_code == status
    assert response.get_json()["type"] == "/problems/not-acceptable"


def test_get_select_returns_plain_text(client, plate_payload):
    full = client.post("/v1/plate", json=plate_payload).get_json()
    response = client.get(_get_url(plate_payload, "results.points.0.temperature"))
    assert response.status_code == 200 and response.mimetype == "text/plain"
    assert float(response.get_data(as_text=True)) == full["results"]["points"][0]["temperature"]
    assert client.get(_get_url(plate_payload, "safety.status")).get_data(as_text=True) == \
        full["safety"]["status"]


def test_get_without_select_returns_json(client, plate_payload):
    response = client.get(_get_url(plate_payload))
    assert response.status_code == 200 and response.get_json()["kind"] == "plate"


@pytest.mark.parametrize("path", ["results.nothing", "results.points.7", "kind.deeper"])
def test_get_select_missing_path_is_422(client, plate_payload, path):
    response = client.get(_get_url(plate_payload, path))
    assert response.status_code == 422
    assert "select" in response.get_json()["errors"]


def test_get_without_problem_is_422(client):
    response = client.get("/v1/plate?select=kind")
    assert response.status_code == 422 and "problem" in response.get_json()["errors"]


def test_get_with_malformed_problem_is_400(client):
    response = client.get("/v1/plate?problem=%7Bnot-json&select=kind")
    assert response.status_code == 400


def test_json_body_sent_as_text_plain_is_accepted(client, plate_payload):
    response = client.post("/v1/plate", data=json.dumps(plate_payload), content_type="text/plain")
    assert response.status_code == 200


def test_cors_allow_list_and_preflight():
    client = create_app({"TESTING": True, "CORS_ORIGINS": "https://sheets.example"}).test_client()
    response = client.options("/v1/plate", headers={
        "Origin": "https://sheets.example", "Access-Control-Request-Method": "POST"})
    assert response.status_code == 200
    assert response.headers["Access-Control-Allow-Origin"] == "https://sheets.example"
    assert "POST" in response.headers["Access-Control-Allow-Methods"]
    other = client.options("/v1/plate", headers={"Origin": "https://elsewhere.example"})
    assert "Access-Control-Allow-Origin" not in other.headers


def test_cors_off_by_default(client):
    response = client.get("/healthz", headers={"Origin": "https://sheets.example"})
    assert "Access-Control-Allow-Origin" not in response.headers
