"""Follow-up delivery, screening counts and the audit log's state."""

from __future__ import annotations

from typing import Any

from flask import render_template, request

from confirm_service.services import attention, followup_views
from confirm_service.web import auth
from confirm_service.web.blueprint import bp, database, settings


@bp.get("/follow-ups")
@auth.requires_role(*auth.READ_ROLES)
def followups() -> Any:
    """Follow-up requests with their state and delivery attempts; undelivered ones first."""
    with database().read() as session:
        stuck = attention.undelivered_followups(session)
        requests = followup_views.recent_requests(session)
    return render_template("followups.html", stuck=stuck, requests=requests)


@bp.get("/screening")
@auth.requires_role(*auth.READ_ROLES)
def screening() -> Any:
    """Per scan: hits received and hits dropped per reason, when screening is installed."""
    with database().read() as session:
        counts = followup_views.screening_counts(session)
    return render_template("screening.html", counts=counts)


@bp.get("/audit")
@auth.requires_role(*auth.READ_ROLES)
def audit() -> Any:
    """The last signed checkpoint; the whole log verified on request."""
    verify = request.args.get("verify") == "1"
    with database().read() as session:
        state = followup_views.audit_state(session, settings(), verify)
    return render_template("audit.html", state=state, verified=verify)
