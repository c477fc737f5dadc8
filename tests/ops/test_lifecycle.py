"""Readiness flips to 503 while draining; liveness does not."""

from __future__ import annotations

from service.app import create_app


def test_readiness_follows_the_drain_marker(tmp_path):
    marker = tmp_path / "draining"
    client = create_app({"TESTING": True, "DRAIN_FILE": str(marker)}).test_client()
    assert client.get("/readyz").status_code == 200
    marker.write_text("1234")
    response = client.get("/readyz")
    assert response.status_code == 503
    assert response.mimetype == "application/problem+json"
    assert response.get_json()["type"] == "/problems/unavailable"
    assert response.headers["Retry-After"] == "5"
    assert client.get("/healthz").status_code == 200


def test_no_marker_configured_means_always_ready():
    client = create_app({"TESTING": True}).test_client()
    assert client.get("/readyz").get_json() == {"status": "ready"}
