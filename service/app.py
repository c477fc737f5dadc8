"""The application factory. gunicorn targets `service.app:create_app()`."""

from __future__ import annotations

import functools
import logging
from collections.abc import Callable, Mapping
from typing import Any

from flask import Flask, g

from schemas.budgets import CURRENT_BUDGETS
from service.api.answers import AnswerCache
from service.config import budgets_from, load_config
from service.cors import install_cors
from service.jsonio import OrjsonProvider
from service.ops import install_ops
from service.ops.logs import REQUEST_ID_HEADER  # noqa: F401 - re-exported
from service.problems import register_error_handlers


class ServiceFlask(Flask):
    """Flask, with `ensure_sync` decided once per function instead of at every call.

    Flask passes every hook and view through `ensure_sync` on every request, and each time
    `inspect.iscoroutinefunction` inspects the function: about 14 inspections per request
    with this app's hooks, measured at 5 to 10 % of a request answered from a kept answer.
    The functions do not change, so the decision is kept (a bounded dictionary: hooks and
    views are registered once, at start-up).
    """

    _SYNC_DECISIONS_MAX = 4096

    def __init__(self, *args: Any, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        self._sync_decisions: dict[Callable[..., Any], Callable[..., Any]] = {}

    def ensure_sync(self, func: Callable[..., Any]) -> Callable[..., Any]:
        try:
            return self._sync_decisions[func]
        except (KeyError, TypeError):  # TypeError: an unhashable callable
            pass
        decided = super().ensure_sync(func)
        if len(self._sync_decisions) < self._SYNC_DECISIONS_MAX:
            try:
                self._sync_decisions[func] = decided
            except TypeError:
                pass
        return decided


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the app: defaults, then CONDUCTION_* environment variables, then `config`."""
    settings = load_config(config)
    app = ServiceFlask(__name__)
    app.json_provider_class = OrjsonProvider
    app.json = OrjsonProvider(app)
    app.config.update(settings)
    app.config["MAX_CONTENT_LENGTH"] = int(settings["MAX_BODY_BYTES"])
    logging.getLogger("service").setLevel(settings["LOG_LEVEL"])

    from service.api import blueprints, meta, verification
    from service.openapi import build_spec

    for blueprint in blueprints():
        app.register_blueprint(blueprint)

    spec = functools.cache(build_spec)
    app.extensions["conduction"] = {
        "budgets": budgets_from(settings),
        "openapi": spec,
        "docs": functools.cache(lambda: meta.render_docs(spec())),
        "verification": functools.cache(verification.report),
        "answers": AnswerCache(int(settings["ANSWER_CACHE_BYTES"]),
                               int(settings["ANSWER_CACHE_ENTRIES"])),
    }
    register_error_handlers(app)

    @app.before_request
    def _budgets() -> None:
        # this app's compute budgets for the schemas, undone when the request ends so that
        # they never leak into whatever runs next in this thread
        g.budgets_token = CURRENT_BUDGETS.set(app.extensions["conduction"]["budgets"])

    @app.teardown_request
    def _budgets_done(exc: BaseException | None) -> None:
        token = g.pop("budgets_token", None)
        if token is not None:
            CURRENT_BUDGETS.reset(token)

    install_cors(app, settings["CORS_ORIGINS"])
    # request IDs and JSON logs, API keys, readiness, time budget, metrics (service/ops/)
    install_ops(app)
    return app
