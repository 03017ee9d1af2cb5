"""An administrator adopts another protocol file for new and open candidates."""

from __future__ import annotations

from sqlalchemy import select
from sqlalchemy.orm import Session

from confirm_service.actor import Actor
from confirm_service.audit.log import record
from confirm_service.models import Candidate
from confirm_service.protocol import LoadedProtocol
from confirm_service.services.evaluation import reevaluate
from confirm_service.services.history import add_history
from confirm_service.services.protocols import ensure_recorded, mark_active
from confirm_service.states import CandidateState
from confirm_service.timeutil import utc_now


def adopt_protocol(session: Session, actor: Actor, loaded: LoadedProtocol) -> int:
    """Make ``loaded`` govern new candidates and every open one; re-evaluate those now.

    Open candidates restart at the new protocol's stage of the same name when it has one,
    otherwise at its first stage. Returns how many open candidates moved.
    """
    row = ensure_recorded(session, actor, loaded)
    mark_active(session, row)
    names = loaded.model.stage_names()
    now = utc_now()
    open_candidates = session.execute(
        select(Candidate)
        .where(Candidate.state == CandidateState.OPEN)
        .order_by(Candidate.id)
        .with_for_update()
    ).scalars()
    moved = 0
    for candidate in list(open_candidates):
        stage = candidate.stage if candidate.stage in names else names[0]
        add_history(
            session,
            actor,
            candidate.id,
            (candidate.stage, stage),
            (CandidateState.OPEN, CandidateState.OPEN),
            f"protocol {loaded.name} {loaded.version} adopted by an administrator",
            "protocol_change",
            now,
        )
        if stage != candidate.stage:
            candidate.stage_entered_at = now
        candidate.stage = stage
        candidate.protocol_name = loaded.name
        candidate.protocol_sha256 = loaded.content_sha256
        candidate.bands_sha256 = loaded.bands_sha256
        reevaluate(session, actor, candidate, now)
        moved += 1
    record(
        session,
        actor,
        "protocol.adopted",
        f"protocol:{loaded.name}",
        {
            "sha256": loaded.content_sha256,
            "bands_sha256": loaded.bands_sha256,
            "open_candidates": moved,
        },
    )
    return moved
