"""When a scan's hits are all in: completion by each route, and what completion sets off.

A scan is *open* while hits may still arrive and *complete* once the pipeline says so (hits
posted inline with the scan, ``"complete": true`` on a batch, the completion route) or the
scheduler closes it after a quiet period. Only then does it count as evidence of absence, its
cadence get screened and the candidates it bears on get re-evaluated. A complete scan takes no
more hits.
"""

from __future__ import annotations

from datetime import datetime, timedelta

from sqlalchemy import func, or_, select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.errors import Conflict
from confirm_service.models import Observation
from confirm_service.services.evaluation import candidates_bearing_on, reevaluate
from confirm_service.timeutil import utc_now

INLINE = "inline"
BATCH_FLAG = "batch_flag"
ENDPOINT = "endpoint"
QUIET_PERIOD = "quiet_period"
COMPLETION_ROUTES = (INLINE, BATCH_FLAG, ENDPOINT, QUIET_PERIOD)
"""How a scan became complete (``observations.completed_by``)."""


def refuse_if_complete(observation: Observation) -> None:
    """A complete scan takes no more hits: 409, and nothing is written."""
    if observation.completed_at is not None:
        raise Conflict(
            f"observation {observation.id} is complete",
            [
                (
                    "id",
                    f"complete since {observation.completed_at.isoformat()} "
                    f"({observation.completed_by}); it takes no more hits",
                )
            ],
        )


def complete_scan(
    session: Session,
    actor: Actor,
    observation: Observation,
    route: str,
    reason: str | None = None,
    now: datetime | None = None,
) -> list[int]:
    """Mark the scan complete (audited), then screen its cadence; returns new candidate ids."""
    refuse_if_complete(observation)
    observation.completed_at = now or utc_now()
    observation.completed_by = route
    session.flush()
    record(
        session,
        actor,
        "observation.completed",
        f"observation:{observation.id}",
        {
            "route": route,
            "reason": reason,
            "detection_count": observation.detection_count,
            "completed_at": observation.completed_at.isoformat(),
        },
    )
    return after_completion(session, actor, observation)


def after_completion(session: Session, actor: Actor, observation: Observation) -> list[int]:
    """Re-evaluate the candidates the scan bears on, then screen its cadence."""
    from confirm_service.services.screening import screen_after_completion

    now = utc_now()
    for candidate in candidates_bearing_on(session, observation):
        reevaluate(session, actor, candidate, now)
    return screen_after_completion(session, actor, observation).candidate_ids


def last_activity(observation: Observation) -> datetime:
    """When the scan last changed: its last batch, or its registration."""
    return observation.last_ingest_at or observation.created_at


def close_stale_scans(
    session: Session, actor: Actor, now: datetime, quiet_period_s: float
) -> list[int]:
    """Complete every open scan with no hits for ``quiet_period_s``; returns their ids.

    Each closure is audited with the quiet period that justified it.
    """
    cutoff = now - timedelta(seconds=quiet_period_s)
    activity = func.coalesce(Observation.last_ingest_at, Observation.created_at)
    stale = session.execute(
        select(Observation)
        .where(Observation.completed_at.is_(None), or_(activity <= cutoff))
        .order_by(Observation.start, Observation.id)
        .with_for_update(of=Observation)
    ).scalars()
    closed = []
    for observation in list(stale):
        idle_s = (now - last_activity(observation)).total_seconds()
        complete_scan(
            session,
            actor,
            observation,
            QUIET_PERIOD,
            f"no hits for {idle_s:.0f} s (quiet period {quiet_period_s:g} s)",
            now,
        )
        closed.append(observation.id)
    return closed
