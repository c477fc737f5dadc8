"""Post a plate problem and print the result.

Scenario (invented for this example): the thick stainless-steel cover of a gearbox oil sump is
heated from below by 85 degC oil, insulated on one side and cooled by a fan on the other side
and on top. What is the centre temperature, and does the top stay below a 60 degC touch limit?

    python client_examples/plate_client.py --url http://127.0.0.1:8000
"""

from __future__ import annotations

import argparse
import json
import sys

import requests

PROBLEM = {
    "width": "400 mm",
    "height": "250 mm",
    "conductivity": 16,
    "edges": {
        "bottom": {"type": "temperature", "value": 85},
        "left": {"type": "insulated"},
        "right": {"type": "convection", "film_coefficient": 60, "ambient": 25},
        "top": {"type": "convection", "film_coefficient": 40, "ambient": 25},
    },
    "points": [["200 mm", "125 mm"], ["200 mm", "250 mm"]],
    "limits": {"max_surface_temperature": 60},
}


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--url", default="http://127.0.0.1:8000")
    args = parser.parse_args()
    response = requests.post(f"{args.url}/v1/plate", json=PROBLEM, timeout=30)
    if response.status_code != 200:
        problem = response.json()
        print(f"{problem['title']}: {problem['detail']}", file=sys.stderr)
        for path, messages in problem.get("errors", {}).items():
            print(f"  {path}: {'; '.join(messages)}", file=sys.stderr)
        return 1
    body = response.json()
    units = body["units"]
    centre, top = body["results"]["points"]
    print(f"centre temperature: {centre['temperature']:.2f} {units['temperature']}")
    print(f"top-centre temperature: {top['temperature']:.2f} {units['temperature']}")
    print(f"safety: {body['safety']['status']}")
    for check in body["safety"]["checks"]:
        print(f"  {check['limit']}: margin {check['margin']:.1f} "
              f"{units['temperature_difference']} at {check['where']['description']}")
    print(json.dumps(body["convergence"], indent=2))
    for caution in body["cautions"]:
        print(f"caution: {caution}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
