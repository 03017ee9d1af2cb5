"""Read side of operations for the web pages: follow-up requests, screening counts, audit state.

Screening counts come from the screening service when it is installed (``screening_counts``
returns None otherwise, and the page says so).
"""

from __future__ import annotations

import importlib
from dataclasses import dataclass
from datetime import datetime
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.models import FollowUpRequest, OutboundMessage, Site

RECENT_REQUESTS = 200


@dataclass(frozen=True)
class RequestRow:
    id: int
    candidate_id: int | None
    kind: str
    stage: str
    site: str | None
    status: str
    attempts: int
    last_error: str | None
    created_at: datetime
    sent_at: datetime | None
    deadline: datetime | None


def recent_requests(session: Session, limit: int = RECENT_REQUESTS) -> list[RequestRow]:
    """The latest follow-up requests and escalations, newest first."""
    rows = session.execute(
        select(FollowUpRequest, Site.code)
        .outerjoin(Site, Site.id == FollowUpRequest.site_id)
        .order_by(FollowUpRequest.id.desc())
        .limit(limit)
    ).all()
    return [
        RequestRow(
            r.id,
            r.candidate_id,
            r.kind,
            r.stage,
            code,
            r.status,
            r.attempts,
            r.last_error,
            r.created_at,
            r.sent_at,
            r.deadline,
        )
        for r, code in rows
    ]


@dataclass(frozen=True)
class MessageRow:
    id: int
    request_id: int | None
    candidate_id: int | None
    kind: str
    channel: str
    destination: str
    status: str
    attempts: int
    next_attempt_at: datetime | None
    last_error: str | None
    created_at: datetime


def undelivered_messages(session: Session, limit: int = RECENT_REQUESTS) -> list[MessageRow]:
    """Messages still retrying or given up (dead letters), oldest first."""
    rows = session.execute(
        select(OutboundMessage)
        .where(OutboundMessage.status.in_(("retrying", "dead")))
        .order_by(OutboundMessage.id)
        .limit(limit)
    ).scalars()
    return [
        MessageRow(
            m.id,
            m.request_id,
            m.candidate_id,
            m.kind,
            m.channel,
            m.destination,
            m.status,
            m.attempts,
            m.next_attempt_at,
            m.last_error,
            m.created_at,
        )
        for m in rows
    ]


def resend_operations() -> dict[str, Any]:
    """The follow-up service's re-send functions that are installed: ``request``, ``message``."""
    found = {}
    for key, module, name in (
        ("request", "confirm_service.services.followups", "resend_request"),
        ("message", "confirm_service.services.messages", "resend"),
    ):
        try:
            function = getattr(importlib.import_module(module), name, None)
        except ImportError:
            function = None
        if function is not None:
            found[key] = function
    return found


@dataclass(frozen=True)
class AuditState:
    entries: int
    checkpoint_size: int | None
    checkpoint_at: datetime | None
    checkpoint_reason: str | None
    key_id: str | None
    verified: bool | None
    findings: list[str]


def audit_state(session: Session, settings: Any, verify: bool) -> AuditState:
    """Log size and last checkpoint; with ``verify``, every entry, root and signature checked."""
    from confirm_service.audit import store
    from confirm_service.audit.checkpoints import latest_checkpoint, service_public_key

    latest = latest_checkpoint(session)
    verified, findings = None, []
    if verify:
        from confirm_service.audit.verify import verify_log

        public_pem, _ = service_public_key(settings)
        report = verify_log(session, public_pem)
        verified = report.ok
        findings = [report.problem] if report.problem else []
        checked = f"{report.entries_checked} entries, {report.checkpoints_checked} checkpoints"
        findings.insert(0, f"checked {checked}")
    return AuditState(
        entries=store.head_size(session) or 0,
        checkpoint_size=latest.tree_size if latest else None,
        checkpoint_at=latest.at if latest else None,
        checkpoint_reason=latest.reason if latest else None,
        key_id=latest.key_id if latest else None,
        verified=verified,
        findings=findings,
    )
