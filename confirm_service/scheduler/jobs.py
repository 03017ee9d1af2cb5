"""Work that is due with time: deadline sweeps and scheduled audit checkpoints.

Each job opens its own write transaction and calls the same service functions as the API.
"""

from __future__ import annotations

import logging

from confirm_service.actor import Actor
from confirm_service.audit.checkpoints import latest_checkpoint, take_checkpoint
from confirm_service.audit.log import tree_size
from confirm_service.config import Settings
from confirm_service.db import Database
from confirm_service.services.evaluation import reevaluate_due

log = logging.getLogger(__name__)
SCHEDULER = Actor(name="scheduler", role="system")


def sweep_deadlines(database: Database) -> int:
    """Re-evaluate open candidates so that passed deadlines escalate or expire them."""
    with database.write() as session:
        changed = reevaluate_due(session, SCHEDULER)
    log.info("deadline sweep: %d candidate(s) changed", changed)
    return changed


def scheduled_checkpoint(database: Database, settings: Settings) -> int | None:
    """Sign a checkpoint when the log grew since the last one; returns its tree size."""
    with database.write() as session:
        size = tree_size(session)
        latest = latest_checkpoint(session)
        if latest is not None and latest.tree_size >= size:
            return None
        checkpoint = take_checkpoint(session, settings, "scheduled")
        log.info("checkpoint at tree size %d", checkpoint.tree_size)
        return checkpoint.tree_size
