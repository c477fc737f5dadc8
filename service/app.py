"""The application factory. gunicorn targets `service.app:create_app()`."""

from __future__ import annotations

import functools
import logging
import time
import uuid
from collections.abc import Mapping
from typing import Any

from flask import Flask, Response, g, request

from service.config import budgets_from, load_config
from service.cors import install_cors
from service.jsonio import OrjsonProvider
from service.problems import register_error_handlers

REQUEST_ID_HEADER = "X-Request-ID"


def create_app(config: Mapping[str, Any] | None = None) -> Flask:
    """Build the app: defaults, then CONDUCTION_* environment variables, then `config`."""
    settings = load_config(config)
    app = Flask(__name__)
    app.json_provider_class = OrjsonProvider
    app.json = OrjsonProvider(app)
    app.config.update(settings)
    app.config["MAX_CONTENT_LENGTH"] = int(settings["MAX_BODY_BYTES"])
    logging.getLogger("service").setLevel(settings["LOG_LEVEL"])

    from service.api import blueprints, meta
    from service.openapi import build_spec

    for blueprint in blueprints():
        app.register_blueprint(blueprint)

    spec = functools.cache(build_spec)
    app.extensions["conduction"] = {
        "budgets": budgets_from(settings),
        "openapi": spec,
        "docs": functools.cache(lambda: meta.render_docs(spec())),
    }
    register_error_handlers(app)
    install_cors(app, settings["CORS_ORIGINS"])

    @app.before_request
    def _start() -> None:
        g.started = time.perf_counter()
        incoming = request.headers.get(REQUEST_ID_HEADER, "")
        g.request_id = incoming[:128] if incoming.isprintable() and incoming else uuid.uuid4().hex

    @app.after_request
    def _finish(response: Response) -> Response:
        response.headers[REQUEST_ID_HEADER] = getattr(g, "request_id", "")
        return response

    return app
