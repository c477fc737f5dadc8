"""Configuration: defaults, then CONDUCTION_* environment variables, then a mapping (tests).

Every setting is listed in README.md ("Configuration"). Budgets are the compute limits a single
request may ask for; requests beyond them are refused up front with 413/422 problems.
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from dataclasses import fields
from typing import Any

from schemas.budgets import Budgets

ENV_PREFIX = "CONDUCTION_"

DEFAULTS: dict[str, Any] = {
    "MAX_BODY_BYTES": 2_000_000,   # request body limit (413 beyond it)
    "LOG_LEVEL": "INFO",
    # operations (service/ops/): logs, keys, readiness, the time budget
    "LOG_FORMAT": "json",          # json (one object per line) or text
    "REQUEST_LOG": True,           # one log line per request (probes and scrapes at DEBUG)
    "API_KEY_HASHES": "",          # SHA-256 digests of accepted keys, comma-separated
    "API_KEY_FILE": "",            # file of digests, one per line (re-read when it changes)
    "API_KEY_QUERY": False,        # also accept ?api_key= on GET requests (spreadsheets)
    "METRICS_REQUIRE_KEY": False,  # /metrics needs a key too (when keys are on)
    "TIME_BUDGET_SECONDS": 25.0,   # per-request time budget, 0 = off (413 beyond it)
    "DRAIN_FILE": "",              # set by deploy/gunicorn.conf.py: exists while draining
    "CORS_ORIGINS": "",            # comma-separated allowed origins for browsers; "*" for any
    # finished answers kept per worker for identical problems (service/api/answers.py)
    "ANSWER_CACHE_BYTES": 32 * 1024 * 1024,  # 0 = never reuse an answer
    "ANSWER_CACHE_ENTRIES": 1024,
    **{f.name.upper(): f.default for f in fields(Budgets)},
}


def _coerce(default: Any, raw: str) -> Any:
    if isinstance(default, bool):
        return raw.strip().lower() in ("1", "true", "yes", "on")
    if isinstance(default, int):
        return int(raw)
    if isinstance(default, float):
        return float(raw)
    return raw


def load_config(overrides: Mapping[str, Any] | None = None,
                environ: Mapping[str, str] | None = None) -> dict[str, Any]:
    """Defaults, then environment variables named CONDUCTION_<KEY>, then `overrides`."""
    environ = os.environ if environ is None else environ
    config = dict(DEFAULTS)
    for key, default in DEFAULTS.items():
        raw = environ.get(ENV_PREFIX + key)
        if raw is not None:
            try:
                config[key] = _coerce(default, raw)
            except ValueError as exc:
                raise ValueError(f"{ENV_PREFIX}{key}={raw!r} is not a valid "
                                 f"{type(default).__name__}") from exc
    config.update(overrides or {})
    return config


def budgets_from(config: Mapping[str, Any]) -> Budgets:
    return Budgets(**{f.name: int(config[f.name.upper()]) for f in fields(Budgets)})
