"""Requests per second through the real gunicorn server (2 sync workers, loopback).

Uses wrk (Debian package `wrk`) when installed, else a bounded Python thread load. Targets
(this 2-core machine, the load generator sharing the cores): a 5-point plate request at 2400
requests/s or more, a 101x101 grid request at 800 or more.

    .venv/bin/python bench/http_throughput.py [--seconds 10]
"""

from __future__ import annotations

import argparse
import json
import pathlib
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time

import requests

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import _server  # noqa: E402

PLATE = {
    "width": 0.6, "height": 1.0, "conductivity": 52,
    "edges": {"bottom": {"type": "temperature", "value": 100},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 750, "ambient": 0},
              "top": {"type": "flux", "value": -200}},
}
CASES = {
    "plate, 5 points": {**PLATE, "points": [[0.1, 0.1], [0.3, 0.5], [0.5, 0.9], [0.6, 0.2],
                                             [0.0, 1.0]]},
    "plate, 101x101 grid": {**PLATE, "grid": {"nx": 101, "ny": 101}},
    "trivial GET /healthz": None,
}


def with_wrk(url: str, body: dict | None, seconds: int, connections: int = 16) -> dict:
    with tempfile.NamedTemporaryFile("w", suffix=".lua", delete=False) as script:
        if body is not None:
            script.write('wrk.method = "POST"\n')
            script.write(f"wrk.body = {json.dumps(json.dumps(body))}\n")
            script.write('wrk.headers["Content-Type"] = "application/json"\n')
    out = subprocess.run(["wrk", "-t2", f"-c{connections}", f"-d{seconds}s", "--latency",
                          "-s", script.name, url], capture_output=True, text=True, check=True)
    text = out.stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", text).group(1))
    p50 = re.search(r"50%\s+([\d.]+\w+)", text).group(1)
    p99 = re.search(r"99%\s+([\d.]+\w+)", text).group(1)
    errors = re.search(r"Non-2xx or 3xx responses: (\d+)", text)
    return {"rps": rps, "p50": p50, "p99": p99, "errors": int(errors.group(1)) if errors else 0}


def with_threads(url: str, body: dict | None, seconds: int, clients: int = 8) -> dict:
    latencies: list[float] = []
    errors = 0
    lock = threading.Lock()
    stop_at = time.monotonic() + seconds

    def worker() -> None:
        nonlocal errors
        session = requests.Session()
        while time.monotonic() < stop_at:
            t0 = time.perf_counter()
            r = (session.post(url, json=body, timeout=30) if body is not None
                 else session.get(url, timeout=30))
            with lock:
                latencies.append(time.perf_counter() - t0)
                errors += r.status_code != 200

    threads = [threading.Thread(target=worker) for _ in range(clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    q = statistics.quantiles(latencies, n=100)
    return {"rps": len(latencies) / seconds, "p50": f"{q[49] * 1e3:.2f}ms",
            "p99": f"{q[98] * 1e3:.2f}ms", "errors": errors}


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--seconds", type=int, default=10)
    args = parser.parse_args()
    load = with_wrk if shutil.which("wrk") else with_threads
    proc, base = _server.start(workers=2)
    try:
        print(f"load generator: {'wrk' if load is with_wrk else 'python threads'}, "
              f"{args.seconds} s per case, 2 sync workers")
        print(f"{'case':<24} {'req/s':>9} {'p50':>10} {'p99':>10} {'errors':>7}")
        for name, body in CASES.items():
            path = "/healthz" if body is None else "/v1/plate"
            load(base + path, body, 2)  # warm-up
            r = load(base + path, body, args.seconds)
            print(f"{name:<24} {r['rps']:>9.0f} {r['p50']:>10} {r['p99']:>10} {r['errors']:>7}")
    finally:
        _server.stop(proc)


if __name__ == "__main__":
    main()
