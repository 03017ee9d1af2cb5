"""Candidate responses and the coordinator's requests about candidates."""

from __future__ import annotations

from typing import Annotated, Any, Literal

from pydantic import BaseModel, ConfigDict, Field, StringConstraints

from confirm_service.schemas.bounds import RowId
from confirm_service.schemas.common import StrictModel, UtcIso
from confirm_service.schemas.followups import ReportIn as ReportIn  # the report contract
from confirm_service.schemas.followups import ReportOut as ReportOut  # lives with follow-ups
from confirm_service.states import CandidateState

Text = Annotated[str, Field(min_length=1, max_length=10_000)]


class ProtocolRef(BaseModel):
    name: str
    sha256: str


class CheckOut(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    kind: str
    outcome: str
    reason: str
    measured: float | None
    expected: float | None
    tolerance: float | None
    unit: str | None
    details: dict[str, Any] = {}
    evaluated_at: UtcIso


class LinkedDetection(BaseModel):
    id: int
    observation: int
    site: str
    frequency_hz: float
    drift_hz_s: float
    snr: float
    on_source: bool
    start: UtcIso = Field(description="Start of the hit's scan")
    time_offset_s: float = Field(default=0.0, description="s after the scan's start")
    time: UtcIso | None = Field(
        default=None,
        description="The instant frequency_hz and drift_hz_s refer to: start + time_offset_s "
        "(give it as time to /predictions)",
    )
    role: str


class TransitionOut(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    from_stage: str | None
    to_stage: str
    from_state: CandidateState | None
    to_state: CandidateState
    reason: str
    reason_class: str | None
    actor: str
    at: UtcIso


class CommentOut(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    author: str
    role: str
    text: str
    at: UtcIso


class SignOffOut(BaseModel):
    model_config = ConfigDict(from_attributes=True)

    id: int
    stage: str
    role: str
    person: str
    approve: bool
    rationale: str
    at: UtcIso


class FollowUpOut(BaseModel):
    """An intent the protocol recorded (request a follow-up, re-observation, notify...)."""

    id: int
    kind: str
    stage: str
    status: str
    site: str | None
    payload: dict[str, Any]
    created_at: UtcIso


class CandidateSummary(BaseModel):
    id: int
    state: CandidateState
    stage: str
    protocol: ProtocolRef
    target: str | None
    site: str
    reference_detection: int
    reference_time: UtcIso = Field(
        description="Instant of the reference hit: its scan's start plus its time_offset_s"
    )
    barycentric_frequency_hz: float
    residual_drift_hz_s: float
    held: bool
    hold_reason: str | None
    reason_class: str | None
    reason: str | None
    origin: str
    created_at: UtcIso
    updated_at: UtcIso


class CandidateOut(CandidateSummary):
    checks: list[CheckOut]
    detections: list[LinkedDetection]
    history: list[TransitionOut]
    comments: list[CommentOut] = []
    signoffs: list[SignOffOut] = []
    followups: list[FollowUpOut] = []
    reports: list[ReportOut] = []
    decision_checkpoint_size: int | None = None
    caution: str


class PromoteIn(StrictModel):
    detection_id: RowId
    note: Text | None = None


class WithdrawIn(StrictModel):
    rationale: Text


class CommentIn(StrictModel):
    text: Text


class SignOffIn(StrictModel):
    """A sign-off of the candidate's current stage by the person the token stands for."""

    approve: bool = True
    rationale: Text
    person: Annotated[str, Field(min_length=1, max_length=200)] | None = None


class DecisionIn(StrictModel):
    """A person's final decision: ``rejected`` or ``withdrawn``, with its rationale."""

    decision: Literal["rejected", "withdrawn"]
    rationale: Text


class HoldReleaseIn(StrictModel):
    rationale: Text


Rationale = Annotated[
    str, StringConstraints(strip_whitespace=True, min_length=1, max_length=10_000)
]


class ReopenIn(StrictModel):
    """Why a coordinator reopens a rejected candidate or retracts a person's decision
    (required, not blank; kept in the audit record)."""

    rationale: Rationale
