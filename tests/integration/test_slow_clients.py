"""Slow and half-sent requests against the real gunicorn (service/ops/worker.py).

One server with 2 workers, a short read deadline and a small body limit serves the module.
Traffic goes to 127.0.0.1 only; every wait is bounded. Timing bounds here are generous
correctness bounds (a blocked worker would hold a request for the whole worker timeout), not
speed targets. The worker's drops are checked in `/metrics` too
(`conduction_connections_dropped_total`, merged over both workers).
"""

from __future__ import annotations

import json
import signal
import socket
import threading
import time
import urllib.parse

import pytest
import requests

from tests.conftest import PLATE_PAYLOAD
from tests.integration.conftest import start_server, stop_server
from tests.integration.test_faults import _workers
from tests.integration.test_ops import metric_samples, sample

READ_SECONDS = 1.5
MAX_BODY = 200_000
PENDING = 25  # incomplete requests per worker
PLATE_BODY = json.dumps(PLATE_PAYLOAD).encode()


@pytest.fixture(scope="module")
def slow_server():
    proc, base = start_server({"CONDUCTION_REQUEST_READ_SECONDS": str(READ_SECONDS),
                               "CONDUCTION_MAX_BODY_BYTES": str(MAX_BODY),
                               "CONDUCTION_PENDING_CONNECTIONS": str(PENDING)}, workers=2)
    yield proc, base, int(base.rsplit(":", 1)[1])
    stop_server(proc)


DROPPED = "conduction_connections_dropped_total"


def dropped(base: str) -> dict[str, float]:
    """reason -> connections dropped so far, over all workers."""
    samples = metric_samples(base)
    return {reason: sample(samples, DROPPED, reason=reason)
            for reason in ("expired", "evicted", "too_large", "line_too_long")}


def connect(port: int) -> socket.socket:
    return socket.create_connection(("127.0.0.1", port), timeout=5)


def read_all(sock: socket.socket, limit: float = 5.0) -> bytes:
    """Everything the server sends until it closes (at most `limit` seconds)."""
    sock.settimeout(limit)
    out = b""
    try:
        while chunk := sock.recv(65536):
            out += chunk
    except ConnectionResetError:
        pass
    return out


def read_response(sock: socket.socket, limit: float = 5.0) -> bytes:
    """One whole response (head, then Content-Length bytes of body), whether or not the
    server then keeps the connection open (at most `limit` seconds)."""
    sock.settimeout(limit)
    out = b""
    while b"\r\n\r\n" not in out:
        chunk = sock.recv(65536)
        assert chunk, out
        out += chunk
    head, _, body = out.partition(b"\r\n\r\n")
    length = int(head.lower().split(b"content-length:")[1].split(b"\r\n")[0])
    while len(body) < length:
        chunk = sock.recv(65536)
        assert chunk, out
        body += chunk
    return head + b"\r\n\r\n" + body


def plate_request(body: bytes = PLATE_BODY, extra: bytes = b"") -> bytes:
    return (b"POST /v1/plate HTTP/1.1\r\nHost: t\r\nContent-Type: application/json\r\n"
            b"Content-Length: %d\r\n%s\r\n" % (len(body), extra)) + body


def status_and_body(raw: bytes) -> tuple[int, dict]:
    head, _, body = raw.partition(b"\r\n\r\n")
    return int(head.split(b" ", 2)[1]), json.loads(body)


def test_half_sent_requests_do_not_block_other_clients(slow_server):
    proc, base, port = slow_server
    workers_before = _workers(proc.pid)
    slow: list[socket.socket] = []
    stop = threading.Event()
    try:
        for i in range(20):
            sock = connect(port)
            if i % 3 == 0:  # a head that never ends
                sock.sendall(b"POST /v1/plate HTTP/1.1\r\nHost: t\r\nContent-Type: applic")
            elif i % 3 == 1:  # a body shorter than its Content-Length
                sock.sendall(plate_request()[:-10])
            slow.append(sock)  # the others trickle one byte every 0.5 s

        def trickle() -> None:
            data = plate_request()
            for step in range(len(data)):  # bounded by the data and the stop event
                for sock in slow[2::3]:
                    try:
                        sock.send(data[step:step + 1])
                    except OSError:
                        pass
                if stop.wait(0.5):
                    return

        trickler = threading.Thread(target=trickle)
        trickler.start()
        time.sleep(0.3)
        session = requests.Session()
        for _ in range(10):
            started = time.monotonic()
            response = session.post(base + "/v1/plate", json=PLATE_PAYLOAD, timeout=5)
            assert response.status_code == 200
            # a blocked worker would hold this for the read deadline or longer
            assert time.monotonic() - started < READ_SECONDS
        assert requests.get(base + "/healthz", timeout=5).status_code == 200
    finally:
        stop.set()
        trickler.join(timeout=5)
        for sock in slow:
            sock.close()
    assert _workers(proc.pid) == workers_before  # heartbeats kept: no worker was killed


def test_beyond_the_pending_cap_the_oldest_incomplete_connections_are_closed(slow_server):
    _, base, port = slow_server
    before = dropped(base)
    opened: list[socket.socket] = []
    try:
        for _ in range(2 * PENDING + 10):
            sock = connect(port)
            sock.sendall(plate_request()[:-10])
            opened.append(sock)
        time.sleep(0.2)
        assert requests.post(base + "/v1/plate", json=PLATE_PAYLOAD, timeout=5).status_code == 200
        closed = []
        for sock in opened:  # well before the read deadline: only evictions have happened
            sock.setblocking(False)
            try:
                closed.append(sock.recv(1) == b"")
            except BlockingIOError:
                closed.append(False)
        assert sum(closed) >= 10  # two workers hold at most 2 * PENDING
        assert not any(closed[-10:])  # the newest were kept
        assert dropped(base)["evicted"] - before["evicted"] >= sum(closed)
    finally:
        for sock in opened:
            sock.close()


@pytest.mark.parametrize("shape", ["head", "body", "trickle"])
def test_a_half_sent_request_is_answered_408_at_the_read_deadline(slow_server, shape):
    _, _, port = slow_server
    sock = connect(port)
    try:
        started = time.monotonic()
        data = plate_request()
        if shape == "head":
            sock.sendall(data[:40])
        elif shape == "body":
            sock.sendall(data[:-1])
        else:  # still sending, one byte every 0.25 s: the deadline is for the whole request
            for step in range(int(READ_SECONDS / 0.25) + 2):
                try:
                    sock.send(data[step:step + 1])
                except OSError:
                    break
                time.sleep(0.25)
        raw = read_all(sock)
        elapsed = time.monotonic() - started
    finally:
        sock.close()
    status, problem = status_and_body(raw)
    assert status == 408
    assert problem["type"] == "/problems/bad-request" and problem["status"] == 408
    assert READ_SECONDS - 0.2 < elapsed < READ_SECONDS + 3


def test_an_expired_half_sent_request_is_counted_in_the_metrics(slow_server):
    _, base, port = slow_server
    before = dropped(base)
    with connect(port) as sock:
        sock.sendall(plate_request()[:-1])
        assert status_and_body(read_all(sock))[0] == 408
    after = dropped(base)
    # counted before the 408 is sent, so the scrape after it sees it
    assert after["expired"] - before["expired"] >= 1
    assert after["too_large"] == before["too_large"]
    assert after["line_too_long"] == before["line_too_long"]


def test_a_silent_connection_is_closed_at_the_read_deadline_without_an_answer(slow_server):
    _, _, port = slow_server
    with connect(port) as sock:
        started = time.monotonic()
        assert read_all(sock) == b""
        assert READ_SECONDS - 0.2 < time.monotonic() - started < READ_SECONDS + 3


def test_a_request_in_many_small_writes_is_served(slow_server):
    _, base, port = slow_server
    expected = requests.post(base + "/v1/plate", json=PLATE_PAYLOAD, timeout=5).json()
    data = plate_request()
    with connect(port) as sock:
        sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        for start in range(0, len(data), 40):
            sock.sendall(data[start:start + 40])
            time.sleep(0.01)
        status, body = status_and_body(read_response(sock))  # may stay open (keep-alive)
    assert status == 200
    assert body["results"] == expected["results"]


def test_pipelined_requests_get_one_answer_then_the_connection_closes(slow_server):
    _, _, port = slow_server
    with connect(port) as sock:
        sock.sendall(plate_request() + b"GET /healthz HTTP/1.1\r\nHost: t\r\n\r\n")
        raw = read_all(sock)
    assert raw.count(b"HTTP/1.1 ") == 1  # sync handling: one response, Connection: close
    assert b"\r\nconnection: close\r\n" in raw.split(b"\r\n\r\n")[0].lower()
    assert status_and_body(raw)[0] == 200
    session = requests.Session()  # a keep-alive client reconnects and is served each time
    for _ in range(3):
        assert session.get(f"http://127.0.0.1:{port}/healthz", timeout=5).status_code == 200


def test_a_chunked_request_is_buffered_to_its_last_chunk(slow_server):
    _, base, _ = slow_server
    pieces = [PLATE_BODY[i:i + 50] for i in range(0, len(PLATE_BODY), 50)]
    response = requests.post(base + "/v1/plate", data=iter(pieces),
                             headers={"Content-Type": "application/json"}, timeout=5)
    assert response.request.headers["Transfer-Encoding"] == "chunked"
    assert response.status_code == 200


def test_expect_100_continue_gets_one_interim_answer_before_the_body(slow_server):
    _, _, port = slow_server
    with connect(port) as sock:
        sock.sendall(plate_request(extra=b"Expect: 100-continue\r\n")[:-len(PLATE_BODY)])
        assert sock.recv(100) == b"HTTP/1.1 100 Continue\r\n\r\n"
        sock.sendall(PLATE_BODY)
        raw = read_response(sock)  # the connection may stay open (keep-alive)
    assert b"100 Continue" not in raw
    assert status_and_body(raw)[0] == 200


def test_a_declared_oversized_body_gets_the_apps_413_without_sending_it(slow_server):
    _, _, port = slow_server
    with connect(port) as sock:
        started = time.monotonic()
        sock.sendall(b"POST /v1/plate HTTP/1.1\r\nHost: t\r\nContent-Type: application/json"
                     b"\r\nContent-Length: %d\r\n\r\n{\"width\":" % (MAX_BODY + 1))
        raw = read_all(sock)
        assert time.monotonic() - started < READ_SECONDS  # not left to the read deadline
    status, problem = status_and_body(raw)
    assert status == 413 and problem["type"] == "/problems/too-large"
    assert "request_id" in problem  # answered by the app itself
    assert b"application/problem+json" in raw.split(b"\r\n\r\n")[0]


def test_an_oversized_chunked_body_gets_a_413_problem_from_the_worker(slow_server):
    _, base, port = slow_server
    before = dropped(base)
    with connect(port) as sock:
        sock.sendall(b"POST /v1/plate HTTP/1.1\r\nHost: t\r\nContent-Type: application/json"
                     b"\r\nTransfer-Encoding: chunked\r\n\r\n%x\r\n" % (MAX_BODY + 1))
        raw = read_all(sock)
    status, problem = status_and_body(raw)
    assert status == 413 and problem["type"] == "/problems/too-large"
    assert problem["detail"] == f"Request body exceeds the limit of {MAX_BODY} bytes."
    assert dropped(base)["too_large"] - before["too_large"] == 1


def test_a_16_kib_request_line_is_served_and_a_longer_one_refused(slow_server):
    _, base, _ = slow_server
    problem = {**PLATE_PAYLOAD, "points": [[0.3, 0.5]]}
    url = base + "/v1/plate?select=results.points.0.temperature&problem="
    while len(url) < 16000:  # a spreadsheet GET carrying many points
        problem["points"].append([0.3, 0.5])
        url = (base + "/v1/plate?select=results.points.0.temperature&problem="
               + urllib.parse.quote(json.dumps(problem, separators=(",", ":"))))
    response = requests.get(url, timeout=5)
    assert response.status_code == 200, response.text[:300]
    assert float(response.text) > 0
    before = dropped(base)
    too_long = requests.get(base + "/healthz?pad=" + "x" * 16384, timeout=5)
    assert too_long.status_code == 414
    assert too_long.headers["Content-Type"] == "application/problem+json"
    assert too_long.json()["detail"].startswith(
        "The request line is longer than the limit of 16384 bytes")
    assert dropped(base)["line_too_long"] - before["line_too_long"] == 1


def test_a_stop_finishes_arriving_requests_within_the_read_deadline_and_no_later():
    proc, base = start_server({"CONDUCTION_REQUEST_READ_SECONDS": str(READ_SECONDS)},
                              workers=1)
    port = int(base.rsplit(":", 1)[1])
    idle, half, finishing = connect(port), connect(port), connect(port)
    try:
        data = plate_request()
        half.sendall(data[:-5])
        finishing.sendall(data[:-5])
        time.sleep(0.3)
        assert requests.get(base + "/healthz", timeout=5).status_code == 200
        started = time.monotonic()
        proc.send_signal(signal.SIGTERM)
        assert read_all(idle) == b""  # had not begun a request: closed at once
        assert time.monotonic() - started < READ_SECONDS
        finishing.sendall(data[-5:])  # a request being received is still served
        assert status_and_body(read_all(finishing))[0] == 200
        assert status_and_body(read_all(half))[0] == 408  # the other gets its deadline
        assert proc.wait(timeout=15) == 0
        assert time.monotonic() - started < READ_SECONDS + 3  # not held by the slow client
    finally:
        for sock in (idle, half, finishing):
            sock.close()
        stop_server(proc)
