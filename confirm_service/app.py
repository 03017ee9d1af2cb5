"""The application factory."""

from __future__ import annotations

from typing import Any

from flask import Flask, Response, request

from confirm_service.api.common import authenticate_request
from confirm_service.api.converters import install_converters
from confirm_service.api.problems import install_problem_handlers
from confirm_service.api.telemetry import install_telemetry
from confirm_service.config import Settings, load_settings
from confirm_service.db import Database
from confirm_service.services import protocols, runtime


def _blueprints() -> list[Any]:
    from confirm_service import web
    from confirm_service.api import (
        audit,
        candidates,
        followups,
        meta,
        observations,
        physics,
        sites,
        targets,
        telemetry,
    )

    return [
        meta.bp,
        sites.bp,
        targets.bp,
        observations.bp,
        candidates.bp,
        followups.bp,
        followups.inbox,
        physics.bp,
        audit.bp,
        telemetry.bp,
        web.bp,
    ]


SECURITY_HEADERS = {
    "Content-Security-Policy": (
        "default-src 'none'; style-src 'self'; img-src 'self' data:; form-action 'self'; "
        "frame-ancestors 'none'; base-uri 'none'"
    ),
    "X-Content-Type-Options": "nosniff",
    "Referrer-Policy": "no-referrer",
    "X-Frame-Options": "DENY",
    "Cross-Origin-Opener-Policy": "same-origin",
    "Cross-Origin-Resource-Policy": "same-origin",
}
"""Sent with every answer, pages and API alike: nothing is framed, sniffed or loaded from
elsewhere. HSTS is the TLS proxy's to send (deploy/nginx-confirm-service.conf)."""


def create_app(config: dict[str, Any] | Settings | None = None) -> Flask:
    """Build the Flask app. ``config`` is a :class:`Settings` or overrides of its fields."""
    settings = config if isinstance(config, Settings) else load_settings(config)
    app = Flask(__name__, instance_path=str(settings.instance_path.resolve()))
    app.config["MAX_CONTENT_LENGTH"] = settings.max_body_bytes
    app.json.sort_keys = False  # type: ignore[attr-defined]
    runtime.configure(settings)
    protocols.load_configured(settings.protocol_file)  # an invalid protocol never serves
    database = Database(settings.database_url)
    app.extensions["confirm.settings"] = settings
    app.extensions["confirm.db"] = database
    install_problem_handlers(app)
    install_converters(app)
    install_telemetry(app, request_log=settings.request_log == "json")

    @app.before_request
    def _authenticate() -> Any:
        if request.path.startswith("/api/"):
            return authenticate_request()
        return None

    @app.after_request
    def _security_headers(response: Response) -> Response:
        for name, value in SECURITY_HEADERS.items():
            response.headers.setdefault(name, value)
        return response

    for blueprint in _blueprints():
        app.register_blueprint(blueprint)
    return app
