"""Batch and sweep: per-item results and errors, caps, tables."""

from __future__ import annotations

import copy

from service.app import create_app


def test_batch_one_bad_item_does_not_spoil_the_others(client, plate_payload):
    bad = copy.deepcopy(plate_payload)
    bad["conductivity"] = -1
    body = client.post("/v1/batch", json={"items": [
        {"kind": "plate", "problem": plate_payload, "id": "cover-a"},
        {"kind": "plate", "problem": bad},
        {"kind": "teapot", "problem": {}},
        {"kind": "plate", "problem": plate_payload},
    ]}).get_json()
    assert body["summary"] == {"count": 4, "succeeded": 2, "failed": 2}
    statuses = [item["status"] for item in body["items"]]
    assert statuses == [200, 422, 422, 200]
    assert body["items"][0]["id"] == "cover-a"
    assert body["items"][0]["result"]["kind"] == "plate"
    assert body["items"][1]["problem"]["errors"] == {
        "conductivity": ["Must be greater than 0 W/(m*K)."]}
    assert "kind" in body["items"][2]["problem"]["errors"]


def test_batch_cap_is_413():
    client = create_app({"TESTING": True, "MAX_BATCH_ITEMS": 2}).test_client()
    response = client.post("/v1/batch", json={"items": [{"kind": "plate", "problem": {}}] * 3})
    assert response.status_code == 413
    assert "limit is 2" in response.get_json()["detail"]


def test_batch_needs_items(client):
    response = client.post("/v1/batch", json={"items": []})
    assert response.status_code == 422 and "items" in response.get_json()["errors"]


def _sweep(plate_payload, **changes):
    return {"kind": "plate", "base": plate_payload,
            "vary": [{"path": "edges.right.film_coefficient", "values": [10, "1 kW/(m^2*K)"]},
                     {"path": "conductivity", "values": [20, -1]}],
            "outputs": ["results.points.0.temperature", "safety.status"], **changes}


def test_sweep_table_with_units_and_failed_cases(client, plate_payload):
    body = client.post("/v1/sweep", json=_sweep(plate_payload)).get_json()
    assert body["cases"] == 4 and body["failed"] == 2
    assert [c["unit"] for c in body["columns"]] == ["W/(m^2*K)", "W/(m*K)", "degC", ""]
    assert body["rows"][0][:2] == [10, 20]
    assert body["rows"][1][2:] == [None, None]
    assert [e["case"] for e in body["errors"]] == [1, 3]


def test_sweep_zip_and_csv(client, plate_payload):
    sweep = _sweep(plate_payload, combine="zip")
    sweep["vary"][1]["values"] = [20, 40]
    response = client.post("/v1/sweep?format=csv", json=sweep)
    lines = response.get_data(as_text=True).splitlines()
    assert lines[0] == ("\ufeffedges.right.film_coefficient [W/(m^2*K)],conductivity [W/(m*K)],"
                        "results.points.0.temperature [degC],safety.status")
    assert len(lines) == 3


def test_sweep_rules(client, plate_payload):
    bad_output = client.post("/v1/sweep", json=_sweep(plate_payload, outputs=["results.nope"]))
    assert bad_output.status_code == 422 and "outputs.0" in bad_output.get_json()["errors"]
    bad_path = _sweep(plate_payload)
    bad_path["vary"][0]["path"] = "edges.middle.value"
    response = client.post("/v1/sweep", json=bad_path)
    assert response.status_code == 422 and "vary.0.path" in response.get_json()["errors"]
    unknown = client.post("/v1/sweep", json=_sweep(plate_payload, kind="teapot"))
    assert unknown.status_code == 422 and "kind" in unknown.get_json()["errors"]
    zipped = _sweep(plate_payload, combine="zip")
    zipped["vary"][1]["values"] = [1, 2, 3]
    assert client.post("/v1/sweep", json=zipped).status_code == 422


def test_sweep_cap_is_413(plate_payload):
    client = create_app({"TESTING": True, "MAX_SWEEP_CASES": 3}).test_client()
    response = client.post("/v1/sweep", json=_sweep(plate_payload))
    assert response.status_code == 413
