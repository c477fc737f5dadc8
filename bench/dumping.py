"""Response dumping: marshmallow's `schema.dump` against the compiled dumper (prints figures).

Run from the repository root:  python bench/dumping.py [--repeat N]

Each case is solved once through the Flask test client; the (schema, envelope, output units)
handed to `dump_with_units` is captured and then dumped many times both ways, in alternation so
that both see the same machine load. Prints the median and minimum per dump, the ratio of the
medians, and checks the two dumps are identical (`schemas.dumping.dump_difference`).

Cases: a 5-point plate (the request of bench/http_throughput.py), the same plate with a 101 x 101
output grid, the 5-point plate in imperial output units, and one response of each other family
(the test suite's demo payloads, tests/conftest.py).
"""

from __future__ import annotations

import os

os.environ.setdefault("OPENBLAS_NUM_THREADS", "1")

import argparse  # noqa: E402
import copy  # noqa: E402
import logging  # noqa: E402
import statistics  # noqa: E402
import sys  # noqa: E402
import time  # noqa: E402
from typing import Any  # noqa: E402

sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))

import service.api.common as common  # noqa: E402
from schemas.dumping import compiled_dumper, dump_difference, set_reference_check  # noqa: E402
from schemas.units import CURRENT_OUTPUT_UNITS  # noqa: E402
from service.app import create_app  # noqa: E402
from tests.conftest import (  # noqa: E402
    FIN_PAYLOAD,
    GRID_PAYLOAD,
    LAYERS_PAYLOAD,
    TRANSIENT_PAYLOAD,
)

set_reference_check(False)  # importing the test payloads turned it on; time the server's way

PLATE_5 = {  # the 5-point request of bench/http_throughput.py
    "width": 0.6, "height": 1.0, "conductivity": 52,
    "edges": {"bottom": {"type": "temperature", "value": 100},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 750, "ambient": 0},
              "top": {"type": "flux", "value": -200}},
    "points": [[0.1, 0.1], [0.3, 0.5], [0.5, 0.9], [0.6, 0.2], [0.0, 1.0]],
}
IMPERIAL = {"temperature": "degF", "length": "in", "heat_flow_per_length": "BTU/(h*ft)"}

CASES: list[tuple[str, str, dict[str, Any]]] = [
    ("plate, 5 points", "/v1/plate", PLATE_5),
    ("plate, 101 x 101 grid", "/v1/plate", {**PLATE_5, "grid": {"nx": 101, "ny": 101}}),
    ("plate, 5 points, degF/in", "/v1/plate", {**PLATE_5, "output_units": IMPERIAL}),
    ("layers", "/v1/layers", LAYERS_PAYLOAD),
    ("fin", "/v1/fin", FIN_PAYLOAD),
    ("transient", "/v1/transient", TRANSIENT_PAYLOAD),
    ("grid", "/v1/grid", GRID_PAYLOAD),
]


def capture(client: Any, path: str, payload: dict[str, Any]) -> tuple[Any, Any, Any]:
    seen: list[tuple[Any, Any, Any]] = []
    real = common.dump_with_units

    def keep(schema: Any, obj: Any, units: Any) -> Any:
        seen.append((schema, obj, units))
        return real(schema, obj, units)

    common.dump_with_units = keep  # type: ignore[assignment]
    try:
        # no-store: solved and dumped even where finished answers are kept for reuse
        response = client.post(path, json=copy.deepcopy(payload),
                               headers={"Cache-Control": "no-store"})
    finally:
        common.dump_with_units = real  # type: ignore[assignment]
    if response.status_code != 200:
        raise SystemExit(f"{path}: {response.status_code} {response.get_json()}")
    return seen[-1]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--repeat", type=int, default=2000, help="dumps per way and case")
    args = parser.parse_args()
    logging.getLogger("service").setLevel(logging.WARNING)
    client = create_app({"TESTING": True, "LOG_LEVEL": "WARNING"}).test_client()
    print(f"{'case':28s} {'marshmallow ms':>21s} {'compiled ms':>21s} {'ratio':>6s}  identical")
    print(f"{'':28s} {'median':>10s} {'min':>10s} {'median':>10s} {'min':>10s}")
    for name, path, payload in CASES:
        schema, obj, units = capture(client, path, payload)
        dumper = compiled_dumper(schema)
        token = CURRENT_OUTPUT_UNITS.set(units)
        try:
            same = dump_difference(schema.dump(obj), dumper(obj, units)) is None
            slow: list[float] = []
            fast: list[float] = []
            for _ in range(args.repeat):
                started = time.perf_counter()
                schema.dump(obj)
                slow.append(time.perf_counter() - started)
                started = time.perf_counter()
                dumper(obj, units)
                fast.append(time.perf_counter() - started)
        finally:
            CURRENT_OUTPUT_UNITS.reset(token)
        slow_ms, fast_ms = statistics.median(slow) * 1e3, statistics.median(fast) * 1e3
        print(f"{name:28s} {slow_ms:10.4f} {min(slow) * 1e3:10.4f} {fast_ms:10.4f} "
              f"{min(fast) * 1e3:10.4f} {slow_ms / fast_ms:6.1f}  {'yes' if same else 'NO'}")
    print(f"load average: {' '.join(f'{x:.2f}' for x in os.getloadavg())}")


if __name__ == "__main__":
    main()
