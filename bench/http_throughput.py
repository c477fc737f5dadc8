"""Requests per second through the real gunicorn server (2 workers, loopback).

Uses wrk (Debian package `wrk`) when installed, else a bounded Python thread load. Targets
(this 2-core machine, the load generator sharing the cores): a 5-point plate request at 2400
requests/s or more, a 101x101 grid request at 800 or more.

The series solver keeps the model of the 32 most recently asked plate definitions per worker
(`service.solvers.plate.CORES`), so the figures depend on what repeats. Each case says:

- "same plate, new points": every request asks the same plate at 5 fresh random points (the
  spreadsheet pattern: one cell per point, recalculated): the model is reused, the points are
  evaluated afresh;
- "new plate each time": the conductivity is random in every request, so nothing is reused:
  the full cost of a solve;
- "same request": byte-identical requests. Each worker keeps finished answers
  (service/api/answers.py), so after its first solve a worker answers these from the kept
  answer (`meta.reused`);
- "same request, no-cache": byte-identical requests sent with `Cache-Control: no-cache`, so each
  is validated, solved (with the kept model) and dumped afresh;
- "new connections": `Connection: close`, so every request opens and closes a TCP connection
  (as gunicorn's plain sync worker forces); the other cases keep wrk's 16 connections alive
  (the worker's keep-alive, README "Keep-alive").

Each case runs `--rounds` times, each run on a fresh server (so no case inherits another's
kept models or answers), the rounds interleaving the cases so that machine noise hits all of
them alike; the table gives the median, the range and the p99 latency of the median run.

    .venv/bin/python bench/http_throughput.py [--seconds 4] [--rounds 3]
"""

from __future__ import annotations

import argparse
import json
import os
import pathlib
import random
import re
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from dataclasses import dataclass

import requests

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import _server  # noqa: E402

WIDTH, HEIGHT = 0.6, 1.0
PLATE = {
    "width": WIDTH, "height": HEIGHT, "conductivity": 52,
    "edges": {"bottom": {"type": "temperature", "value": 100},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 750, "ambient": 0},
              "top": {"type": "flux", "value": -200}},
}
FIVE = [[0.1, 0.1], [0.3, 0.5], [0.5, 0.9], [0.6, 0.2], [0.0, 1.0]]
GRID = {"nx": 101, "ny": 101}


@dataclass(frozen=True)
class Case:
    name: str
    path: str
    body: str | None       # JSON text; "@POINTS@" and "@K@" are replaced per request
    new_points: bool = False
    new_plate: bool = False
    no_cache: bool = False  # send Cache-Control: no-cache (solve afresh, no answer reuse)
    close: bool = False     # send Connection: close (a new connection for every request)
    target: int | None = None  # req/s asked by issue 2 for this request


def _template(extra: dict, points: bool, conductivity: bool) -> str:
    body = {**PLATE, **extra}
    if points:
        body["points"] = "@POINTS@"
    if conductivity:
        body["conductivity"] = "@K@"
    return json.dumps(body).replace('"@POINTS@"', "@POINTS@").replace('"@K@"', "@K@")


FIVE_SAME = _template({"points": FIVE}, points=False, conductivity=False)
GRID_SAME = _template({"grid": GRID}, points=False, conductivity=False)
PLATE_PATH = "/v1/plate"

CASES = [
    Case("plate, 5 points, same plate, new points", PLATE_PATH,
         _template({}, points=True, conductivity=False), new_points=True),
    Case("plate, 5 points, new plate each time", PLATE_PATH,
         _template({"points": FIVE}, points=False, conductivity=True), new_plate=True),
    Case("plate, 5 points, same request", PLATE_PATH, FIVE_SAME, target=2400),
    Case("plate, 5 points, same request, new connections", PLATE_PATH, FIVE_SAME, close=True),
    Case("plate, 5 points, same request, no-cache", PLATE_PATH, FIVE_SAME, no_cache=True),
    Case("plate, 101x101 grid, same request", PLATE_PATH, GRID_SAME, target=800),
    Case("plate, 101x101 grid, same request, no-cache", PLATE_PATH, GRID_SAME, no_cache=True),
    Case("plate, 101x101 grid, new plate each time", PLATE_PATH,
         _template({"grid": GRID}, points=False, conductivity=True), new_plate=True),
    Case("trivial GET /healthz", "/healthz", None),
    Case("trivial GET /healthz, new connections", "/healthz", None, close=True),
]


def _points(rng: random.Random) -> str:
    # millimetre positions, as a drawing gives them (a point a few micrometres from a data
    # edge needs more than the default max_terms and is answered 422 not-converged)
    return json.dumps([[round(rng.uniform(0.0, WIDTH), 3), round(rng.uniform(0.0, HEIGHT), 3)]
                       for _ in range(5)])


def fill(case: Case, rng: random.Random) -> str | None:
    if case.body is None:
        return None
    body = case.body
    if case.new_points:
        body = body.replace("@POINTS@", _points(rng))
    if case.new_plate:
        body = body.replace("@K@", f"{rng.uniform(20.0, 80.0):.9f}")
    return body


_LUA = """
local counter = 0
function setup(thread)
  counter = counter + 1
  thread:set("seed", counter)
end
function init(args)
  math.randomseed(seed * 7919)
end
local template = %s
local path = %s
local headers = {["Content-Type"] = "application/json"}
if %s then headers["Cache-Control"] = "no-cache" end
if %s then headers["Connection"] = "close" end
local function points()
  local out = {}
  for i = 1, 5 do
    out[i] = string.format("[%%.3f,%%.3f]", math.random() * %r, math.random() * %r)
  end
  return "[" .. table.concat(out, ",") .. "]"
end
if not (%s or %s) then
  -- the same request every time: wrk sends a prepared request, so that the load generator,
  -- which shares the 2 cores with the server, costs as little as it can
  wrk.method = template and "POST" or "GET"
  wrk.body = template
  for name, value in pairs(headers) do wrk.headers[name] = value end
  return
end
request = function()
  local body = template
  if %s then body = body:gsub("@POINTS@", points(), 1) end
  if %s then body = body:gsub("@K@", string.format("%%.9f", 20 + 60 * math.random()), 1) end
  return wrk.format("POST", path, headers, body)
end
"""


def with_wrk(base: str, case: Case, seconds: int, connections: int = 16) -> dict:
    with tempfile.NamedTemporaryFile("w", suffix=".lua", delete=False) as script:
        template = "nil" if case.body is None else json.dumps(case.body)
        script.write(_LUA % (template, json.dumps(case.path),
                             str(case.no_cache).lower(), str(case.close).lower(), WIDTH, HEIGHT,
                             str(case.new_points).lower(), str(case.new_plate).lower(),
                             str(case.new_points).lower(), str(case.new_plate).lower()))
    out = subprocess.run(["wrk", "-t2", f"-c{connections}", f"-d{seconds}s", "--latency",
                          "-s", script.name, base + case.path],
                         capture_output=True, text=True, check=True)
    text = out.stdout
    rps = float(re.search(r"Requests/sec:\s+([\d.]+)", text).group(1))
    p50 = re.search(r"50%\s+([\d.]+\w+)", text).group(1)
    p99 = re.search(r"99%\s+([\d.]+\w+)", text).group(1)
    errors = re.search(r"Non-2xx or 3xx responses: (\d+)", text)
    return {"rps": rps, "p50": p50, "p99": p99, "errors": int(errors.group(1)) if errors else 0}


def with_threads(base: str, case: Case, seconds: int, clients: int = 8) -> dict:
    latencies: list[float] = []
    errors = 0
    lock = threading.Lock()
    stop_at = time.monotonic() + seconds

    def worker(seed: int) -> None:
        nonlocal errors
        rng = random.Random(seed)
        session = requests.Session()
        headers = {"Content-Type": "application/json"}
        if case.no_cache:
            headers["Cache-Control"] = "no-cache"
        if case.close:
            headers["Connection"] = "close"
        while time.monotonic() < stop_at:
            body = fill(case, rng)
            t0 = time.perf_counter()
            r = (session.post(base + case.path, data=body, headers=headers, timeout=30)
                 if body is not None else session.get(base + case.path, headers=headers,
                                                    timeout=30))
            with lock:
                latencies.append(time.perf_counter() - t0)
                errors += r.status_code != 200

    threads = [threading.Thread(target=worker, args=(i,)) for i in range(clients)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    q = statistics.quantiles(latencies, n=100)
    return {"rps": len(latencies) / seconds, "p50": f"{q[49] * 1e3:.2f}ms",
            "p99": f"{q[98] * 1e3:.2f}ms", "errors": errors}


def check_bodies(base: str) -> None:
    """Every case's body is a valid request (one of each, answered 200)."""
    rng = random.Random(1)
    for case in CASES:
        body = fill(case, rng)
        if body is not None:
            r = requests.post(base + case.path, data=body, timeout=30,
                              headers={"Content-Type": "application/json"})
            r.raise_for_status()


def measure(case: Case, seconds: int, load) -> dict:
    """One run of `case` on a server of its own: started, warmed up for 1 s with the case's own
    requests, measured for `seconds`, stopped. Each case then starts from the same state (no
    plate models or answers kept from other cases, no worker recycled part-way)."""
    proc, base = _server.start(workers=2)
    try:
        load(base, case, 1)
        return load(base, case, seconds)
    finally:
        _server.stop(proc)


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--seconds", type=int, default=4, help="per case and round")
    parser.add_argument("--rounds", type=int, default=3,
                        help="rounds over all cases (a noisy machine: medians and ranges)")
    args = parser.parse_args()
    load = with_wrk if shutil.which("wrk") else with_threads
    proc, base = _server.start(workers=2)
    try:
        check_bodies(base)
    finally:
        _server.stop(proc)
    print(f"load generator: {'wrk' if load is with_wrk else 'python threads'}, "
          f"{args.seconds} s per case in each of {args.rounds} rounds, each run on a fresh "
          f"server after 1 s of warm-up, 16 connections (kept alive unless the case says new "
          f"connections), 2 workers; load average before: {os.getloadavg()[0]:.2f}")
    results: dict[str, list[dict]] = {case.name: [] for case in CASES}
    for _ in range(args.rounds):  # rounds interleave the cases: noise hits all alike
        for case in CASES:
            results[case.name].append(measure(case, args.seconds, load))
    print(f"{'case':<48} {'req/s':>7} {'range':>11} {'p99':>9} {'errors':>6} {'target':>7}")
    for case in CASES:
        runs = results[case.name]
        rates = sorted(r["rps"] for r in runs)
        mid = runs[[r["rps"] for r in runs].index(statistics.median_low(rates))]
        target = f"{case.target}" if case.target else ""
        print(f"{case.name:<48} {statistics.median(rates):>7.0f} "
              f"{f'{rates[0]:.0f}-{rates[-1]:.0f}':>11} {mid['p99']:>9} "
              f"{sum(r['errors'] for r in runs):>6} {target:>7}", flush=True)
    print(f"load average after: {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
