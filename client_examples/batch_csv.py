"""Run a CSV of cases through the batch endpoint and write a CSV of results.

Scenario (invented): a maintenance team lists the cast covers of several valve pits; each row
gives a cover's size, material conductivity and the side-wind film coefficient, and they want
the centre temperature and the safety status of each.

Input CSV: a header of dotted paths into the template problem (e.g. `width`,
`edges.right.film_coefficient`), plus an optional `id` column. Output CSV: the input columns,
then `status` and each selected output.

    python client_examples/batch_csv.py cases.csv results.csv --url http://127.0.0.1:8000
"""

from __future__ import annotations

import argparse
import copy
import csv
import json
import sys
from typing import Any

from conduction_client import ConductionClient

TEMPLATE: dict[str, Any] = {
    "width": 0.6, "height": 0.4, "conductivity": 50,
    "edges": {"bottom": {"type": "temperature", "value": 70},
              "left": {"type": "insulated"},
              "right": {"type": "convection", "film_coefficient": 15, "ambient": 5},
              "top": {"type": "convection", "film_coefficient": 10, "ambient": 5}},
    "points": [[0.3, 0.2]],
    "limits": {"max_surface_temperature": 55},
}
OUTPUTS = ["results.points.0.temperature", "safety.status"]


def _number(text: str) -> Any:
    try:
        return float(text)
    except ValueError:
        return text  # e.g. "600 mm": the service reads units


def _put(problem: dict[str, Any], path: str, value: Any) -> None:
    parts = path.split(".")
    target: Any = problem
    for part in parts[:-1]:
        target = target[int(part)] if isinstance(target, list) else target[part]
    target[parts[-1]] = value


def _get(body: dict[str, Any], path: str) -> Any:
    value: Any = body
    for part in path.split("."):
        value = value[int(part)] if isinstance(value, list) else value[part]
    return value


def run(rows: list[dict[str, str]], client: ConductionClient, chunk: int,
        template: dict[str, Any]) -> list[dict[str, Any]]:
    results: list[dict[str, Any]] = []
    for start in range(0, len(rows), chunk):
        part = rows[start:start + chunk]
        items = []
        for row in part:
            problem = copy.deepcopy(template)
            for key, text in row.items():
                if key != "id":
                    _put(problem, key, _number(text))
            items.append({"kind": "plate", "problem": problem, "id": row.get("id")})
        for row, item in zip(part, client.batch(items)["items"], strict=True):
            out: dict[str, Any] = {**row, "status": item["status"]}
            for path in OUTPUTS:
                out[path] = _get(item["result"], path) if item["result"] else ""
            if item["problem"]:
                out["error"] = item["problem"]["detail"]
            results.append(out)
        done = min(start + chunk, len(rows))
        bar = "#" * (30 * done // len(rows))
        print(f"\r[{bar:<30}] {done}/{len(rows)}", end="", file=sys.stderr, flush=True)
    print(file=sys.stderr)
    return results


def main() -> int:
    parser = argparse.ArgumentParser(description="Run a CSV of plate cases in batches.")
    parser.add_argument("cases")
    parser.add_argument("results")
    parser.add_argument("--url", default="http://127.0.0.1:8000")
    parser.add_argument("--chunk", type=int, default=100)
    parser.add_argument("--template", help="JSON file with the template problem")
    args = parser.parse_args()
    template = TEMPLATE
    if args.template:
        with open(args.template, encoding="utf-8") as handle:
            template = json.load(handle)
    with open(args.cases, newline="", encoding="utf-8-sig") as handle:
        rows = list(csv.DictReader(handle))
    results = run(rows, ConductionClient(args.url), args.chunk, template)
    columns = list(dict.fromkeys(key for row in results for key in row))
    with open(args.results, "w", newline="", encoding="utf-8-sig") as handle:
        writer = csv.DictWriter(handle, fieldnames=columns)
        writer.writeheader()
        writer.writerows(results)
    failed = sum(1 for row in results if row["status"] != 200)
    print(f"{len(results)} cases, {failed} failed -> {args.results}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
