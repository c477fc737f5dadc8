"""Operations against the real gunicorn: metrics, request IDs, keys, budgets, drain on SIGTERM.

Servers are started like `start_server` in conftest.py (same command, same environment
handling) but with their output sent to files, so the JSON logs can be read, and with a start-up
wait that tolerates slow first answers on a busy machine.
"""

from __future__ import annotations

import http.client
import json
import os
import pathlib
import signal
import subprocess
import sys
import time
import uuid
from datetime import datetime

import pytest
import requests
from prometheus_client.parser import text_string_to_metric_families

from service.ops.keys import hash_key
from tests.conftest import PLATE_PAYLOAD
from tests.integration.conftest import free_port, stop_server

ROOT = pathlib.Path(__file__).resolve().parents[2]
KEY = "integration-" + uuid.uuid4().hex
TIME_BUDGET = 0.4

pytestmark = pytest.mark.integration


class Server:
    def __init__(self, extra_env: dict[str, str], tmp: pathlib.Path, workers: int = 2) -> None:
        port = free_port()
        self.bind = f"127.0.0.1:{port}"
        self.base = f"http://{self.bind}"
        self.stdout_path, self.stderr_path = tmp / "stdout.log", tmp / "stderr.log"
        env = {**os.environ, "CONDUCTION_BIND": self.bind, "CONDUCTION_WORKERS": str(workers),
               **extra_env}
        gunicorn = pathlib.Path(sys.executable).with_name("gunicorn")
        with open(self.stdout_path, "wb") as out, open(self.stderr_path, "wb") as err:
            self.proc = subprocess.Popen([str(gunicorn), "-c", "deploy/gunicorn.conf.py"],
                                         cwd=ROOT, env=env, stdout=out, stderr=err)
        deadline = time.monotonic() + 60
        while time.monotonic() < deadline:
            if self.proc.poll() is not None:
                raise RuntimeError("gunicorn exited: " + self.stderr_path.read_text()[-2000:])
            try:
                if requests.get(self.base + "/healthz", timeout=5).status_code == 200:
                    return
            except requests.RequestException:
                time.sleep(0.1)
        self.proc.kill()
        raise RuntimeError("gunicorn did not become healthy within 60 s")

    def logs(self) -> str:
        return self.stdout_path.read_text() + self.stderr_path.read_text()

    def stop(self) -> None:
        if self.proc.poll() is None:
            stop_server(self.proc)


def metric_samples(base: str) -> dict[tuple[str, frozenset], float]:
    response = requests.get(base + "/metrics", timeout=10)
    assert response.status_code == 200
    return {(s.name, frozenset(s.labels.items())): s.value
            for family in text_string_to_metric_families(response.text)
            for s in family.samples}


def sample(samples, name: str, **labels: str) -> float:
    return samples.get((name, frozenset(labels.items())), 0.0)


@pytest.fixture(scope="module")
def keyed(tmp_path_factory):
    """Keys on (one labelled digest), query keys allowed on GET."""
    server = Server({"CONDUCTION_API_KEY_HASHES": f"ci-sheet:{hash_key(KEY)}",
                     "CONDUCTION_API_KEY_QUERY": "true"}, tmp_path_factory.mktemp("keyed"))
    yield server
    server.stop()


@pytest.fixture(scope="module")
def budgeted(tmp_path_factory):
    """No keys, a short time budget."""
    server = Server({"CONDUCTION_TIME_BUDGET_SECONDS": str(TIME_BUDGET)},
                    tmp_path_factory.mktemp("budgeted"))
    yield server
    server.stop()


# --------------------------------------------------------------------------- keys


def test_health_readiness_and_metrics_need_no_key(keyed):
    for path in ("/healthz", "/readyz", "/metrics"):
        assert requests.get(keyed.base + path, timeout=10).status_code == 200, path


def test_keys_are_enforced(keyed):
    url = keyed.base + "/v1/plate"
    missing = requests.post(url, json=PLATE_PAYLOAD, timeout=10)
    assert missing.status_code == 401
    assert missing.headers["Content-Type"].startswith("application/problem+json")
    assert missing.json()["type"] == "/problems/unauthorized"
    assert missing.headers["WWW-Authenticate"].startswith("Bearer")
    wrong = requests.post(url, json=PLATE_PAYLOAD, headers={"X-API-Key": KEY + "x"}, timeout=10)
    assert wrong.status_code == 401
    for headers in ({"Authorization": f"Bearer {KEY}"}, {"X-API-Key": KEY}):
        assert requests.post(url, json=PLATE_PAYLOAD, headers=headers,
                             timeout=30).status_code == 200
    eigen = keyed.base + "/v1/eigenvalues"
    query = {"geometry": "slab", "count": "2", "api_key": KEY}
    assert requests.get(eigen, params=query, timeout=10).status_code == 200
    refused = requests.post(url, params={"api_key": KEY}, json=PLATE_PAYLOAD, timeout=10)
    assert refused.status_code == 403 and refused.json()["type"] == "/problems/forbidden"


# --------------------------------------------------------------------------- request IDs, logs


def test_request_ids_propagate_and_logs_are_json_without_secrets(keyed):
    rid = "ops-" + uuid.uuid4().hex
    payload = {**PLATE_PAYLOAD, "conductivity": 51.987654321}  # must not reach the log
    response = requests.post(keyed.base + "/v1/plate", json=payload, timeout=30,
                             headers={"X-API-Key": KEY, "X-Request-ID": rid})
    assert response.headers["X-Request-ID"] == rid
    assert response.json()["meta"]["request_id"] == rid
    problem = requests.post(keyed.base + "/v1/plate", json=payload, timeout=10,
                            headers={"X-Request-ID": rid + "-b"})
    assert problem.status_code == 401 and problem.json()["request_id"] == rid + "-b"
    generated = requests.get(keyed.base + "/healthz", timeout=10).headers["X-Request-ID"]
    assert len(generated) == 32
    requests.get(keyed.base + "/v1/eigenvalues", timeout=10,
                 params={"geometry": "slab", "count": "2", "api_key": KEY})
    time.sleep(0.2)  # let the workers' lines reach the file
    logs = keyed.logs()
    assert KEY not in logs and "51.987654321" not in logs
    entries = [json.loads(line) for line in logs.splitlines() if line.strip()]  # all JSON
    mine = [e for e in entries if e.get("request_id") == rid and e.get("event") == "request"]
    assert len(mine) == 1
    assert mine[0]["route"] == "/v1/plate" and mine[0]["status"] == 200
    assert mine[0]["client"] == "ci-sheet" and mine[0]["family"] == "plate"
    assert any(e.get("logger") == "gunicorn.error" for e in entries)


# --------------------------------------------------------------------------- metrics


def test_metrics_count_requests_over_all_workers(keyed):
    before = metric_samples(keyed.base)
    terms = 0
    n = 8
    for _ in range(n):  # sync workers close each connection: requests spread over both
        body = requests.post(keyed.base + "/v1/plate", json=PLATE_PAYLOAD, timeout=30,
                             headers={"X-API-Key": KEY, "Connection": "close"}).json()
        terms += body["convergence"]["terms"]
    requests.post(keyed.base + "/v1/plate", json=PLATE_PAYLOAD, timeout=10)  # 401
    after = metric_samples(keyed.base)

    def delta(name, **labels):
        return sample(after, name, **labels) - sample(before, name, **labels)

    ok = {"family": "plate", "route": "/v1/plate", "method": "POST", "status": "200"}
    assert delta("conduction_http_requests_total", **ok) == n
    assert delta("conduction_http_requests_total", **{**ok, "status": "401"}) == 1
    assert delta("conduction_http_request_duration_seconds_count", family="plate",
                 route="/v1/plate", status="200") == n
    assert delta("conduction_auth_failures_total", reason="missing") == 1
    outcome = {"family": "plate", "method": body["method"],
               "outcome": body["convergence"]["status"]}
    # the same problem each time: each worker solves it once, then reuses its answer
    computed = delta("conduction_answers_total", family="plate", result="computed")
    assert computed <= 2  # none when an earlier test of this server asked it on both
    assert delta("conduction_answers_total", family="plate", result="reused") == n - computed
    assert delta("conduction_solve_duration_seconds_count", **outcome) == computed
    assert delta("conduction_series_terms_count", family="plate") == computed
    assert delta("conduction_series_terms_sum", family="plate") == (
        terms * computed / n)
    assert sample(after, "conduction_answer_cache_bytes") > 0
    # only the scrape itself is in flight, whichever worker answers it
    assert sample(after, "conduction_http_requests_in_flight") == 1


# --------------------------------------------------------------------------- budgets


def test_oversized_work_is_refused_quickly(budgeted):
    url = budgeted.base + "/v1/plate"
    cases = [
        ({**PLATE_PAYLOAD, "points": [[0.3, 0.5]] * 10_001}, "points", "10000"),
        ({**PLATE_PAYLOAD, "grid": {"nx": 1001, "ny": 1000}}, "grid", "1000000"),
    ]
    for payload, field, limit in cases:
        started = time.monotonic()
        response = requests.post(url, json=payload, timeout=30)
        elapsed = time.monotonic() - started
        assert response.status_code == 413, response.text
        body = response.json()
        assert body["type"] == "/problems/too-large" and limit in body["detail"]
        assert field in body["errors"]
        assert elapsed < 2.0, f"{field}: refused after {elapsed:.2f} s"  # nothing was solved
    started = time.monotonic()
    big = requests.post(url, data=b"[" + b"0," * 1_100_000 + b"0]", timeout=30,
                        headers={"Content-Type": "application/json"})
    assert big.status_code == 413 and "2000000 bytes" in big.json()["detail"]
    assert time.monotonic() - started < 5.0


def test_time_budget_stops_a_slow_request(budgeted):
    # within every size limit, but far more work than TIME_BUDGET allows: 10000 points and a
    # 1000 x 1000 output field from the finite-volume method (about a second of solving)
    heavy = {**PLATE_PAYLOAD, "points": [[0.3, 0.5]] * 10_000, "grid": {"nx": 1000, "ny": 1000},
             "method": "grid"}
    started = time.monotonic()
    response = requests.post(budgeted.base + "/v1/plate", json=heavy, timeout=60)
    elapsed = time.monotonic() - started
    assert response.status_code == 413, response.text[:500]
    body = response.json()
    assert body["type"] == "/problems/too-large"
    assert body["diagnostics"] == {"time_budget_seconds": TIME_BUDGET}
    assert elapsed < TIME_BUDGET + 3.0
    # the worker is disarmed and serves on: small requests on both workers answer normally
    for _ in range(4):
        small = requests.post(budgeted.base + "/v1/plate", json=PLATE_PAYLOAD, timeout=30,
                              headers={"Connection": "close"})
        assert small.status_code == 200
    metrics = metric_samples(budgeted.base)
    assert sample(metrics, "conduction_time_budget_exceeded_total", route="/v1/plate") == 1


def test_container_healthcheck_command(budgeted):
    env = {**os.environ, "CONDUCTION_BIND": budgeted.bind.replace("127.0.0.1", "0.0.0.0")}
    ok = subprocess.run([sys.executable, "-m", "service.ops.healthcheck"], cwd=ROOT, env=env,
                        capture_output=True, timeout=30)
    assert ok.returncode == 0, ok.stderr
    env["CONDUCTION_BIND"] = f"127.0.0.1:{free_port()}"
    down = subprocess.run([sys.executable, "-m", "service.ops.healthcheck"], cwd=ROOT, env=env,
                          capture_output=True, text=True, timeout=30)
    assert down.returncode == 1 and "failed" in down.stderr


# --------------------------------------------------------------------------- drain on SIGTERM


def _served(base: str) -> bool:
    """Whether a new request is answered. After the drain the master closes its listening
    socket, but a worker still finishing a request holds its copy open: the kernel may accept a
    new connection that nobody serves, so "not served" is a refusal or a timeout."""
    try:
        requests.get(base + "/healthz", timeout=1)
    except requests.RequestException:
        return False
    return True


def _seconds_between(logs: str, first: str, second: str) -> float:
    """Seconds between the master's log lines starting with `first` and with `second`."""
    stamps = {}
    for line in logs.splitlines():
        entry = json.loads(line)
        for prefix in (first, second):
            if entry["message"].startswith(prefix):
                stamps[prefix] = datetime.fromisoformat(entry["time"].replace("Z", "+00:00"))
    return (stamps[second] - stamps[first]).total_seconds()


def test_sigterm_flips_readiness_and_lets_the_in_flight_request_finish(tmp_path):
    drain = 1.0
    server = Server({"CONDUCTION_DRAIN_SECONDS": str(drain)}, tmp_path)
    host, port = server.bind.split(":")
    body = json.dumps(PLATE_PAYLOAD).encode()
    # A request in flight: headers and half the body sent, the rest held back, so one worker is
    # busy with it for as long as this test likes (whatever the solver's speed).
    slow = http.client.HTTPConnection(host, int(port), timeout=30)
    try:
        slow.putrequest("POST", "/v1/plate")
        slow.putheader("Content-Type", "application/json")
        slow.putheader("Content-Length", str(len(body)))
        slow.putheader("X-Request-ID", "in-flight")
        slow.endheaders()
        slow.send(body[: len(body) // 2])
        time.sleep(0.3)
        assert requests.get(server.base + "/readyz", timeout=10).status_code == 200

        sent = time.monotonic()
        server.proc.send_signal(signal.SIGTERM)
        states = []
        while "drain period over" not in server.logs() and time.monotonic() - sent < 15:
            try:
                ready = requests.get(server.base + "/readyz", timeout=3)
                live = requests.get(server.base + "/healthz", timeout=3)
            except requests.RequestException:
                # the drain ended between the log check and this probe (see _served)
                time.sleep(0.2)
                assert "drain period over" in server.logs()
                break
            states.append((ready.status_code, live.status_code))
            time.sleep(0.05)
        # readiness went 503 as soon as the master handled the signal (a poll or two) and stayed
        # so while liveness stayed 200, for about the drain period
        first = next(i for i, (ready_status, _) in enumerate(states) if ready_status == 503)
        assert first <= 2 and set(states[:first]) <= {(200, 200)}, states
        assert set(states[first:]) == {(503, 200)}, states
        assert ready.json()["type"] == "/problems/unavailable"
        # the master keeps serving for the drain period (it checks about once a second)
        assert drain <= _seconds_between(server.logs(), "SIGTERM: draining",
                                         "drain period over") <= drain + 1.5
        time.sleep(0.3)
        assert not _served(server.base)  # stopping: nothing new is taken

        # the in-flight request still completes
        slow.send(body[len(body) // 2:])
        response = slow.getresponse()
        assert response.status == 200
        answer = json.loads(response.read())
        assert answer["meta"]["request_id"] == "in-flight"
        assert answer["convergence"]["converged"] is True
        assert server.proc.wait(timeout=20) == 0
    finally:
        slow.close()
        server.stop()
    assert "draining for 1 s" in server.logs()
