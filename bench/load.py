"""Bounded mixed load against the real gunicorn server on 127.0.0.1.

16 concurrent clients for 60 s (both bounded; loopback only) send a mix of light (plate at
points), medium (layers with solve_for, transient with a target) and heavy (finite-volume grid)
requests. Reports requests per second and p50/p99 latency per class, the error count (must be
zero), and the workers' resident memory before and after at least 10,000 requests. Each client
keeps its connection alive and sends `Cache-Control: no-cache`, so every request is solved
(the bodies repeat, and reused answers would otherwise make this a test of look-ups).

    .venv/bin/python bench/load.py [--clients 16] [--seconds 60] [--min-requests 10000]
"""

from __future__ import annotations

import argparse
import itertools
import pathlib
import statistics
import sys
import threading
import time

import requests

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import _server  # noqa: E402

PLATE = {"width": 0.6, "height": 0.4, "conductivity": 50,
         "edges": {"bottom": {"type": "temperature", "value": 70}, "left": {"type": "insulated"},
                   "right": {"type": "convection", "film_coefficient": 15, "ambient": 5},
                   "top": {"type": "convection", "film_coefficient": 10, "ambient": 5}},
         "points": [[0.1, 0.1], [0.3, 0.2], [0.5, 0.3], [0.6, 0.4], [0.0, 0.0]]}
LAYERS = {"geometry": "cylinder", "inner_radius": 0.0545, "length": 1.0,
          "layers": [{"name": "pipe", "thickness": 0.004, "conductivity": 45},
                     {"name": "insulation", "thickness": 0.05, "conductivity": 0.04}],
          "inside": {"type": "convection", "film_coefficient": 1000, "ambient": 250},
          "outside": {"type": "convection_radiation", "film_coefficient": 8, "ambient": 20,
                      "emissivity": 0.9, "surroundings": 20},
          "solve_for": {"layer": 1, "target": {"surface_temperature": 55}}}
TRANSIENT = {"shape": "cylinder", "radius": 0.05, "conductivity": 45, "density": 7800,
             "specific_heat": 460, "initial_temperature": 900,
             "surface": {"type": "convection", "film_coefficient": 500, "ambient": 30},
             "times": [60, 600, 3600], "positions": [0, 0.025, 0.05],
             "target": {"temperature": 200, "position": 0}}
GRID = {"width": 0.5, "height": 0.05, "cells": {"nx": 200, "ny": 40}, "conductivity": 0.04,
        "zones": [{"name": "steel", "region": [0.2, 0, 0.3, 0.05], "conductivity": 50}],
        "edges": {"bottom": {"type": "temperature", "value": 150},
                  "top": {"type": "convection", "film_coefficient": 10, "ambient": 20},
                  "left": {"type": "insulated"}, "right": {"type": "insulated"}},
        "points": [[0.25, 0.05]]}
PLATE_HEAVY = {**PLATE, "points": [], "grid": {"nx": 101, "ny": 101}}

# (class, path, body, weight in the mix)
MIX = [("light: plate 5 points", "/v1/plate", PLATE, 6),
       ("medium: layers solve_for", "/v1/layers", LAYERS, 2),
       ("medium: transient target", "/v1/transient", TRANSIENT, 2),
       ("heavy: grid 8000 cells", "/v1/grid", GRID, 1),
       ("heavy: plate 101x101", "/v1/plate", PLATE_HEAVY, 1)]


def worker_rss(master_pid: int) -> dict[int, int]:
    """Resident memory (KiB) of each gunicorn worker (children of the master)."""
    out = {}
    for task in pathlib.Path(f"/proc/{master_pid}/task").iterdir():
        children = (task / "children").read_text().split()
        for pid in children:
            status = pathlib.Path(f"/proc/{pid}/status").read_text()
            rss = next(line for line in status.splitlines() if line.startswith("VmRSS"))
            out[int(pid)] = int(rss.split()[1])
    return out


def main() -> int:
    parser = argparse.ArgumentParser()
    parser.add_argument("--clients", type=int, default=16)
    parser.add_argument("--seconds", type=float, default=60.0)
    parser.add_argument("--min-requests", type=int, default=10_000)
    parser.add_argument("--max-seconds", type=float, default=300.0, help="hard stop")
    args = parser.parse_args()
    proc, base = _server.start(workers=2)
    schedule = list(itertools.chain.from_iterable([m] * m[3] for m in MIX))
    results: dict[str, list[float]] = {m[0]: [] for m in MIX}
    errors: dict[str, int] = {m[0]: 0 for m in MIX}
    lock = threading.Lock()
    count = 0
    try:
        for name, path, body, _ in MIX:  # warm-up, and check every class answers
            r = requests.post(base + path, json=body, timeout=60)
            if r.status_code != 200:
                print(f"{name}: warm-up answered {r.status_code}: {r.text[:300]}")
        before = worker_rss(proc.pid)
        started = time.monotonic()
        hard_stop = started + args.max_seconds

        def client(offset: int) -> None:
            nonlocal count
            session = requests.Session()  # keeps its connection alive
            # every request solved: the same few bodies repeat, and this measures solving
            # under mixed load, not reused answers
            session.headers["Cache-Control"] = "no-cache"
            for i in itertools.count(offset):
                now = time.monotonic()
                with lock:
                    done = count >= args.min_requests
                if now > hard_stop or (now - started > args.seconds and done):
                    return
                name, path, body, _ = schedule[i % len(schedule)]
                t0 = time.perf_counter()
                try:
                    ok = session.post(base + path, json=body, timeout=60).status_code == 200
                except requests.RequestException:
                    ok = False
                elapsed = time.perf_counter() - t0
                with lock:
                    count += 1
                    results[name].append(elapsed)
                    errors[name] += not ok

        threads = [threading.Thread(target=client, args=(k * 3,)) for k in range(args.clients)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        wall = time.monotonic() - started
        after = worker_rss(proc.pid)
    finally:
        _server.stop(proc)
    print(f"{args.clients} clients, {wall:.0f} s, {count} requests, "
          f"{count / wall:.0f} requests/s overall (2 workers, loopback, kept-alive "
          f"connections, every request solved)")
    print(f"{'class':<28} {'requests':>8} {'req/s':>7} {'p50 ms':>8} {'p99 ms':>8} {'errors':>7}")
    for name, times in results.items():
        if len(times) < 2:
            continue
        q = statistics.quantiles(times, n=100)
        print(f"{name:<28} {len(times):>8} {len(times) / wall:>7.0f} {q[49] * 1e3:>8.1f} "
              f"{q[98] * 1e3:>8.1f} {errors[name]:>7}")
    print("worker memory (RSS, MiB) before -> after:")
    for pid in sorted(before):
        after_kib = after.get(pid)
        tail = f"{after_kib / 1024:.0f}" if after_kib else "(replaced)"
        print(f"  pid {pid}: {before[pid] / 1024:.0f} -> {tail}")
    return 1 if sum(errors.values()) else 0


if __name__ == "__main__":
    sys.exit(main())
