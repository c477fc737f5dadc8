"""Keep-alive connections against the real gunicorn (service/ops/worker.py).

One server with 2 workers, a short keep-alive time and a small per-connection request cap
serves the module. Traffic goes to 127.0.0.1 only; every wait is bounded, and the timing bounds
are generous correctness bounds (a starved connection waits for seconds), not speed targets.
"""

from __future__ import annotations

import http.client
import signal
import threading
import time

import pytest
import requests

from tests.conftest import PLATE_PAYLOAD
from tests.integration.conftest import start_server, stop_server
from tests.integration.test_slow_clients import (
    PLATE_BODY,
    connect,
    dropped,
    plate_request,
    read_all,
    read_response,
    status_and_body,
)

KEEPALIVE_SECONDS = 1
KEEPALIVE_REQUESTS = 4


@pytest.fixture(scope="module")
def kept_server():
    proc, base = start_server({"CONDUCTION_KEEPALIVE_SECONDS": str(KEEPALIVE_SECONDS),
                               "CONDUCTION_KEEPALIVE_REQUESTS": str(KEEPALIVE_REQUESTS)},
                              workers=2)
    yield proc, base, int(base.rsplit(":", 1)[1])
    stop_server(proc)


def _connection_header(response: http.client.HTTPResponse) -> str:
    return (response.getheader("Connection") or "").lower()


def test_one_connection_serves_requests_up_to_the_cap_then_closes(kept_server):
    _, _, port = kept_server
    conn = http.client.HTTPConnection("127.0.0.1", port, timeout=10)
    try:
        local_ports = set()
        for i in range(KEEPALIVE_REQUESTS):
            conn.request("POST", "/v1/plate", body=PLATE_BODY,
                         headers={"Content-Type": "application/json"})
            local_ports.add(conn.sock.getsockname()[1])
            response = conn.getresponse()
            body = response.read()
            assert response.status == 200, body[:300]
            last = i == KEEPALIVE_REQUESTS - 1
            assert _connection_header(response) == ("close" if last else "keep-alive")
        assert len(local_ports) == 1  # every request went over the one connection
        # the server closed it after the last answer
        assert conn.sock is None or read_all(conn.sock, 3.0) == b""
    finally:
        conn.close()


def test_an_idle_connection_is_closed_quietly_after_the_keepalive_time(kept_server):
    _, base, port = kept_server
    before = dropped(base)
    sock = connect(port)
    try:
        sock.sendall(plate_request())
        head = read_response(sock, 10.0)
        assert head.startswith(b"HTTP/1.1 200") and b"keep-alive" in head.lower()
        started = time.monotonic()
        assert read_all(sock, 5.0 + KEEPALIVE_SECONDS) == b""  # closed, nothing said
        assert time.monotonic() - started < KEEPALIVE_SECONDS + 3.0
    finally:
        sock.close()
    # an idle keep-alive connection ending is no dropped request
    assert dropped(base) == before


@pytest.mark.parametrize("request_bytes", [
    plate_request(extra=b"Connection: close\r\n"),
    plate_request().replace(b"HTTP/1.1", b"HTTP/1.0"),
    (b"POST /v1/plate HTTP/1.1\r\nHost: t\r\nContent-Type: application/json\r\n"
     b"Transfer-Encoding: chunked\r\n\r\n%x\r\n%s\r\n0\r\n\r\n" % (len(PLATE_BODY), PLATE_BODY)),
], ids=["client-asks-close", "http-1.0", "chunked-body"])
def test_connections_close_when_http_asks_or_the_request_was_not_framed(kept_server,
                                                                       request_bytes):
    _, _, port = kept_server
    sock = connect(port)
    try:
        sock.sendall(request_bytes)
        raw = read_all(sock, 5.0)  # returns because the server closes
    finally:
        sock.close()
    status, body = status_and_body(raw)
    assert status == 200 and body["kind"] == "plate"
    assert b"\r\nconnection: close\r\n" in raw.split(b"\r\n\r\n")[0].lower()


def test_busy_keepalive_clients_do_not_starve_new_connections(kept_server):
    """8 clients keep both workers' queues full over kept-alive connections; a newcomer on a
    fresh connection is still accepted and answered promptly (a worker takes at least one new
    connection per turn even while requests wait)."""
    _, base, _ = kept_server
    stop = threading.Event()
    served = []

    def hammer() -> None:
        session = requests.Session()
        count = 0
        while not stop.is_set():
            count += session.get(base + "/healthz", timeout=10).status_code == 200
        served.append(count)

    threads = [threading.Thread(target=hammer) for _ in range(8)]
    for t in threads:
        t.start()
    try:
        time.sleep(0.3)
        waits = []
        for _ in range(5):
            started = time.monotonic()
            response = requests.post(base + "/v1/plate", json=PLATE_PAYLOAD, timeout=10,
                                     headers={"Connection": "close"})
            waits.append(time.monotonic() - started)
            assert response.status_code == 200
    finally:
        stop.set()
        for t in threads:
            t.join(timeout=15)
    assert max(waits) < 1.0, waits
    assert sum(served) > 0


def test_a_stop_closes_idle_connections_at_once():
    """SIGTERM with kept-alive connections open: the idle ones are closed (they have not begun
    a request), so the stop does not wait for their keep-alive time."""
    proc, base = start_server({"CONDUCTION_KEEPALIVE_SECONDS": "60"}, workers=2)
    port = int(base.rsplit(":", 1)[1])
    idle = []
    try:
        for _ in range(4):
            sock = connect(port)
            sock.sendall(plate_request())
            assert read_response(sock, 10.0).startswith(b"HTTP/1.1 200")
            idle.append(sock)
        started = time.monotonic()
        proc.send_signal(signal.SIGTERM)
        for sock in idle:
            assert read_all(sock, 10.0) == b""  # closed without an answer
        proc.wait(timeout=15)
        assert time.monotonic() - started < 10.0  # not the 60 s keep-alive time
    finally:
        for sock in idle:
            sock.close()
        stop_server(proc)  # also closes its stderr pipe; no signal once it has exited
