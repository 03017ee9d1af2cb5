"""Candidates: list, get, explicit promotion, decisions and their reopening, comments."""

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
from confirm_service.api.spec import documented
from confirm_service.schemas.candidates import (
    CandidateOut,
    CandidateSummary,
    CommentIn,
    CommentOut,
    DecisionIn,
    HoldReleaseIn,
    PromoteIn,
    ReopenIn,
    ReportIn,
    ReportOut,
    SignOffIn,
    SignOffOut,
    WithdrawIn,
)
from confirm_service.schemas.common import Page
from confirm_service.schemas.queries import CandidateQuery
from confirm_service.services import access, decisions, intake, reports
from confirm_service.services import candidate_views as views

bp = Blueprint("candidates", __name__, url_prefix="/api/v1/candidates")


def _detail_after_commit(candidate_id: int) -> Response:
    """The candidate as it stands once the write committed (its checkpoint is then signed)."""
    with database().read() as session:
        return json_response(views.detail(session, candidate_id))


@bp.get("")
@documented(
    "List candidates", query=CandidateQuery, response=Page[CandidateSummary], tag="candidates"
)
@roles(*READ_ROLES)
def list_candidates() -> Response:
    query = parse_query(CandidateQuery)
    with database().read() as session:
        rows = views.list_candidates(session, query, query.limit + 1)
        return json_response(
            page_of(rows, query.limit, lambda c: views.summary(session, c).model_dump(mode="json"))
        )


@bp.get("/<int:candidate_id>")
@documented(
    "A candidate with its checks, linked detections and history",
    response=CandidateOut,
    error_statuses=(401, 403, 404),
    tag="candidates",
)
@roles(*READ_ROLES)
def get_candidate(candidate_id: int) -> Response:
    with database().read() as session:
        return json_response(views.detail(session, candidate_id))


@bp.post("")
@documented(
    "Promote a detection to a candidate",
    request=PromoteIn,
    response=CandidateOut,
    status=201,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.PROMOTE)
def promote() -> Response:
    data = parse_body(PromoteIn)
    with database().write() as session:
        candidate = intake.promote_detection(session, current_actor(), data.detection_id, data.note)
        body = views.detail(session, candidate.id)
    return json_response(body, 201)


@bp.post("/<int:candidate_id>/withdraw")
@documented(
    "Withdraw a candidate (a person closes it)",
    request=WithdrawIn,
    response=CandidateOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.DECIDE)
def withdraw(candidate_id: int) -> Response:
    data = parse_body(WithdrawIn)
    with database().write() as session:
        decisions.withdraw(session, current_actor(), candidate_id, data.rationale)
    return _detail_after_commit(candidate_id)


@bp.post("/<int:candidate_id>/comments")
@documented(
    "Comment on a candidate",
    request=CommentIn,
    response=CommentOut,
    status=201,
    error_statuses=(401, 403, 404, 415, 422),
    tag="candidates",
)
@roles(*access.COMMENT)
def comment(candidate_id: int) -> Response:
    data = parse_body(CommentIn)
    with database().write() as session:
        row = decisions.add_comment(session, current_actor(), candidate_id, data.text)
        body = CommentOut.model_validate(row)
    return json_response(body, 201)


@bp.post("/<int:candidate_id>/signoffs")
@documented(
    "Sign off (approve or object to) the candidate's current stage",
    request=SignOffIn,
    response=SignOffOut,
    status=201,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.SIGNOFF)
def signoff(candidate_id: int) -> Response:
    data = parse_body(SignOffIn)
    with database().write() as session:
        row = decisions.add_signoff(
            session, current_actor(), candidate_id, data.approve, data.rationale, data.person
        )
        body = SignOffOut.model_validate(row)
    return json_response(body, 201)


@bp.post("/<int:candidate_id>/decision")
@documented(
    "A person's final decision (rejected or withdrawn) with its rationale",
    request=DecisionIn,
    response=CandidateOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.DECIDE)
def decision(candidate_id: int) -> Response:
    data = parse_body(DecisionIn)
    with database().write() as session:
        decisions.decide(session, current_actor(), candidate_id, data.decision, data.rationale)
    return _detail_after_commit(candidate_id)


@bp.post("/<int:candidate_id>/release-hold")
@documented(
    "Release the holds of the current stage after review",
    request=HoldReleaseIn,
    response=CandidateOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.RELEASE_HOLD)
def release_hold(candidate_id: int) -> Response:
    data = parse_body(HoldReleaseIn)
    with database().write() as session:
        decisions.release_hold(session, current_actor(), candidate_id, data.rationale)
    return _detail_after_commit(candidate_id)


@bp.post("/<int:candidate_id>/reopen")
@documented(
    "Reopen a rejected candidate with a rationale; it is re-evaluated under its protocol, the "
    "checks that failed then hold it for a person instead of rejecting it",
    request=ReopenIn,
    response=CandidateOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.REOPEN)
def reopen(candidate_id: int) -> Response:
    data = parse_body(ReopenIn)
    with database().write() as session:
        decisions.reopen(session, current_actor(), candidate_id, data.rationale)
    return _detail_after_commit(candidate_id)


@bp.post("/<int:candidate_id>/retract")
@documented(
    "Retract a person's decision (rejected or withdrawn) with a rationale; the candidate is "
    "open again and re-evaluated under its protocol",
    request=ReopenIn,
    response=CandidateOut,
    error_statuses=(401, 403, 404, 409, 415, 422),
    tag="candidates",
)
@roles(*access.REOPEN)
def retract(candidate_id: int) -> Response:
    data = parse_body(ReopenIn)
    with database().write() as session:
        decisions.retract(session, current_actor(), candidate_id, data.rationale)
    return _detail_after_commit(candidate_id)


@bp.get("/<int:candidate_id>/dossier")
@documented(
    "The candidate's dossier as JSON, with inclusion proofs against a fresh signed checkpoint",
    error_statuses=(401, 403, 404),
    tag="candidates",
)
@roles(*READ_ROLES)
def dossier(candidate_id: int) -> Response:
    from confirm_service.api.common import settings
    from confirm_service.dossier.build import build_dossier

    with database().write() as session:
        document = build_dossier(session, settings(), candidate_id)
    return json_response(document)


@bp.post("/<int:candidate_id>/reports")
@documented(
    "A partner site reports its follow-up look: seen (frequency, drift) or not, over a band",
    request=ReportIn,
    response=ReportOut,
    status=201,
    error_statuses=(401, 403, 404, 415, 422),
    tag="candidates",
)
@roles(*access.REPORT)
def report(candidate_id: int) -> Response:
    data = parse_body(ReportIn)
    with database().write() as session:
        row = reports.add_report(session, current_actor(), candidate_id, data)
        body = views.report_out(row, data.site)
    return json_response(body, 201)
