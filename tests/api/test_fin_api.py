"""POST /v1/fin through the Flask test client."""

from __future__ import annotations

import numpy as np
import pytest

from tests.solvers.reference_layers import FIN_CASES


def post(client, payload, status=200):
    response = client.post("/v1/fin", json=payload)
    assert response.status_code == status, response.get_json()
    return response.get_json()


def test_envelope_and_array(client, fin_payload):
    body = post(client, fin_payload)
    assert body["kind"] == "fin" and body["method"] == "closed_form"
    assert body["convergence"]["converged"] is True
    results = body["results"]
    assert results["shape"] == "straight" and results["tip"] == "convective"
    assert 0 < results["efficiency"] < 1 and results["effectiveness"] > 1
    assert body["units"]["heat_flow"] == "W" and body["units"]["reciprocal_length"] == "1/m"
    theta_b = fin_payload["base_temperature"] - fin_payload["ambient"]
    h = fin_payload["film_coefficient"]
    # efficiency = q / (h A_fin theta_b) (definition of fin efficiency)
    np.testing.assert_allclose(results["efficiency"],
                               results["heat_flow"] / (h * results["fin_area"] * theta_b),
                               rtol=1e-8, atol=0)
    # array: N q + h A_base theta_b (definition of the array heat flow)
    array = results["array"]
    assert array["count"] == 12
    np.testing.assert_allclose(array["heat_flow"],
                               12 * results["heat_flow"] + h * 0.02 * theta_b, rtol=1e-8, atol=0)
    np.testing.assert_allclose(array["total_area"], 12 * results["fin_area"] + 0.02, rtol=1e-9,
                               atol=0)
    profile = results["profile"]
    assert profile["positions"][0] == 0 and profile["positions"][-1] == fin_payload["length"]
    assert profile["temperatures"][0] == 100 and profile["temperatures"][-1] == \
        results["tip_temperature"]
    assert any("uniform" in c and "film coefficient" in c for c in body["cautions"])


@pytest.mark.parametrize("case", FIN_CASES, ids=lambda c: c.id)
def test_long_rods_through_http(client, case):
    results = post(client, case.inputs)["results"]
    # Source: case.source (tests/solvers/reference_layers.py)
    np.testing.assert_allclose(results["heat_flow"], case.expected["heat_flow"],
                               **case.tolerances("heat_flow"))
    assert results["efficiency"] is None and results["fin_length"] is None
    assert results["tip_temperature"] == case.inputs["ambient"]


def test_fixed_tip_temperature_and_output_units(client, fin_payload):
    fin_payload.update(tip={"temperature": "140 degF"}, count=1, base_area=0)  # 60 degC
    plain = post(client, fin_payload)
    fin_payload["output_units"] = {"temperature": "degF", "length": "mm", "heat_flow": "BTU/h"}
    converted = post(client, fin_payload)
    assert converted["units"]["temperature"] == "degF" and converted["units"]["length"] == "mm"
    p, c = plain["results"], converted["results"]
    assert p["tip"] == "temperature" and p["efficiency"] is None
    # 140 degF = 60 degC; degF = degC * 9/5 + 32; 1 m = 1000 mm (unit definitions)
    np.testing.assert_allclose(p["tip_temperature"], 60.0, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(c["tip_temperature"], 140.0, rtol=1e-12, atol=1e-9)
    np.testing.assert_allclose(c["profile"]["temperatures"],
                               np.array(p["profile"]["temperatures"]) * 1.8 + 32, rtol=1e-9,
                               atol=1e-6)
    np.testing.assert_allclose(c["profile"]["positions"],
                               np.array(p["profile"]["positions"]) * 1000, rtol=1e-9, atol=0)
    # 1 W = 3.412142 BTU/h (international table BTU; handbook conversion tables, from memory)
    np.testing.assert_allclose(c["heat_flow"], p["heat_flow"] * 3.412142, rtol=1e-6, atol=0)


def test_annular_fin_profile_runs_over_radii(client):
    payload = {"shape": "annular", "inner_radius": "12.5 mm", "outer_radius": "35 mm",
               "thickness": "1 mm", "conductivity": 180, "film_coefficient": 60,
               "base_temperature": 120, "ambient": 30, "tip": "insulated"}
    results = post(client, payload)["results"]
    positions = results["profile"]["positions"]
    np.testing.assert_allclose([positions[0], positions[-1]], [0.0125, 0.035], rtol=1e-12,
                               atol=0)
    np.testing.assert_allclose(results["fin_length"], 0.0225, rtol=1e-9, atol=0)
    assert 0 < results["efficiency"] < 1
    assert results["tip_temperature"] < payload["base_temperature"]


def test_surface_limit_and_biot_warning(client):
    # a thick stainless bracket acting as a fin (demo scenario, invented): Biot > 0.1
    payload = {"shape": "pin", "diameter": 0.05, "length": 0.1, "conductivity": 15,
               "film_coefficient": 200, "base_temperature": 180, "ambient": 20,
               "tip": "insulated", "limits": {"max_surface_temperature": 60}}
    body = post(client, payload)
    assert body["results"]["biot"] > 0.1
    assert any("Biot number" in w for w in body["warnings"])
    assert body["safety"]["status"] == "exceeded"
    assert body["safety"]["checks"][0]["where"]["description"] == "fin base"


def test_missing_tip_temperature_is_422(client, fin_payload):
    fin_payload["tip"] = {"temp": 50}
    body = post(client, fin_payload, status=422)
    assert body["type"] == "/problems/validation-failed"
    assert "tip.temperature" in body["errors"]


def test_csv_answer(client, fin_payload):
    response = client.post("/v1/fin", json=fin_payload, headers={"Accept": "text/csv"})
    assert response.status_code == 200 and response.mimetype == "text/csv"
    rows = response.get_data(as_text=True).splitlines()
    assert any(row.startswith("results.array.heat_flow,") and row.endswith(",W")
               for row in rows)
    assert any(row.startswith("results.efficiency,") for row in rows)
