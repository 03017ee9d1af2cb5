"""Read side of candidates: filtered lists and the full record of one candidate."""

from __future__ import annotations

from datetime import UTC, datetime

from sqlalchemy import and_, func, select
from sqlalchemy.orm import Session

from confirm_service.cautions import CANDIDATE_IS_NOT_A_DETECTION
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
from confirm_service.services.errors import NotFound


def latest_checks_subquery():  # type: ignore[no-untyped-def]
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
    statement = statement.order_by(Candidate.id).limit(limit)
    return list(session.execute(statement).scalars())


def _utc_from_unix(unix_s: float) -> datetime:
    return datetime.fromtimestamp(unix_s, UTC)


def summary(session: Session, candidate: Candidate) -> CandidateSummary:
    site = session.get(Site, candidate.site_id)
    target = session.get(Target, candidate.target_id) if candidate.target_id else None
    return CandidateSummary(
        id=candidate.id,
        state=candidate.state,
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
            role=link.role,
        )
        for link, detection, observation, site in rows
    ]


def get_candidate(session: Session, candidate_id: int) -> Candidate:
    candidate = session.get(Candidate, candidate_id)
    if candidate is None:
        raise NotFound(f"no candidate {candidate_id}", [("id", "no such candidate")])
    return candidate


def detail(session: Session, candidate_id: int) -> CandidateOut:
    candidate = get_candidate(session, candidate_id)
    base = summary(session, candidate)
    checks = [
        CheckOut(
            kind=c.kind,
            outcome=c.outcome,
            reason=c.reason,
            measured=c.measured,
            expected=c.expected,
            tolerance=c.tolerance,
            unit=c.unit,
            details=c.details or {},
            evaluated_at=c.evaluated_at,
        )
        for c in latest_checks(session, candidate_id)
    ]
    history = [
        TransitionOut(
            from_stage=t.from_stage,
            to_stage=t.to_stage,
            from_state=t.from_state,
            to_state=t.to_state,
            reason=t.reason,
            reason_class=t.reason_class,
            actor=t.actor,
            at=t.at,
        )
        for t in session.execute(
            select(StageTransition)
            .where(StageTransition.candidate_id == candidate_id)
            .order_by(StageTransition.id)
        ).scalars()
    ]
    comments = [
        CommentOut(id=c.id, author=c.author, role=c.role, text=c.text, at=c.at)
        for c in session.execute(
            select(Comment).where(Comment.candidate_id == candidate_id).order_by(Comment.id)
        ).scalars()
    ]
    site_codes = dict(session.execute(select(Site.id, Site.code)).all())
    signoffs = [
        SignOffOut(
            id=s.id,
            stage=s.stage,
            role=s.role,
            person=s.person,
            approve=s.approve,
            rationale=s.rationale,
            at=s.at,
        )
        for s in session.execute(
            select(SignOff).where(SignOff.candidate_id == candidate_id).order_by(SignOff.id)
        ).scalars()
    ]
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
        for f in session.execute(
            select(FollowUpRequest)
            .where(FollowUpRequest.candidate_id == candidate_id)
            .order_by(FollowUpRequest.id)
        ).scalars()
    ]
    reports = [
        ReportOut(
            id=r.id,
            site=site_codes.get(r.site_id, "?"),
            observed_at=r.observed_at,
            duration_s=r.duration_s,
            detected=r.detected,
            frequency_hz=r.frequency_hz,
            drift_hz_s=r.drift_hz_s,
            frequency_min_hz=r.frequency_min_hz,
            frequency_max_hz=r.frequency_max_hz,
            notes=r.notes,
            received_at=r.received_at,
        )
        for r in session.execute(
            select(FollowUpReport)
            .where(FollowUpReport.candidate_id == candidate_id)
            .order_by(FollowUpReport.id)
        ).scalars()
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
