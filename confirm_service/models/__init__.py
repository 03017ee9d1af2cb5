"""SQLAlchemy tables, one module per area."""

from confirm_service.models.audit import AuditCheckpoint, AuditEntry, AuditHead
from confirm_service.models.auth import ROLES, ApiToken, IdempotencyRecord
from confirm_service.models.base import Base
from confirm_service.models.candidates import (
    Candidate,
    CandidateDetection,
    CheckResult,
    Comment,
    ProtocolRecord,
    SignOff,
    StageTransition,
)
from confirm_service.models.followups import (
    FollowUpReport,
    FollowUpRequest,
    OutboundMessage,
    PartnerSecret,
    ReceivedMessage,
)
from confirm_service.models.log import Detection, Observation, ScreeningRun, Site, Target
from confirm_service.models.people import PERSON_ROLES, Person
from confirm_service.models.scheduler import SchedulerJob, SchedulerRun

__all__ = [
    "PERSON_ROLES",
    "ROLES",
    "ApiToken",
    "AuditCheckpoint",
    "AuditEntry",
    "AuditHead",
    "Base",
    "Candidate",
    "CandidateDetection",
    "CheckResult",
    "Comment",
    "Detection",
    "FollowUpReport",
    "FollowUpRequest",
    "IdempotencyRecord",
    "Observation",
    "Person",
    "OutboundMessage",
    "PartnerSecret",
    "ProtocolRecord",
    "ReceivedMessage",
    "SchedulerJob",
    "SchedulerRun",
    "ScreeningRun",
    "SignOff",
    "Site",
    "StageTransition",
    "Target",
]
