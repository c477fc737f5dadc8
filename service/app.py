"""The application factory. gunicorn targets `service.app:create_app()`."""

from __future__ import annotations

import functools
import logging
from collections.abc import Mapping
from typing import Any

from flask import Flask, g

from schemas.budgets import CURRENT_BUDGETS
from service.config import budgets_from, load_config
from service.cors import install_cors
from service.jsonio import OrjsonProvider
from service.ops import install_ops
from service.ops.logs import REQUEST_ID_HEADER  # noqa: F401 - re-exported
from service.problems import register_error_handlers


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the app: defaults, then CONDUCTION_* environment variables, then `config`."""
    settings = load_config(config)
    app = Flask(__name__)
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
