"""Items per second through the real server: a 1,000-item batch and a 1,000-case sweep, against
the same 1,000 problems sent one request at a time (one keep-alive connection).

    .venv/bin/python bench/batch_sweep.py [--items 1000]
"""

from __future__ import annotations

import argparse
import copy
import pathlib
import sys
import time

import requests

sys.path.insert(0, str(pathlib.Path(__file__).resolve().parent))
import _server  # noqa: E402

BASE = {
    # a light plate problem: two points, no grid
    "width": 0.6, "height": 0.4, "conductivity": 50,
    "edges": {"bottom": {"type": "temperature", "value": 70},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 15, "ambient": 5},
              "top": {"type": "convection", "film_coefficient": 10, "ambient": 5}},
    "points": [[0.3, 0.2], [0.6, 0.4]],
}


def problems(n: int) -> list[dict]:
    out = []
    for i in range(n):
        p = copy.deepcopy(BASE)
        p["edges"]["right"]["film_coefficient"] = 5 + i * 0.1
        out.append(p)
    return out


def main() -> None:
    parser = argparse.ArgumentParser()
    parser.add_argument("--items", type=int, default=1000)
    args = parser.parse_args()
    items = problems(args.items)
    proc, base = _server.start(workers=2)
    try:
        session = requests.Session()
        session.post(base + "/v1/plate", json=items[0], timeout=30)  # warm-up
        t0 = time.perf_counter()
        for p in items:
            assert session.post(base + "/v1/plate", json=p, timeout=30).status_code == 200
        single = time.perf_counter() - t0
        t0 = time.perf_counter()
        body = session.post(base + "/v1/batch", json={"items": [
            {"kind": "plate", "problem": p} for p in items]}, timeout=600).json()
        batch = time.perf_counter() - t0
        assert body["summary"]["failed"] == 0
        t0 = time.perf_counter()
        sweep = session.post(base + "/v1/sweep", json={
            "kind": "plate", "base": BASE,
            "vary": [{"path": "edges.right.film_coefficient",
                      "values": [5 + i * 0.1 for i in range(args.items)]}],
            "outputs": ["results.points.0.temperature"]}, timeout=600).json()
        swept = time.perf_counter() - t0
        assert sweep["failed"] == 0
        n = args.items
        print(f"{n} light plate problems through gunicorn (2 sync workers, loopback)")
        print(f"{'mode':<28} {'seconds':>8} {'items/s':>9} {'vs single':>10}")
        for name, seconds in (("one request per item", single), ("one batch request", batch),
                              ("one sweep request", swept)):
            print(f"{name:<28} {seconds:>8.2f} {n / seconds:>9.0f} {single / seconds:>9.2f}x")
    finally:
        _server.stop(proc)


if __name__ == "__main__":
    main()
