"""The real gunicorn server on a loopback port, driven with requests."""

from __future__ import annotations

import pathlib
import subprocess
import sys

import requests

from tests.conftest import PLATE_PAYLOAD

ROOT = pathlib.Path(__file__).resolve().parents[2]


def test_health(server):
    assert requests.get(server + "/healthz", timeout=5).json() == {"status": "ok"}


def test_plate_solve_envelope(server):
    response = requests.post(server + "/v1/plate", json=PLATE_PAYLOAD, timeout=30)
    assert response.status_code == 200, response.text
    body = response.json()
    assert set(body) == {"kind", "method", "units", "results", "convergence", "safety",
                         "warnings", "cautions", "meta"}
    assert body["kind"] == "plate" and body["method"] == "series"
    assert body["convergence"]["converged"] is True
    assert body["units"]["temperature"] == "degC"
    assert len(body["results"]["points"]) == 2
    assert body["safety"]["status"] in ("ok", "warning", "exceeded")
    assert any("codes, standards" in c for c in body["cautions"])
    assert response.headers["X-Request-ID"] == body["meta"]["request_id"]


def test_transient_over_http(server):
    from tests.conftest import TRANSIENT_PAYLOAD

    response = requests.post(server + "/v1/transient", json=TRANSIENT_PAYLOAD, timeout=30)
    assert response.status_code == 200, response.text
    assert response.json()["results"]["target_time"] > 0


def test_layers_over_http(server):
    from tests.conftest import LAYERS_PAYLOAD

    payload = {**LAYERS_PAYLOAD, "solve_for": {"layer": 1, "target": {"surface_temperature": 55}},
               "output_units": {"length": "mm"}}
    response = requests.post(server + "/v1/layers", json=payload, timeout=30)
    assert response.status_code == 200, response.text
    body = response.json()
    assert body["kind"] == "layers" and body["units"]["length"] == "mm"
    assert body["results"]["heat_flow_per_length"] > 0
    assert 0 < body["results"]["solved"]["thickness"] < 50  # mm


def test_fin_over_http(server):
    from tests.conftest import FIN_PAYLOAD

    response = requests.post(server + "/v1/fin", json=FIN_PAYLOAD, timeout=30)
    assert response.status_code == 200, response.text
    results = response.json()["results"]
    assert 0 < results["efficiency"] < 1 and results["array"]["count"] == 12
    response = requests.post(server + "/v1/fin", json={**FIN_PAYLOAD, "tip": "hot"}, timeout=30)
    assert response.status_code == 422 and "tip" in response.json()["errors"]


def test_grid_over_http(server):
    from tests.conftest import GRID_PAYLOAD

    payload = {**GRID_PAYLOAD, "verify_mesh": True, "output_units": {"length": "mm"}}
    response = requests.post(server + "/v1/grid", json=payload, timeout=30)
    assert response.status_code == 200, response.text
    body = response.json()
    assert body["kind"] == "grid" and body["method"] == "grid"
    assert body["units"]["length"] == "mm" and body["units"]["heat_flow_per_length"] == "W/m"
    assert len(body["results"]["edges"]["bottom"]["segments"]) == 2
    assert all(p["error_estimate"] is not None for p in body["results"]["points"])
    response = requests.post(server + "/v1/grid", timeout=10,
                             json={**GRID_PAYLOAD, "cells": {"nx": 100_000, "ny": 100_000}})
    assert response.status_code == 413
    assert response.json()["type"] == "/problems/too-large"


def test_problem_details_over_http(server):
    response = requests.post(server + "/v1/plate", data="{", timeout=5,
                             headers={"Content-Type": "application/json"})
    assert response.status_code == 400
    assert response.headers["Content-Type"].startswith("application/problem+json")
    response = requests.post(server + "/v1/plate", json={"width": "5 kg"}, timeout=5)
    assert response.status_code == 422
    assert "width" in response.json()["errors"]
    response = requests.post(server + "/v1/plate", data=b"x" * 3_000_000, timeout=10,
                             headers={"Content-Type": "application/json"})
    assert response.status_code == 413


def test_openapi_and_docs_served(server):
    assert requests.get(server + "/v1/openapi.json", timeout=10).json()["paths"]
    assert "<table>" in requests.get(server + "/v1/docs", timeout=10).text


def test_python_client_example_runs_against_server(server):
    out = subprocess.run([sys.executable, "client_examples/plate_client.py", "--url", server],
                         cwd=ROOT, capture_output=True, text=True, timeout=60)
    assert out.returncode == 0, out.stderr
    assert "centre temperature" in out.stdout
