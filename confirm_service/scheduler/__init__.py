"""The scheduler process: due work calls the same services as the API."""

from __future__ import annotations

import logging

from apscheduler.schedulers.blocking import BlockingScheduler

from confirm_service.config import Settings
from confirm_service.db import Database
from confirm_service.scheduler.jobs import scheduled_checkpoint, sweep_deadlines
from confirm_service.scheduler.leader import LeaderLock

DEADLINE_SWEEP_S = 300.0


def build_scheduler(database: Database, settings: Settings) -> BlockingScheduler:
    scheduler = BlockingScheduler(timezone="UTC")
    scheduler.add_job(
        sweep_deadlines,
        "interval",
        seconds=DEADLINE_SWEEP_S,
        args=[database],
        id="deadlines",
        max_instances=1,
        coalesce=True,
    )
    scheduler.add_job(
        scheduled_checkpoint,
        "interval",
        seconds=settings.checkpoint_interval_s,
        args=[database, settings],
        id="checkpoint",
        max_instances=1,
        coalesce=True,
    )
    return scheduler


def run_scheduler(database: Database, settings: Settings) -> None:
    """Run until interrupted, if no other scheduler holds the leader lock."""
    logging.basicConfig(level=logging.INFO, format="%(asctime)s %(levelname)s %(message)s")
    lock = LeaderLock(database, settings.instance_path)
    if not lock.acquire():
        raise SystemExit("another scheduler is running (leader lock held)")
    try:
        build_scheduler(database, settings).start()
    finally:
        lock.release()
