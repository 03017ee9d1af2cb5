"""Follow-up requests to partner sites, their reports, outgoing messages and partner secrets."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, ForeignKey, Index, String, Text
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base
from confirm_service.timeutil import utc_now


class FollowUpRequest(Base):
    """A protocol intent, or a request to one partner site to observe a candidate's target.

    Protocol intents (``status = "intended"``) are recorded by evaluation with the protocol's
    idempotency key; the follow-up service turns a ``request_followup`` or
    ``request_reobservation`` intent into one request per chosen site (``parent_id`` points at
    the intent) and marks the intent ``dispatched``. ``direction`` is ``outbound`` for requests
    this service makes and ``inbound`` for requests a federated partner sent to us (then
    ``candidate_id`` is empty and ``remote_id`` is the partner's request id).
    """

    __tablename__ = "followup_requests"
    __table_args__ = (Index("ix_followup_requests_status_send_at", "status", "send_at"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    intent_key: Mapped[str] = mapped_column(String(400), unique=True)
    kind: Mapped[str] = mapped_column(String(32), default="request_followup")
    candidate_id: Mapped[int | None] = mapped_column(ForeignKey("candidates.id"), index=True)
    site_id: Mapped[int | None] = mapped_column(ForeignKey("sites.id"))
    stage: Mapped[str] = mapped_column(String(128))
    status: Mapped[str] = mapped_column(String(16), default="intended")
    payload: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    attempts: Mapped[int] = mapped_column(default=0)
    last_error: Mapped[str | None] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    sent_at: Mapped[datetime | None]
    direction: Mapped[str] = mapped_column(String(16), default="outbound")
    origin: Mapped[str] = mapped_column(String(32), default="protocol")
    parent_id: Mapped[int | None] = mapped_column(ForeignKey("followup_requests.id"))
    remote_id: Mapped[int | None]
    remote_site: Mapped[str | None] = mapped_column(String(32))
    reply_url: Mapped[str | None] = mapped_column(Text)
    send_at: Mapped[datetime | None]
    deadline: Mapped[datetime | None]
    drafted_at: Mapped[datetime | None]
    acknowledged_at: Mapped[datetime | None]
    reported_at: Mapped[datetime | None]
    closed_at: Mapped[datetime | None]
    expired_at: Mapped[datetime | None]
    declined_at: Mapped[datetime | None]
    failed_at: Mapped[datetime | None]
    state_reason: Mapped[str | None] = mapped_column(Text)


class FollowUpReport(Base):
    """A partner site's answer: it observed (and saw the signal or not), or could not observe.

    A report that carries its scan and hits stores them in the observation log
    (``observation_id``); the checks then count that scan, once. ``threshold_snr`` and
    ``sefd_jy`` say how faint a signal the look could have seen.
    """

    __tablename__ = "followup_reports"

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    request_id: Mapped[int | None] = mapped_column(ForeignKey("followup_requests.id"))
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"))
    observed_at: Mapped[datetime]
    duration_s: Mapped[float]
    detected: Mapped[bool] = mapped_column(Boolean)
    frequency_hz: Mapped[float | None]
    drift_hz_s: Mapped[float | None]
    frequency_min_hz: Mapped[float]
    frequency_max_hz: Mapped[float]
    notes: Mapped[str | None] = mapped_column(Text)
    received_at: Mapped[datetime] = mapped_column(default=utc_now)
    observed: Mapped[bool] = mapped_column(Boolean, default=True)
    not_observed_reason: Mapped[str | None] = mapped_column(String(32))
    threshold_snr: Mapped[float | None]
    sefd_jy: Mapped[float | None]
    pointing_ra_deg: Mapped[float | None]
    pointing_dec_deg: Mapped[float | None]
    observation_id: Mapped[int | None] = mapped_column(ForeignKey("observations.id"))
    time_offset_s: Mapped[float] = mapped_column(default=0.0)
    """A sighting's frequency and drift refer to ``observed_at + time_offset_s``."""
    warnings: Mapped[list[Any]] = mapped_column(JSON, default=list)
    """What the service noticed on receipt (e.g. a sighting far from the prediction)."""


class PartnerSecret(Base):
    """The HMAC-SHA256 key shared with one partner site, for messages in both directions."""

    __tablename__ = "partner_secrets"

    id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"), unique=True)
    secret: Mapped[str] = mapped_column(String(200))
    created_at: Mapped[datetime] = mapped_column(default=utc_now)


class OutboundMessage(Base):
    """One message to a partner or a contact (webhook or e-mail) and its delivery result.

    ``status``: ``pending`` (first try due at ``next_attempt_at``), ``retrying``, ``delivered``
    or ``dead`` (the retry limit was reached; a coordinator may re-send it).
    """

    __tablename__ = "outbound_messages"
    __table_args__ = (
        Index("ix_outbound_messages_status_next_attempt_at", "status", "next_attempt_at"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    message_id: Mapped[str] = mapped_column(String(64), unique=True)
    kind: Mapped[str] = mapped_column(String(48))
    channel: Mapped[str] = mapped_column(String(16))
    destination: Mapped[str] = mapped_column(Text)
    candidate_id: Mapped[int | None] = mapped_column(ForeignKey("candidates.id"), index=True)
    request_id: Mapped[int | None] = mapped_column(ForeignKey("followup_requests.id"), index=True)
    site_id: Mapped[int | None] = mapped_column(ForeignKey("sites.id"))
    subject: Mapped[str] = mapped_column(String(300))
    body: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    status: Mapped[str] = mapped_column(String(16), default="pending")
    attempts: Mapped[int] = mapped_column(default=0)
    next_attempt_at: Mapped[datetime | None]
    last_error: Mapped[str | None] = mapped_column(Text)
    last_status_code: Mapped[int | None]
    response: Mapped[dict[str, Any] | None] = mapped_column(JSON)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    delivered_at: Mapped[datetime | None]
    dead_at: Mapped[datetime | None]
    transition_id: Mapped[int | None] = mapped_column(ForeignKey("stage_transitions.id"))


class ReceivedMessage(Base):
    """A signed message a partner sent us, kept by id so that a replay has no effect."""

    __tablename__ = "received_messages"

    id: Mapped[int] = mapped_column(primary_key=True)
    message_id: Mapped[str] = mapped_column(String(64), unique=True)
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"))
    kind: Mapped[str] = mapped_column(String(48))
    body_sha256: Mapped[str] = mapped_column(String(64))
    result: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    received_at: Mapped[datetime] = mapped_column(default=utc_now)
