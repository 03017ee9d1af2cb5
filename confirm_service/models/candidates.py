"""Candidates and everything recorded about them while the protocol runs."""

from __future__ import annotations

from datetime import datetime
from typing import Any

from sqlalchemy import JSON, Boolean, ForeignKey, Index, Integer, String, Text, UniqueConstraint
from sqlalchemy.orm import Mapped, mapped_column

from confirm_service.models.base import Base
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now


class Candidate(Base):
    """A signal under confirmation; ``state`` is open, rejected, passed_protocol or withdrawn."""

    __tablename__ = "candidates"
    __table_args__ = (
        Index("ix_candidates_state_stage", "state", "stage"),
        Index("ix_candidates_target", "target_id"),
        Index("ix_candidates_barycentric_frequency", "target_id", "barycentric_frequency_hz"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    reference_detection_id: Mapped[int] = mapped_column(ForeignKey("detections.id"), unique=True)
    target_id: Mapped[int | None] = mapped_column(ForeignKey("targets.id"))
    site_id: Mapped[int] = mapped_column(ForeignKey("sites.id"))
    protocol_name: Mapped[str] = mapped_column(String(128))
    protocol_sha256: Mapped[str] = mapped_column(String(64))
    bands_sha256: Mapped[str] = mapped_column(String(64), default="")
    state: Mapped[str] = mapped_column(String(16), default=CandidateState.OPEN)
    stage: Mapped[str] = mapped_column(String(128))
    stage_entered_at: Mapped[datetime] = mapped_column(default=utc_now)
    held: Mapped[bool] = mapped_column(Boolean, default=False)
    hold_reason: Mapped[str | None] = mapped_column(Text)
    hold_released: Mapped[bool] = mapped_column(Boolean, default=False)
    overruled_checks: Mapped[list[str] | None] = mapped_column(JSON)
    """Check kinds whose automatic rejection a person overruled by reopening the candidate."""
    reason_class: Mapped[str | None] = mapped_column(String(64))
    reason: Mapped[str | None] = mapped_column(Text)
    origin: Mapped[str] = mapped_column(String(16), default="intake")
    reference_unix_s: Mapped[float]
    barycentric_frequency_hz: Mapped[float]
    residual_drift_hz_s: Mapped[float]
    evaluation_count: Mapped[int] = mapped_column(Integer, default=0)
    decision_checkpoint_size: Mapped[int | None]
    created_at: Mapped[datetime] = mapped_column(default=utc_now)
    updated_at: Mapped[datetime] = mapped_column(default=utc_now, onupdate=utc_now)


class CandidateDetection(Base):
    """A link between a candidate and a detection on its predicted track."""

    __tablename__ = "candidate_detections"
    __table_args__ = (UniqueConstraint("candidate_id", "detection_id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    detection_id: Mapped[int] = mapped_column(ForeignKey("detections.id"), index=True)
    observation_id: Mapped[int] = mapped_column(ForeignKey("observations.id"))
    role: Mapped[str] = mapped_column(String(16), default="match")
    linked_at: Mapped[datetime] = mapped_column(default=utc_now)


class CheckResult(Base):
    """One evaluation of one check kind; the history is kept, never overwritten."""

    __tablename__ = "check_results"
    __table_args__ = (Index("ix_check_results_candidate_kind", "candidate_id", "kind", "id"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"))
    evaluation: Mapped[int] = mapped_column(Integer)
    kind: Mapped[str] = mapped_column(String(64))
    outcome: Mapped[str] = mapped_column(String(16))
    reason: Mapped[str] = mapped_column(Text)
    measured: Mapped[float | None]
    expected: Mapped[float | None]
    tolerance: Mapped[float | None]
    unit: Mapped[str | None] = mapped_column(String(32))
    details: Mapped[dict[str, Any]] = mapped_column(JSON, default=dict)
    protocol_sha256: Mapped[str] = mapped_column(String(64))
    evaluated_at: Mapped[datetime] = mapped_column(default=utc_now)


class StageTransition(Base):
    """A change of stage or state, with who or what caused it."""

    __tablename__ = "stage_transitions"

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    from_stage: Mapped[str | None] = mapped_column(String(128))
    to_stage: Mapped[str] = mapped_column(String(128))
    from_state: Mapped[str | None] = mapped_column(String(16))
    to_state: Mapped[str] = mapped_column(String(16))
    reason: Mapped[str] = mapped_column(Text)
    reason_class: Mapped[str | None] = mapped_column(String(64))
    actor: Mapped[str] = mapped_column(String(200))
    at: Mapped[datetime] = mapped_column(default=utc_now)


class SignOff(Base):
    """An approval (or objection) of a stage by one person holding a role."""

    __tablename__ = "signoffs"
    __table_args__ = (
        UniqueConstraint("candidate_id", "stage", "person"),
        UniqueConstraint("candidate_id", "stage", "token_id"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    stage: Mapped[str] = mapped_column(String(128))
    role: Mapped[str] = mapped_column(String(32))
    person: Mapped[str] = mapped_column(String(200))
    token_id: Mapped[int] = mapped_column(ForeignKey("api_tokens.id"))
    approve: Mapped[bool] = mapped_column(Boolean, default=True)
    rationale: Mapped[str] = mapped_column(Text)
    at: Mapped[datetime] = mapped_column(default=utc_now)


class Comment(Base):
    __tablename__ = "comments"

    id: Mapped[int] = mapped_column(primary_key=True)
    candidate_id: Mapped[int] = mapped_column(ForeignKey("candidates.id"), index=True)
    author: Mapped[str] = mapped_column(String(200))
    role: Mapped[str] = mapped_column(String(32))
    text: Mapped[str] = mapped_column(Text)
    at: Mapped[datetime] = mapped_column(default=utc_now)


class ProtocolRecord(Base):
    """Every protocol file the service has used, by content hash, with its exact text.

    The interference-band file it names is kept too, so that a candidate is always evaluated
    under exactly the files it was first evaluated under.
    """

    __tablename__ = "protocol_records"
    __table_args__ = (UniqueConstraint("sha256", "bands_sha256"),)

    id: Mapped[int] = mapped_column(primary_key=True)
    name: Mapped[str] = mapped_column(String(128))
    version: Mapped[str] = mapped_column(String(64))
    sha256: Mapped[str] = mapped_column(String(64))
    source_text: Mapped[str] = mapped_column(Text)
    bands_sha256: Mapped[str] = mapped_column(String(64), default="")
    bands_relative_path: Mapped[str | None] = mapped_column(String(400))
    bands_text: Mapped[str | None] = mapped_column(Text)
    active: Mapped[bool] = mapped_column(Boolean, default=False)
    loaded_at: Mapped[datetime] = mapped_column(default=utc_now)
