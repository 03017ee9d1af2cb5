"""Confirmation-protocol core: protocol files, check kinds, the stage machine.

Pure: no Flask, no SQLAlchemy, no confirm_service.models. Astronomy goes through
confirm_service.physics. A candidate that passes every stage is still not a detection; see
``machine`` for the cautions that go with a ``passed_protocol`` state.
"""

from confirm_service.protocol.bands import (
    BandSet,
    InterferenceBand,
    load_interference_bands,
    validate_interference_band_file,
)
from confirm_service.protocol.checks import check_kinds
from confirm_service.protocol.facts import (
    CANDIDATE_STATES,
    CandidateFacts,
    DetectionFact,
    ObservationFact,
    ReportFact,
    SignoffFact,
    SiteFact,
    TargetFact,
)
from confirm_service.protocol.loader import (
    LoadedProtocol,
    load_protocol,
    load_protocol_text,
    validate_protocol_file,
    validate_protocol_text,
)
from confirm_service.protocol.machine import (
    evaluate,
    evaluate_many,
    initial_stage,
    intake_decision,
    stage_entry_actions,
)
from confirm_service.protocol.matching import (
    CandidateView,
    build_candidate_view,
    build_candidate_views,
    match_detections,
    report_views,
    search_window_hz,
    search_windows_hz,
)
from confirm_service.protocol.problems import ProtocolError, ProtocolProblem
from confirm_service.protocol.reference import (
    PhysicsContext,
    ReferenceSignal,
    default_physics_context,
    drift_resolution_hz_s,
    reference_of,
    target_coord_of,
)
from confirm_service.protocol.results import (
    Action,
    CheckResult,
    Evaluation,
    IntakeDecision,
    SignoffStatus,
    Transition,
)
from confirm_service.protocol.schema import ProtocolModel
from confirm_service.protocol.signoffs import signoff_statuses, signoffs_met

__all__ = [
    "CANDIDATE_STATES",
    "Action",
    "BandSet",
    "CandidateFacts",
    "CandidateView",
    "CheckResult",
    "DetectionFact",
    "Evaluation",
    "IntakeDecision",
    "InterferenceBand",
    "LoadedProtocol",
    "ObservationFact",
    "PhysicsContext",
    "ProtocolError",
    "ProtocolModel",
    "ProtocolProblem",
    "ReferenceSignal",
    "ReportFact",
    "SignoffFact",
    "SignoffStatus",
    "SiteFact",
    "TargetFact",
    "Transition",
    "build_candidate_view",
    "build_candidate_views",
    "check_kinds",
    "default_physics_context",
    "drift_resolution_hz_s",
    "evaluate",
    "evaluate_many",
    "initial_stage",
    "intake_decision",
    "load_interference_bands",
    "target_coord_of",
    "load_protocol",
    "load_protocol_text",
    "match_detections",
    "reference_of",
    "search_window_hz",
    "report_views",
    "search_windows_hz",
    "signoff_statuses",
    "signoffs_met",
    "stage_entry_actions",
    "validate_interference_band_file",
    "validate_protocol_file",
    "validate_protocol_text",
]
