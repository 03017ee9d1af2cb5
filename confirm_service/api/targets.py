"""Targets: create, list, get, update."""

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
from confirm_service.api.serialise import target_out
from confirm_service.api.spec import documented
from confirm_service.schemas.common import Page
from confirm_service.schemas.log import TargetIn, TargetOut, TargetUpdate
from confirm_service.schemas.queries import ListQuery
from confirm_service.services import access
from confirm_service.services import sites as service

bp = Blueprint("targets", __name__, url_prefix="/api/v1/targets")


@bp.post("")
@documented(
    "Register a target",
    request=TargetIn,
    response=TargetOut,
    status=201,
    error_statuses=(401, 403, 409, 415, 422),
)
@roles(*access.REGISTER)
def create_target() -> Response:
    data = parse_body(TargetIn)
    with database().write() as session:
        body = target_out(service.create_target(session, current_actor(), data))
    return json_response(body, 201)


@bp.get("")
@documented("List targets", query=ListQuery, response=Page[TargetOut])
@roles(*READ_ROLES)
def list_targets() -> Response:
    query = parse_query(ListQuery)
    with database().read() as session:
        rows = service.list_targets(session, query.after, query.limit + 1)
        return json_response(page_of(rows, query.limit, target_out))


@bp.get("/<name>")
@documented("Get a target", response=TargetOut, error_statuses=(401, 403, 404))
@roles(*READ_ROLES)
def get_target(name: str) -> Response:
    with database().read() as session:
        return json_response(target_out(service.target_by_name(session, name, "name")))


@bp.patch("/<name>")
@documented(
    "Update a target",
    request=TargetUpdate,
    response=TargetOut,
    error_statuses=(401, 403, 404, 415, 422),
)
@roles(*access.REGISTER)
def update_target(name: str) -> Response:
    data = parse_body(TargetUpdate)
    with database().write() as session:
        body = target_out(service.update_target(session, current_actor(), name, data))
    return json_response(body)
