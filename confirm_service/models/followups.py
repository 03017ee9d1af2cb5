"""Follow-up requests sent to partner sites, and the reports they send back."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, ForeignKey, String, Text
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base
from confirm_service.timeutil import utc_now


class FollowUpRequest(Base):
    """An intent recorded by the protocol: ask a site to observe, or escalate to contacts.

    ``intent_key`` is the protocol's idempotency key for the action, so re-evaluation never
    records the same intent twice. Delivery fills ``status``, ``attempts`` and ``sent_at``.
    """

    __tablename__ = "followup_requests"

    id: Mapped[int] = mapped_column(primary_key=True)
    intent_key: Mapped[str] = mapped_column(String(400), unique=True)
    kind: Mapped[str] = mapped_column(String(32), default="request_followup")
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    site_id: Mapped[int | None] = mapped_column(ForeignKey("sites.id"))
    stage: Mapped[str] = mapped_column(String(128))
    status: Mapped[str] = mapped_column(String(16), default="intended")
    payload: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    attempts: Mapped[int] = mapped_column(default=0)
    last_error: Mapped[str | None] = mapped_column(Text)
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    sent_at: Mapped[datetime | None]


class FollowUpReport(Base):
    """A partner site's answer: it observed the target and saw (or did not see) the signal."""

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
