"""Faults: a worker killed under load is replaced; slow clients do not block the others.

Traffic goes to 127.0.0.1 only and every loop is bounded in count and time.
"""

from __future__ import annotations

import os
import pathlib
import signal
import socket
import threading
import time

import requests

from tests.conftest import PLATE_PAYLOAD
from tests.integration.conftest import start_server, stop_server


def _workers(master_pid: int) -> set[int]:
    pids: set[int] = set()
    for task in pathlib.Path(f"/proc/{master_pid}/task").iterdir():
        pids.update(int(p) for p in (task / "children").read_text().split())
    return pids


def test_killed_worker_is_replaced_and_only_in_flight_requests_fail():
    proc, base = start_server(workers=2)
    try:
        outcomes: list[bool] = []
        stop = threading.Event()

        def load() -> None:
            session = requests.Session()
            for _ in range(2000):  # bounded
                if stop.is_set():
                    return
                try:
                    ok = session.post(base + "/v1/plate", json=PLATE_PAYLOAD,
                                      timeout=10).status_code == 200
                except requests.RequestException:
                    ok = False
                    session = requests.Session()
                outcomes.append(ok)

        clients = [threading.Thread(target=load) for _ in range(4)]
        for c in clients:
            c.start()
        time.sleep(1.0)
        before = _workers(proc.pid)
        victim = min(before)
        os.kill(victim, signal.SIGKILL)
        deadline = time.monotonic() + 15
        while time.monotonic() < deadline:
            now = _workers(proc.pid)
            if len(now) == 2 and victim not in now:
                break
            time.sleep(0.1)
        replaced_after = time.monotonic() - (deadline - 15)
        time.sleep(1.0)
        stop.set()
        for c in clients:
            c.join(timeout=30)
        assert victim not in _workers(proc.pid) and len(_workers(proc.pid)) == 2
        assert replaced_after < 10
        failures = outcomes.count(False)
        # only requests in flight on the killed worker may fail: at most one per client
        assert failures <= 4, f"{failures} failures out of {len(outcomes)}"
        assert outcomes.count(True) > 20
        assert requests.get(base + "/healthz", timeout=5).status_code == 200
    finally:
        stop_server(proc)


def test_a_slow_client_does_not_block_others():
    proc, base = start_server(workers=2)
    slow = socket.create_connection(("127.0.0.1", int(base.rsplit(":", 1)[1])), timeout=5)
    try:
        # half a request: headers promise a body that never fully arrives
        slow.sendall(b"POST /v1/plate HTTP/1.1\r\nHost: x\r\nContent-Type: application/json\r\n"
                     b"Content-Length: 1000\r\n\r\n{\"width\":")
        time.sleep(0.5)
        started = time.monotonic()
        for _ in range(5):
            response = requests.post(base + "/v1/plate", json=PLATE_PAYLOAD, timeout=10)
            assert response.status_code == 200
        assert time.monotonic() - started < 10
    finally:
        slow.close()
        stop_server(proc)
