"""Follow-up delivery, screening counts and the audit log's state."""

from __future__ import annotations

from typing import Any

from flask import flash, redirect, render_template, request, url_for
from werkzeug.exceptions import NotFound

from confirm_service.services import access, attention, followup_views, observations
from confirm_service.timeutil import utc_now
from confirm_service.web import auth
from confirm_service.web.blueprint import bp, database, settings

RESEND = access.DECIDE


@bp.get("/follow-ups")
@auth.requires_role(*auth.READ_ROLES)
def followups() -> Any:
    """Follow-up requests with their state and delivery attempts; undelivered ones first."""
    with database().read() as session:
        stuck = attention.undelivered_followups(session, utc_now())
        requests = followup_views.recent_requests(session)
        messages = followup_views.undelivered_messages(session)
    resend = followup_views.resend_operations() if auth.may(auth.current_actor(), RESEND) else {}
    return render_template(
        "followups.html", stuck=stuck, requests=requests, messages=messages, resend=resend
    )


def _resend(kind: str, number: int) -> Any:
    operation = followup_views.resend_operations().get(kind)
    if operation is None:
        raise NotFound("re-sending is not available in this installation")
    with database().write() as session:
        operation(session, auth.current_actor(), number, utc_now())
    flash(f"The {kind} {number} will be sent again at the next delivery pass.", "success")
    return redirect(url_for(".followups"))


@bp.post("/follow-ups/requests/<int:number>/resend")
@auth.requires_role(*RESEND)
def resend_request(number: int) -> Any:
    """Send a failed follow-up request again (drafted again, due now)."""
    return _resend("request", number)


@bp.post("/follow-ups/messages/<int:number>/resend")
@auth.requires_role(*RESEND)
def resend_message(number: int) -> Any:
    """Give a dead letter a fresh round of tries."""
    return _resend("message", number)


@bp.get("/screening")
@auth.requires_role(*auth.READ_ROLES)
def screening() -> Any:
    """The latest scans: hits received, per screening reason, and still pending."""
    with database().read() as session:
        counts = observations.recent_screening_counts(session)
    return render_template("screening.html", counts=counts)


@bp.get("/audit")
@auth.requires_role(*auth.READ_ROLES)
def audit() -> Any:
    """The last signed checkpoint; the whole log verified on request."""
    verify = request.args.get("verify") == "1"
    with database().read() as session:
        state = followup_views.audit_state(session, settings(), verify)
    return render_template("audit.html", state=state, verified=verify)
