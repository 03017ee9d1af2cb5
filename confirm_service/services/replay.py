"""What-if: evaluate stored candidates under another protocol, changing nothing.

Each candidate is evaluated from the other protocol's first stage on everything stored about it
now (scans, detections, reports, sign-offs); a withdrawal by a person stands. The result is
compared with the candidate's recorded state and stage.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from datetime import datetime

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.models import Candidate
from confirm_service.protocol import LoadedProtocol, evaluate, initial_stage
from confirm_service.protocol import default_physics_context as physics_context
from confirm_service.services import facts as factbook
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now


@dataclass(frozen=True)
class ReplayOutcome:
    candidate_id: int
    recorded_state: str
    recorded_stage: str
    replayed_state: str
    replayed_stage: str
    replayed_reason: str | None

    @property
    def differs(self) -> bool:
        return (self.recorded_state, self.recorded_stage) != (
            self.replayed_state,
            self.replayed_stage,
        )


def replay_candidate(
    session: Session, candidate: Candidate, protocol: LoadedProtocol, now: datetime
) -> ReplayOutcome:
    facts = factbook.candidate_facts(
        session, candidate, protocol, now.timestamp(), physics_context()
    )
    withdrawn = candidate.state == CandidateState.WITHDRAWN
    start = initial_stage(protocol)
    from dataclasses import replace

    facts = replace(
        facts,
        stage=start,
        state=CandidateState.WITHDRAWN if withdrawn else CandidateState.OPEN,
        stage_entered_unix_s=candidate.created_at.timestamp(),
        manual_hold_released=False,
    )
    evaluation = evaluate(protocol, facts, physics_context=physics_context())
    reason = evaluation.transitions[-1].reason if evaluation.transitions else None
    return ReplayOutcome(
        candidate.id, candidate.state, candidate.stage, evaluation.state, evaluation.stage, reason
    )


def replay(
    session: Session,
    protocol: LoadedProtocol,
    candidate_id: int | None = None,
    now: datetime | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> list[ReplayOutcome]:
    """Outcomes for one candidate or all, in id order (read only); ``progress(done, total)``."""
    now = now or utc_now()
    query = select(Candidate).order_by(Candidate.id)
    if candidate_id is not None:
        query = query.where(Candidate.id == candidate_id)
    candidates = list(session.execute(query).scalars())
    outcomes = []
    for done, candidate in enumerate(candidates, start=1):
        outcomes.append(replay_candidate(session, candidate, protocol, now))
        if progress is not None:
            progress(done, len(candidates))
    return outcomes
