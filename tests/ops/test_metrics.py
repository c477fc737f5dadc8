"""Prometheus metrics in one process (the multi-process merge is checked against the real
gunicorn in tests/integration/test_ops.py, the worker's connection drops in
tests/integration/test_slow_clients.py)."""

from __future__ import annotations

import os
import pathlib
import subprocess
import sys

import pytest
from prometheus_client.parser import text_string_to_metric_families

from service.api.common import FAMILIES
from service.api.plate import plate_models_counted
from service.app import create_app
from service.ops.metrics import DROP_REASONS, observe_solve
from service.ops.worker import RequestBufferingWorker
from service.solvers.convergence import Convergence
from service.solvers.methods import solve_plate_by_method
from service.solvers.plate import CORES

ROOT = pathlib.Path(__file__).resolve().parents[2]


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
    # solved afresh even when an earlier test asked the same plate (answer reuse is checked in
    # tests/api/test_answers.py)
    body = client.post("/v1/plate", json=plate_payload,
                       headers={"Cache-Control": "no-cache"}).get_json()
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


# --------------------------------------------------------------------------- plate models


def _plate_models(client) -> tuple[float, float, float]:
    samples = _samples(client)
    return (_value(samples, "conduction_plate_models_total", result="built"),
            _value(samples, "conduction_plate_models_total", result="kept"),
            _value(samples, "conduction_plate_model_bytes"))


def _new_plate(plate_payload, width: float) -> dict:
    # a width no other test uses: a plate this process has not kept yet
    return {**plate_payload, "width": width}


def test_the_same_plate_twice_is_built_once_then_kept(client, plate_payload):
    payload = _new_plate(plate_payload, 0.6173)
    built0, kept0, _ = _plate_models(client)
    hits0, misses0 = CORES.hits, CORES.misses
    assert client.post("/v1/plate", json=payload).status_code == 200
    built1, kept1, nbytes = _plate_models(client)
    assert (built1 - built0, kept1 - kept0) == (1, 0)
    assert nbytes == CORES.nbytes() > 0  # the gauge is the cache's own figure
    # a second request for the same plate, other points: the model is kept
    payload["points"] = [[0.1, 0.9]]
    assert client.post("/v1/plate", json=payload).status_code == 200
    built2, kept2, nbytes = _plate_models(client)
    assert (built2 - built0, kept2 - kept0) == (1, 1)
    assert (CORES.misses - misses0, CORES.hits - hits0) == (1, 1)
    assert nbytes == CORES.nbytes()


def test_batch_and_sweep_items_count_once_each(client, plate_payload):
    payload = _new_plate(plate_payload, 0.6271)
    built0, kept0, _ = _plate_models(client)
    items = [{"id": f"i{i}", "kind": "plate", "problem": payload} for i in range(3)]
    response = client.post("/v1/batch", json={"items": items})
    assert response.get_json()["summary"]["succeeded"] == 3
    built1, kept1, _ = _plate_models(client)
    assert (built1 - built0, kept1 - kept0) == (1, 2)
    # a sweep over the film coefficient: two new plates
    sweep = {"kind": "plate", "base": payload,
             "vary": [{"path": "edges.right.film_coefficient", "values": [700, 800]}],
             "outputs": ["results.points.0.temperature"]}
    response = client.post("/v1/sweep", json=sweep)
    assert response.get_json()["failed"] == 0
    built2, kept2, nbytes = _plate_models(client)
    assert (built2 - built1, kept2 - kept1) == (2, 0)
    assert nbytes == CORES.nbytes()


def test_grid_solves_use_no_plate_model(client, plate_payload):
    before = _plate_models(client)
    payload = {**_new_plate(plate_payload, 0.6337), "method": "grid"}
    assert client.post("/v1/plate", json=payload).status_code == 200
    after = _plate_models(client)
    assert after[:2] == before[:2]


def test_a_solve_that_fails_after_building_still_counts(client, plate_payload):
    problem = FAMILIES["plate"].request_schema.load(_new_plate(plate_payload, 0.6411)).problem

    def fails_late(problem):  # as when the time budget runs out once the model is built
        solve_plate_by_method(problem)
        raise TimeoutError("time budget used up")

    before = _plate_models(client)
    with pytest.raises(TimeoutError):
        plate_models_counted(fails_late)(problem)
    after = _plate_models(client)
    assert (after[0] - before[0], after[1] - before[1]) == (1, 0)
    assert after[2] == CORES.nbytes()


# --------------------------------------------------------------------------- worker drops


def test_the_worker_module_keeps_flask_and_prometheus_out_of_the_master():
    # gunicorn's master imports the worker class by its dotted path before any fork
    code = ("import sys, service.ops.worker\n"
            "bad = [n for n in ('flask', 'werkzeug', 'marshmallow', 'prometheus_client',\n"
            "                   'service.ops.metrics', 'numpy') if n in sys.modules]\n"
            "print(','.join(bad))\n")
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True,
                         text=True, check=True, env={**os.environ, "PYTHONPATH": str(ROOT)})
    assert out.stdout.strip() == "", f"the worker module imported {out.stdout.strip()}"


class _Log:
    def __init__(self) -> None:
        self.warnings: list[str] = []

    def warning(self, message: str, *args: object) -> None:
        self.warnings.append(message % args)


def _bare_worker() -> RequestBufferingWorker:
    """The worker's counting state without a server (what run() sets up)."""
    worker = object.__new__(RequestBufferingWorker)
    worker.log = _Log()
    worker._dropped = dict.fromkeys(DROP_REASONS, 0)
    return worker


def test_worker_drops_are_counted_by_reason(client):
    worker = _bare_worker()
    worker._drop_counters = worker._load_drop_counters()
    assert sorted(worker._drop_counters) == sorted(DROP_REASONS)
    before = _samples(client)
    worker._count_drop("expired")
    worker._count_drop("expired")
    worker._count_drop("line_too_long")
    after = _samples(client)
    for reason, count in (("expired", 2), ("line_too_long", 1), ("evicted", 0),
                          ("too_large", 0)):
        assert _value(after, "conduction_connections_dropped_total", reason=reason) - _value(
            before, "conduction_connections_dropped_total", reason=reason) == count
    assert worker._dropped == {"expired": 2, "evicted": 0, "too_large": 0, "line_too_long": 1}
    assert worker.log.warnings == []


def test_the_worker_runs_without_its_metrics_and_says_so_once(monkeypatch):
    monkeypatch.setitem(sys.modules, "service.ops.metrics", None)  # the import fails
    worker = _bare_worker()
    worker._drop_counters = worker._load_drop_counters()
    assert worker._drop_counters == {}
    for reason in DROP_REASONS:
        worker._count_drop(reason)
    assert worker._dropped == dict.fromkeys(DROP_REASONS, 1)  # the log summary still counts
    assert len(worker.log.warnings) == 1
    assert worker.log.warnings[0].startswith("connection drops are not counted in the metrics")


def test_a_failing_counter_is_given_up_after_one_warning():
    class Broken:
        def inc(self) -> None:
            raise OSError("No space left on device")

    worker = _bare_worker()
    worker._drop_counters = {"evicted": Broken()}
    worker._count_drop("evicted")
    worker._count_drop("evicted")
    assert worker._dropped["evicted"] == 2
    assert len(worker.log.warnings) == 1
    assert "No space left on device" in worker.log.warnings[0]
