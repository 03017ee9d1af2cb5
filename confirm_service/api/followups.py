"""Follow-up requests, partners' reports, outgoing messages, and the signed partner inbox."""

from __future__ import annotations

from typing import Any

from flask import Blueprint, Response, request

from confirm_service.api.common import (
    READ_ROLES,
    current_actor,
    database,
    json_response,
    page_of,
    parse_body,
    parse_query,
    roles,
    settings,
)
from confirm_service.api.spec import documented
from confirm_service.errors import Forbidden
from confirm_service.models import FollowUpRequest, OutboundMessage, Site
from confirm_service.schemas.common import Page
from confirm_service.schemas.followups import (
    DeclineIn,
    FollowUpCreate,
    FollowUpListQuery,
    FollowUpRequestOut,
    MessageOut,
    ReportIn,
    ReportOut,
)
from confirm_service.services import access, federation, messages
from confirm_service.services import followups as service
from confirm_service.services.candidate_views import stored_report_out
from confirm_service.timeutil import utc_now

bp = Blueprint("followups", __name__, url_prefix="/api/v1")
inbox = Blueprint("federation", __name__, url_prefix="/federation/v1")


def request_out(row: FollowUpRequest, site_code: str | None) -> FollowUpRequestOut:
    return FollowUpRequestOut(
        id=row.id,
        kind=row.kind,
        direction=row.direction,
        origin=row.origin,
        candidate_id=row.candidate_id,
        stage=row.stage,
        status=row.status,
        site=site_code,
        remote_site=row.remote_site,
        remote_id=row.remote_id,
        parent_id=row.parent_id,
        send_at=row.send_at,
        deadline=row.deadline,
        created_at=row.created_at,
        drafted_at=row.drafted_at,
        sent_at=row.sent_at,
        acknowledged_at=row.acknowledged_at,
        reported_at=row.reported_at,
        closed_at=row.closed_at,
        expired_at=row.expired_at,
        declined_at=row.declined_at,
        failed_at=row.failed_at,
        state_reason=row.state_reason,
        payload=row.payload,
    )


def message_out(row: OutboundMessage) -> MessageOut:
    return MessageOut.model_validate(row, from_attributes=True)


def _site_codes(session: Any) -> dict[int, str]:
    from sqlalchemy import select

    return dict(session.execute(select(Site.id, Site.code)).all())


@bp.post("/candidates/<int:candidate_id>/followups")
@documented(
    "Ask a named site, or every site at least min_distance_km away that can see the target, "
    "to observe the candidate",
    request=FollowUpCreate,
    response=list[FollowUpRequestOut],
    status=201,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="followups",
)
@roles(*access.DECIDE)
def create(candidate_id: int) -> Response:
    data = parse_body(FollowUpCreate)
    with database().write() as session:
        rows = service.create_request(session, current_actor(), settings(), candidate_id, data)
        codes = _site_codes(session)
        body = [request_out(r, codes.get(r.site_id or 0)).model_dump(mode="json") for r in rows]
    return json_response(body, 201)


@bp.get("/candidates/<int:candidate_id>/messages")
@documented(
    "Every message sent about the candidate (requests, reports, notices) and its result",
    response=list[MessageOut],
    error_statuses=(401, 403),
    tag="followups",
)
@roles(*READ_ROLES)
def candidate_messages(candidate_id: int) -> Response:
    with database().read() as session:
        rows = messages.messages_of(session, candidate_id=candidate_id)
        body = [message_out(r).model_dump(mode="json") for r in rows]
    return json_response(body)


@bp.get("/followups")
@documented(
    "Follow-up requests; a site token sees its own site's (partners without a webhook poll "
    "?site=CODE&state=sent)",
    query=FollowUpListQuery,
    response=Page[FollowUpRequestOut],
    error_statuses=(401, 403, 404, 422),
    tag="followups",
)
@roles(*READ_ROLES)
def list_followups() -> Response:
    query = parse_query(FollowUpListQuery)
    actor = current_actor()
    site = query.site
    if actor.site_code:
        if site is not None and site != actor.site_code:
            raise Forbidden(
                f"this token acts for site {actor.site_code}",
                [("site", f"this token sees only {actor.site_code}'s requests")],
            )
        site = actor.site_code
    with database().read() as session:
        rows = service.list_requests(
            session,
            site,
            query.state,
            query.candidate,
            query.direction,
            query.after,
            query.limit + 1,
        )
        codes = _site_codes(session)
        body = page_of(rows, query.limit, lambda r: request_out(r, codes.get(r.site_id or 0)))
        body["items"] = [item.model_dump(mode="json") for item in body["items"]]
    return json_response(body)


@bp.get("/followups/<int:request_id>")
@documented(
    "One follow-up request with its content and its messages",
    response=FollowUpRequestOut,
    error_statuses=(401, 403, 404),
    tag="followups",
)
@roles(*READ_ROLES)
def get_followup(request_id: int) -> Response:
    with database().read() as session:
        row = service.get_request(session, request_id)
        codes = _site_codes(session)
        if current_actor().site_code and codes.get(row.site_id or 0) != current_actor().site_code:
            raise Forbidden("another site's request", [("id", "made to another site")])
        body = request_out(row, codes.get(row.site_id or 0)).model_dump(mode="json")
        body["messages"] = [
            message_out(m).model_dump(mode="json")
            for m in messages.messages_of(session, request_id=request_id)
        ]
    return json_response(body)


@bp.post("/followups/<int:request_id>/reports")
@documented(
    "The asked site's report: observed or not (and why), its scan and hits, threshold and "
    "sensitivity. On an incoming request the report is relayed, signed, to the requester",
    request=ReportIn,
    response=ReportOut,
    status=201,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="followups",
)
@roles(*access.REPORT)
def report(request_id: int) -> Response:
    data = parse_body(ReportIn)
    with database().write() as session:
        row = service.get_request(session, request_id)
        if row.direction == "inbound":
            message = federation.relay_report(session, current_actor(), request_id, data)
            return json_response(message_out(message).model_dump(mode="json"), 202)
        stored = service.record_report(session, current_actor(), data, request_id=request_id)
        body = stored_report_out(session, stored)
    return json_response(body, 201)


@bp.post("/followups/<int:request_id>/acknowledge")
@documented(
    "The asked site will try",
    response=FollowUpRequestOut,
    error_statuses=(401, 403, 404, 409),
    tag="followups",
)
@roles(*access.REPORT)
def acknowledge(request_id: int) -> Response:
    with database().write() as session:
        row = service.acknowledge(session, current_actor(), request_id)
        body = request_out(row, _site_codes(session).get(row.site_id or 0))
    return json_response(body)


@bp.post("/followups/<int:request_id>/decline")
@documented(
    "The asked site will not observe, with its reason",
    request=DeclineIn,
    response=FollowUpRequestOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="followups",
)
@roles(*access.REPORT)
def decline(request_id: int) -> Response:
    data = parse_body(DeclineIn)
    with database().write() as session:
        row = service.decline(session, current_actor(), request_id, data.reason)
        body = request_out(row, _site_codes(session).get(row.site_id or 0))
    return json_response(body)


@bp.post("/followups/<int:request_id>/resend")
@documented(
    "Re-send a request whose delivery gave up (a fresh round of tries)",
    response=FollowUpRequestOut,
    error_statuses=(401, 403, 404, 409),
    tag="followups",
)
@roles(*access.DECIDE)
def resend(request_id: int) -> Response:
    with database().write() as session:
        row = service.resend_request(session, current_actor(), request_id)
        body = request_out(row, _site_codes(session).get(row.site_id or 0))
    return json_response(body)


@bp.get("/messages")
@documented(
    "Outgoing messages; ?status=dead lists the dead letters",
    response=list[MessageOut],
    error_statuses=(401, 403, 422),
    tag="followups",
)
@roles(*access.DECIDE)
def list_messages() -> Response:
    status = request.args.get("status")
    with database().read() as session:
        rows = messages.messages_of(session, status=status)
        body = [message_out(r).model_dump(mode="json") for r in rows]
    return json_response(body)


@bp.post("/messages/<int:message_pk>/resend")
@documented(
    "Re-send a dead letter (notices and reports; for requests prefer /followups/{id}/resend)",
    response=MessageOut,
    error_statuses=(401, 403, 404, 409),
    tag="followups",
)
@roles(*access.DECIDE)
def resend_message(message_pk: int) -> Response:
    with database().write() as session:
        row = session.get(OutboundMessage, message_pk)
        if row is not None and row.request_id is not None and row.kind == service.REQUEST_MESSAGE:
            request_row = service.get_request(session, row.request_id)
            if request_row.status == "failed":
                service.resend_request(session, current_actor(), row.request_id)
                return json_response(message_out(row).model_dump(mode="json"))
        message = messages.resend(session, current_actor(), message_pk, utc_now())
        body = message_out(message)
    return json_response(body)


@inbox.post("/messages")
def receive() -> Response:
    """A partner's signed message (no bearer token: the signature authenticates it)."""
    body = request.get_data(cache=True)
    with database().write() as session:
        status, answer = federation.receive(session, request.headers, body)
    return json_response(answer, status)
