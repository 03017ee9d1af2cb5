"""A candidate's history: one line per change of stage or state, with who, why and when."""

from __future__ import annotations

from datetime import datetime

from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.models import StageTransition
from confirm_service.timeutil import utc_now


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
