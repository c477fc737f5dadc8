"""Start and stop the real gunicorn server for benchmarks (loopback only)."""

from __future__ import annotations

import os
import pathlib
import signal
import socket
import subprocess
import sys
import time
import urllib.request

ROOT = pathlib.Path(__file__).resolve().parents[1]


def free_port() -> int:
    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return sock.getsockname()[1]


def start(workers: int = 2, extra_env: dict[str, str] | None = None):
    port = free_port()
    env = {**os.environ, "CONDUCTION_BIND": f"127.0.0.1:{port}",
           "CONDUCTION_WORKERS": str(workers), "CONDUCTION_ACCESS_LOG": "",
           "CONDUCTION_LOG_LEVEL": "WARNING", **(extra_env or {})}
    gunicorn = pathlib.Path(sys.executable).with_name("gunicorn")
    proc = subprocess.Popen([str(gunicorn), "-c", "deploy/gunicorn.conf.py"], cwd=ROOT, env=env,
                            stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    base = f"http://127.0.0.1:{port}"
    for _ in range(300):
        try:
            with urllib.request.urlopen(base + "/healthz", timeout=1):
                return proc, base
        except OSError:
            time.sleep(0.1)
    proc.kill()
    raise RuntimeError("server did not start")


def stop(proc: subprocess.Popen) -> None:
    proc.send_signal(signal.SIGTERM)
    proc.wait(timeout=30)
