"""POST /v1/grid through the Flask test client."""

from __future__ import annotations

import json
import math
import urllib.parse

import numpy as np

from tests.solvers.reference_grid import slab_fixed_surface


def _post(client, payload, query=""):
    response = client.post("/v1/grid" + query, json=payload)
    return response, response.get_json()


def test_envelope_units_segments_and_safety(client, grid_payload):
    response, body = _post(client, grid_payload)
    assert response.status_code == 200, body
    assert set(body) == {"kind", "method", "units", "results", "convergence", "safety",
                         "warnings", "cautions", "meta"}
    assert body["kind"] == "grid" and body["method"] == "grid"
    assert body["units"]["heat_flow_per_length"] == "W/m" and body["units"]["heat_flow"] == "W"
    results = body["results"]
    assert results["geometry"] == "planar" and results["history"] is None
    bottom = results["edges"]["bottom"]
    # planar: per metre of depth only, never one field with two units
    assert bottom["heat_flow"] is None and bottom["heat_flow_per_length"] is not None
    assert [(s["from"], s["to"], s["type"]) for s in bottom["segments"]] == [
        (0.0, 0.2, "convection"), (0.2, 0.3, "flux")]
    # a flux segment passes exactly its flux times its length: 40 W/m^2 x 0.1 m (definition)
    np.testing.assert_allclose(bottom["segments"][1]["heat_flow_per_length"], 4.0,
                               rtol=1e-9, atol=0)
    # the segments add up to the edge (conservation, common practice, no source)
    # (to the 10 significant digits the response keeps)
    np.testing.assert_allclose(sum(s["heat_flow_per_length"] for s in bottom["segments"]),
                               bottom["heat_flow_per_length"], rtol=1e-9, atol=1e-12)
    balance = results["energy_balance"]
    assert balance["transient"] is None and balance["steady"]["boundary_inflow"] is None
    # a steady finite-volume solution conserves energy to rounding (common practice, no source)
    np.testing.assert_allclose(balance["steady"]["imbalance_per_length"], 0.0, rtol=0,
                               atol=1e-9)
    assert results["solver"]["cells"] == 300 and results["solver"]["linear_solver"] == "direct"
    assert body["convergence"]["cells"] == 300 and body["convergence"]["converged"]
    limits = {check["limit"] for check in body["safety"]["checks"]}
    assert limits == {"min_temperature", "zones.0.max_temperature"}
    assert results["grid"] is None and results["points"][0]["error_estimate"] is None


def test_output_units_apply(client, grid_payload):
    _, plain = _post(client, grid_payload)
    grid_payload["output_units"] = {"temperature": "degF", "length": "mm",
                                    "heat_flow_per_length": "BTU/(h*ft)"}
    _, converted = _post(client, grid_payload)
    assert converted["units"]["temperature"] == "degF" and converted["units"]["length"] == "mm"
    t = [p["temperature"] for p in plain["results"]["points"]]
    tf = [p["temperature"] for p in converted["results"]["points"]]
    # degF = degC * 9/5 + 32, 1 m = 1000 mm, 1 W/m = 3600 s/h / 1055.05585262 J/BTU x
    # 0.3048 m/ft BTU/(h ft) (definitions, international-table BTU; pint rounds the BTU to
    # 1055.056 J, 1.4e-7 away)
    np.testing.assert_allclose(tf, np.array(t) * 1.8 + 32, rtol=1e-9, atol=1e-6)
    np.testing.assert_allclose(converted["results"]["points"][1]["x"], 150.0, rtol=1e-12, atol=0)
    np.testing.assert_allclose(converted["results"]["edges"]["top"]["heat_flow_per_length"],
                               plain["results"]["edges"]["top"]["heat_flow_per_length"]
                               * 3600 / 1055.05585262 * 0.3048, rtol=1e-6, atol=0)


def test_axisymmetric_rod_with_generation_reports_whole_body_flows(client):
    # a heating cartridge: solid rod, R = 0.05 m, g = 1e6 W/m^3, surface held at 50 degC
    radius, height, k, g, ts = 0.05, 0.2, 15.0, 1e6, 50.0
    payload = {"width": radius, "height": height, "geometry": "axisymmetric",
               "cells": {"nx": 40, "ny": 4}, "conductivity": k, "generation": g,
               "edges": {"left": {"type": "insulated"},
                         "right": {"type": "temperature", "value": ts},
                         "bottom": {"type": "insulated"}, "top": {"type": "insulated"}},
               "points": [[0.0, 0.1], [0.025, 0.1]]}
    response, body = _post(client, payload)
    assert response.status_code == 200, body
    right = body["results"]["edges"]["right"]
    assert right["heat_flow_per_length"] is None
    # all generated heat g pi R^2 H leaves the surface (conservation, common practice)
    np.testing.assert_allclose(right["heat_flow"], -g * math.pi * radius**2 * height,
                               rtol=1e-9, atol=0)
    exact = [ts + g * (radius**2 - r**2) / (4 * k) for r in (0.0, 0.025)]
    # T(r) = Ts + g (R^2 - r^2) / (4 k) (common practice, no source: solid cylinder)
    np.testing.assert_allclose([p["temperature"] for p in body["results"]["points"]], exact,
                               rtol=0, atol=2e-3 * (exact[0] - ts))


def test_transient_history_against_series_and_energy(client):
    # a refractory tile: slab 0.02 m, both faces dropped to 0 degC from 100 degC at t = 0
    length, k, rho, c = 0.02, 1.2, 2000.0, 900.0
    payload = {"width": length, "height": 0.01, "cells": {"nx": 40, "ny": 1},
               "conductivity": k, "density": rho, "specific_heat": c,
               "edges": {"left": {"type": "temperature", "value": 0},
                         "right": {"type": "temperature", "value": {"table": [[0, 0], [1, 0]]}},
                         "bottom": {"type": "insulated"}, "top": {"type": "insulated"}},
               "points": [[0.005, 0.005], [0.01, 0.005]],
               "transient": {"initial_temperature": 100, "times": [20, 60, 120],
                             "time_step": 0.5, "scheme": "crank_nicolson"},
               "output_grid": True}
    response, body = _post(client, payload)
    assert response.status_code == 200, body
    history = body["results"]["history"]
    assert history["times"] == [20.0, 60.0, 120.0]
    assert np.shape(history["point_temperatures"]) == (3, 2)
    assert np.shape(history["fields"]) == (3, 1, 40)
    alpha = k / (rho * c)
    for i, t in enumerate(history["times"]):
        # Fourier sine series of the slab (reference_grid.slab_fixed_surface; numpy)
        exact = slab_fixed_surface(np.array([0.005, 0.01]), t, length, alpha, 100.0, 0.0)
        np.testing.assert_allclose(history["point_temperatures"][i], exact, rtol=0, atol=0.05)
    # stored energy equals the time integral of the inflow (conservation, common practice)
    np.testing.assert_allclose(history["stored_energy_per_length"],
                               history["net_inflow_per_length"], rtol=1e-9, atol=1e-9)
    assert history["stored_energy"] is None and history["edge_heat_flow"] is None
    assert len(history["edge_heat_flow_per_length"]["left"]) == 3
    balance = body["results"]["energy_balance"]
    assert balance["steady"] is None
    # stored energy change rho c h integral (T - T0) dx of the series (reference_grid
    # .slab_fixed_surface integrated with numpy's trapezoid rule on 4001 points)
    x = np.linspace(0.0, length, 4001)
    profile = slab_fixed_surface(x, 120.0, length, alpha, 100.0, 0.0)
    stored = rho * c * 0.01 * np.trapezoid(profile - 100.0, x)
    np.testing.assert_allclose(balance["transient"]["stored_per_length"], stored, rtol=2e-3,
                               atol=0)
    assert body["units"]["energy_per_length"] == "J/m"


def test_nafems_t3_against_an_independent_series(client):
    from service.verification import _T3_GRID

    response, body = _post(client, _T3_GRID)
    assert response.status_code == 200, body
    k, rho, c, length = 35.0, 7200.0, 440.5, 0.1
    alpha, omega = k / (rho * c), math.pi / 40.0
    n = np.arange(1, 20001)
    decay = alpha * (n * math.pi / length) ** 2
    t, x = 32.0, 0.08
    # u = x/L f(t) + sum b_n(t) sin(n pi x / L), f = 100 sin(omega t), b_n from Duhamel's
    # integral (common practice, no source; evaluated with numpy)
    integral = (decay * np.cos(omega * t) + omega * np.sin(omega * t)
                - decay * np.exp(-decay * t)) / (decay**2 + omega**2)
    b = -2.0 * (-1.0) ** (n + 1) / (n * math.pi) * 100.0 * omega * integral
    exact = x / length * 100.0 * math.sin(omega * t) + float(np.sum(b * np.sin(n * math.pi * x
                                                                                  / length)))
    np.testing.assert_allclose(exact, 36.603, rtol=0, atol=5e-4)
    np.testing.assert_allclose(body["results"]["points"][0]["temperature"], exact, rtol=0,
                               atol=5e-3)


def test_verify_mesh_reports_point_estimates(client, grid_payload):
    grid_payload["verify_mesh"] = True
    _, body = _post(client, grid_payload)
    estimates = [p["error_estimate"] for p in body["results"]["points"]]
    assert all(e is not None and e >= 0 for e in estimates)
    assert body["convergence"]["error_estimate"] >= max(estimates)
    assert "refined grid of 1200 cells" in body["convergence"]["message"]


def test_png_picture_of_the_field(client, grid_payload):
    response = client.post("/v1/grid", json=grid_payload, headers={"Accept": "image/png"})
    assert response.status_code == 200 and response.mimetype == "image/png"
    assert response.data[:8] == b"\x89PNG\r\n\x1a\n"
    # a single column of cells still draws (the field is held out to the outline)
    grid_payload.update(cells={"nx": 1, "ny": 3}, zones=[])
    grid_payload["edges"]["bottom"] = {"type": "temperature", "value": 10}
    response = client.post("/v1/grid?format=png", json=grid_payload)
    assert response.status_code == 200 and response.data[:4] == b"\x89PNG"


def test_csv_rows_carry_units(client, grid_payload):
    response = client.post("/v1/grid?format=csv", json=grid_payload)
    assert response.status_code == 200 and response.mimetype == "text/csv"
    rows = dict((line.split(",")[0], line.split(",")[-1])
                for line in response.get_data(as_text=True).splitlines()[1:])
    assert rows["results.points.0.temperature"] == "degC"
    assert rows["results.edges.bottom.segments.1.heat_flow_per_length"] == "W/m"


def test_spreadsheet_get_selects_one_value(client, grid_payload):
    query = urllib.parse.urlencode({"problem": json.dumps(grid_payload),
                                    "select": "results.points.1.temperature"})
    response = client.get("/v1/grid?" + query)
    _, body = _post(client, grid_payload)
    assert response.status_code == 200 and response.mimetype == "text/plain"
    assert float(response.get_data(as_text=True)) == body["results"]["points"][1]["temperature"]


def test_too_many_cells_refused_before_the_solver_runs(client, grid_payload, monkeypatch):
    import service.api.grid as grid_api

    def must_not_run(problem):
        raise AssertionError("the solver ran")

    monkeypatch.setattr(grid_api, "solve_grid_method", must_not_run)
    grid_payload["cells"] = {"nx": 100_000, "ny": 100_000}
    response, body = _post(client, grid_payload)
    assert response.status_code == 413 and body["type"] == "/problems/too-large"
    assert "cells" in body["errors"]


def test_non_convergence_is_422_unless_accepted(client, grid_payload):
    grid_payload["edges"]["top"] = {"type": "radiation", "emissivity": 0.9,
                                    "surroundings": -25}
    grid_payload["max_iterations"] = 1
    response, body = _post(client, grid_payload)
    assert response.status_code == 422 and body["type"] == "/problems/not-converged"
    assert body["diagnostics"]["status"] == "max_iterations"
    grid_payload["accept_unconverged"] = True
    response, body = _post(client, grid_payload)
    assert response.status_code == 200 and not body["convergence"]["converged"]
    assert any(w.startswith("Not converged (max_iterations)") for w in body["warnings"])


def test_no_sink_is_not_unique(client, grid_payload):
    grid_payload["edges"] = {name: {"type": "insulated"}
                             for name in ("bottom", "right", "top", "left")}
    response, body = _post(client, grid_payload)
    assert response.status_code == 422 and body["type"] == "/problems/not-unique"
    assert "edges" in body["errors"]


def test_gap_between_segments_warns(client, grid_payload):
    grid_payload["edges"]["bottom"][1]["from"] = 0.25
    _, body = _post(client, grid_payload)
    assert any("0.2 m to 0.25 m is not covered" in w for w in body["warnings"])
