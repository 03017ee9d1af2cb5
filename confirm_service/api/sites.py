"""Sites: create, list, get, update."""

from __future__ import annotations

from flask import Blueprint, Response

from confirm_service.api.common import (
    READ_ROLES,
    current_actor,
    database,
    json_response,
    page_of,
    parse_body,
    parse_query,
    roles,
)
from confirm_service.api.serialise import site_out
from confirm_service.api.spec import documented
from confirm_service.schemas.common import Page
from confirm_service.schemas.log import SiteIn, SiteOut, SiteUpdate
from confirm_service.schemas.queries import ListQuery
from confirm_service.services import access
from confirm_service.services import sites as service

bp = Blueprint("sites", __name__, url_prefix="/api/v1/sites")


@bp.post("")
@documented(
    "Register a site",
    request=SiteIn,
    response=SiteOut,
    status=201,
    error_statuses=(401, 403, 409, 415, 422),
)
@roles(*access.REGISTER)
def create_site() -> Response:
    data = parse_body(SiteIn)
    with database().write() as session:
        site = service.create_site(session, current_actor(), data)
        body = site_out(site)
    return json_response(body, 201, {"Location": f"/api/v1/sites/{site.code}"})


@bp.get("")
@documented("List sites", query=ListQuery, response=Page[SiteOut])
@roles(*READ_ROLES)
def list_sites() -> Response:
    query = parse_query(ListQuery)
    with database().read() as session:
        rows = service.list_sites(session, query.after, query.limit + 1)
        return json_response(page_of(rows, query.limit, site_out))


@bp.get("/<code>")
@documented("Get a site", response=SiteOut, error_statuses=(401, 403, 404))
@roles(*READ_ROLES)
def get_site(code: str) -> Response:
    with database().read() as session:
        return json_response(site_out(service.site_by_code(session, code, "code")))


@bp.patch("/<code>")
@documented(
    "Update a site", request=SiteUpdate, response=SiteOut, error_statuses=(401, 403, 404, 415, 422)
)
@roles(*access.REGISTER)
def update_site(code: str) -> Response:
    data = parse_body(SiteUpdate)
    with database().write() as session:
        body = site_out(service.update_site(session, current_actor(), code, data))
    return json_response(body)
