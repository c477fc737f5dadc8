"""CORS for browser pages and office add-ins, with an allow-list (CONDUCTION_CORS_ORIGINS).

Empty (the default) means no cross-origin access. "*" allows any origin. Preflight OPTIONS
requests are answered by Flask's automatic OPTIONS handling plus the headers set here.
"""

from __future__ import annotations

from flask import Flask, Response, request

ALLOWED_HEADERS = "Content-Type, Accept, Authorization, X-API-Key, X-Request-ID"
EXPOSED_HEADERS = "X-Request-ID"


def install_cors(app: Flask, origins_setting: str) -> None:
    origins = {o.strip() for o in origins_setting.split(",") if o.strip()}
    if not origins:
        return

    @app.after_request
    def _cors(response: Response) -> Response:
        origin = request.headers.get("Origin")
        if not origin or ("*" not in origins and origin not in origins):
            return response
        response.headers["Access-Control-Allow-Origin"] = "*" if "*" in origins else origin
        response.headers.add("Vary", "Origin")
        response.headers["Access-Control-Expose-Headers"] = EXPOSED_HEADERS
        if request.method == "OPTIONS":
            response.headers["Access-Control-Allow-Methods"] = "GET, POST, OPTIONS"
            response.headers["Access-Control-Allow-Headers"] = ALLOWED_HEADERS
            response.headers["Access-Control-Max-Age"] = "600"
        return response
