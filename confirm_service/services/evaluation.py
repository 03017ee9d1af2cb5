"""Evaluation of candidates under their own protocol, recording only what changed.

Every write happens in the caller's transaction together with its audit entries. Candidates are
locked (``SELECT ... FOR UPDATE`` on PostgreSQL; SQLite serialises writers) before they are
evaluated, so concurrent requests advance a stage at most once.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import and_, func, or_, select
from sqlalchemy.orm import Session

from confirm_service import metrics
from confirm_service.actor import SYSTEM, Actor
from confirm_service.audit.log import record
from confirm_service.errors import NotFound
from confirm_service.models import (
    Candidate,
    CandidateDetection,
    CheckResult,
    Detection,
    FollowUpRequest,
    Observation,
    Site,
)
from confirm_service.protocol import Evaluation, default_physics_context, evaluate
from confirm_service.services import facts as factbook
from confirm_service.services import runtime
from confirm_service.services.checkpointing import checkpoint_if_due
from confirm_service.services.history import add_history
from confirm_service.services.protocols import protocol_of
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now


def candidates_bearing_on(session: Session, observation: Observation) -> list[Candidate]:
    """Open candidates that a new or changed scan can affect."""
    conditions = []
    if observation.target_id is not None:
        conditions.append(Candidate.target_id == observation.target_id)
    reference_scans = select(Detection.id).join(
        Observation, Observation.id == Detection.observation_id
    )
    scan_end = observation.start + timedelta(seconds=observation.duration_s)
    overlapping = reference_scans.where(
        or_(
            and_(
                Observation.cadence == observation.cadence,
                Observation.cadence.is_not(None),
            ),
            and_(
                Observation.start < scan_end,
                Observation.start >= observation.start - timedelta(hours=6),
            ),
        )
    )
    conditions.append(Candidate.reference_detection_id.in_(overlapping))
    query = (
        select(Candidate)
        .where(Candidate.state == CandidateState.OPEN, or_(*conditions))
        .order_by(Candidate.id)
        .with_for_update()
    )
    return list(session.execute(query).scalars())


def _result_signature(result: Any) -> tuple[Any, ...]:
    return (
        result.outcome,
        result.reason,
        result.measured,
        result.expected,
        result.tolerance,
        result.unit,
    )


def _latest_results(session: Session, candidate_id: int) -> dict[str, CheckResult]:
    latest = (
        select(func.max(CheckResult.id))
        .where(CheckResult.candidate_id == candidate_id)
        .group_by(CheckResult.kind)
    )
    rows = session.execute(select(CheckResult).where(CheckResult.id.in_(latest))).scalars()
    return {row.kind: row for row in rows}


def _record_results(
    session: Session, actor: Actor, candidate: Candidate, evaluation: Evaluation, now: datetime
) -> int:
    previous = _latest_results(session, candidate.id)
    changed = [
        r
        for r in evaluation.results
        if r.kind not in previous or _result_signature(previous[r.kind]) != _result_signature(r)
    ]
    if not changed:
        return 0
    candidate.evaluation_count += 1
    for result in changed:
        session.add(
            CheckResult(
                candidate_id=candidate.id,
                evaluation=candidate.evaluation_count,
                kind=result.kind,
                outcome=result.outcome,
                reason=result.reason,
                measured=result.measured,
                expected=result.expected,
                tolerance=result.tolerance,
                unit=result.unit,
                details=_jsonable(result.details),
                protocol_sha256=candidate.protocol_sha256,
                evaluated_at=now,
            )
        )
        record(
            session,
            actor,
            "check.changed",
            f"candidate:{candidate.id}",
            {
                "kind": result.kind,
                "stage": result.stage,
                "outcome": result.outcome,
                "reason": result.reason,
                "measured": result.measured,
                "expected": result.expected,
                "tolerance": result.tolerance,
                "unit": result.unit,
                "evaluation": candidate.evaluation_count,
            },
        )
    return len(changed)


def _jsonable(value: Any) -> Any:
    """Details as plain JSON: numpy scalars to floats, tuples to lists, NaN to None."""
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, list | tuple):
        return [_jsonable(v) for v in value]
    if hasattr(value, "item") and not isinstance(value, str | bytes):
        value = value.item()
    if isinstance(value, float) and value != value:
        return None
    return value


def _record_links(session: Session, candidate: Candidate, evaluation: Evaluation) -> None:
    existing = set(
        session.execute(
            select(CandidateDetection.detection_id).where(
                CandidateDetection.candidate_id == candidate.id
            )
        ).scalars()
    )
    for observation_id, detection_ids in sorted(evaluation.matched.items()):
        for detection_id in detection_ids:
            if detection_id not in existing:
                session.add(
                    CandidateDetection(
                        candidate_id=candidate.id,
                        detection_id=detection_id,
                        observation_id=observation_id,
                        role="match",
                    )
                )
                existing.add(detection_id)


def record_actions(
    session: Session, actor: Actor, candidate: Candidate, actions: Sequence[Any]
) -> None:
    for action in actions:
        known = session.execute(
            select(FollowUpRequest.id).where(FollowUpRequest.intent_key == action.key)
        ).first()
        if known:
            continue
        payload = _jsonable(dict(action.params))
        site_id = None
        if isinstance(payload.get("site"), str):
            site_id = session.execute(
                select(Site.id).where(Site.code == payload["site"])
            ).scalar_one_or_none()
        session.add(
            FollowUpRequest(
                intent_key=action.key,
                kind=action.kind,
                candidate_id=candidate.id,
                site_id=site_id,
                stage=action.stage,
                status="intended",
                payload=payload,
            )
        )
        record(
            session,
            actor,
            "followup.intended" if action.kind == "request_followup" else f"{action.kind}.intended",
            f"candidate:{candidate.id}",
            {"kind": action.kind, "stage": action.stage, "key": action.key, "params": payload},
        )


def _record_transitions(
    session: Session, actor: Actor, candidate: Candidate, evaluation: Evaluation
) -> bool:
    for transition in evaluation.transitions:
        at = datetime.fromtimestamp(transition.unix_s, UTC) if transition.unix_s else None
        add_history(
            session,
            actor,
            candidate.id,
            (transition.from_stage, transition.to_stage),
            (transition.from_state, transition.to_state),
            transition.reason,
            transition.reason_class,
            at,
        )
        record(
            session,
            actor,
            "candidate.transition",
            f"candidate:{candidate.id}",
            {
                "from_stage": transition.from_stage,
                "to_stage": transition.to_stage,
                "from_state": transition.from_state,
                "to_state": transition.to_state,
                "reason": transition.reason,
                "reason_class": transition.reason_class,
            },
        )
    return bool(evaluation.transitions)


def _apply_state(candidate: Candidate, evaluation: Evaluation) -> None:
    if evaluation.stage != candidate.stage:
        candidate.stage_entered_at = datetime.fromtimestamp(evaluation.stage_entered_unix_s, UTC)
        candidate.hold_released = False
    candidate.stage = evaluation.stage
    candidate.state = evaluation.state
    candidate.held = evaluation.held
    candidate.hold_reason = evaluation.hold_reason
    if evaluation.reason_class:
        candidate.reason_class = evaluation.reason_class
    if evaluation.transitions:
        candidate.reason = evaluation.transitions[-1].reason


def reevaluate(
    session: Session, actor: Actor, candidate: Candidate, now: datetime | None = None
) -> Evaluation:
    """Evaluate ``candidate`` under its own protocol and record what changed (idempotent)."""
    now = now or utc_now()
    protocol = protocol_of(session, candidate)
    facts = factbook.candidate_facts(
        session, candidate, protocol, now.timestamp(), default_physics_context()
    )
    evaluation = evaluate(protocol, facts, physics_context=default_physics_context())
    _record_results(session, actor, candidate, evaluation, now)
    _record_links(session, candidate, evaluation)
    record_actions(session, actor, candidate, evaluation.actions)
    transitioned = _record_transitions(session, actor, candidate, evaluation)
    _apply_state(candidate, evaluation)
    if transitioned:
        reason = f"candidate {candidate.id} transition"
        checkpoint_if_due(session, runtime.settings(), now, reason, moved=[candidate])
    outcome = "transitioned" if transitioned else "unchanged"
    metrics.count_on_commit(session, metrics.EVALUATIONS, outcome=outcome)
    return evaluation


def locked_candidate(session: Session, candidate_id: int) -> Candidate:
    candidate = session.get(Candidate, candidate_id, with_for_update=True)
    if candidate is None:
        raise NotFound(f"no candidate {candidate_id}", [("id", "no such candidate")])
    return candidate


def reevaluate_due(session: Session, actor: Actor = SYSTEM) -> int:
    """Re-evaluate every open candidate (deadlines pass with time); returns how many changed."""
    changed = 0
    ids = session.execute(
        select(Candidate.id).where(Candidate.state == CandidateState.OPEN).order_by(Candidate.id)
    ).scalars()
    for candidate_id in list(ids):
        candidate = locked_candidate(session, candidate_id)
        before = (candidate.state, candidate.stage, candidate.held)
        reevaluate(session, actor, candidate)
        changed += before != (candidate.state, candidate.stage, candidate.held)
    return changed
