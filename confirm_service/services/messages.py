"""Outgoing messages: queued in the database, delivered with retries, dead letters re-sent.

A message is one POST of JSON to a partner's webhook (signed with the partner's shared secret)
or to a contact's webhook, or one e-mail to a contact. ``deliver_due`` sends every message whose
next attempt is due, outside any transaction, and records each result with its audit entry.
"""

from __future__ import annotations

import json
from datetime import datetime, timedelta
from typing import Any

from sqlalchemy import or_, select
from sqlalchemy.orm import Session

from confirm_service import metrics
from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.config import Settings
from confirm_service.db import Database
from confirm_service.errors import Conflict, NotFound
from confirm_service.followup import delivery, signing
from confirm_service.models import OutboundMessage, PartnerSecret
from confirm_service.timeutil import utc_now

PENDING, RETRYING, DELIVERED, DEAD = "pending", "retrying", "delivered", "dead"


def queue_message(
    session: Session,
    actor: Actor,
    *,
    kind: str,
    channel: str,
    destination: str,
    subject: str,
    body: dict[str, Any],
    due: datetime,
    candidate_id: int | None = None,
    request_id: int | None = None,
    site_id: int | None = None,
    transition_id: int | None = None,
) -> OutboundMessage:
    """Queue one message, first try at ``due``; audited."""
    message = OutboundMessage(
        message_id=signing.new_message_id(),
        kind=kind,
        channel=channel,
        destination=destination,
        subject=subject[:300],
        body=body,
        status=PENDING,
        attempts=0,
        next_attempt_at=due,
        candidate_id=candidate_id,
        request_id=request_id,
        site_id=site_id,
        transition_id=transition_id,
    )
    session.add(message)
    session.flush()
    record(
        session,
        actor,
        "message.queued",
        f"candidate:{candidate_id}" if candidate_id else f"message:{message.id}",
        {
            "message": message.message_id,
            "kind": kind,
            "channel": channel,
            "destination": destination,
            "subject": message.subject,
            "request_id": request_id,
        },
    )
    return message


def _body_bytes(message: OutboundMessage) -> bytes:
    return json.dumps(message.body, sort_keys=True, separators=(",", ":")).encode("utf-8")


def _attempt(message: OutboundMessage, secret: str | None, settings: Settings) -> delivery.Attempt:
    """One try, by channel. Messages to partner sites are signed with their shared secret and
    never sent without one; notices to contacts' webhooks are not signed."""
    if message.channel == "email":
        if not settings.smtp_host:
            return delivery.Attempt(False, None, "no SMTP host configured", True)
        text = message.body.get("text", "")
        return delivery.send_mail(
            settings.smtp_host,
            settings.smtp_port,
            settings.mail_from,
            message.destination,
            message.subject,
            text,
            settings.delivery_timeout_s,
        )
    body = _body_bytes(message)
    headers = {"Content-Type": "application/json", signing.MESSAGE_ID_HEADER: message.message_id}
    if message.site_id is not None and secret is None:
        return delivery.Attempt(
            False, None, "no shared secret for this partner (confirm-service partner secret)", False
        )
    if secret is not None:
        sender = settings.site_code or "confirm-service"
        headers = signing.signed_headers(secret, sender, message.message_id, body)
    return delivery.post_json(message.destination, body, headers, settings.delivery_timeout_s)


def due_message_ids(session: Session, now: datetime) -> list[int]:
    return list(
        session.execute(
            select(OutboundMessage.id)
            .where(
                OutboundMessage.status.in_((PENDING, RETRYING)),
                or_(
                    OutboundMessage.next_attempt_at.is_(None),
                    OutboundMessage.next_attempt_at <= now,
                ),
            )
            .order_by(OutboundMessage.next_attempt_at, OutboundMessage.id)
        ).scalars()
    )


def deliver_due(
    database: Database, settings: Settings, actor: Actor, now: datetime, on_result: Any
) -> dict[str, int]:
    """Try every message due at ``now``; ``on_result(session, actor, message, attempt)`` lets
    the follow-up service move its request. Returns counts by outcome."""
    with database.read() as session:
        ids = due_message_ids(session, now)
    counts = {DELIVERED: 0, RETRYING: 0, DEAD: 0}
    for message_id in ids:
        with database.read() as session:
            message = session.get(OutboundMessage, message_id)
            if message is None or message.status not in (PENDING, RETRYING):
                continue
            secret = None
            if message.site_id is not None and message.channel == "webhook":
                secret = session.execute(
                    select(PartnerSecret.secret).where(PartnerSecret.site_id == message.site_id)
                ).scalar_one_or_none()
            session.expunge(message)
        attempt = _attempt(message, secret, settings)
        with database.write() as session:
            row = session.get(OutboundMessage, message_id, with_for_update=True)
            assert row is not None
            outcome = record_attempt(session, actor, row, attempt, settings, now)
            on_result(session, actor, row, attempt)
        counts[outcome] += 1
    return counts


def record_attempt(
    session: Session,
    actor: Actor,
    message: OutboundMessage,
    attempt: delivery.Attempt,
    settings: Settings,
    now: datetime,
) -> str:
    """Store one try's result: delivered, retry later (backoff with jitter), or dead."""
    message.attempts += 1
    message.last_status_code = attempt.status_code
    message.last_error = attempt.error
    message.response = attempt.response
    if attempt.delivered:
        message.status, message.delivered_at, message.next_attempt_at = DELIVERED, utc_now(), None
    elif attempt.retry and message.attempts < settings.delivery_max_attempts:
        delay = delivery.retry_delay_s(
            message.attempts, settings.delivery_backoff_s, settings.delivery_backoff_max_s
        )
        message.status, message.next_attempt_at = RETRYING, now + timedelta(seconds=delay)
    else:
        message.status, message.dead_at, message.next_attempt_at = DEAD, utc_now(), None
    record(
        session,
        actor,
        f"message.{message.status}",
        f"candidate:{message.candidate_id}" if message.candidate_id else f"message:{message.id}",
        {
            "message": message.message_id,
            "attempt": message.attempts,
            "status_code": attempt.status_code,
            "error": attempt.error,
            "next_attempt_at": message.next_attempt_at.isoformat()
            if message.next_attempt_at
            else None,
        },
    )
    metrics.count_on_commit(session, metrics.DELIVERIES, outcome=message.status)
    return message.status


def resend(session: Session, actor: Actor, message_pk: int, now: datetime) -> OutboundMessage:
    """A coordinator re-sends a dead letter: a fresh round of tries, the first at ``now``."""
    message = session.get(OutboundMessage, message_pk, with_for_update=True)
    if message is None:
        raise NotFound(f"no message {message_pk}", [("id", "no such message")])
    if message.status != DEAD:
        raise Conflict(
            f"message {message_pk} is {message.status}", [("status", "only dead letters re-send")]
        )
    message.status, message.attempts, message.next_attempt_at = PENDING, 0, now
    message.dead_at = None
    record(
        session,
        actor,
        "message.resent",
        f"candidate:{message.candidate_id}" if message.candidate_id else f"message:{message.id}",
        {"message": message.message_id},
    )
    return message


def messages_of(
    session: Session,
    candidate_id: int | None = None,
    request_id: int | None = None,
    status: str | None = None,
) -> list[OutboundMessage]:
    query = select(OutboundMessage).order_by(OutboundMessage.id)
    if candidate_id is not None:
        query = query.where(OutboundMessage.candidate_id == candidate_id)
    if request_id is not None:
        query = query.where(OutboundMessage.request_id == request_id)
    if status is not None:
        query = query.where(OutboundMessage.status == status)
    return list(session.execute(query).scalars())
