"""Read side of candidates: filtered lists and the full record of one candidate."""

from __future__ import annotations

from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import ColumnElement, and_, func, or_, select
from sqlalchemy.orm import Session

from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
from confirm_service.errors import NotFound
from confirm_service.models import (
    Candidate,
    CandidateDetection,
    CheckResult,
    Comment,
    Detection,
    FollowUpReport,
    FollowUpRequest,
    Observation,
    SignOff,
    Site,
    StageTransition,
    Target,
)
from confirm_service.schemas.candidates import (
    CandidateOut,
    CandidateSummary,
    CheckOut,
    CommentOut,
    FollowUpOut,
    LinkedDetection,
    ProtocolRef,
    ReportOut,
    SignOffOut,
    TransitionOut,
)
from confirm_service.schemas.queries import CandidateQuery
from confirm_service.states import CandidateState


def latest_checks_subquery():
    return (
        select(CheckResult.candidate_id, CheckResult.kind, func.max(CheckResult.id).label("id"))
        .group_by(CheckResult.candidate_id, CheckResult.kind)
        .subquery()
    )


def list_candidates(session: Session, query: CandidateQuery, limit: int) -> list[Candidate]:
    statement = select(Candidate).where(Candidate.id > query.after)
    if query.state:
        statement = statement.where(Candidate.state == query.state)
    if query.stage:
        statement = statement.where(Candidate.stage == query.stage)
    if query.target:
        statement = statement.join(Target, Target.id == Candidate.target_id).where(
            Target.name == query.target
        )
    if query.site:
        linked_sites = (
            select(CandidateDetection.candidate_id)
            .join(Observation, Observation.id == CandidateDetection.observation_id)
            .join(Site, Site.id == Observation.site_id)
            .where(Site.code == query.site)
        )
        statement = statement.where(Candidate.id.in_(linked_sites))
    if query.check_kind or query.check_outcome:
        latest = latest_checks_subquery()
        conditions = [CheckResult.id == latest.c.id]
        if query.check_kind:
            conditions.append(CheckResult.kind == query.check_kind)
        if query.check_outcome:
            conditions.append(CheckResult.outcome == query.check_outcome)
        matching = select(CheckResult.candidate_id).join(latest, and_(*conditions))
        statement = statement.where(Candidate.id.in_(matching))
    if query.q:
        statement = statement.where(_matches_text(query.q))
    if query.frequency_hz is not None:
        statement = statement.where(_near_frequency(query.frequency_hz, query.tolerance_hz))
    statement = statement.order_by(Candidate.id).limit(limit)
    return list(session.execute(statement).scalars())


def _matches_text(text: str) -> Any:
    """A candidate id (``12`` or ``#12``), part of a target name, or a site code (any case)."""
    text = text.strip()
    number = text.removeprefix("#")
    pattern = "%" + text.lower().replace("\\", "").replace("%", "").replace("_", "\\_") + "%"
    named = select(Target.id).where(func.lower(Target.name).like(pattern, escape="\\"))
    at_site = (
        select(CandidateDetection.candidate_id)
        .join(Observation, Observation.id == CandidateDetection.observation_id)
        .join(Site, Site.id == Observation.site_id)
        .where(func.lower(Site.code) == text.lower())
    )
    conditions: list[ColumnElement[bool]] = [
        Candidate.target_id.in_(named),
        Candidate.id.in_(at_site),
    ]
    if number.isdigit():
        conditions.append(Candidate.id == int(number))
    return or_(*conditions)


def _near_frequency(frequency_hz: float, tolerance_hz: float) -> Any:
    """The barycentric frequency, or a linked hit's frequency, within the tolerance (Hz)."""
    low, high = frequency_hz - tolerance_hz, frequency_hz + tolerance_hz
    linked = (
        select(CandidateDetection.candidate_id)
        .join(Detection, Detection.id == CandidateDetection.detection_id)
        .where(Detection.frequency_hz.between(low, high))
    )
    return or_(Candidate.barycentric_frequency_hz.between(low, high), Candidate.id.in_(linked))


def counts_by_state_and_stage(session: Session) -> dict[tuple[str, str], int]:
    """How many candidates are in each (state, stage)."""
    rows = session.execute(
        select(Candidate.state, Candidate.stage, func.count()).group_by(
            Candidate.state, Candidate.stage
        )
    ).all()
    return {(state, stage): int(number) for state, stage, number in rows}


def targets_with_candidates(session: Session) -> list[str]:
    """Names of targets that have at least one candidate, sorted."""
    names = (
        select(Target.name)
        .join(Candidate, Candidate.target_id == Target.id)
        .distinct()
        .order_by(Target.name)
    )
    return list(session.execute(names).scalars())


def _utc_from_unix(unix_s: float) -> datetime:
    return datetime.fromtimestamp(unix_s, UTC)


def summary(session: Session, candidate: Candidate) -> CandidateSummary:
    site = session.get(Site, candidate.site_id)
    target = session.get(Target, candidate.target_id) if candidate.target_id else None
    return CandidateSummary(
        id=candidate.id,
        state=CandidateState(candidate.state),
        stage=candidate.stage,
        protocol=ProtocolRef(name=candidate.protocol_name, sha256=candidate.protocol_sha256),
        target=target.name if target else None,
        site=site.code if site else "?",
        reference_detection=candidate.reference_detection_id,
        reference_time=_utc_from_unix(candidate.reference_unix_s),
        barycentric_frequency_hz=candidate.barycentric_frequency_hz,
        residual_drift_hz_s=candidate.residual_drift_hz_s,
        held=candidate.held,
        hold_reason=candidate.hold_reason,
        reason_class=candidate.reason_class,
        reason=candidate.reason,
        origin=candidate.origin,
        created_at=candidate.created_at,
        updated_at=candidate.updated_at,
    )


def latest_checks(session: Session, candidate_id: int) -> list[CheckResult]:
    latest = (
        select(func.max(CheckResult.id))
        .where(CheckResult.candidate_id == candidate_id)
        .group_by(CheckResult.kind)
    )
    rows = session.execute(
        select(CheckResult).where(CheckResult.id.in_(latest)).order_by(CheckResult.id)
    ).scalars()
    return list(rows)


def linked_detections(session: Session, candidate_id: int) -> list[LinkedDetection]:
    rows = session.execute(
        select(CandidateDetection, Detection, Observation, Site)
        .join(Detection, Detection.id == CandidateDetection.detection_id)
        .join(Observation, Observation.id == CandidateDetection.observation_id)
        .join(Site, Site.id == Observation.site_id)
        .where(CandidateDetection.candidate_id == candidate_id)
        .order_by(Observation.start, Detection.id)
    ).all()
    return [
        LinkedDetection(
            id=detection.id,
            observation=observation.id,
            site=site.code,
            frequency_hz=detection.frequency_hz,
            drift_hz_s=detection.drift_hz_s,
            snr=detection.snr,
            on_source=observation.on_source,
            start=observation.start,
            time_offset_s=detection.time_offset_s,
            time=observation.start + timedelta(seconds=detection.time_offset_s),
            role=link.role,
        )
        for link, detection, observation, site in rows
    ]


def get_candidate(session: Session, candidate_id: int) -> Candidate:
    candidate = session.get(Candidate, candidate_id)
    if candidate is None:
        raise NotFound(f"no candidate {candidate_id}", [("id", "no such candidate")])
    return candidate


def _rows_of(session: Session, model: Any, candidate_id: int) -> list[Any]:
    """Every row of ``model`` about the candidate, oldest first."""
    return list(
        session.execute(
            select(model).where(model.candidate_id == candidate_id).order_by(model.id)
        ).scalars()
    )


def report_out(report: FollowUpReport, site_code: str) -> ReportOut:
    return ReportOut(
        id=report.id,
        site=site_code,
        request_id=report.request_id,
        observed=report.observed,
        not_observed_reason=report.not_observed_reason,
        observed_at=report.observed_at,
        duration_s=report.duration_s,
        detected=report.detected,
        frequency_hz=report.frequency_hz,
        drift_hz_s=report.drift_hz_s,
        frequency_min_hz=report.frequency_min_hz,
        frequency_max_hz=report.frequency_max_hz,
        threshold_snr=report.threshold_snr,
        sefd_jy=report.sefd_jy,
        pointing_ra_deg=report.pointing_ra_deg,
        pointing_dec_deg=report.pointing_dec_deg,
        observation_id=report.observation_id,
        time_offset_s=report.time_offset_s,
        notes=report.notes,
        received_at=report.received_at,
        warnings=list(report.warnings or []),
    )


def detail(session: Session, candidate_id: int) -> CandidateOut:
    candidate = get_candidate(session, candidate_id)
    base = summary(session, candidate)
    site_codes = dict(session.execute(select(Site.id, Site.code)).all())
    checks = [CheckOut.model_validate(c) for c in latest_checks(session, candidate_id)]
    history = [
        TransitionOut.model_validate(t) for t in _rows_of(session, StageTransition, candidate_id)
    ]
    comments = [CommentOut.model_validate(c) for c in _rows_of(session, Comment, candidate_id)]
    signoffs = [SignOffOut.model_validate(s) for s in _rows_of(session, SignOff, candidate_id)]
    followups = [
        FollowUpOut(
            id=f.id,
            kind=f.kind,
            stage=f.stage,
            status=f.status,
            site=site_codes.get(f.site_id) if f.site_id else None,
            payload=f.payload,
            created_at=f.created_at,
        )
        for f in _rows_of(session, FollowUpRequest, candidate_id)
    ]
    reports = [
        report_out(r, site_codes.get(r.site_id, "?"))
        for r in _rows_of(session, FollowUpReport, candidate_id)
    ]
    return CandidateOut(
        **base.model_dump(),
        followups=followups,
        reports=reports,
        checks=checks,
        detections=linked_detections(session, candidate_id),
        history=history,
        comments=comments,
        signoffs=signoffs,
        decision_checkpoint_size=candidate.decision_checkpoint_size,
        caution=CANDIDATE_IS_NOT_A_DETECTION,
    )
