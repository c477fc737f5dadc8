"""POST /v1/layers through the Flask test client."""

from __future__ import annotations

import json
import urllib.parse

import numpy as np

from tests.solvers.reference_layers import LAYER_CASES

ENVELOPE = {"kind", "method", "units", "results", "convergence", "safety", "warnings",
            "cautions", "meta"}
CASES = {case.id: case for case in LAYER_CASES}


def post(client, payload, status=200, **kwargs):
    response = client.post("/v1/layers", json=payload, **kwargs)
    assert response.status_code == status, response.get_json()
    return response.get_json()


def test_envelope_and_per_metre_basis_of_a_cylinder(client, layers_payload):
    body = post(client, layers_payload)
    assert set(body) == ENVELOPE
    assert body["kind"] == "layers" and body["method"] == "closed_form"
    assert body["convergence"]["converged"] is True
    results = body["results"]
    # the response says the flows are per metre of length
    assert "per metre of length" in results["heat_flow_basis"]
    assert "per metre of length" in results["notes"][0]
    assert body["units"]["heat_flow_per_length"] == "W/m"
    assert body["units"]["resistance_per_length"] == "m*K/W"
    assert body["units"]["overall_coefficient"] == "W/(m^2*K)"
    # per-metre values are filled, whole-body resistances are not (their unit would differ)
    assert all(lay["resistance"] is None and lay["resistance_per_length"] > 0
               for lay in results["layers"])
    assert results["total_resistance"] is None
    assert [r["kind"] for r in results["resistances"]] == ["film", "layer", "layer", "film"]
    # shares of a series network add up to one (definition)
    np.testing.assert_allclose(sum(r["share"] for r in results["resistances"]), 1.0,
                               rtol=1e-9, atol=0)
    # ambient = surroundings outside, so the linearised network carries the whole difference:
    # q' R'_total = 250 - 20 K (series resistances, definition of the film resistances)
    np.testing.assert_allclose(
        results["heat_flow_per_length"] * results["total_resistance_per_length"], 230.0,
        rtol=1e-8, atol=0)
    # the profile runs from the inside to the outside surface
    profile = results["profile"]
    assert profile["positions"][0] == layers_payload["inner_radius"]
    assert profile["temperatures"][0] == results["surface_temperatures"]["inside"]
    assert profile["temperatures"][-1] == results["surface_temperatures"]["outside"]
    assert set(profile["layer"]) == {0, 1}
    assert len(results["interface_temperatures"]) == 1
    assert results["solved"] is None
    assert any("touch" in c.lower() and "contact time" in c for c in body["cautions"])
    assert any("correlations" in c for c in body["cautions"])


def test_whole_length_heat_flow_scales_with_length(client, layers_payload):
    one = post(client, layers_payload)["results"]
    layers_payload["length"] = 3.0
    three = post(client, layers_payload)["results"]
    # per-metre values do not depend on the length; the total is per metre x length
    # (definition of the per-length basis)
    np.testing.assert_allclose(three["heat_flow_per_length"], one["heat_flow_per_length"],
                               rtol=1e-9, atol=0)
    np.testing.assert_allclose(three["heat_flow"], 3.0 * one["heat_flow_per_length"],
                               rtol=1e-9, atol=0)


def test_plane_wall_reports_whole_wall_values(client):
    case = CASES["boiler-house-wall"]
    body = post(client, case.inputs)
    results = body["results"]
    # Source: case.source (tests/solvers/reference_layers.py), 630 W through the wall
    np.testing.assert_allclose(results["heat_flow"], case.expected["heat_flow"],
                               **case.tolerances("heat_flow"))
    assert results["heat_flow_per_length"] is None
    assert results["layers"][0]["resistance"] is not None
    assert results["layers"][0]["resistance_per_length"] is None
    assert results["critical_radius"] is None
    assert "whole body" in results["heat_flow_basis"]
    assert not any("per metre" in note for note in results["notes"])


def test_steam_main_per_metre_through_http(client):
    case = CASES["steam-main-glass-wool"]
    results = post(client, case.inputs)["results"]
    # Source: case.source (tests/solvers/reference_layers.py), 121 W/m
    np.testing.assert_allclose(results["heat_flow_per_length"], case.expected["heat_flow"],
                               **case.tolerances("heat_flow"))


def test_output_units_convert_results(client, layers_payload):
    plain = post(client, layers_payload)
    layers_payload["output_units"] = {"length": "mm", "temperature": "degF",
                                      "heat_flow_per_length": "W/ft"}
    converted = post(client, layers_payload)
    assert converted["units"]["length"] == "mm"
    assert converted["units"]["temperature"] == "degF"
    assert converted["units"]["temperature_difference"] == "delta_degF"
    p, c = plain["results"], converted["results"]
    # 1 m = 1000 mm; degF = degC * 9/5 + 32; 1 W/m = 0.3048 W/ft (unit definitions)
    np.testing.assert_allclose(c["profile"]["positions"],
                               np.array(p["profile"]["positions"]) * 1000, rtol=1e-9, atol=0)
    np.testing.assert_allclose(c["profile"]["temperatures"],
                               np.array(p["profile"]["temperatures"]) * 1.8 + 32, rtol=1e-9,
                               atol=1e-6)
    np.testing.assert_allclose(c["surface_temperatures"]["outside"],
                               p["surface_temperatures"]["outside"] * 1.8 + 32, rtol=1e-9,
                               atol=1e-6)
    np.testing.assert_allclose(c["layers"][1]["thickness"], 50.0, rtol=1e-9, atol=0)
    np.testing.assert_allclose(c["heat_flow_per_length"], p["heat_flow_per_length"] * 0.3048,
                               rtol=1e-9, atol=0)
    # a unit the caller did not choose stays in its default
    assert c["heat_flux"] == p["heat_flux"]
    # the safety margin is a temperature difference: 18 degF per 10 K (definition)
    np.testing.assert_allclose(converted["safety"]["checks"][0]["margin"],
                               plain["safety"]["checks"][0]["margin"] * 1.8, rtol=1e-9,
                               atol=1e-9)


def test_solve_for_round_trip(client, layers_payload):
    # target given in degF: 131 degF = 55 degC (definition)
    layers_payload["solve_for"] = {"layer": 1, "target": {"surface_temperature": "131 degF"}}
    body = post(client, layers_payload)
    solved = body["results"]["solved"]
    assert solved["quantity"] == "surface_temperature" and solved["name"] == "mineral wool"
    assert solved["target"] == {"surface_temperature": 55.0, "heat_flow_per_length": None,
                                "heat_flux": None, "heat_flow": None}
    assert 0 < solved["thickness"] < 0.05  # thinner than the 50 mm first guess
    # the results are for the solved thickness
    assert body["results"]["layers"][1]["thickness"] == solved["thickness"]
    np.testing.assert_allclose(body["results"]["surface_temperatures"]["outside"], 55.0,
                               rtol=0, atol=1e-3)
    # solving again with that thickness and no target gives the target back (round trip;
    # thickness rounded to 10 digits, state tolerance 1e-6 of the 230 K span)
    layers_payload.pop("solve_for")
    layers_payload["layers"][1]["thickness"] = solved["thickness"]
    again = post(client, layers_payload)["results"]
    np.testing.assert_allclose(again["surface_temperatures"]["outside"], 55.0, rtol=0,
                               atol=1e-3)


def test_solve_for_heat_loss_per_metre(client, layers_payload):
    layers_payload["solve_for"] = {"layer": 1, "target": {"heat_flow_per_length": 60}}
    results = post(client, layers_payload)["results"]
    assert results["solved"]["quantity"] == "heat_flow_per_length"
    # round trip through the solver: the reported loss is the target (tolerance of the
    # thickness root finder)
    np.testing.assert_allclose(results["heat_flow_per_length"], 60.0, rtol=1e-6, atol=0)
    np.testing.assert_allclose(results["solved"]["achieved"]["heat_flow_per_length"], 60.0,
                               rtol=1e-6, atol=0)


def test_unreachable_target_is_422_with_the_field_path(client, layers_payload):
    # below the 20 degC ambient: no thickness gets there
    layers_payload["solve_for"] = {"layer": 1, "target": {"surface_temperature": 10}}
    body = post(client, layers_payload, status=422)
    assert body["type"] == "/problems/target-unreachable"
    assert "solve_for.target.surface_temperature" in body["errors"]
    assert "mineral wool" in body["detail"]


def test_critical_radius_note(client):
    # a thin instrument cable with a PVC sheath in still air (demo scenario, invented): the
    # outer radius 3.5 mm is below k/h = 0.2/10 = 20 mm (critical radius, definition)
    payload = {"geometry": "cylinder", "inner_radius": 0.001,
               "layers": [{"name": "conductor", "thickness": 0.0005, "conductivity": 390},
                          {"name": "PVC sheath", "thickness": 0.002, "conductivity": 0.2}],
               "inside": {"type": "temperature", "value": 70},
               "outside": {"type": "convection", "film_coefficient": 10, "ambient": 25}}
    results = post(client, payload)["results"]
    critical = results["critical_radius"]
    assert critical["insulation_increases_heat_flow"] is True
    np.testing.assert_allclose(critical["radius"], 0.02, rtol=1e-9, atol=0)
    assert any("critical radius" in note and "increases the heat flow" in note
               for note in results["notes"])
    # a heat-loss target below the critical radius reports the thinner alternative
    payload["solve_for"] = {"layer": 1, "target": {
        "heat_flow_per_length": results["heat_flow_per_length"]}}
    solved = post(client, payload)["results"]["solved"]
    assert solved["alternative_thickness"] is not None
    assert solved["thickness"] > solved["alternative_thickness"]
    assert "critical radius" in solved["note"]


def test_layer_service_limit_exceeded(client, layers_payload):
    layers_payload["layers"][1]["max_temperature"] = 200
    body = post(client, layers_payload)
    assert body["safety"]["status"] == "exceeded"
    check = next(c for c in body["safety"]["checks"]
                 if c["limit"] == "layers.1.max_temperature")
    assert check["status"] == "exceeded" and check["margin"] < 0
    assert "mineral wool" in check["where"]["description"]
    # the hot face of the insulation is its inner face, at the interface
    assert check["where"]["position"] == [body["results"]["interface_temperatures"][0]["position"]]
    assert any("Limits are checked" in c for c in body["cautions"])


def test_air_surface_reports_its_correlation(client, layers_payload):
    layers_payload["outside"] = {"type": "air", "ambient": 20, "emissivity": 0.9,
                                 "wind_speed": "10 km/h"}
    results = post(client, layers_payload)["results"]
    outside = results["surfaces"]["outside"]
    assert "Churchill-Bernstein" in outside["correlation"]
    assert outside["reynolds"] > 0 and outside["nusselt"] > 0
    assert outside["radiative_coefficient"] > 0
    assert results["surfaces"]["inside"]["correlation"] is None


def test_plane_wall_with_air_and_sphere(client):
    furnace_door = {  # a kiln door lining (demo scenario, invented)
        "geometry": "plane", "area": 1.5,
        "layers": [{"name": "firebrick", "thickness": 0.115, "conductivity": 1.1,
                    "conductivity_slope": 4e-4},
                   {"name": "board", "thickness": 0.1, "conductivity": 0.12}],
        "contact_resistances": [2e-3],
        "inside": {"type": "temperature", "value": 1100},
        "outside": {"type": "air", "ambient": 25, "emissivity": 0.8, "orientation": "vertical",
                    "characteristic_length": 1.2}}
    body = post(client, furnace_door)
    results = body["results"]
    interface = results["interface_temperatures"][0]
    assert interface["inner_side"] > interface["outer_side"]  # drop across the contact
    assert [r["kind"] for r in results["resistances"]] == ["layer", "contact", "layer", "film"]
    assert "Churchill-Chu" in results["surfaces"]["outside"]["correlation"]
    vessel = {"geometry": "sphere", "inner_radius": 0.5,
              "layers": [{"thickness": 0.01, "conductivity": 16},
                         {"thickness": 0.1, "conductivity": 0.04}],
              "inside": {"type": "temperature", "value": -40},
              "outside": {"type": "convection", "film_coefficient": 10, "ambient": 25}}
    results = post(client, vessel)["results"]
    assert results["heat_flow"] < 0 and results["heat_flow_per_length"] is None  # a heat gain
    assert results["overall_coefficient"] > 0
    assert results["critical_radius"]["insulation_increases_heat_flow"] is False


def test_two_flux_surfaces_are_not_unique(client, layers_payload):
    layers_payload["inside"] = {"type": "flux", "value": 100}
    layers_payload["outside"] = {"type": "flux", "value": -50}
    body = post(client, layers_payload, status=422)
    assert body["type"] == "/problems/not-unique" and "outside.type" in body["errors"]


def test_not_converged_unless_accepted(client, layers_payload):
    layers_payload["max_iterations"] = 1  # radiation makes the problem nonlinear
    body = post(client, layers_payload, status=422)
    assert body["type"] == "/problems/not-converged"
    assert body["diagnostics"]["status"] == "max_iterations"
    layers_payload["accept_unconverged"] = True
    body = post(client, layers_payload)
    assert body["convergence"]["converged"] is False
    assert any("Not converged" in w for w in body["warnings"])


def test_csv_answer(client, layers_payload):
    response = client.post("/v1/layers?format=csv", json=layers_payload)
    assert response.status_code == 200 and response.mimetype == "text/csv"
    rows = response.get_data(as_text=True).splitlines()
    assert rows[0] == "\ufeffquantity,value,unit"
    assert any(row.startswith("results.heat_flow_per_length,") and row.endswith(",W/m")
               for row in rows)
    assert any(row.startswith("results.profile.temperatures.0,") and row.endswith(",degC")
               for row in rows)
    assert any(row.startswith("results.layers.1.resistance_per_length,")
               and row.endswith(",m*K/W") for row in rows)


def test_get_select_one_value(client, layers_payload):
    full = post(client, layers_payload)
    query = urllib.parse.urlencode({"problem": json.dumps(layers_payload),
                                    "select": "results.heat_flow_per_length"})
    response = client.get("/v1/layers?" + query)
    assert response.status_code == 200 and response.mimetype == "text/plain"
    assert float(response.get_data(as_text=True)) == full["results"]["heat_flow_per_length"]


def test_batch_item(client, layers_payload):
    body = client.post("/v1/batch", json={"items": [
        {"kind": "layers", "problem": layers_payload},
        {"kind": "layers", "problem": {**layers_payload, "layers": []}}]}).get_json()
    assert [item["status"] for item in body["items"]] == [200, 422]


def test_sweep_over_insulation_thickness(client, layers_payload):
    body = client.post("/v1/sweep", json={
        "kind": "layers", "base": layers_payload,
        "vary": [{"path": "layers.1.thickness", "values": [0.02, "40 mm", 0.08]}],
        "outputs": ["results.heat_flow_per_length"]}).get_json()
    assert body["failed"] == 0 and body["columns"][1]["unit"] == "W/m"
    losses = [row[1] for row in body["rows"]]
    assert losses[0] > losses[1] > losses[2]  # beyond the critical radius, more is less


def test_layers_png_profile(client, layers_payload):
    response = client.post("/v1/layers?format=png", json=layers_payload)
    assert response.status_code == 200 and response.data[:4] == b"\x89PNG"
