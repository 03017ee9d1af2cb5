"""RFC 9457 problem details: every error the API returns, in one shape."""

from __future__ import annotations

from typing import Any

from flask import Flask, Response, json
from pydantic import ValidationError
from werkzeug.exceptions import HTTPException

from confirm_service.errors import ServiceError

PROBLEM_MEDIA_TYPE = "application/problem+json"
RETRY_AFTER_S = 10
"""Sent as ``Retry-After`` with every 503 (RFC 9110 section 10.2.3)."""


def problem_response(
    status: int,
    title: str,
    detail: str | None = None,
    errors: list[tuple[str, str]] | None = None,
    headers: dict[str, str] | None = None,
) -> Response:
    body: dict[str, Any] = {"type": "about:blank", "title": title, "status": status}
    if detail:
        body["detail"] = detail
    body["errors"] = [{"field": field, "message": message} for field, message in errors or []]
    response = Response(json.dumps(body), status=status, mimetype=PROBLEM_MEDIA_TYPE)
    for name, value in (headers or {}).items():
        response.headers[name] = value
    return response


def field_path(location: tuple[Any, ...], prefix: str = "") -> str:
    """``("detections", 57, "frequency_hz")`` becomes ``detections[57].frequency_hz``."""
    path = prefix
    for part in location:
        if isinstance(part, int):
            path += f"[{part}]"
        else:
            path += f".{part}" if path else str(part)
    return path or "body"


def validation_errors(exc: ValidationError, prefix: str = "") -> list[tuple[str, str]]:
    errors = []
    for error in exc.errors(include_url=False):
        location = tuple(p for p in error["loc"] if not str(p).startswith("function-"))
        errors.append((field_path(location, prefix), error["msg"]))
    return errors


def install_problem_handlers(app: Flask) -> None:
    @app.after_request
    def _retry_after(response: Response) -> Response:
        if response.status_code == 503:
            response.headers.setdefault("Retry-After", str(RETRY_AFTER_S))
        return response

    @app.errorhandler(ServiceError)
    def _service_error(exc: ServiceError) -> Response:
        return problem_response(exc.status, exc.title, exc.detail, exc.errors)

    @app.errorhandler(HTTPException)
    def _http_error(exc: HTTPException) -> Response:
        status = exc.code or 500
        errors = [("body", "request body exceeds the size limit")] if status == 413 else []
        return problem_response(status, exc.name, exc.description, errors)

    @app.errorhandler(Exception)
    def _unexpected(exc: Exception) -> Response:
        app.logger.exception("unhandled error")
        return problem_response(500, "Internal server error", "the error was logged")
