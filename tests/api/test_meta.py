"""Health, readiness, OpenAPI document, docs page and eigenvalue tables."""

from __future__ import annotations

import json
import pathlib
import re

import numpy as np

from service.openapi import render

ROOT = pathlib.Path(__file__).resolve().parents[2]


def test_health_and_readiness(client):
    assert client.get("/healthz").get_json() == {"status": "ok"}
    assert client.get("/readyz").status_code == 200


def test_committed_openapi_document_is_current():
    committed = (ROOT / "docs" / "openapi.json").read_text()
    assert render() == committed, "run `make openapi` and commit docs/openapi.json"


def test_openapi_served_and_lists_every_family(client):
    spec = client.get("/v1/openapi.json").get_json()
    assert spec["openapi"].startswith("3.")
    assert "/v1/plate" in spec["paths"]
    assert "/v1/eigenvalues" in spec["paths"]
    assert "Problem" in spec["components"]["schemas"]


def test_docs_page_has_no_external_assets(client):
    response = client.get("/v1/docs")
    assert response.status_code == 200 and response.mimetype == "text/html"
    page = response.get_data(as_text=True)
    assert "/v1/plate" in page
    assert not re.search(r"(src|href)=['\"]https?://", page)


def test_eigenvalues_slab(client):
    body = client.get("/v1/eigenvalues?geometry=slab&biot=1&count=3").get_json()
    # first root of mu tan mu = 1 is 0.8603 and C1 = 1.1191 (textbook one-term table, from memory)
    np.testing.assert_allclose(body["roots"][0], 0.8603, rtol=0, atol=6e-5)
    np.testing.assert_allclose(body["coefficients"][0], 1.1191, rtol=0, atol=6e-5)
    assert len(body["roots"]) == 3


def test_eigenvalues_fixed_surface_default(client):
    body = client.get("/v1/eigenvalues?geometry=sphere&count=2").get_json()
    # fixed surface: roots n pi (exact)
    np.testing.assert_allclose(body["roots"], [np.pi, 2 * np.pi], rtol=1e-9, atol=0)
    assert body["biot"] is None


def test_eigenvalues_edge_pair(client):
    body = client.get("/v1/eigenvalues?geometry=fixed-insulated&count=2").get_json()
    # fixed-insulated pair: (n - 1/2) pi (exact)
    np.testing.assert_allclose(body["roots"], [0.5 * np.pi, 1.5 * np.pi], rtol=1e-9, atol=0)


def test_eigenvalues_bad_query_is_422(client):
    response = client.get("/v1/eigenvalues?geometry=cube&count=zero")
    assert response.status_code == 422
    assert set(response.get_json()["errors"]) == {"geometry", "count"}
    response = client.get("/v1/eigenvalues?geometry=slab&count=100000")
    assert response.status_code == 422
    assert json.loads(response.get_data())["errors"]["count"] == ["Must be at most 1000."]
