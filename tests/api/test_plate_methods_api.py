"""POST /v1/plate with method grid and both (the series-versus-grid cross-check)."""

from __future__ import annotations

import numpy as np
import pytest

from service.app import create_app


@pytest.fixture(scope="module")
def small_client():
    # a small cell budget keeps the grid solves of these tests quick (10,000 cells)
    return create_app({"TESTING": True, "MAX_CELLS": 10_000}).test_client()


def _post(client, payload):
    response = client.post("/v1/plate", json=payload)
    return response, response.get_json()


def test_method_grid_answers_in_the_plate_shape(small_client, plate_payload):
    plate_payload["method"] = "grid"
    response, body = _post(small_client, plate_payload)
    assert response.status_code == 200, body
    assert body["method"] == "grid" and body["results"]["cross_check"] is None
    assert body["convergence"]["cells"] <= 10_000
    assert body["convergence"]["error_estimate"] is not None
    assert np.shape(body["results"]["grid"]["temperature"]) == (11, 7)
    _, series = _post(small_client, {**plate_payload, "method": "series"})
    # the grid's points meet the series within three times the grid's mesh estimate plus the
    # series bound (reference: the series, an independent method)
    allowed = 3 * body["convergence"]["error_estimate"] + series["convergence"]["error_estimate"]
    np.testing.assert_allclose([p["temperature"] for p in body["results"]["points"]],
                               [p["temperature"] for p in series["results"]["points"]],
                               rtol=0, atol=allowed)


def test_series_versus_grid_cross_check(small_client, plate_payload):
    plate_payload["method"] = "both"
    response, body = _post(small_client, plate_payload)
    assert response.status_code == 200, body
    _, series = _post(small_client, {**plate_payload, "method": "series"})
    assert body["method"] == "series"
    assert body["results"]["points"] == series["results"]["points"]
    check = body["results"]["cross_check"]
    assert check["method"] == "grid" and check["agrees"] is True
    assert check["grid_cells"] <= 10_000 and len(check["points"]) == 2
    # agreement within the reported errors (reference: the series; grid estimate with the
    # two-grid safety factor of 3)
    assert check["max_difference"] <= (3 * check["grid_error_estimate"]
                                       + check["series_error_estimate"])
    np.testing.assert_allclose([p["temperature"] for p in check["points"]],
                               [p["temperature"] for p in body["results"]["points"]],
                               rtol=0, atol=3 * check["grid_error_estimate"]
                               + check["series_error_estimate"])
    assert set(check["edge_heat_flow"]) == {"bottom", "right", "top", "left"}
    assert body["units"]["temperature_difference"] == "K"


def test_cross_check_in_output_units(small_client, plate_payload):
    plate_payload.update(method="both", output_units={"temperature": "degF", "length": "mm"})
    _, body = _post(small_client, plate_payload)
    check = body["results"]["cross_check"]
    _, plain = _post(small_client, {**plate_payload, "output_units": {}})
    # a temperature difference of 1 K is 1.8 degF; 1 m = 1000 mm (definitions)
    np.testing.assert_allclose(check["max_difference"],
                               1.8 * plain["results"]["cross_check"]["max_difference"],
                               rtol=1e-9, atol=0)
    np.testing.assert_allclose(check["at"], 1000 * np.array(plain["results"]["cross_check"]["at"]),
                               rtol=1e-12, atol=0)


def test_method_grid_png(small_client, plate_payload):
    plate_payload["method"] = "grid"
    del plate_payload["grid"]
    response = small_client.post("/v1/plate?format=png", json=plate_payload)
    assert response.status_code == 200 and response.data[:4] == b"\x89PNG"
