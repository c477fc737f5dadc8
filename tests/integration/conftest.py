"""Start the real gunicorn server on a free loopback port for the integration tests."""

from __future__ import annotations

import os
import pathlib
import signal
import socket
import subprocess
import sys
import time

import pytest
import requests

ROOT = pathlib.Path(__file__).resolve().parents[2]


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def start_server(extra_env: dict[str, str] | None = None, workers: int = 2):
    port = free_port()
    env = {**os.environ, "CONDUCTION_BIND": f"127.0.0.1:{port}",
           "CONDUCTION_WORKERS": str(workers), "CONDUCTION_ACCESS_LOG": "/dev/null",
           **(extra_env or {})}
    gunicorn = pathlib.Path(sys.executable).with_name("gunicorn")
    proc = subprocess.Popen([str(gunicorn), "-c", "deploy/gunicorn.conf.py"], cwd=ROOT, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    base = f"http://127.0.0.1:{port}"
    deadline = time.monotonic() + 30
    while time.monotonic() < deadline:
        if proc.poll() is not None:
            raise RuntimeError("gunicorn exited: " + proc.stderr.read().decode()[-2000:])
        try:
            if requests.get(base + "/healthz", timeout=5).status_code == 200:
                return proc, base
        except requests.RequestException:
            time.sleep(0.1)
    proc.kill()
    raise RuntimeError("gunicorn did not become healthy within 30 s")


def stop_server(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGTERM)
    try:
        proc.wait(timeout=20)
    except subprocess.TimeoutExpired:
        proc.kill()
        proc.wait()
    if proc.stderr:
        proc.stderr.close()


@pytest.fixture(scope="session")
def server():
    proc, base = start_server()
    yield base
    stop_server(proc)
