"""Partner sites' follow-up reports: recorded, audited, and fed to the candidate's checks."""

from __future__ import annotations

from typing import Any

from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Forbidden
from confirm_service.models import FollowUpReport
from confirm_service.services.evaluation import locked_candidate, reevaluate
from confirm_service.services.sites import site_by_code


def add_report(session: Session, actor: Actor, candidate_id: int, data: Any) -> Any:
    """A partner site's follow-up report; re-evaluates the candidate at once.

    A token bound to a site (``site_code``) may only report for that site.
    """
    candidate = locked_candidate(session, candidate_id)
    site = site_by_code(session, data.site)
    if actor.site_code and actor.site_code != site.code:
        raise Forbidden(
            f"this token reports for site {actor.site_code}",
            [("site", f"this token may only report for {actor.site_code}")],
        )
    report = FollowUpReport(
        candidate_id=candidate_id,
        site_id=site.id,
        observed_at=data.observed_at,
        duration_s=data.duration_s,
        detected=data.detected,
        frequency_hz=data.frequency_hz,
        drift_hz_s=data.drift_hz_s,
        frequency_min_hz=data.frequency_min_hz,
        frequency_max_hz=data.frequency_max_hz,
        notes=data.notes,
    )
    session.add(report)
    session.flush()
    record(
        session,
        actor,
        "followup.reported",
        f"candidate:{candidate_id}",
        {"report_id": report.id, **data.model_dump(mode="json")},
    )
    if candidate.state == "open":
        reevaluate(session, actor, candidate)
    return report
