"""What people do to candidates: sign-offs, decisions, holds released, comments, reopening.

A final state set by a person, and a reopening, is pinned to a signed audit checkpoint.
"""

from __future__ import annotations

from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict, Forbidden, Invalid, NotFound
from confirm_service.models import Candidate, CheckResult, Comment, SignOff
from confirm_service.services.evaluation import (
    locked_candidate,
    reevaluate,
    take_decision_checkpoint,
)
from confirm_service.services.history import add_history
from confirm_service.timeutil import utc_now


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

    ``passed_protocol`` is never set by hand: it is reached only by passing the protocol's last
    stage with its sign-offs. The decision is pinned to a signed audit checkpoint.
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


def reopen(session: Session, actor: Actor, candidate_id: int, rationale: str) -> Candidate:
    """A coordinator reopens a rejected candidate (by a check or by a person), with a rationale.

    The candidate is open again at the stage it was rejected in, and re-evaluated under its
    protocol at once; the checks failing at reopening hold it for a person from then on
    instead of rejecting it again (see ``CandidateFacts.overruled_checks``).
    """
    candidate = locked_candidate(session, candidate_id)
    if candidate.state != "rejected":
        raise Conflict(
            f"candidate {candidate.id} is {candidate.state}, not rejected",
            [("state", f"only a rejected candidate can be reopened; it is {candidate.state}")],
        )
    return _back_to_open(session, actor, candidate, rationale, "reopened")


def retract(session: Session, actor: Actor, candidate_id: int, rationale: str) -> Candidate:
    """A coordinator retracts a person's decision (``rejected`` or ``withdrawn``), with a
    rationale; the candidate is open again and re-evaluated under its protocol at once."""
    candidate = locked_candidate(session, candidate_id)
    if candidate.state not in ("rejected", "withdrawn") or candidate.reason_class != "person":
        raise Conflict(
            f"candidate {candidate.id} carries no decision of a person to retract",
            [
                (
                    "state",
                    f"it is {candidate.state} ({candidate.reason_class or 'by the protocol'}); "
                    "a rejection by a check is reopened instead",
                )
            ],
        )
    return _back_to_open(session, actor, candidate, rationale, "retracted")


def _failing_check_kinds(session: Session, candidate_id: int) -> set[str]:
    """Kinds whose latest recorded result for the candidate is a failure."""
    latest = (
        select(func.max(CheckResult.id))
        .where(CheckResult.candidate_id == candidate_id)
        .group_by(CheckResult.kind)
    )
    rows = session.execute(
        select(CheckResult.kind).where(CheckResult.id.in_(latest), CheckResult.outcome == "fail")
    )
    return set(rows.scalars())


def _back_to_open(
    session: Session, actor: Actor, candidate: Candidate, rationale: str, verb: str
) -> Candidate:
    """Open a closed candidate again (audited, pinned to a checkpoint) and re-evaluate it."""
    rationale = rationale.strip()
    if not rationale:
        raise Invalid("a rationale is required", [("rationale", "must not be blank")])
    overruled = sorted(
        set(candidate.overruled_checks or ()) | _failing_check_kinds(session, candidate.id)
    )
    add_history(
        session,
        actor,
        candidate.id,
        (candidate.stage, candidate.stage),
        (candidate.state, "open"),
        rationale,
        verb,
    )
    record(
        session,
        actor,
        f"candidate.{verb}",
        f"candidate:{candidate.id}",
        {
            "stage": candidate.stage,
            "from_state": candidate.state,
            "rationale": rationale,
            "overruled_checks": overruled,
        },
    )
    candidate.state = "open"
    candidate.reason = rationale
    candidate.reason_class = verb
    candidate.overruled_checks = overruled
    candidate.stage_entered_at = utc_now()  # the stage starts afresh: its deadline too
    candidate.hold_released = False
    candidate.decision_checkpoint_size = None
    session.flush()
    reevaluate(session, actor, candidate)
    take_decision_checkpoint(session, candidate, f"candidate {candidate.id} {verb}")
    return candidate
