"""When the service signs an audit checkpoint, as one explicit step its callers take.

A checkpoint is due at once when a candidate moved (stage or state): the entries that record the
move must be covered by a signed root, and a decided candidate is pinned to that root. Otherwise
it is due when the log grew and the latest checkpoint is ``checkpoint_interval_s`` old (the
scheduler asks every tick). Computing a root reads the whole log, so nothing else signs.
"""

from __future__ import annotations

from collections.abc import Sequence
from datetime import datetime, timedelta

from sqlalchemy.orm import Session

from confirm_service.audit.checkpoints import MAX_REASON_CHARS, latest_checkpoint, take_checkpoint
from confirm_service.audit.log import tree_size
from confirm_service.config import Settings
from confirm_service.models import AuditCheckpoint, Candidate
from confirm_service.states import CandidateState


def checkpoint_if_due(
    session: Session,
    settings: Settings,
    now: datetime,
    reason: str,
    moved: Sequence[Candidate] = (),
) -> AuditCheckpoint | None:
    """Sign a checkpoint when one is due (see the module); returns it, or None when none was.

    Call it after the audit entries it must cover are recorded. Each candidate in ``moved``
    that is no longer open gets ``decision_checkpoint_size``, the tree size it is pinned to.
    """
    if not moved and not _interval_elapsed(session, settings, now):
        return None
    session.flush()
    checkpoint = take_checkpoint(session, settings, reason[:MAX_REASON_CHARS])
    for candidate in moved:
        if candidate.state != CandidateState.OPEN:
            candidate.decision_checkpoint_size = checkpoint.tree_size
    return checkpoint


def _interval_elapsed(session: Session, settings: Settings, now: datetime) -> bool:
    """The log grew since the latest checkpoint, taken at least the interval before ``now``."""
    latest = latest_checkpoint(session)
    if latest is None:
        return tree_size(session) > 0
    if latest.tree_size >= tree_size(session):
        return False
    return now - latest.at >= timedelta(seconds=settings.checkpoint_interval_s)
