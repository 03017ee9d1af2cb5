"""What needs a person now: the first thing the web pages show.

Held candidates, candidates whose current stage waits for the viewer's sign-off (decided by the
protocol's own sign-off rule), stage deadlines within a day or past, follow-up requests that
could not be delivered, and automatic check results marked inconclusive.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import and_, func, or_, select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.models import Candidate, CheckResult, FollowUpRequest, OutboundMessage, Site
from confirm_service.protocol import SignoffStatus, signoff_statuses
from confirm_service.schemas.candidates import CandidateSummary
from confirm_service.services import candidate_views, facts
from confirm_service.services.protocols import protocol_for
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now

DEADLINE_HORIZON = timedelta(days=1)
OPEN_CANDIDATES_EXAMINED = 500
"""Open candidates looked at per request, oldest first (beyond this the list says so)."""
UNDELIVERED_STATUSES = ("failed", "expired")
"""Request states that need a person: delivery given up, or no report before the deadline."""
WAITING_STATUSES = ("drafted", "sent", "acknowledged")
DEAD_MESSAGE = "dead"
INCONCLUSIVE = "inconclusive"
OPEN_NOW_SHOWN = 5


@dataclass(frozen=True)
class AttentionItem:
    candidate: CandidateSummary
    why: str
    due_at: datetime | None = None


@dataclass(frozen=True)
class StuckFollowUp:
    request_id: int
    candidate_id: int | None
    site: str | None
    status: str
    attempts: int
    last_error: str | None


@dataclass
class Attention:
    held: list[AttentionItem] = field(default_factory=list)
    awaiting_signoff: list[AttentionItem] = field(default_factory=list)
    due_soon: list[AttentionItem] = field(default_factory=list)
    followups: list[StuckFollowUp] = field(default_factory=list)
    inconclusive: list[AttentionItem] = field(default_factory=list)
    open_now: list[AttentionItem] = field(default_factory=list)
    """The most recently updated open candidates (context, not counted in ``total``)."""
    more_open_than_examined: bool = False

    @property
    def total(self) -> int:
        return sum(
            len(part)
            for part in (
                self.held,
                self.awaiting_signoff,
                self.due_soon,
                self.followups,
                self.inconclusive,
            )
        )


def _stage_of(session: Session, candidate: Candidate) -> Any:
    protocol = protocol_for(session, candidate.protocol_sha256, candidate.bands_sha256)
    return next((s for s in protocol.model.stages if s.name == candidate.stage), None)


@dataclass(frozen=True)
class StageProgress:
    """The current stage's description, its sign-off statuses (the protocol's own rule) and
    its deadline, if any."""

    description: str
    statuses: tuple[SignoffStatus, ...]
    deadline_at: datetime | None


def stage_progress(session: Session, candidate: Candidate) -> StageProgress:
    stage = _stage_of(session, candidate)
    if stage is None:
        return StageProgress("", (), None)
    entered = candidate.stage_entered_at.timestamp()
    statuses = signoff_statuses(stage, facts.signoff_facts(session, candidate.id), entered)
    deadline = None
    if stage.deadline_hours is not None:
        deadline = candidate.stage_entered_at + timedelta(hours=stage.deadline_hours)
    return StageProgress(stage.description, statuses, deadline)


def _waits_for(session: Session, candidate: Candidate, stage: Any, actor: Actor) -> str | None:
    """Why ``actor`` is asked to sign this stage, or None."""
    if actor.role not in ("coordinator", "site", "admin"):
        return None
    entered = candidate.stage_entered_at.timestamp()
    statuses = signoff_statuses(stage, facts.signoff_facts(session, candidate.id), entered)
    for status in statuses:
        mine = status.role == actor.role or actor.role == "admin"
        signed = actor.name in status.approved_by or actor.name in status.declined_by
        if mine and not status.met and not signed:
            return (
                f"stage {candidate.stage} needs {status.needed} {status.role} sign-off(s), "
                f"{len(status.approved_by)} so far"
            )
    return None


def attention_for(session: Session, actor: Actor, now: datetime) -> Attention:
    """Everything that needs a person, for ``actor``, as of ``now``."""
    found = Attention()
    open_rows = list(
        session.execute(
            select(Candidate)
            .where(Candidate.state == CandidateState.OPEN)
            .order_by(Candidate.id)
            .limit(OPEN_CANDIDATES_EXAMINED + 1)
        ).scalars()
    )
    found.more_open_than_examined = len(open_rows) > OPEN_CANDIDATES_EXAMINED
    for candidate in open_rows[:OPEN_CANDIDATES_EXAMINED]:
        summary = candidate_views.summary(session, candidate)
        if candidate.held:
            found.held.append(AttentionItem(summary, candidate.hold_reason or "held"))
        stage = _stage_of(session, candidate)
        if stage is None:
            continue
        why = _waits_for(session, candidate, stage, actor)
        if why:
            found.awaiting_signoff.append(AttentionItem(summary, why))
        hours = getattr(stage, "deadline_hours", None)
        if hours is not None:
            due = candidate.stage_entered_at + timedelta(hours=hours)
            if due - now <= DEADLINE_HORIZON:
                late = "past its deadline" if due <= now else "deadline within a day"
                found.due_soon.append(AttentionItem(summary, f"stage {stage.name}: {late}", due))
    found.due_soon.sort(key=lambda item: item.due_at or now)
    latest = sorted(open_rows[:OPEN_CANDIDATES_EXAMINED], key=lambda c: c.updated_at, reverse=True)
    found.open_now = [
        AttentionItem(
            candidate_views.summary(session, c), f"updated {c.updated_at:%Y-%m-%d %H:%M} UTC"
        )
        for c in latest[:OPEN_NOW_SHOWN]
    ]
    found.followups = undelivered_followups(session, now)
    found.inconclusive = _inconclusive(session)
    return found


def undelivered_followups(session: Session, now: datetime | None = None) -> list[StuckFollowUp]:
    """Follow-up requests whose delivery failed, that expired, or whose deadline passed while
    waiting for the partner; and messages given up after their retries (dead letters)."""
    now = now or utc_now()
    rows = session.execute(
        select(FollowUpRequest, Site.code)
        .outerjoin(Site, Site.id == FollowUpRequest.site_id)
        .where(
            or_(
                FollowUpRequest.status.in_(UNDELIVERED_STATUSES),
                and_(
                    FollowUpRequest.status.in_(WAITING_STATUSES),
                    FollowUpRequest.deadline.is_not(None),
                    FollowUpRequest.deadline < now,
                ),
            )
        )
        .order_by(FollowUpRequest.id)
    ).all()
    stuck = [
        StuckFollowUp(
            r.id,
            r.candidate_id,
            code,
            r.status if r.status in UNDELIVERED_STATUSES else f"{r.status}, deadline passed",
            r.attempts,
            r.last_error or r.state_reason,
        )
        for r, code in rows
    ]
    dead = session.execute(
        select(OutboundMessage)
        .where(OutboundMessage.status == DEAD_MESSAGE)
        .order_by(OutboundMessage.id)
    ).scalars()
    stuck += [
        StuckFollowUp(
            m.request_id or 0,
            m.candidate_id,
            m.destination,
            f"message {m.id} ({m.kind}) given up",
            m.attempts,
            m.last_error,
        )
        for m in dead
    ]
    return stuck


def _inconclusive(session: Session) -> list[AttentionItem]:
    latest = (
        select(func.max(CheckResult.id))
        .group_by(CheckResult.candidate_id, CheckResult.kind)
        .scalar_subquery()
    )
    rows = session.execute(
        select(CheckResult, Candidate)
        .join(Candidate, Candidate.id == CheckResult.candidate_id)
        .where(CheckResult.id.in_(latest), CheckResult.outcome == INCONCLUSIVE)
        .where(Candidate.state == CandidateState.OPEN)
        .order_by(CheckResult.candidate_id)
    ).all()
    return [
        AttentionItem(candidate_views.summary(session, c), f"{r.kind}: {r.reason}") for r, c in rows
    ]
