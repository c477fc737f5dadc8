"""A small Python client for the conduction service.

- timeouts on every call, retries on connection errors (solves are pure functions of their
  input, so repeating one is safe);
- problem-details answers raised as `ProblemDetailsError` with the field errors attached.

    from conduction_client import ConductionClient
    client = ConductionClient("http://127.0.0.1:8000")
    body = client.solve("plate", {...})
    value = client.value("plate", {...}, "results.points.0.temperature")
"""

from __future__ import annotations

import json
from typing import Any

import requests
from requests.adapters import HTTPAdapter
from urllib3.util.retry import Retry


class ProblemDetailsError(Exception):
    """The service answered with an RFC 9457 problem."""

    def __init__(self, status: int, problem: dict[str, Any]) -> None:
        self.status = status
        self.problem = problem
        self.type = problem.get("type", "")
        self.errors: dict[str, list[str]] = problem.get("errors", {}) or {}
        lines = [f"{status} {problem.get('title', '')}: {problem.get('detail', '')}"]
        lines += [f"  {path}: {'; '.join(msgs)}" for path, msgs in self.errors.items()]
        super().__init__("\n".join(lines))


class ConductionClient:
    def __init__(self, base_url: str = "http://127.0.0.1:8000", *, timeout: float = 30.0,
                 retries: int = 3, api_key: str | None = None) -> None:
        self.base_url = base_url.rstrip("/")
        self.timeout = timeout
        self.session = requests.Session()
        retry = Retry(total=retries, connect=retries, read=0, status=0, backoff_factor=0.3,
                      allowed_methods=None)
        self.session.mount("http://", HTTPAdapter(max_retries=retry))
        self.session.mount("https://", HTTPAdapter(max_retries=retry))
        if api_key:
            self.session.headers["Authorization"] = f"Bearer {api_key}"

    def _check(self, response: requests.Response) -> requests.Response:
        if response.status_code >= 400:
            try:
                problem = response.json()
            except ValueError:
                problem = {"title": "Unexpected answer", "detail": response.text[:500]}
            raise ProblemDetailsError(response.status_code, problem)
        return response

    def solve(self, kind: str, problem: dict[str, Any]) -> dict[str, Any]:
        """POST /v1/<kind>; returns the response envelope."""
        response = self.session.post(f"{self.base_url}/v1/{kind}", json=problem,
                                     timeout=self.timeout)
        return self._check(response).json()

    def solve_csv(self, kind: str, problem: dict[str, Any], separator: str = ",") -> str:
        response = self.session.post(f"{self.base_url}/v1/{kind}", json=problem,
                                     params={"format": "csv", "sep": separator},
                                     timeout=self.timeout)
        return self._check(response).content.decode("utf-8-sig")

    def value(self, kind: str, problem: dict[str, Any], select: str) -> str:
        """One value as text, by the GET form spreadsheets use."""
        params = {"problem": json.dumps(problem, separators=(",", ":")), "select": select}
        response = self.session.get(f"{self.base_url}/v1/{kind}", params=params,
                                    timeout=self.timeout)
        return self._check(response).text

    def batch(self, items: list[dict[str, Any]]) -> dict[str, Any]:
        response = self.session.post(f"{self.base_url}/v1/batch", json={"items": items},
                                     timeout=self.timeout * max(1, len(items) // 50))
        return self._check(response).json()

    def sweep(self, kind: str, base: dict[str, Any], vary: list[dict[str, Any]],
              outputs: list[str], combine: str = "product") -> dict[str, Any]:
        body = {"kind": kind, "base": base, "vary": vary, "outputs": outputs,
                "combine": combine}
        response = self.session.post(f"{self.base_url}/v1/sweep", json=body,
                                     timeout=self.timeout * 10)
        return self._check(response).json()
