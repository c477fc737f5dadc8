"""Prometheus metrics in one process (the multi-process merge is checked against the real
gunicorn in tests/integration/test_ops.py)."""

from __future__ import annotations

from prometheus_client.parser import text_string_to_metric_families

from service.app import create_app
from service.ops.metrics import observe_solve
from service.solvers.convergence import Convergence


def _samples(client) -> dict[tuple[str, tuple[tuple[str, str], ...]], float]:
    response = client.get("/metrics")
    assert response.status_code == 200
    assert response.mimetype == "text/plain"
    out = {}
    for family in text_string_to_metric_families(response.get_data(as_text=True)):
        for sample in family.samples:
            out[(sample.name, tuple(sorted(sample.labels.items())))] = sample.value
    return out


def _value(samples, name: str, **labels: str) -> float:
    return samples.get((name, tuple(sorted(labels.items()))), 0.0)


def test_requests_and_solves_are_counted(client, plate_payload):
    before = _samples(client)
    body = client.post("/v1/plate", json=plate_payload).get_json()
    client.post("/v1/plate", json={"width": "5 kg"})
    client.get("/no/such/path")
    after = _samples(client)

    def delta(name, **labels):
        return _value(after, name, **labels) - _value(before, name, **labels)

    ok = {"family": "plate", "route": "/v1/plate", "method": "POST", "status": "200"}
    assert delta("conduction_http_requests_total", **ok) == 1
    assert delta("conduction_http_requests_total", **{**ok, "status": "422"}) == 1
    assert delta("conduction_http_requests_total", family="", route="unmatched", method="GET",
                 status="404") == 1
    assert delta("conduction_http_request_duration_seconds_count", family="plate",
                 route="/v1/plate", status="200") == 1
    outcome = {"family": "plate", "method": body["method"],
               "outcome": body["convergence"]["status"]}
    assert delta("conduction_solve_duration_seconds_count", **outcome) == 1
    # the terms the response reports are the terms observed
    assert delta("conduction_series_terms_count", family="plate") == 1
    assert delta("conduction_series_terms_sum", family="plate") == body["convergence"]["terms"]
    assert _value(after, "conduction_build_info", version=body["meta"]["service_version"]) == 1


def test_grid_cells_and_iterations_are_observed(client):
    before = _samples(client)
    observe_solve("grid", "grid", Convergence("max_iterations", "ran out", iterations=40,
                                              cells=38_000), 0.5)
    after = _samples(client)
    for name, total in (("conduction_grid_cells", 38_000), ("conduction_solver_iterations", 40)):
        assert _value(after, name + "_count", family="grid") - _value(
            before, name + "_count", family="grid") == 1
        assert _value(after, name + "_sum", family="grid") - _value(
            before, name + "_sum", family="grid") == total
    assert _value(after, "conduction_solve_duration_seconds_count", family="grid",
                  method="grid", outcome="max_iterations") >= 1


def test_odd_methods_do_not_make_new_series(client):
    before = _samples(client)
    client.open("/healthz", method="BREW")
    after = _samples(client)
    assert _value(after, "conduction_http_requests_total", family="", route="unmatched",
                  method="other", status="405") - _value(
        before, "conduction_http_requests_total", family="", route="unmatched",
        method="other", status="405") == 1


def test_in_flight_returns_to_zero(client):
    client.get("/healthz")
    # the scrape itself is the one request in flight
    assert _value(_samples(client), "conduction_http_requests_in_flight") == 1


def test_metrics_endpoint_is_open_by_default():
    assert create_app({"TESTING": True}).test_client().get("/metrics").status_code == 200
