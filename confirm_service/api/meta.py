"""Health and the OpenAPI document."""

from __future__ import annotations

from importlib.metadata import PackageNotFoundError, version

from flask import Blueprint, Response, current_app

from confirm_service.api.common import READ_ROLES, database, json_response, roles
from confirm_service.api.spec import build_openapi, documented
from confirm_service.schemas.common import OutModel

bp = Blueprint("meta", __name__)


class Health(OutModel):
    status: str
    database: str


def service_version() -> str:
    try:
        return version("confirm-service")
    except PackageNotFoundError:
        return "0+unknown"


@bp.get("/healthz")
@documented("Database reachability (no token needed)", response=Health, error_statuses=(503,))
def healthz() -> Response:
    reachable = database().ping()
    body = Health(
        status="ok" if reachable else "degraded",
        database="reachable" if reachable else "unreachable",
    )
    return json_response(body, 200 if reachable else 503)


@bp.get("/api/v1/openapi.json")
@documented("This document", error_statuses=(401, 403))
@roles(*READ_ROLES)
def openapi() -> Response:
    return json_response(build_openapi(current_app, service_version()))
