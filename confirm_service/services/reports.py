"""Partner sites' follow-up reports: recorded, audited, and fed to the candidate's checks."""

from __future__ import annotations

from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.models import FollowUpReport
from confirm_service.schemas.followups import ReportIn


def add_report(session: Session, actor: Actor, candidate_id: int, data: ReportIn) -> FollowUpReport:
    """A partner site's report without a follow-up request; the same path as reports on a
    request (``followups.record_report``): stored, audited, the candidate re-evaluated.

    A token bound to a site (``site_code``) may only report for that site.
    """
    from confirm_service.services.followups import record_report

    return record_report(session, actor, data, candidate_id=candidate_id)
