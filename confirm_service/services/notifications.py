"""Notices to people: escalations and stage changes, to the protocol's contacts by e-mail and
webhook, each a queued message delivered (and retried) like any other."""

from __future__ import annotations

from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import exists, select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.config import Settings
from confirm_service.followup.contacts import addresses, load_directory
from confirm_service.models import Candidate, FollowUpRequest, OutboundMessage, StageTransition
from confirm_service.services import messages
from confirm_service.services.protocols import protocol_of

RECENT = timedelta(days=7)
"""Stage changes older than this when first seen by the scheduler are not announced."""


def candidate_link(settings: Settings, candidate_id: int) -> str:
    return f"{settings.public_url.rstrip('/')}/dashboard/candidates/{candidate_id}"


def notify(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate: Candidate,
    kind: str,
    subject: str,
    lines: list[str],
    contacts: list[str],
    now: datetime,
    transition_id: int | None = None,
) -> int:
    """Queue one message per contact address; returns how many."""
    directory = load_directory(settings.contacts_file)
    link = candidate_link(settings, candidate.id)
    text = "\n".join([*lines, "", f"Candidate record: {link}"])
    count = 0
    for contact in contacts:
        for channel, destination in addresses(contact, directory):
            body: dict[str, Any] = {
                "kind": kind,
                "candidate_id": candidate.id,
                "subject": subject,
                "text": text,
                "link": link,
                "contact": contact,
            }
            messages.queue_message(
                session,
                actor,
                kind=kind,
                channel=channel,
                destination=destination,
                subject=subject,
                body=body,
                due=now,
                candidate_id=candidate.id,
                transition_id=transition_id,
            )
            count += 1
    return count


def notify_intent(
    session: Session,
    actor: Actor,
    settings: Settings,
    candidate: Candidate,
    intent: FollowUpRequest,
    now: datetime,
) -> int:
    """An escalation (a stage deadline passed) or an on-entry notice, to its contacts."""
    params = intent.payload
    contacts = [str(c) for c in params.get("contacts", [])]
    if intent.kind == "escalate":
        waiting = ", ".join(params.get("waiting_for", [])) or "sign-offs"
        subject = (
            f"[confirm-service] Candidate {candidate.id}: deadline of stage '{intent.stage}' passed"
        )
        lines = [
            f"Candidate {candidate.id} has been in stage '{intent.stage}' past its deadline.",
            f"Still waiting for: {waiting}.",
            "Please decide what to do next.",
        ]
    else:
        subject = f"[confirm-service] Candidate {candidate.id} entered stage '{intent.stage}'"
        lines = [f"Candidate {candidate.id} entered stage '{intent.stage}'."]
        if params.get("note"):
            lines.append(str(params["note"]))
    return notify(
        session, actor, settings, candidate, f"notice.{intent.kind}", subject, lines, contacts, now
    )


def notify_stage_changes(session: Session, actor: Actor, settings: Settings, now: datetime) -> int:
    """Announce each recent stage or state change, once, to the new stage's contacts."""
    announced = exists().where(OutboundMessage.transition_id == StageTransition.id)
    rows = session.execute(
        select(StageTransition, Candidate)
        .join(Candidate, Candidate.id == StageTransition.candidate_id)
        .where(
            StageTransition.from_stage.is_not(None),
            StageTransition.at >= now - RECENT,
            StageTransition.at <= now,
            ~announced,
        )
        .order_by(StageTransition.id)
    ).all()
    count = 0
    for transition, candidate in rows:
        model = protocol_of(session, candidate).model
        names = model.stage_names()
        stage = (
            model.stages[names.index(transition.to_stage)] if transition.to_stage in names else None
        )
        contacts = list(stage.contacts) if stage is not None else []
        if not contacts:
            continue
        change = (
            f"moved from stage '{transition.from_stage}' to '{transition.to_stage}'"
            if transition.from_stage != transition.to_stage
            else f"is now {transition.to_state} at stage '{transition.to_stage}'"
        )
        subject = f"[confirm-service] Candidate {candidate.id} {change}"
        lines = [f"Candidate {candidate.id} {change}.", f"Why: {transition.reason}"]
        count += notify(
            session,
            actor,
            settings,
            candidate,
            "notice.stage_change",
            subject,
            lines,
            contacts,
            now,
            transition.id,
        )
    return count
