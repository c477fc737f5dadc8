"""POST /v1/transient through the Flask test client."""

from __future__ import annotations

import numpy as np


def test_envelope_units_and_target(client, transient_payload):
    body = client.post("/v1/transient", json=transient_payload).get_json()
    assert body["kind"] == "transient" and body["method"] == "series"
    results = body["results"]
    assert np.shape(results["temperatures"]) == (3, 3)
    assert results["energy_per_area"] is not None and results["energy"] is None
    assert body["units"]["energy_per_area"] == "J/m^2"
    # the centre (first column) passes 200 degC between the 600 s and 3600 s outputs
    assert results["temperatures"][1][0] > 200 > results["temperatures"][2][0]
    assert 600 < results["target_time"] < 3600
    assert body["convergence"]["converged"] and body["convergence"]["iterations"] >= 1


def test_output_units_apply(client, transient_payload):
    plain = client.post("/v1/transient", json=transient_payload).get_json()
    transient_payload["output_units"] = {"temperature": "degF", "time": "min"}
    converted = client.post("/v1/transient", json=transient_payload).get_json()
    # degF = degC * 9/5 + 32 and 1 min = 60 s (definitions)
    np.testing.assert_allclose(converted["results"]["temperatures"],
                               np.array(plain["results"]["temperatures"]) * 1.8 + 32,
                               rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(converted["results"]["target_time"],
                               plain["results"]["target_time"] / 60, rtol=1e-9, atol=0)


def test_unreachable_target_is_422(client, transient_payload):
    transient_payload["target"] = {"temperature": 1000}
    response = client.post("/v1/transient", json=transient_payload)
    assert response.status_code == 422
    body = response.get_json()
    assert body["type"] == "/problems/target-unreachable"
    assert "target.temperature" in body["errors"]


def test_position_outside_body_is_validation_failure(client, transient_payload):
    transient_payload["positions"] = [0.2]
    body = client.post("/v1/transient", json=transient_payload).get_json()
    assert body["type"] == "/problems/validation-failed" and "positions.0" in body["errors"]


def test_first_crossing_of_a_limit(client, transient_payload):
    # heat a cold part: the surface crosses 400 degC first
    transient_payload.update(initial_temperature=20, target=None, times=[10, 30, 60, 120, 600])
    transient_payload["surface"]["ambient"] = 900
    transient_payload.pop("target")
    transient_payload["limits"] = {"max_surface_temperature": 400}
    body = client.post("/v1/transient", json=transient_payload).get_json()
    check = body["safety"]["checks"][0]
    assert check["status"] == "exceeded"
    assert check["first_crossed_time"] in (10, 30, 60, 120, 600)


def test_lumped_product_and_semi_infinite_shapes(client):
    common = {"conductivity": 200, "density": 2700, "specific_heat": 900,
              "initial_temperature": 20, "times": [10, 100]}
    lumped = client.post("/v1/transient", json={
        **common, "shape": "lumped", "volume": 1e-4, "area": 0.01,
        "surface": {"type": "convection", "film_coefficient": 20, "ambient": 80}})
    assert lumped.status_code == 200 and lumped.get_json()["method"] == "lumped"
    box = client.post("/v1/transient", json={
        **common, "shape": "box", "half_widths": [0.01, 0.02, 0.03],
        "positions": [[0, 0, 0]], "surface": {"type": "temperature", "value": 100}})
    assert box.status_code == 200
    semi = client.post("/v1/transient", json={
        **common, "shape": "semi_infinite", "positions": [0, 0.01],
        "surface": {"type": "flux", "value": 5000}})
    assert semi.status_code == 200 and semi.get_json()["method"] == "closed_form"


def test_png_curves(client, transient_payload):
    response = client.post("/v1/transient?format=png", json=transient_payload)
    assert response.status_code == 200 and response.data[:4] == b"\x89PNG"
