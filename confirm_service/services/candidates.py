"""Candidates: intake, matching, evaluation under their protocol, and what people do to them.

Every write happens in the caller's transaction together with its audit entries. Candidates are
locked (``SELECT ... FOR UPDATE`` on PostgreSQL; SQLite serialises writers) before they are
evaluated, so concurrent requests advance a stage at most once.
"""

from __future__ import annotations

import threading
from collections.abc import Sequence
from datetime import UTC, datetime, timedelta
from typing import Any

from sqlalchemy import and_, event, func, or_, select
from sqlalchemy.orm import Session

from confirm_service.actor import SYSTEM, Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Forbidden, Invalid, NotFound
from confirm_service.models import (
    Candidate,
    CandidateDetection,
    CheckResult,
    Comment,
    Detection,
    FollowUpRequest,
    Observation,
    SignOff,
    Site,
    StageTransition,
)
from confirm_service.protocol import (
    Evaluation,
    LoadedProtocol,
    evaluate,
    initial_stage,
    intake_decision,
    reference_of,
    search_windows_hz,
    stage_entry_actions,
)
from confirm_service.protocol.reference import PhysicsContext
from confirm_service.schemas.log import DetectionIn
from confirm_service.services import facts as factbook
from confirm_service.services import protocols, runtime
from confirm_service.timeutil import utc_now

SAME_SIGNAL_SEARCH_HZ = 100_000.0
"""Candidates whose barycentric frequency lies within this of a new hit are tested as the same
signal (a residual drift of 1 Hz/s moves a signal 86 kHz in a day)."""

_context_local = threading.local()


def physics_context() -> PhysicsContext:
    """One physics cache per thread, reused across requests (tracks stay warm)."""
    context = getattr(_context_local, "context", None)
    if context is None:
        context = _context_local.context = PhysicsContext()
    return context


def configured_protocol(session: Session | None = None) -> LoadedProtocol:
    """The protocol for new candidates: one an admin adopted, else the configured file."""
    if session is not None:
        adopted = protocols.active_record(session)
        if adopted is not None:
            return protocols.protocol_for(session, adopted.sha256, adopted.bands_sha256)
    return protocols.load_configured(runtime.settings().protocol_file)


def protocol_of(session: Session, candidate: Candidate) -> LoadedProtocol:
    return protocols.protocol_for(session, candidate.protocol_sha256, candidate.bands_sha256)


# --- intake -----------------------------------------------------------------------------------


def _prefilter(protocol: LoadedProtocol, rows: Sequence[DetectionIn]) -> list[int]:
    """Indexes of rows the intake rule could accept, or that the pipeline flagged."""
    rule = protocol.model.intake
    keep = []
    for index, row in enumerate(rows):
        passes = row["snr"] >= rule.min_snr and abs(row["drift_hz_s"]) <= rule.max_abs_drift_hz_s
        if passes or row.get("candidate", False):
            keep.append(index)
    return keep


def _could_be_same_signal(
    candidate: Candidate, barycentric_frequency_hz: float, unix_s: float
) -> bool:
    """Coarse test from stored columns: the candidate's barycentric track passes near the hit.

    Allows 1 kHz plus 0.05 Hz/s of drift error per second of gap; the exact predicted window is
    computed only for candidates that pass.
    """
    gap_s = unix_s - candidate.reference_unix_s
    expected = candidate.barycentric_frequency_hz + candidate.residual_drift_hz_s * gap_s
    return abs(expected - barycentric_frequency_hz) <= 1_000.0 + 0.05 * abs(gap_s)


def _same_signal_candidate(
    session: Session,
    protocol: LoadedProtocol,
    detection: Detection,
    observation: Observation,
) -> Candidate | None:
    """An existing candidate of the same target whose predicted track this detection lies on."""
    target = observation.target
    if target is None:
        return None
    detection_f = factbook.detection_fact(detection)
    observation_f = factbook.observation_fact(observation)
    target_f = factbook.target_fact(target)
    signal = reference_of((detection_f, observation_f, target_f), protocol.model, physics_context())
    nearby = session.execute(
        select(Candidate).where(
            Candidate.target_id == target.id,
            Candidate.barycentric_frequency_hz.between(
                signal.barycentric_frequency_hz - SAME_SIGNAL_SEARCH_HZ,
                signal.barycentric_frequency_hz + SAME_SIGNAL_SEARCH_HZ,
            ),
        )
    ).scalars()
    for candidate in nearby:
        if not _could_be_same_signal(candidate, signal.barycentric_frequency_hz, signal.unix_s):
            continue
        reference, reference_observation, _ = factbook.reference_parts(
            session, candidate.reference_detection_id
        )
        if reference_observation.id == observation.id:
            continue  # one signal gives one hit per scan: another hit of the same scan differs
        windows = search_windows_hz(
            protocol_of(session, candidate),
            factbook.detection_fact(reference),
            factbook.observation_fact(reference_observation),
            target_f,
            [observation_f],
            physics_context(),
        )
        low, high = windows[observation.id]
        if low <= detection.frequency_hz <= high:
            return candidate
    return None


def add_history(
    session: Session,
    actor: Actor,
    candidate_id: int,
    stages: tuple[str | None, str],
    states: tuple[str | None, str],
    reason: str,
    reason_class: str | None = None,
    at: datetime | None = None,
) -> None:
    """One line of a candidate's history: (from, to) stage and state, why, by whom, when."""
    session.add(
        StageTransition(
            candidate_id=candidate_id,
            from_stage=stages[0],
            to_stage=stages[1],
            from_state=states[0],
            to_state=states[1],
            reason=reason,
            reason_class=reason_class,
            actor=actor.name,
            at=at or utc_now(),
        )
    )


def create_candidate(
    session: Session,
    actor: Actor,
    detection: Detection,
    observation: Observation,
    origin: str,
    note: str | None = None,
) -> Candidate:
    """A new candidate from ``detection`` under the configured protocol, evaluated at once."""
    if observation.target is None:
        raise Invalid(
            "the detection's scan has no target",
            [("detection_id", "only detections from scans of a registered target can be followed")],
        )
    protocol = configured_protocol(session)
    protocols.ensure_recorded(session, actor, protocol)
    signal = reference_of(
        (
            factbook.detection_fact(detection),
            factbook.observation_fact(observation),
            factbook.target_fact(observation.target),
        ),
        protocol.model,
        physics_context(),
    )
    now = utc_now()
    stage = initial_stage(protocol)
    candidate = Candidate(
        reference_detection_id=detection.id,
        target_id=observation.target_id,
        site_id=observation.site_id,
        protocol_name=protocol.name,
        protocol_sha256=protocol.content_sha256,
        bands_sha256=protocol.bands_sha256,
        state="open",
        stage=stage,
        stage_entered_at=now,
        origin=origin,
        reference_unix_s=signal.unix_s,
        barycentric_frequency_hz=signal.barycentric_frequency_hz,
        residual_drift_hz_s=signal.residual_drift_hz_s,
        evaluation_count=0,
    )
    session.add(candidate)
    session.flush()
    session.add(
        CandidateDetection(
            candidate_id=candidate.id,
            detection_id=detection.id,
            observation_id=observation.id,
            role="reference",
        )
    )
    reason = f"created ({origin})" + (f": {note}" if note else "")
    add_history(session, actor, candidate.id, (None, stage), (None, "open"), reason, at=now)
    record(
        session,
        actor,
        "candidate.created",
        f"candidate:{candidate.id}",
        {
            "detection_id": detection.id,
            "origin": origin,
            "note": note,
            "protocol": protocol.name,
            "protocol_sha256": protocol.content_sha256,
            "bands_sha256": protocol.bands_sha256,
            "barycentric_frequency_hz": signal.barycentric_frequency_hz,
            "residual_drift_hz_s": signal.residual_drift_hz_s,
            "reference_unix_s": signal.unix_s,
            "stage": stage,
        },
    )
    entered = stage_entry_actions(protocol, stage, candidate.id, now.timestamp(), signal)
    _record_actions(session, actor, candidate, entered)
    reevaluate(session, actor, candidate, now)
    return candidate


def _intake(
    session: Session,
    actor: Actor,
    observation: Observation,
    rows: Sequence[DetectionIn],
    ids: list[int],
) -> list[int]:
    if observation.target is None or not rows:
        return []
    protocol = configured_protocol(session)
    chosen = _prefilter(protocol, rows)
    if not chosen:
        return []
    observation_f = factbook.observation_fact(observation)
    target_f = factbook.target_fact(observation.target)
    created: list[int] = []
    for index in chosen:
        detection = session.get(Detection, ids[index])
        assert detection is not None
        flagged = bool(rows[index].get("candidate", False))
        if not flagged:
            decision = intake_decision(
                protocol, factbook.detection_fact(detection), observation_f, target_f
            )
            if not decision.promote:
                continue
        if _same_signal_candidate(session, protocol, detection, observation) is not None:
            continue
        origin = "pipeline_flag" if flagged else "intake_rule"
        created.append(create_candidate(session, actor, detection, observation, origin).id)
    return created


# --- re-evaluation --------------------------------------------------------------------------


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
        .where(Candidate.state == "open", or_(*conditions))
        .order_by(Candidate.id)
        .with_for_update()
    )
    return list(session.execute(query).scalars())


def on_new_data(
    session: Session,
    actor: Actor,
    observation: Observation,
    rows: Sequence[DetectionIn],
    ids: list[int],
) -> list[int]:
    """Intake of new detections, then re-evaluation of every candidate the scan bears on."""
    created = _intake(session, actor, observation, rows, ids)
    now = utc_now()
    for candidate in candidates_bearing_on(session, observation):
        if candidate.id not in created:
            reevaluate(session, actor, candidate, now)
    return created


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


def _record_actions(
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


_PENDING_CHECKPOINT = "confirm.checkpoint_for"


def take_decision_checkpoint(session: Session, candidate: Candidate, reason: str) -> None:
    """Ask for a signed checkpoint when this transaction commits, pinned to the candidate.

    However many candidates change in one transaction, one checkpoint is signed, just before
    commit, covering every entry the transaction wrote (computing a root reads the whole log).
    """
    session.info.setdefault(_PENDING_CHECKPOINT, {})[candidate.id] = (candidate, reason)


@event.listens_for(Session, "after_rollback")
def _forget_pending_checkpoint(session: Session) -> None:
    session.info.pop(_PENDING_CHECKPOINT, None)


@event.listens_for(Session, "before_commit")
def _sign_pending_checkpoint(session: Session) -> None:
    pending = session.info.pop(_PENDING_CHECKPOINT, None)
    if not pending:
        return
    from confirm_service.audit.checkpoints import take_checkpoint

    session.flush()
    reasons = [reason for _, reason in pending.values()]
    reason = reasons[0] if len(reasons) == 1 else f"{len(reasons)} candidate decisions"
    checkpoint = take_checkpoint(session, runtime.settings(), reason[:64])
    for candidate, _ in pending.values():
        if candidate.state != "open":
            candidate.decision_checkpoint_size = checkpoint.tree_size
    session.flush()


def reevaluate(
    session: Session, actor: Actor, candidate: Candidate, now: datetime | None = None
) -> Evaluation:
    """Evaluate ``candidate`` under its own protocol and record what changed (idempotent)."""
    now = now or utc_now()
    protocol = protocol_of(session, candidate)
    facts = factbook.candidate_facts(
        session, candidate, protocol, now.timestamp(), physics_context()
    )
    evaluation = evaluate(protocol, facts, physics_context=physics_context())
    _record_results(session, actor, candidate, evaluation, now)
    _record_links(session, candidate, evaluation)
    _record_actions(session, actor, candidate, evaluation.actions)
    transitioned = _record_transitions(session, actor, candidate, evaluation)
    _apply_state(candidate, evaluation)
    if transitioned:
        take_decision_checkpoint(session, candidate, f"candidate {candidate.id} transition")
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
        select(Candidate.id).where(Candidate.state == "open").order_by(Candidate.id)
    ).scalars()
    for candidate_id in list(ids):
        candidate = locked_candidate(session, candidate_id)
        before = (candidate.state, candidate.stage, candidate.held)
        reevaluate(session, actor, candidate)
        changed += before != (candidate.state, candidate.stage, candidate.held)
    return changed


# --- what people do --------------------------------------------------------------------------


def promote_detection(
    session: Session, actor: Actor, detection_id: int, note: str | None
) -> Candidate:
    """Explicit promotion of a detection by a coordinator or a pipeline."""
    detection = session.get(Detection, detection_id)
    if detection is None:
        raise NotFound(f"no detection {detection_id}", [("detection_id", "no such detection")])
    existing = session.execute(
        select(CandidateDetection.candidate_id).where(
            CandidateDetection.detection_id == detection_id
        )
    ).first()
    if existing:
        raise Conflict(
            f"detection {detection_id} already belongs to candidate {existing[0]}",
            [("detection_id", f"already linked to candidate {existing[0]}")],
        )
    observation = session.get(Observation, detection.observation_id)
    assert observation is not None
    return create_candidate(session, actor, detection, observation, "explicit", note)


def _require_open(candidate: Candidate) -> None:
    if candidate.state != "open":
        raise Conflict(
            f"candidate {candidate.id} is {candidate.state}",
            [("state", f"the candidate is already {candidate.state}")],
        )


def withdraw(session: Session, actor: Actor, candidate_id: int, rationale: str) -> Candidate:
    """A person closes a candidate, with a written rationale."""
    return decide(session, actor, candidate_id, "withdrawn", rationale)


def decide(
    session: Session, actor: Actor, candidate_id: int, decision: str, rationale: str
) -> Candidate:
    """A person's final decision (``rejected`` or ``withdrawn``) with its rationale.

    ``confirmed`` is never set by hand: it is reached only by passing the protocol's last stage
    with its sign-offs. The decision is pinned to a signed audit checkpoint.
    """
    if decision not in ("rejected", "withdrawn"):
        raise Invalid(
            "only rejected or withdrawn can be decided by a person",
            [("decision", "must be 'rejected' or 'withdrawn'")],
        )
    candidate = locked_candidate(session, candidate_id)
    _require_open(candidate)
    add_history(
        session,
        actor,
        candidate.id,
        (candidate.stage, candidate.stage),
        (candidate.state, decision),
        rationale,
        "person",
    )
    record(
        session,
        actor,
        f"candidate.{decision}",
        f"candidate:{candidate.id}",
        {"stage": candidate.stage, "from_state": candidate.state, "rationale": rationale},
    )
    candidate.state = decision
    candidate.reason = rationale
    candidate.reason_class = "person"
    take_decision_checkpoint(session, candidate, f"candidate {candidate.id} {decision}")
    return candidate


def add_comment(session: Session, actor: Actor, candidate_id: int, text: str) -> Comment:
    candidate = session.get(Candidate, candidate_id)
    if candidate is None:
        raise NotFound(f"no candidate {candidate_id}", [("id", "no such candidate")])
    comment = Comment(candidate_id=candidate_id, author=actor.name, role=actor.role, text=text)
    session.add(comment)
    session.flush()
    record(session, actor, "comment.added", f"candidate:{candidate_id}", {"text": text})
    return comment


def add_signoff(
    session: Session,
    actor: Actor,
    candidate_id: int,
    approve: bool,
    rationale: str,
    person: str | None = None,
) -> SignOff:
    """One person's sign-off of the candidate's current stage; re-evaluates at once.

    A person signs a stage once; a token stands for one person only. The candidate row is
    locked first, so concurrent sign-offs advance the stage exactly once.
    """
    if actor.token_id is None:
        raise Forbidden("sign-offs need a token", [("Authorization", "sign-offs need a token")])
    person = (person or actor.name).strip()
    candidate = locked_candidate(session, candidate_id)
    _require_open(candidate)
    other_person = session.execute(
        select(SignOff.person).where(SignOff.token_id == actor.token_id, SignOff.person != person)
    ).first()
    if other_person:
        raise Conflict(
            "this token already signed for another person",
            [("person", f"this token signs for {other_person[0]!r}")],
        )
    twice = session.execute(
        select(SignOff.id).where(
            SignOff.candidate_id == candidate_id,
            SignOff.stage == candidate.stage,
            or_(SignOff.person == person, SignOff.token_id == actor.token_id),
        )
    ).first()
    if twice:
        raise Conflict(
            f"{person} has already signed stage {candidate.stage!r}",
            [("person", "has already signed this stage")],
        )
    signoff = SignOff(
        candidate_id=candidate_id,
        stage=candidate.stage,
        role=actor.role,
        person=person,
        token_id=actor.token_id,
        approve=approve,
        rationale=rationale,
    )
    session.add(signoff)
    session.flush()
    record(
        session,
        actor,
        "signoff.recorded",
        f"candidate:{candidate_id}",
        {"stage": candidate.stage, "person": person, "approve": approve, "rationale": rationale},
    )
    reevaluate(session, actor, candidate)
    return signoff


def release_hold(session: Session, actor: Actor, candidate_id: int, rationale: str) -> Candidate:
    """A person reviewed the holds of the current stage and lets the candidate continue."""
    candidate = locked_candidate(session, candidate_id)
    _require_open(candidate)
    if not candidate.held:
        raise Conflict("the candidate is not held", [("held", "the candidate is not held")])
    candidate.hold_released = True
    record(
        session,
        actor,
        "hold.released",
        f"candidate:{candidate_id}",
        {"stage": candidate.stage, "rationale": rationale},
    )
    reevaluate(session, actor, candidate)
    return candidate


def add_report(session: Session, actor: Actor, candidate_id: int, data: Any) -> Any:
    """A partner site's follow-up report; re-evaluates the candidate at once.

    A token bound to a site (``site_code``) may only report for that site.
    """
    from confirm_service.models import FollowUpReport
    from confirm_service.services.sites import site_by_code

    candidate = locked_candidate(session, candidate_id)
    site = site_by_code(session, data.site)
    if actor.site_code and actor.site_code != site.code:
        raise Forbidden(
            f"this token reports for site {actor.site_code}",
            [("site", f"this token may only report for {actor.site_code}")],
        )
    report = FollowUpReport(
        candidate_id=candidate_id,
        site_id=site.id,
        observed_at=data.observed_at,
        duration_s=data.duration_s,
        detected=data.detected,
        frequency_hz=data.frequency_hz,
        drift_hz_s=data.drift_hz_s,
        frequency_min_hz=data.frequency_min_hz,
        frequency_max_hz=data.frequency_max_hz,
        notes=data.notes,
    )
    session.add(report)
    session.flush()
    record(
        session,
        actor,
        "followup.reported",
        f"candidate:{candidate_id}",
        {"report_id": report.id, **data.model_dump(mode="json")},
    )
    if candidate.state == "open":
        reevaluate(session, actor, candidate)
    return report
